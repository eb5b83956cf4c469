"""Build the hub location MILP in PuLP from validated data and a distance matrix.

Pure: values in, a :class:`HubModel` (a PuLP problem plus handles on its
variables) out. No files, no solver calls. Constraint names are readable in
an ``.lp`` dump (``assign_3``, ``hub_count``, ``flow_5_12``...).

Two compact formulations, both exact for their problem:

* **single allocation** (every terminal sends and receives through one
  hub; optional sort capacity and fixed costs): the flow formulation of
  Ernst and Krishnamoorthy (1996, 1999), with allocation binaries
  ``x[i, k]`` and, per origin ``i``, inter-hub flows ``y[i, k, l]``;
* **multiple allocation** (each flow picks its own hubs): the
  origin-based flow formulation of Ernst and Krishnamoorthy (1998), with
  hub binaries ``h[k]``, collection shares ``z[i, k]``, inter-hub flows
  ``y[i, k, l]`` and distribution flows ``x[i, l, j]``, plus the rule that
  a unit changes hubs at most once (paths have at most two hubs).

Costs per unit (currency per unit): collection ``rate * chi * d[i, k]``,
transfer ``rate * alpha * d[k, l]``, distribution ``rate * delta *
d[l, j]``; handling ``handling[k]`` at every hub a unit passes; fixed cost
``hub_fixed_cost[k]`` per open hub.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pulp

from hubnet.config import HubModelParams
from hubnet.data import NetworkData
from hubnet.errors import InputError, Problem
from hubnet.solution import unit_path_costs

#: Flows below this share of the largest flow are treated as absent.
_ZERO = 0.0


@dataclass(eq=False)
class HubModel:
    """A built MILP and the handles needed to read a plan back.

    Attributes
    ----------
    problem
        The PuLP problem (minimise cost, currency per day).
    formulation
        Short name of the formulation.
    hub
        ``hub[k]`` is the binary "hub open at site k" (a PuLP variable or
        the expression ``x[k, k]``), or ``None`` where no hub may open.
    assign
        Single allocation: ``assign[(i, k)]`` binary "terminal i uses hub
        k". Empty for multiple allocation.
    candidates
        Matrix indices of candidate hubs.
    """

    problem: pulp.LpProblem
    formulation: str
    hub: list[pulp.LpVariable | None]
    assign: dict[tuple[int, int], pulp.LpVariable] = field(default_factory=dict)
    candidates: list[int] = field(default_factory=list)

    def open_hubs(self) -> list[int]:
        """Indices of hubs open in the solver's current values."""
        return [k for k, v in enumerate(self.hub) if v is not None and (v.varValue or 0) > 0.5]

    def allocation(self) -> np.ndarray | None:
        """Single allocation: hub index per site from current values; else None."""
        if not self.assign:
            return None
        n = len(self.hub)
        out = np.full(n, -1, dtype=int)
        best = np.full(n, -1.0)
        for (i, k), v in self.assign.items():
            val = v.varValue or 0.0
            if val > best[i]:
                best[i], out[i] = val, k
        return out

    def set_start(self, hubs: list[int], assign: np.ndarray | None) -> None:
        """Give the solver a starting plan (used as a MIP start)."""
        open_set = set(hubs)
        for k, v in enumerate(self.hub):
            if v is not None and not self.assign:
                v.setInitialValue(1 if k in open_set else 0)
        if self.assign and assign is not None:
            for (i, k), v in self.assign.items():
                v.setInitialValue(1 if assign[i] == k else 0)


