"""Single allocation: the linear relaxation of the path formulation, solved first.

The flow formulation that :mod:`hubnet.model` builds for single allocation
(Ernst and Krishnamoorthy 1996) is compact, O(n^3) columns, but its linear
relaxation can lie several per cent under the optimum, and branch and bound
then takes minutes (CAB, 25 cities, 4 hubs, transfer factor 1.0: 246 s with
CBC). The path formulation of Skorin-Kapov, Skorin-Kapov and O'Kelly (1996,
EJOR 94:582-593) has one column per OD pair and hub pair, O(n^4), and a far
tighter relaxation: on the p-hub median instances measured its LP optimum
was integral, so it *is* the optimum, proven, without any branching.

This module builds that relaxation over unordered pairs ``{i, j}`` (both
directions of a pair use the same hub pair, so one column serves both) and
solves it with HiGHS:

* columns ``x[i, a]`` (terminal i allocated to candidate hub a, relaxed to
  [0, 1]) and ``u[p, a, b]`` >= 0 (the pair p = {i, j} goes via hubs a of i
  and b of j);
* rows: every terminal allocated once; ``x[i, a] <= x[hub a, a]``; the hub
  count; per pair ``sum_b u[p, a, b] = x[i, a]`` and ``sum_a u[p, a, b] =
  x[j, b]``;
* costs: collection, distribution and the first hub's handling on ``x``
  (with the hub's fixed cost on ``x[k, k]``), as in the flow model; the
  transfer and the second hub's handling on ``u`` for ``a != b``.

When the hub-to-hub costs obey the triangle inequality (the classic
discounted distances on any metric do), each pair's transport problem is
replaced by a flow with the same optimum: columns ``g[p, a, b]`` for
``a != b`` and one row per hub, ``sum_b g[p, a, b] - sum_b g[p, b, a] =
x[i, a] - x[j, a]``. Any transport plan is such a flow, and a flow that
passes through a third hub costs no less than the direct transfer, so both
forms have the same optimum and give a plan the same cost; the flow form
has half the pair rows and is solved 2-3x faster (CAB, 25 cities, 4 hubs: 1.3-3.4 s
against 3.2-11.9 s on the machine of benchmarks/README.md).

When every ``x`` comes out 0 or 1 the plan it describes is optimal;
otherwise :func:`branch_on_path` branches on the same model in HiGHS, depth
first, each node re-solved from its parent's basis. The relaxation lies
within a fraction of a per cent of the optimum, so few nodes are needed
(CAB, 20 cities, 4 hubs, transfer factor 1.0: 7 nodes, 0.5 s, where the
flow model's MILP took 51 s). Sort capacities are not modelled here:
capacitated problems skip this step.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Any, Literal

import highspy
import numpy as np

from hubnet._highs import pass_columns, quiet_highs
from hubnet.config import HubModelParams
from hubnet.data import NetworkData
from hubnet.model import allocation_costs
from hubnet.solution import unit_path_costs

#: Largest relaxation built (columns): about n = 30 with every site a
#: candidate. Above it the flow model alone is used.
MAX_COLUMNS = 450_000
#: How far from 0 or 1 an allocation value may be and still count as whole.
INTEGRAL_TOL = 1e-6


@dataclass(frozen=True)
class PathRelaxation:
    """The solved relaxation.

    Attributes
    ----------
    objective
        Its optimum, currency per day: a lower bound on every plan's cost.
    hubs
        Open hubs (matrix indices) when the allocation is integral, else ``[]``.
    assign
        ``assign[i]`` = hub index of site i when integral, else ``None``.
    columns
        Columns of the relaxation.
    build_seconds, solve_seconds
        Time to build it and to solve it, seconds.
    form
        ``"flow"`` or ``"transport"``: how the pairs' hub-to-hub legs were
        written (see :func:`solve_path_relaxation`).
    reduced_cost
        ``(n, n)``: the LP reduced cost of "site i allocated to hub k"
        (currency per day; ``inf`` where k is no candidate). Any plan with
        that allocation costs at least ``objective + reduced_cost[i, k]``.
    """

    objective: float
    hubs: list[int]
    assign: np.ndarray | None
    columns: int
    build_seconds: float
    solve_seconds: float
    reduced_cost: np.ndarray = field(repr=False, default_factory=lambda: np.zeros((0, 0)))
    form: str = "transport"

    @property
    def integral(self) -> bool:
        """The relaxation's optimum is a plan: proven optimal."""
        return self.assign is not None


