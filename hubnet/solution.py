"""The solved plan: hubs, allocation, routes, legs and costs, all traceable.

A :class:`Solution` is built by :func:`evaluate_plan` from a hub set and an
allocation alone, by re-pricing every OD route with the same cost rules the
model uses. So every figure in every output is recomputed from the plan,
independently of the solver, and the solver's objective is checked against
it (:attr:`Solution.objective_check`).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Literal

import numpy as np

from hubnet.config import HubModelParams, SolverParams
from hubnet.data import NetworkData

RunStatus = Literal["optimal", "time_limit", "infeasible", "error"]
Tier = Literal["feeder", "trunk", "direct"]


@dataclass(frozen=True, slots=True)
class SolveStats:
    """What the solver said, so a proven optimum is told from a time-limited plan.

    Attributes
    ----------
    solver
        ``highs`` or ``cbc``.
    status
        ``optimal`` (gap within the tolerance), ``time_limit`` (a plan, not
        proven optimal), ``infeasible`` or ``error``.
    objective
        Cost of the plan found, currency per day.
    best_bound
        Proven lower bound on the optimal cost, currency per day.
    gap
        ``(objective - best_bound) / objective`` (0 when proven optimal).
    solve_seconds, build_seconds
        Wall time in the solver, and in building the model, seconds.
    start_seconds
        Wall time of the starting-plan search before the solver, seconds
        (0 when none ran).
    formulation
        Name of the formulation / algorithm used.
    options
        Solver options as given (time limit, gap, threads).
    log
        The solver's own log (written to the run folder as solver.log).
    """

    solver: str
    status: RunStatus
    objective: float | None
    best_bound: float | None
    gap: float | None
    solve_seconds: float
    build_seconds: float
    formulation: str
    options: Mapping[str, object] = field(default_factory=dict)
    log: str = field(default="", repr=False)
    start_seconds: float = 0.0

    def bound_text(self) -> str:
        """``bound 1,234.00, gap 0.0100 %``, or ``no bound proven yet``, for progress lines."""
        if self.best_bound is None:
            return "no bound proven yet"
        return f"bound {self.best_bound:,.2f}, gap {100 * (self.gap or 0.0):.4f} %"


def solver_options(opts: SolverParams) -> dict[str, object]:
    """The solver options as summary.json reports them: time limit (s), gap, threads."""
    return {"time_limit_s": opts.time_limit_s, "gap": opts.gap, "threads": opts.threads}


@dataclass(frozen=True, slots=True)
class Route:
    """The path of one OD pair.

    Attributes
    ----------
    origin, destination
        Site ids.
    volume
        Units per day.
    path
        Site ids from origin through the hubs to destination (a hub equal
        to the origin or destination is not repeated).
    distance_km
        Length of the path, km.
    cost
        Transport plus handling cost of the pair's whole volume, currency
        per day.
    hubs
        The hubs where the volume is sorted, in order (one or two ids; a
        hub at the origin or destination is listed when the volume is
        sorted there). Empty for a direct route.
    transit_h
        Freight model: hours from the origin's cut-off to arrival (driving,
        breaks, relays and sorts). ``None`` in the classic model.
    allowance_h
        Freight model: hours allowed from cut-off to the delivery deadline.
    """

    origin: str
    destination: str
    volume: float
    path: tuple[str, ...]
    distance_km: float
    cost: float
    hubs: tuple[str, ...] = ()
    transit_h: float | None = None
    allowance_h: float | None = None

    @property
    def slack_h(self) -> float | None:
        """Hours to spare before the deadline (freight model), else ``None``."""
        if self.transit_h is None or self.allowance_h is None:
            return None
        return self.allowance_h - self.transit_h


@dataclass(frozen=True, slots=True)
class Leg:
    """A directed leg of the plan with the volume that uses it.

    Attributes
    ----------
    tier
        ``feeder`` (terminal to hub or hub to terminal), ``trunk`` (hub to
        hub) or ``direct``.
    origin, destination
        Site ids at the two ends.
    distance_km
        km.
    volume
        Units per day on the leg.
    cost
        Transport cost of that volume on the leg, currency per day. In the
        freight model: the one-way runs' share of the vehicles' cost (a
        round trip's dispatch cost is split evenly between its two
        directions, km and hour costs go with the direction driven).
    dispatches
        Freight model: vehicles run on this direction per day, by vehicle
        class id. A round trip appears on both directions of its leg;
        a direction with volume 0 is an empty return.
    capacity
        Freight model: units the dispatches can carry, per day.
    drive_h
        Freight model: driving hours of one run at the slowest class used.
    transit_h
        Freight model: hours from departure to arrival of one run
        (driving, breaks and relays).
    relays, drivers
        Freight model: driver changes on one run, and drivers on board.
    vehicle_km
        Freight model: vehicle-km per day on this direction.
    co2e_ttw_kg, co2e_wtw_kg
        Freight model: tank-to-wheel and well-to-wheel CO2e, kg per day.
    class_cost, class_drive_h
        Freight model, by vehicle class id: the class's share of ``cost``
        (its own dispatches' cost, currency per day) and the driving hours
        of one of its runs.
    """

    tier: Tier
    origin: str
    destination: str
    distance_km: float
    volume: float
    cost: float
    dispatches: Mapping[str, float] = field(default_factory=dict)
    capacity: float | None = None
    drive_h: float | None = None
    transit_h: float | None = None
    relays: int = 0
    drivers: int = 1
    vehicle_km: float | None = None
    co2e_ttw_kg: float | None = None
    co2e_wtw_kg: float | None = None
    class_cost: Mapping[str, float] = field(default_factory=dict)
    class_drive_h: Mapping[str, float] = field(default_factory=dict)

    @property
    def fill(self) -> float | None:
        """Volume over capacity (0..1) in the freight model, else ``None``."""
        if self.capacity is None or self.capacity <= 0:
            return None
        return self.volume / self.capacity

    @property
    def vehicle_classes(self) -> str:
        """Class ids used on the leg, joined by ``+`` (empty in the classic model)."""
        return "+".join(k for k, v in sorted(self.dispatches.items()) if v > 0)

    @property
    def unit_km(self) -> float:
        """Volume times distance, unit-km per day."""
        return self.volume * self.distance_km


@dataclass(frozen=True, slots=True)
class HubRecord:
    """One open hub.

    Attributes
    ----------
    id
        Site id.
    throughput
        Units per day sorted at the hub (every unit passing counts once).
    inbound
        Originating volume of the terminals allocated to the hub, units per
        day (what the sort capacity limits).
    capacity
        Sort capacity, units per day, or ``None`` (unlimited).
    terminals
        Sites allocated to the hub (single allocation), or sites sending
        some volume through it first (multiple allocation).
    fixed_cost, handling_cost
        Currency per day.
    """

    id: str
    throughput: float
    inbound: float
    capacity: float | None
    terminals: tuple[str, ...]
    fixed_cost: float
    handling_cost: float

    @property
    def utilisation(self) -> float | None:
        """Inbound over capacity (0..1), or ``None`` when unlimited."""
        if self.capacity is None or self.capacity <= 0:
            return None
        return self.inbound / self.capacity


@dataclass(frozen=True, eq=False)
class Solution:
    """A complete plan with its figures.

    Attributes
    ----------
    scenario
        Scenario name.
    stats
        Solver status, objective, bound and gap.
    hubs
        Open hubs.
    routes, legs
        Every OD route and every leg used.
    costs
        Cost by component, currency per day: ``hub_fixed``, ``handling``,
        ``collection``, ``transfer``, ``distribution`` and ``total``.
    volume_unit
        The unit of every volume.
    """

    scenario: str
    stats: SolveStats
    hubs: tuple[HubRecord, ...]
    routes: tuple[Route, ...]
    legs: tuple[Leg, ...]
    costs: Mapping[str, float]
    volume_unit: str
    allocation: str
    site_names: Mapping[str, str] = field(default_factory=dict)
    freight: Mapping[str, object] = field(default_factory=dict)

    @property
    def hub_ids(self) -> tuple[str, ...]:
        """Ids of the open hubs."""
        return tuple(h.id for h in self.hubs)

    @property
    def objective_check(self) -> float | None:
        """Re-priced total minus the solver's objective (should be ~0)."""
        if self.stats.objective is None:
            return None
        return self.costs["total"] - self.stats.objective


def unit_path_costs(
    d: np.ndarray, params: HubModelParams
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per-unit leg cost matrices for collection, transfer and distribution.

    Parameters
    ----------
    d
        ``(n, n)`` distances, km.
    params
        Model parameters (factors and cost per unit-km).

    Returns
    -------
    tuple of arrays
        ``(collect, transfer, distribute)``, each ``(n, n)`` in currency
        per unit: ``collect[i, k]`` to bring a unit from terminal i to hub
        k, ``transfer[k, m]`` between hubs, ``distribute[m, j]`` from hub m
        to terminal j.
    """
    rate = params.cost_per_unit_km
    return (
        rate * params.collection_factor * d,
        rate * params.transfer_factor * d,
        rate * params.distribution_factor * d,
    )


def best_hub_pairs(
    d: np.ndarray, params: HubModelParams, hubs: Sequence[int], handling: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Cheapest first and second hub for every OD pair, given the open hubs.

    This is the exact routing of multiple allocation once hubs are fixed.

    Returns
    -------
    tuple of arrays
        ``(cost, first, second)``, each ``(n, n)``: per-unit cost and the
        matrix indices of the first and second hub.
    """
    c, t, dist = unit_path_costs(d, params)
    h = np.asarray(hubs, dtype=int)
    # g[i, m_idx, k_idx] = collect[i, k] + handle[k] + transfer[k, m] (+ handle[m] if m != k)
    hk = handling[h]
    second_handle = np.where(h[:, None] == h[None, :], 0.0, handling[h][:, None])  # [m, k]
    trunk = t[np.ix_(h, h)].T  # [m, k]
    g = c[:, h][:, None, :] + hk[None, None, :] + trunk[None, :, :] + second_handle[None]
    first_idx = g.argmin(axis=2)  # (n, |H|) best k for each (i, m)
    g_min = np.take_along_axis(g, first_idx[:, :, None], axis=2)[:, :, 0]
    total = g_min[:, :, None] + dist[h][None, :, :]  # (i, m, j)
    m_idx = total.argmin(axis=1)  # (n, n)
    cost = np.take_along_axis(total, m_idx[:, None, :], axis=1)[:, 0, :]
    k_idx = np.take_along_axis(first_idx, m_idx, axis=1)
    return cost, h[k_idx], h[m_idx]


def hub_records(
    data: NetworkData,
    hubs: Sequence[int],
    through: np.ndarray,
    inbound: np.ndarray,
    users: Mapping[int, set[int]],
    handling: np.ndarray,
) -> list[HubRecord]:
    """One :class:`HubRecord` per open hub, from per-site volumes (units per day).

    ``through`` and ``inbound`` are ``(n,)`` volumes sorted at and taken in
    by each site, ``users`` the terminals of each hub, ``handling`` the
    handling cost per unit of each site.
    """
    ids = data.ids
    return [
        HubRecord(
            id=data.sites[h].id,
            throughput=float(through[h]),
            inbound=float(inbound[h]),
            capacity=data.sites[h].sort_capacity,
            terminals=tuple(ids[i] for i in sorted(users.get(h, set()))),
            fixed_cost=data.sites[h].hub_fixed_cost,
            handling_cost=float(through[h] * handling[h]),
        )
        for h in hubs
    ]


def evaluate_plan(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    hubs: Sequence[int],
    assign: np.ndarray | None,
    stats: SolveStats,
    scenario: str = "",
) -> Solution:
    """Price a plan from its hubs (and allocation) and build the :class:`Solution`.

    Parameters
    ----------
    data
        The network.
    d
        ``(n, n)`` distances, km.
    params
        Model parameters.
    hubs
        Matrix indices of the open hubs.
    assign
        For single allocation, ``assign[i]`` is the hub index of site i;
        ``None`` for multiple allocation (each flow takes its cheapest
        hub pair among the open hubs).
    stats
        The solver's report.
    scenario
        Scenario name.
    """
    n = data.n
    ids = data.ids
    w = data.flow_matrix()
    handling = np.array([s.handling_cost for s in data.sites])
    c, t, dist = unit_path_costs(d, params)
    hubs = sorted(int(h) for h in hubs)
    if assign is not None:
        first = np.repeat(np.asarray(assign, dtype=int)[:, None], n, axis=1)
        second = np.repeat(np.asarray(assign, dtype=int)[None, :], n, axis=0)
    else:
        _, first, second = best_hub_pairs(d, params, hubs, handling)

    rows, cols = np.nonzero(w)
    routes: list[Route] = []
    leg_volume: dict[tuple[str, int, int], float] = {}
    through = np.zeros(n)
    inbound = np.zeros(n)
    users: dict[int, set[int]] = {h: set() for h in hubs}
    totals = {"collection": 0.0, "transfer": 0.0, "distribution": 0.0, "handling": 0.0}
    for i, j in zip(rows.tolist(), cols.tolist(), strict=True):
        vol = float(w[i, j])
        k, m = int(first[i, j]), int(second[i, j])
        coll, tran, dis = vol * c[i, k], vol * t[k, m], vol * dist[m, j]
        hand = vol * handling[k] + (vol * handling[m] if m != k else 0.0)
        totals["collection"] += coll
        totals["transfer"] += tran
        totals["distribution"] += dis
        totals["handling"] += hand
        through[k] += vol
        if m != k:
            through[m] += vol
        inbound[k] += vol
        users[k].add(i)
        path = [ids[i]]
        for node in (k, m, j):
            if ids[node] != path[-1]:
                path.append(ids[node])
        routes.append(
            Route(
                origin=ids[i],
                destination=ids[j],
                volume=vol,
                path=tuple(path),
                distance_km=float(d[i, k] + d[k, m] + d[m, j]),
                cost=float(coll + tran + dis + hand),
                hubs=(ids[k],) if m == k else (ids[k], ids[m]),
            )
        )
        for tier, a, b in (("collection", i, k), ("transfer", k, m), ("distribution", m, j)):
            if a != b:
                leg_volume[(tier, a, b)] = leg_volume.get((tier, a, b), 0.0) + vol

    factor = {"collection": c, "transfer": t, "distribution": dist}
    legs = [
        Leg(
            tier="trunk" if kind == "transfer" else "feeder",
            origin=ids[a],
            destination=ids[b],
            distance_km=float(d[a, b]),
            volume=vol,
            cost=float(vol * factor[kind][a, b]),
        )
        for (kind, a, b), vol in sorted(leg_volume.items(), key=lambda kv: (kv[0][0], kv[0][1:]))
    ]
    if assign is not None:
        for i in range(n):
            users.setdefault(int(assign[i]), set()).add(i)
    records = hub_records(data, hubs, through, inbound, users, handling)
    costs = dict(totals)
    costs["hub_fixed"] = float(sum(data.sites[h].hub_fixed_cost for h in hubs))
    costs["total"] = float(sum(costs.values()))
    return Solution(
        scenario=scenario,
        stats=stats,
        hubs=tuple(records),
        routes=tuple(routes),
        legs=tuple(legs),
        costs=costs,
        volume_unit=data.volume_unit,
        allocation=params.allocation,
        site_names={s.id: s.name for s in data.sites},
    )