def check_plan_possible(data: NetworkData, params: HubModelParams) -> None:
    """Raise :class:`InputError` when no plan can exist (no candidate, too many hubs asked)."""
    cand = [k for k, s in enumerate(data.sites) if s.is_candidate]
    problems = []
    forced = [k for k, s in enumerate(data.sites) if s.hub_status == "open"]
    if not cand:
        problems.append(Problem("sites", None, "can_be_hub", "no site may be a hub"))
    if params.hubs is not None:
        if params.hubs > len(cand):
            problems.append(
                Problem(
                    "config",
                    None,
                    "model.hubs",
                    f"{params.hubs} hubs asked but only {len(cand)} candidate hubs",
                )
            )
        if len(forced) > params.hubs:
            problems.append(
                Problem(
                    "config",
                    None,
                    "model.hubs",
                    f"{len(forced)} hubs forced open but only {params.hubs} hubs asked",
                )
            )
    if problems:
        raise InputError(problems)


def _var(
    prob: pulp.LpProblem,
    name: str,
    low: float | None = None,
    up: float | None = None,
    cat: str = pulp.LpContinuous,
) -> pulp.LpVariable:
    """A variable attached to ``prob`` (PuLP 3.3+ API)."""
    return prob.add_variable(name, low, up, cat=cat)


def _expr(pairs: list[tuple[pulp.LpVariable, float]]) -> pulp.LpAffineExpression:
    return pulp.LpAffineExpression(pairs)


def build_model(data: NetworkData, d: np.ndarray, params: HubModelParams) -> HubModel:
    """Build the MILP for the configured allocation rule.

    Parameters
    ----------
    data
        Validated network.
    d
        ``(n, n)`` distances, km.
    params
        Model parameters.

    Returns
    -------
    HubModel

    Raises
    ------
    InputError
        When no plan can exist (no candidate hub, more hubs than candidates).
    """
    check_plan_possible(data, params)
    cand = [k for k, s in enumerate(data.sites) if s.is_candidate]
    if params.allocation == "single":
        return _single_allocation(data, d, params, cand)
    return _multiple_allocation(data, d, params, cand)


def allocation_costs(
    data: NetworkData, d: np.ndarray, params: HubModelParams, cand: list[int]
) -> np.ndarray:
    """Cost of allocating each site to each candidate hub, currency per day.

    ``(n, len(cand))``: element ``[i, a]`` is site i's volume collected to
    hub ``cand[a]`` and handled there, plus its volume in distributed from
    that hub; on the hub's own row (``i == cand[a]``, the hub open) plus its
    fixed cost. Transfers between hubs are priced separately per pair.
    """
    w = data.flow_matrix()
    out_vol = w.sum(axis=1)
    in_vol = w.sum(axis=0)
    handling = np.array([s.handling_cost for s in data.sites], dtype=float)
    fixed = np.array([s.hub_fixed_cost for s in data.sites], dtype=float)
    c, _t, dist = unit_path_costs(d, params)
    idx = np.asarray(cand, dtype=np.int64)
    cost = (
        c[:, idx] * out_vol[:, None]
        + dist[idx, :].T * in_vol[:, None]
        + handling[idx][None, :] * out_vol[:, None]
    )
    cost[idx, np.arange(len(idx))] += fixed[idx]
    return np.asarray(cost, dtype=float)


def sort_capacities(data: NetworkData) -> np.ndarray:
    """Each site's sort capacity, units per day (``inf`` where none is set), ``(n,)``."""
    return np.array([np.inf if s.sort_capacity is None else s.sort_capacity for s in data.sites])


def hubs_needed(capacities: np.ndarray, volume: float) -> int:
    """Fewest hubs whose sort capacities (units per day) can hold ``volume`` between them."""
    caps = np.sort(capacities)[::-1]
    if not len(caps) or not np.isfinite(caps[0]):
        return 1
    return int(np.searchsorted(np.cumsum(caps), volume * (1 - 1e-12))) + 1