def satisfies_triangle(hop: np.ndarray, *, rel_tol: float = 1e-12) -> bool:
    """Whether hub-to-hub costs obey the triangle inequality.

    ``hop[a, b]``: cost of one unit from hub a to hub b (transfer plus the
    second hub's handling, currency per unit; zero diagonal). True when
    ``hop[a, m] + hop[m, b] >= hop[a, b]`` for every a, m, b (to a relative
    ``rel_tol``): then no unit could go cheaper by way of a third hub, and a
    pair's hub-to-hub leg can be written as a flow (q rows) instead of a
    transport problem (2q rows) with the same optimum. True of the
    discounted-distance transfers of the classic problems on any metric
    (planar or geodesic distances); a user's matrix may break it.
    """
    q = len(hop)
    if q < 3:
        return True
    scale = max(float(np.abs(hop).max()), 1.0)
    for m in range(q):
        via = hop[:, m][:, None] + hop[m, :][None, :]
        if np.any(via < hop - rel_tol * scale):
            return False
    return True


def hub_hop_costs(
    data: NetworkData, d: np.ndarray, params: HubModelParams, cand: np.ndarray
) -> np.ndarray:
    """``(q, q)``: cost of one unit from candidate hub a to candidate hub b.

    The transfer (discounted distance) plus the second hub's handling,
    currency per unit, with a zero diagonal; ``cand`` holds the candidates'
    matrix indices and ``d`` the ``(n, n)`` distances, km.
    """
    handling = np.array([s.handling_cost for s in data.sites], dtype=float)
    _collect, transfer, _distribute = unit_path_costs(d, params)
    hop = transfer[np.ix_(cand, cand)] + handling[cand][None, :]
    np.fill_diagonal(hop, 0.0)
    return np.asarray(hop, dtype=float)


def relaxation_columns(data: NetworkData, allowed: np.ndarray | None = None) -> int:
    """Columns of the relaxation's larger (transport) form for ``data``.

    Used to decide whether to build it; the flow form has ``n q + pairs q
    (q - 1)`` columns, a share 1/q fewer per pair. With ``allowed`` (see
    :func:`relax_path`) each pair counts the product of its two ends'
    allowed hubs instead of ``q^2``.
    """
    w = data.flow_matrix()
    cand = [k for k, s in enumerate(data.sites) if s.is_candidate]
    q = len(cand)
    iu, ju = np.nonzero(np.triu(w + w.T, k=1) > 0)
    if allowed is None:
        return data.n * q + len(iu) * q * q
    per_site = allowed[:, cand].sum(axis=1)
    return data.n * q + int((per_site[iu] * per_site[ju]).sum())


def solve_path_relaxation(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    *,
    time_limit_s: float | None = None,
    threads: int | None = None,
    form: Literal["auto", "flow", "transport"] = "auto",
) -> PathRelaxation | None:
    """Build and solve the path relaxation of a single-allocation problem.

    See :func:`relax_path` (which also hands back the model, to branch on).
    """
    out = relax_path(data, d, params, time_limit_s=time_limit_s, threads=threads, form=form)
    return None if out is None else out[0]


@dataclass
class PathModel:
    """The path model held in HiGHS after its relaxation, to branch on.

    Attributes
    ----------
    h
        The ``highspy.Highs`` object, solved at the root.
    cand
        Matrix indices of the candidate hubs (column block order).
    x_lo, x_hi
        The allocation columns' bounds at the root, ``(n q,)``; column
        ``i q + a`` is site i allocated to ``cand[a]``.
    """

    h: Any
    cand: np.ndarray
    x_lo: np.ndarray
    x_hi: np.ndarray