def _single_allocation(
    data: NetworkData, d: np.ndarray, params: HubModelParams, cand: list[int]
) -> HubModel:
    n = data.n
    w = data.flow_matrix()
    out_vol = w.sum(axis=1)
    handling = np.array([s.handling_cost for s in data.sites])
    _c, t, _dist = unit_path_costs(d, params)
    prob = pulp.LpProblem("single_allocation", pulp.LpMinimize)
    cset = set(cand)

    x: dict[tuple[int, int], pulp.LpVariable] = {}
    for i in range(n):
        for k in cand:
            x[i, k] = _var(prob, f"x_{i}_{k}", cat=pulp.LpBinary)
    hub: list[pulp.LpVariable | None] = [x[k, k] if k in cset else None for k in range(n)]
    # Inter-hub flow of volume originating at i, from hub k to hub l (k != l).
    senders = [i for i in range(n) if out_vol[i] > _ZERO]
    y: dict[tuple[int, int, int], pulp.LpVariable] = {}
    for i in senders:
        for k in cand:
            for m in cand:
                if k != m:
                    y[i, k, m] = _var(prob, f"y_{i}_{k}_{m}", 0)

    obj: list[tuple[pulp.LpVariable, float]] = []
    alloc = allocation_costs(data, d, params, cand)
    col = {k: a for a, k in enumerate(cand)}
    for (i, k), v in x.items():
        obj.append((v, float(alloc[i, col[k]])))
    for (_i, k, m), v in y.items():
        obj.append((v, float(t[k, m] + handling[m])))
    prob += _expr(obj)

    if params.hubs is not None:
        prob += _expr([(x[k, k], 1.0) for k in cand]) == params.hubs, "hub_count"
    elif params.capacitated:
        # As many hubs as the largest sort capacities need to hold all the
        # volume: implied for whole hubs, it cuts off relaxations that open
        # hubs in part (AP, 25 sites, tight fixed costs and capacities: LP
        # bound 333,272 -> 340,038 against the optimum 348,369; CBC 13.0 s
        # -> 7.3 s).
        least = hubs_needed(sort_capacities(data)[cand], float(out_vol.sum()))
        if least > 1:
            prob += _expr([(x[k, k], 1.0) for k in cand]) >= least, "hubs_needed"
    for i in range(n):
        prob += _expr([(x[i, k], 1.0) for k in cand]) == 1, f"assign_{i}"
        for k in cand:
            if i != k:
                prob += x[i, k] - x[k, k] <= 0, f"open_{i}_{k}"
    for k in cand:
        if data.sites[k].hub_status == "open":
            prob += x[k, k] == 1, f"forced_open_{k}"
        cap = data.sites[k].sort_capacity
        if params.capacitated and cap is not None:
            prob += (
                _expr([(x[i, k], float(out_vol[i])) for i in range(n) if out_vol[i] > 0])
                - cap * x[k, k]
                <= 0,
                f"capacity_{k}",
            )
    for i in senders:
        for k in cand:
            terms = [(y[i, k, m], 1.0) for m in cand if m != k]
            terms += [(y[i, m, k], -1.0) for m in cand if m != k]
            terms.append((x[i, k], -float(out_vol[i])))
            terms += [(x[j, k], float(w[i, j])) for j in range(n) if w[i, j] > 0]
            merged: dict[pulp.LpVariable, float] = {}
            for v, a in terms:
                merged[v] = merged.get(v, 0.0) + a
            prob += _expr(list(merged.items())) == 0, f"flow_{i}_{k}"
    return HubModel(prob, "single-allocation flow (EK96)", hub, x, cand)