def relax_path(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    *,
    time_limit_s: float | None = None,
    threads: int | None = None,
    form: Literal["auto", "flow", "transport"] = "auto",
    allowed: np.ndarray | None = None,
) -> tuple[PathRelaxation, PathModel] | None:
    """Build and solve the path relaxation; return it and the model in HiGHS.

    Parameters
    ----------
    data
        Validated network.
    d
        ``(n, n)`` distances, km.
    params
        Model parameters (single allocation, uncapacitated).
    time_limit_s
        Seconds the LP may take; ``None`` for no limit.
    threads
        HiGHS threads (``None``: HiGHS's default), as for the whole solve.
    form
        How each OD pair's hub-to-hub leg is written: ``"transport"`` (per
        OD pair one column per ordered hub pair, q^2, and two rows per hub)
        or ``"flow"`` (per OD pair one column per ordered pair of distinct
        hubs, q(q - 1), and one row per hub); ``"auto"``: flow when the
        transfer costs satisfy the triangle inequality (then both have the
        same optimum), else transport.
    allowed
        ``(n, n)`` booleans: the allocations "site i to hub k" that may be
        used (``None``: all). The others are left out, with their pairs'
        columns and rows; a forced-open hub's own allocation is always in.
        The relaxation then bounds only the plans made of allowed
        allocations (for example, all plans cheaper than a plan in hand
        after reduced-cost fixing), and ``reduced_cost`` is ``inf`` on the
        others.

    Returns
    -------
    tuple or None
        The relaxation and the model; ``None`` when the relaxation was not
        solved to optimality (time limit, numerical trouble) or does not
        apply.
    """
    if params.allocation != "single" or params.capacitated:
        return None
    t0 = time.perf_counter()
    n = data.n
    cand = np.array([k for k, s in enumerate(data.sites) if s.is_candidate], dtype=np.int64)
    q = len(cand)
    if q == 0:
        return None
    w = data.flow_matrix().astype(float)
    iu, ju = np.nonzero(np.triu(w + w.T, k=1) > 0)
    ok = np.ones((n, q), dtype=bool) if allowed is None else allowed[:, cand].astype(bool)
    # A forced-open hub's own allocation: always in, and fixed at 1 below.
    forced = np.array(
        [a for a, k in enumerate(cand) if data.sites[k].hub_status == "open"], dtype=np.int64
    )
    ok[cand[forced], forced] = True

    # Costs.
    cx = allocation_costs(data, d, params, [int(k) for k in cand])
    hop = hub_hop_costs(data, d, params, cand)
    if form == "auto":
        form = "flow" if satisfies_triangle(hop) else "transport"
    # Pair cost of hub a for i and hub b for j, both directions of the pair.
    cu = w[iu, ju][:, None, None] * hop[None, :, :] + w[ju, iu][:, None, None] * hop.T[None, :, :]

    def xcol(i: np.ndarray, a: np.ndarray) -> np.ndarray:
        return i * q + a

    # Rows, as (row, column, value) triplets.
    r_assign = 0
    r_open = n  # one per (i, a) with i != cand[a]
    ii = np.repeat(np.arange(n), q)
    aa = np.tile(np.arange(q), n)
    keep = ii != cand[aa]
    oi, oa = ii[keep], aa[keep]
    n_open = len(oi)
    r_count = r_open + n_open
    has_count = params.hubs is not None
    r_pair = r_count + (1 if has_count else 0)

    rows = [r_assign + ii, r_open + np.arange(n_open), r_open + np.arange(n_open)]
    cols = [xcol(ii, aa), xcol(oi, oa), xcol(cand[oa], oa)]
    vals = [np.ones(n * q), np.ones(n_open), -np.ones(n_open)]
    if has_count:
        rows.append(np.full(q, r_count))
        cols.append(xcol(cand, np.arange(q)))
        vals.append(np.ones(q))
    # Which hubs each end of each pair may use: s_i for the pair's first
    # end, s_j for its second, (pairs, q) booleans.
    s_i, s_j = ok[iu], ok[ju]
    # Each end's allocation columns, as (pair, hub) positions.
    pi, ai = np.nonzero(s_i)
    pj, bj = np.nonzero(s_j)
    n_x = n * q
    if form == "transport":
        # u[p, a, b]: rows sum_b u = x[i, a] (a in s_i), sum_a u = x[j, b] (b in s_j).
        p_idx, a_idx, b_idx = np.nonzero(s_i[:, :, None] & s_j[:, None, :])
        ri = np.cumsum(s_i.ravel()).reshape(s_i.shape) - 1
        rj = np.cumsum(s_j.ravel()).reshape(s_j.shape) - 1
        r_pj = r_pair + int(s_i.sum())
        n_row = r_pj + int(s_j.sum())
        n_u = len(p_idx)
        rows += [r_pair + ri[p_idx, a_idx], r_pj + rj[p_idx, b_idx]]
        vals += [np.ones(n_u), np.ones(n_u)]
        rows += [r_pair + ri[pi, ai], r_pj + rj[pj, bj]]
        vals += [-np.ones(len(pi)), -np.ones(len(pj))]
    else:
        # g[p, a, b], a in s_i, b in s_j, a != b: rows out - in = x[i, a] -
        # x[j, a] at every hub a either end may use.
        arcs = s_i[:, :, None] & s_j[:, None, :] & ~np.eye(q, dtype=bool)[None]
        p_idx, a_idx, b_idx = np.nonzero(arcs)
        either = s_i | s_j
        ri = np.cumsum(either.ravel()).reshape(either.shape) - 1
        rj = ri
        n_row = r_pair + int(either.sum())
        n_u = len(p_idx)
        rows += [r_pair + ri[p_idx, a_idx], r_pair + ri[p_idx, b_idx]]
        vals += [np.ones(n_u), -np.ones(n_u)]
        rows += [r_pair + ri[pi, ai], r_pair + rj[pj, bj]]
        vals += [-np.ones(len(pi)), np.ones(len(pj))]
    cost_u = cu[p_idx, a_idx, b_idx]
    n_col = n_x + n_u
    u_cols = n_x + np.arange(n_u)
    cols += [u_cols, u_cols, xcol(iu[pi], ai), xcol(ju[pj], bj)]
    cost = np.concatenate([cx.ravel(), cost_u])

    row = np.concatenate(rows)
    col = np.concatenate(cols)
    val = np.concatenate(vals)
    order = np.lexsort((row, col))
    row, col, val = row[order].astype(np.int32), col[order], val[order]
    start = np.searchsorted(col, np.arange(n_col + 1)).astype(np.int32)

    row_lo = np.zeros(n_row)
    row_hi = np.zeros(n_row)
    row_lo[r_assign : r_assign + n] = row_hi[r_assign : r_assign + n] = 1.0
    row_lo[r_open : r_open + n_open] = -highspy.kHighsInf
    if has_count:
        row_lo[r_count] = row_hi[r_count] = float(params.hubs or 0)
    col_lo = np.zeros(n_col)
    col_hi = np.full(n_col, highspy.kHighsInf)
    col_hi[:n_x] = ok.ravel()
    col_lo[xcol(cand[forced], forced)] = 1.0

    h = quiet_highs(threads)
    # HiGHS's presolve costs more than it saves on this LP: CAB n = 25, p = 4,
    # alpha 0.6 / 1.0 solved in 2.5 / 3.6 s with it, 1.4 / 2.7 s without.
    h.setOptionValue("presolve", "off")
    if time_limit_s is not None:
        h.setOptionValue("time_limit", max(float(time_limit_s), 0.01))
    pass_columns(h, cost, (col_lo, col_hi), (row_lo, row_hi), (start, row, val))
    build_seconds = time.perf_counter() - t0
    t1 = time.perf_counter()
    h.run()
    solve_seconds = time.perf_counter() - t1
    if h.getModelStatus() != highspy.HighsModelStatus.kOptimal:
        return None
    objective = float(h.getInfo().objective_function_value)
    solution = h.getSolution()
    x = np.asarray(solution.col_value)[:n_x].reshape(n, q)
    reduced = np.full((n, n), np.inf)
    # At the upper bound (an allocation at 1) a reduced cost is <= 0 and
    # says nothing about raising it: count it as 0. A column fixed at 1 (a
    # forced-open hub's own allocation) may show any reduced cost: it is in
    # every plan, so 0 as well.
    dual = np.maximum(np.asarray(solution.col_dual)[:n_x], 0.0)
    dual[col_lo[:n_x] >= 1.0] = 0.0
    dual[~ok.ravel()] = np.inf
    reduced[:, cand] = dual.reshape(n, q)
    whole = bool(np.all(np.minimum(np.abs(x), np.abs(x - 1.0)) <= INTEGRAL_TOL))
    hubs: list[int] = []
    assign: np.ndarray | None = None
    if whole:
        assign = cand[np.argmax(x, axis=1)]
        hubs = sorted(int(k) for a, k in enumerate(cand) if x[k, a] > 0.5)
    relaxed = PathRelaxation(
        objective,
        hubs,
        assign,
        n_col,
        build_seconds,
        solve_seconds,
        reduced_cost=reduced,
        form=form,
    )
    return relaxed, PathModel(h, cand, col_lo[:n_x].copy(), col_hi[:n_x].copy())


@dataclass(frozen=True)
class PathPlan:
    """Outcome of branching on the path model.

    Attributes
    ----------
    objective
        Cost of the best plan, currency per day (``inf`` if none was found).
    bound
        Proven lower bound on every plan's cost, currency per day.
    hubs, assign
        The best plan's hubs and each site's hub (matrix indices);
        ``assign`` is ``None`` when no plan was found.
    proven
        The search was finished: the plan is optimal to the gap asked (or,
        with ``assign`` ``None``, no plan exists among the allocations
        searched).
    out_of_time
        The search was stopped by its time limit (not by ``max_nodes``).
    nodes
        Linear programs solved in the search (the root not counted).
    seconds
        Wall time of the search, seconds.
    """

    objective: float
    bound: float
    hubs: list[int]
    assign: np.ndarray | None
    proven: bool
    out_of_time: bool
    nodes: int
    seconds: float


#: Most nodes a branch and bound on the path model may solve before it
#: hands over to the flow model's MILP (with its best plan as the start).
MAX_NODES = 400


def branch_on_path(
    model: PathModel,
    relaxed: PathRelaxation,
    incumbent: tuple[float, np.ndarray | None] | None,
    *,
    gap: float = 1e-6,
    time_limit_s: float | None = None,
    max_nodes: int | None = None,
) -> PathPlan:
    """Branch and bound on the path model's allocations, depth first.

    The relaxation is tight (its optimum lies within a fraction of a per
    cent of the plan's on the classic instances), so few nodes are needed:
    each fixes one allocation at 0 or 1 (an open/closed hub first, the most
    fractional one; then the most fractional allocation of a site), and is
    re-solved from its parent's basis by HiGHS's dual simplex. A node whose
    relaxation is integral is a plan; a node whose bound is within the
    relative ``gap`` of the best plan is cut off.

    Parameters
    ----------
    model, relaxed
        From :func:`relax_path`.
    incumbent
        A plan in hand, ``(cost, assign)``: cost per day and each site's hub
        (matrix indices), e.g. from local search. Allocations its cost rules
        out by reduced cost (:func:`fixable`) are left out of the search.
        ``assign`` may be ``None`` for a plan outside this model (other
        hubs): its cost is then only a cut-off, and when nothing cheaper
        is found the result has no allocation.
    gap
        Relative gap at which a plan counts as proven optimal.
    time_limit_s
        Seconds the search may take; ``None`` for no limit.
    max_nodes
        Nodes to solve at most (``None``: :data:`MAX_NODES`); then the
        search stops unproven.
    """
    t0 = time.perf_counter()
    if max_nodes is None:
        max_nodes = MAX_NODES
    h, cand = model.h, model.cand
    q = len(cand)
    n = len(model.x_lo) // q
    lo, hi = model.x_lo.copy(), model.x_hi.copy()
    best, best_assign = np.inf, None
    if incumbent is not None and np.isfinite(incumbent[0]):
        best = float(incumbent[0])
        out = fixable(relaxed, best)[:, cand].ravel()
        if incumbent[1] is not None:
            best_assign = np.asarray(incumbent[1])
            pos = {int(k): a for a, k in enumerate(cand)}
            keep = np.array([i * q + pos[int(k)] for i, k in enumerate(best_assign)])
            out[keep] = False
        hi[out] = np.minimum(hi[out], 0.0)
    changed = np.flatnonzero(hi != model.x_hi)
    for col in changed:
        h.changeColBounds(int(col), float(lo[col]), float(hi[col]))
    hub_cols = np.array([int(k) * q + a for a, k in enumerate(cand)])
    stack: list[tuple[dict[int, float], float]] = [({}, relaxed.objective)]
    set_before: dict[int, float] = {}
    cut_off = np.inf  # least bound of the nodes cut off by the gap alone
    nodes = 0
    out_of_time = False

    def cut(bound: float) -> bool:
        return bound >= best - gap * abs(best)

    while stack:
        fix, bound = stack.pop()
        if cut(bound):
            cut_off = min(cut_off, bound)
            continue
        spent = time.perf_counter() - t0
        out_of_time = time_limit_s is not None and spent >= time_limit_s
        if nodes >= max_nodes or out_of_time:
            stack.append((fix, bound))
            break
        for j in set_before:
            h.changeColBounds(j, float(lo[j]), float(hi[j]))
        for j, v in fix.items():
            h.changeColBounds(j, v, v)
        set_before = fix
        if time_limit_s is not None:
            # HiGHS measures its limit against the object's run time over
            # every run() so far (the root and earlier nodes), not this run's.
            h.setOptionValue("time_limit", h.getRunTime() + max(time_limit_s - spent, 0.01))
        h.run()
        nodes += 1
        status = h.getModelStatus()
        if status == highspy.HighsModelStatus.kInfeasible:
            continue
        if status != highspy.HighsModelStatus.kOptimal:
            stack.append((fix, bound))  # not solved (time limit): still open
            out_of_time = status == highspy.HighsModelStatus.kTimeLimit
            break
        value = float(h.getInfo().objective_function_value)
        if cut(value):
            cut_off = min(cut_off, value)
            continue
        x = np.asarray(h.getSolution().col_value)[: n * q]
        frac = np.minimum(np.abs(x), np.abs(1.0 - x))
        if frac.max() <= INTEGRAL_TOL:
            best = value
            best_assign = cand[np.argmax(x.reshape(n, q), axis=1)]
            continue
        on_hubs = frac[hub_cols]
        c = (
            int(hub_cols[np.argmax(on_hubs)])
            if on_hubs.max() > INTEGRAL_TOL
            else int(frac.argmax())
        )
        up: tuple[dict[int, float], float] = ({**fix, c: 1.0}, value)
        down: tuple[dict[int, float], float] = ({**fix, c: 0.0}, value)
        # Depth first, the side nearer the relaxation's value first.
        stack += [down, up] if x[c] >= 0.5 else [up, down]
    bound = min([b for _, b in stack] + [cut_off, best])
    hubs: list[int] = [] if best_assign is None else sorted({int(k) for k in best_assign})
    seconds = time.perf_counter() - t0
    return PathPlan(best, bound, hubs, best_assign, not stack, out_of_time, nodes, seconds)


def fixable(relaxed: PathRelaxation, incumbent: float, *, tol: float = 1e-7) -> np.ndarray:
    """Allocations no plan cheaper than ``incumbent`` can use: ``(n, n)`` booleans.

    By LP duality, a plan allocating site i to hub k costs at least the
    relaxation's optimum plus that allocation's reduced cost; where this
    exceeds the cost of a plan in hand, the allocation can be left out of
    the search (reduced-cost fixing).  Allocations fixed at 1 in the relaxation (a
    forced-open hub's own) carry reduced cost 0 there, so they are never
    ruled out.
    """
    slack = incumbent - relaxed.objective + tol * max(1.0, abs(incumbent))
    return np.asarray(relaxed.reduced_cost > slack)


__all__ = [
    "MAX_COLUMNS",
    "MAX_NODES",
    "PathModel",
    "PathPlan",
    "PathRelaxation",
    "branch_on_path",
    "fixable",
    "hub_hop_costs",
    "relax_path",
    "relaxation_columns",
    "solve_path_relaxation",
]