def _multiple_allocation(
    data: NetworkData, d: np.ndarray, params: HubModelParams, cand: list[int]
) -> HubModel:
    n = data.n
    w = data.flow_matrix()
    out_vol = w.sum(axis=1)
    handling = np.array([s.handling_cost for s in data.sites])
    c, t, dist = unit_path_costs(d, params)
    prob = pulp.LpProblem("multiple_allocation", pulp.LpMinimize)
    hv = {k: _var(prob, f"h_{k}", cat=pulp.LpBinary) for k in cand}
    hub: list[pulp.LpVariable | None] = [hv.get(k) for k in range(n)]
    senders = [i for i in range(n) if out_vol[i] > _ZERO]
    z = {(i, k): _var(prob, f"z_{i}_{k}", 0, 1) for i in senders for k in cand}
    y = {
        (i, k, m): _var(prob, f"y_{i}_{k}_{m}", 0)
        for i in senders
        for k in cand
        for m in cand
        if k != m
    }
    xd = {
        (i, m, j): _var(prob, f"x_{i}_{m}_{j}", 0)
        for i in senders
        for j in range(n)
        if w[i, j] > 0
        for m in cand
    }
    obj: list[tuple[pulp.LpVariable, float]] = []
    for k in cand:
        if data.sites[k].hub_fixed_cost:
            obj.append((hv[k], data.sites[k].hub_fixed_cost))
    for (i, k), v in z.items():
        obj.append((v, float((c[i, k] + handling[k]) * out_vol[i])))
    for (_i, k, m), v in y.items():
        obj.append((v, float(t[k, m] + handling[m])))
    for (_i, m, j), v in xd.items():
        obj.append((v, float(dist[m, j])))
    prob += _expr(obj)

    if params.hubs is not None:
        prob += _expr([(v, 1.0) for v in hv.values()]) == params.hubs, "hub_count"
    for k in cand:
        if data.sites[k].hub_status == "open":
            prob += hv[k] == 1, f"forced_open_{k}"
    for i in senders:
        prob += _expr([(z[i, k], 1.0) for k in cand]) == 1, f"collect_{i}"
        dests = [j for j in range(n) if w[i, j] > 0]
        for k in cand:
            prob += z[i, k] - hv[k] <= 0, f"collect_open_{i}_{k}"
            out_y = [(y[i, k, m], 1.0) for m in cand if m != k]
            in_y = [(y[i, m, k], 1.0) for m in cand if m != k]
            # Conservation at hub k of volume from origin i.
            terms = [(z[i, k], float(out_vol[i]))] + [(v, -a) for v, a in out_y]
            terms += in_y + [(xd[i, k, j], -1.0) for j in dests]
            prob += _expr(terms) == 0, f"flow_{i}_{k}"
            # A unit changes hubs at most once: transfers out of k carry only
            # volume collected at k.
            prob += _expr(out_y + [(z[i, k], -float(out_vol[i]))]) <= 0, f"one_transfer_{i}_{k}"
        for j in dests:
            prob += _expr([(xd[i, m, j], 1.0) for m in cand]) == float(w[i, j]), f"deliver_{i}_{j}"
            for m in cand:
                prob += (
                    xd[i, m, j] - float(w[i, j]) * hv[m] <= 0,
                    f"deliver_open_{i}_{m}_{j}",
                )
    return HubModel(prob, "multiple-allocation flow (EK98)", hub, {}, cand)


def check_start_hubs(data: NetworkData, start_hubs: Sequence[str] | None) -> None:
    """Refuse a warm start naming sites the network does not have."""
    unknown = [h for h in start_hubs or () if h not in data.ids]
    if unknown:
        raise InputError(
            Problem("warm start", None, "hubs", f"unknown hub ids {', '.join(unknown)}")
        )


def start_misfit(
    data: NetworkData, params: HubModelParams, start_hubs: Sequence[str]
) -> str | None:
    """Why a warm start's hub set is not a plan of this scenario, or ``None``.

    ``start_hubs`` are site ids the network has (:func:`check_start_hubs`).

    A start from another scenario (last night's plan after the hub count or
    a hub's status changed) would otherwise be taken as the plan to beat,
    and a plan the scenario does not allow could be reported.
    """
    given = {data.index(h) for h in start_hubs}
    if not given:
        return "no hubs"
    if params.hubs is not None and len(given) != params.hubs:
        return f"{len(given)} hubs, the scenario asks for {params.hubs}"
    barred = sorted(data.sites[k].id for k in given if not data.sites[k].is_candidate)
    if barred:
        return f"{', '.join(barred)} may not be a hub"
    forced = sorted(
        s.id for k, s in enumerate(data.sites) if s.hub_status == "open" and k not in given
    )
    if forced:
        return f"forced-open hub {', '.join(forced)} missing"
    return None
