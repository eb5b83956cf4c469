"""Benders decomposition for multiple allocation: large networks solved exactly.

The origin-based flow formulation of Ernst and Krishnamoorthy (1998) has
O(n^3) flow variables, too many to build beyond ~50 sites. Here the flows
are projected out (Benders 1962; for hub location see Camargo, Miranda and
Luna 2008, and Contreras, Cordeau and Laporte 2011, Operations Research
59(6)): a small **master** MILP built in PuLP keeps one binary per
candidate hub and one cost variable ``theta[i]`` per origin; for each
origin a **subproblem** LP routes the origin's volume through the open
hubs, and its dual prices give a cut ``theta[i] >= const - sum_k coef[k]
* y[k]`` valid for every hub set.

Two phases:

1. LP phase: the master's relaxation is solved and cut until it reaches
   the LP bound of the flow formulation (subproblems are solved on the
   support of the fractional hub vector, their duals are extended to the
   other candidates in closed form, so every cut is valid everywhere).
2. Integer phase: the master MILP is re-solved with the cuts; each new hub
   set is priced exactly and cut, until the best plan's cost and the
   master's bound meet within the gap. On HiGHS, once a plan is in hand,
   each round asks only for the first hub set the master values under a
   cutoff just below that plan (options ``objective_bound`` and
   ``mip_max_improving_sols``) rather than for the master's optimum; a
   master with no hub set left under the cutoff is the proof.

Assumes leg costs satisfy the triangle inequality (true for geodesic,
Euclidean and road distances of one metric); plan costs are always priced
exactly, so a user matrix that breaks it can only leave a gap, never a
wrong cost.

Subproblem LPs are solved by HiGHS (highspy) whatever solver runs the
master: they are the decomposition's inner step, not the model.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass

import highspy
import numpy as np
import pulp

from hubnet._highs import pass_columns, quiet_highs, use_threads
from hubnet.config import HubModelParams, SolverParams
from hubnet.data import NetworkData
from hubnet.heuristics import polish_multiple
from hubnet.solution import (
    RunStatus,
    SolveStats,
    best_hub_pairs,
    solver_options,
    unit_path_costs,
)

Progress = Callable[[str], None]
_INF = highspy.kHighsInf
_SUB_PRESOLVE = "off"
_ALL_SOLUTIONS = 2_147_483_647  # HiGHS's default for mip_max_improving_sols
#: At most this many hub sets are cut around the master's plan in a round.
_NEIGHBOUR_CUTS = 50
#: A round (a master solve and the cuts from its answer) is not started
#: with less time left than this share of the previous round's wall time:
#: cut short it yields nothing, and neither the cut generation nor a HiGHS
#: master given a few seconds stops on time (AP, 200 sites, 15 hubs: an
#: integer round started with 4 s left after rounds of 52-77 s ended a 600
#: s run at 665 s; with half a round's time as the rule, a round started
#: with 35 s left after one of 57 s ended it at 621 s).
ROUND_SHARE = 1.0


def room_for_round(left_s: float | None, last_s: float | None) -> bool:
    """Whether another round may start with ``left_s`` s of the run left.

    ``last_s``: wall time of the previous round, s (``None``: none yet).
    No limit (``left_s`` ``None``) always leaves room.
    """
    if left_s is None:
        return True
    if left_s <= 0:
        return False
    return last_s is None or left_s >= ROUND_SHARE * last_s


@dataclass(frozen=True)
class _Costs:
    """Per-unit leg costs with handling folded in, over candidate hubs."""

    collect: np.ndarray  # (n, q): origin i to first hub k, plus handling at k
    transfer: np.ndarray  # (q, q): hub k to hub m, plus handling at m; 0 on the diagonal
    deliver: np.ndarray  # (q, n): hub m to destination j
    flows: np.ndarray  # (n, n)
    fixed: np.ndarray  # (q,)


def _costs(data: NetworkData, d: np.ndarray, params: HubModelParams, cand: np.ndarray) -> _Costs:
    c, t, dist = unit_path_costs(d, params)
    handling = np.array([s.handling_cost for s in data.sites])
    transfer = t[np.ix_(cand, cand)] + handling[cand][None, :]
    np.fill_diagonal(transfer, 0.0)
    return _Costs(
        collect=c[:, cand] + handling[cand][None, :],
        transfer=transfer,
        deliver=dist[cand, :],
        flows=data.flow_matrix(),
        fixed=np.array([data.sites[k].hub_fixed_cost for k in cand]),
    )


def _origin_cut(
    costs: _Costs, i: int, y: np.ndarray, support: np.ndarray, threads: int | None = None
) -> tuple[float, np.ndarray, float]:
    """Solve origin i's routing LP on the open (or partly open) hubs.

    Parameters
    ----------
    costs
        Leg costs.
    i
        Origin site index.
    y
        Hub values over candidates, in [0, 1].
    support
        Candidate positions with ``y > 0``.
    threads
        HiGHS threads, as for the whole solve.

    Returns
    -------
    tuple
        ``(const, coef, value)``: the cut ``theta_i >= const - coef @ y``
        (valid for every hub vector) and the LP value at ``y``.
    """
    w = costs.flows[i]
    out_vol = float(w.sum())
    q_all = len(y)
    dests = np.nonzero(w > 0)[0]
    s = support
    q, nj = len(s), len(dests)
    # Columns: z[a] (share collected at hub s[a]), t[a, b] (transfer a->b,
    # a != b), x[a, jj] (delivery from hub s[a] to destination dests[jj]).
    aa, bb = np.nonzero(~np.eye(q, dtype=bool))
    n_z, n_t, n_x = q, len(aa), q * nj
    cost = np.concatenate(
        [
            costs.collect[i, s] * out_vol,
            costs.transfer[s[aa], s[bb]],
            costs.deliver[np.ix_(s, dests)].ravel(),
        ]
    )
    upper = np.concatenate([y[s], np.full(n_t, _INF), np.outer(y[s], w[dests]).ravel()])
    # Rows: 0 = shares sum to 1; 1..q = conservation at each hub;
    # q+1..q+nj = each destination receives its volume.
    z_cols = np.arange(n_z)
    t_cols = n_z + np.arange(n_t)
    x_cols = n_z + n_t + np.arange(n_x)
    xa = np.repeat(np.arange(q), nj)
    xj = np.tile(np.arange(nj), q)
    rows = np.concatenate([np.zeros(q), 1 + z_cols, 1 + aa, 1 + bb, 1 + xa, 1 + q + xj])
    cols = np.concatenate([z_cols, z_cols, t_cols, t_cols, x_cols, x_cols])
    vals = np.concatenate(
        [np.ones(q), np.full(q, out_vol), -np.ones(n_t), np.ones(n_t), -np.ones(n_x), np.ones(n_x)]
    )
    order = np.lexsort((rows, cols))
    rows, cols, vals = rows[order].astype(np.int32), cols[order], vals[order]
    n_col = n_z + n_t + n_x
    start = np.searchsorted(cols, np.arange(n_col + 1)).astype(np.int32)
    rhs = np.concatenate([[1.0], np.zeros(q), w[dests]])

    h = quiet_highs(threads)
    h.setOptionValue("presolve", _SUB_PRESOLVE)
    pass_columns(h, cost, (np.zeros(n_col), upper), (rhs, rhs), (start, rows, vals))
    h.run()
    duals = np.asarray(h.getSolution().row_dual)
    value = float(h.getInfo().objective_function_value)

    sigma = float(duals[0])
    phi = np.empty(q_all)
    phi[s] = duals[1 : 1 + q]
    pi = np.zeros(costs.flows.shape[0])
    pi[dests] = duals[1 + q :]
    # Extend the hub potentials to closed hubs so every transfer column
    # prices non-negative (triangle inequality makes this choice feasible).
    closed = np.setdiff1d(np.arange(q_all), s)
    if len(closed):
        phi[closed] = (phi[s][None, :] - costs.transfer[np.ix_(closed, s)]).max(axis=1)
    alpha = np.maximum(0.0, sigma + out_vol * (phi - costs.collect[i]))
    beta = np.maximum(0.0, pi[None, :] - phi[:, None] - costs.deliver)
    coef = alpha + (beta * w[None, :]).sum(axis=1)
    const = sigma + float((w * pi).sum())
    return const, coef, value


class _CutCopy:
    """The master's cuts as arrays, to value many hub sets at once."""

    #: Most (cuts x hub sets) values computed at once, to bound memory.
    CHUNK = 2_000_000

    def __init__(self, n_senders: int, q: int) -> None:
        self.n_senders = n_senders
        self.n = 0
        self.origin = np.zeros(64, dtype=np.int64)
        self.const = np.zeros(64)
        self.coef = np.zeros((64, q))

    def add(self, pos_i: int, const: float, coef: np.ndarray) -> None:
        """Keep ``theta[pos_i] >= const - coef @ y`` (currency per day)."""
        if self.n == len(self.const):  # grow by doubling, not a copy per cut
            self.origin = np.concatenate([self.origin, np.zeros_like(self.origin)])
            self.const = np.concatenate([self.const, np.zeros_like(self.const)])
            self.coef = np.vstack([self.coef, np.zeros_like(self.coef)])
        self.origin[self.n], self.const[self.n] = pos_i, const
        self.coef[self.n] = coef
        self.n += 1

    def thetas(self, hub_sets: np.ndarray) -> np.ndarray:
        """Least ``theta`` the cuts allow per origin at each hub vector.

        ``hub_sets`` is ``(m, q)``; returns ``(m, senders)``, currency per day.
        """
        out = np.zeros((self.n_senders, len(hub_sets)))
        if self.n == 0:
            return out.T
        origin, const, coef = self.origin[: self.n], self.const[: self.n], self.coef[: self.n]
        step = max(1, self.CHUNK // self.n)
        for lo in range(0, len(hub_sets), step):
            part = hub_sets[lo : lo + step]
            values = const[:, None] - coef @ part.T
            np.maximum.at(out[:, lo : lo + step], origin, values)
        return out.T


def _moves(
    y0: np.ndarray, can_close: np.ndarray, can_open: np.ndarray, swaps_only: bool
) -> np.ndarray:
    """Hub vectors one move from ``y0``, ``(m, q)``.

    A move swaps an open hub for a closed one; when the hub count is free
    it may also open or close one hub.
    """
    shut = np.nonzero((y0 < 0.5) & can_open)[0]
    open_ = np.nonzero((y0 > 0.5) & can_close)[0]
    rows = []
    for a in open_:
        for b in shut:
            row = y0.copy()
            row[a], row[b] = 0.0, 1.0
            rows.append(row)
    if not swaps_only:
        for b in shut:
            row = y0.copy()
            row[b] = 1.0
            rows.append(row)
        if y0.sum() > 1.5:
            for a in open_:
                row = y0.copy()
                row[a] = 0.0
                rows.append(row)
    return np.array(rows).reshape(-1, len(y0))


def _plan_cost(data: NetworkData, d: np.ndarray, params: HubModelParams, hubs: list[int]) -> float:
    """Exact cost of a multiple-allocation plan (currency per day)."""
    handling = np.array([s.handling_cost for s in data.sites])
    unit, _, _ = best_hub_pairs(d, params, hubs, handling)
    fixed = sum(data.sites[k].hub_fixed_cost for k in hubs)
    return float((data.flow_matrix() * unit).sum() + fixed)


@dataclass
class _MasterResult:
    ok: bool  # a solution was found
    proven: bool  # optimal (LP) or proven within the gap (MIP)
    infeasible: bool
    value: float  # objective of the solution found
    bound: float  # proven lower bound on the master's optimum
    y: np.ndarray
    theta: np.ndarray
    #: LP reduced costs of the hub variables (LP solves with HiGHS only).
    reduced: np.ndarray | None = None


class _Master:
    """The master problem, built in PuLP and re-solved after each round of cuts.

    With HiGHS the model PuLP built is kept inside HiGHS and cuts are added
    to it directly, so each re-solve starts from the previous basis; with
    CBC the PuLP problem is re-solved from scratch.
    """

    def __init__(
        self,
        prob: pulp.LpProblem,
        y: list[pulp.LpVariable],
        theta: list[pulp.LpVariable],
        opts: SolverParams,
    ) -> None:
        self.prob, self.y, self.theta, self.opts = prob, y, theta, opts
        self.highs: highspy.Highs | None = None
        self.mip = False

    def add_cut(self, th: int, coef: dict[int, float], const: float, name: str) -> None:
        """Add ``theta[th] + sum coef[a] * y[a] >= const``."""
        if self.highs is not None:
            idx = np.array([self.theta[th].index] + [self.y[a].index for a in coef], dtype=np.int32)
            val = np.array([1.0] + list(coef.values()))
            self.highs.addRow(const, _INF, len(idx), idx, val)
        else:
            expr = pulp.LpAffineExpression(
                [(self.theta[th], 1.0)] + [(self.y[a], c) for a, c in coef.items()]
            )
            self.prob.addConstraint(expr >= const, name)

    def make_integer(self) -> None:
        """Switch the hub variables to binary for the integer phase."""
        self.mip = True
        for v in self.y:
            v.cat = pulp.LpInteger
        if self.highs is not None:
            idx = np.array([v.index for v in self.y], dtype=np.int32)
            kinds = np.array([highspy.HighsVarType.kInteger] * len(idx))
            self.highs.changeColsIntegrality(len(idx), idx, kinds)

    def solve(self, time_left: float | None, below: float | None = None) -> _MasterResult:
        """Solve the master (LP or MIP) within the time left (s).

        With ``below`` (currency per day; HiGHS, integer phase), the solve
        stops at the first hub set whose master value is under it instead
        of proving the master's optimum: that hub set is cut next. When no
        hub set is under ``below``, HiGHS 1.16 says "infeasible" or, more
        often, "optimal" with some hub set at or above it (not the
        master's optimum); either proves that no plan is cheaper. The bound
        reported is the master's dual bound when it stopped.
        """
        limit = None if time_left is None else max(1.0, time_left)
        gap = self.opts.gap / 10
        if self.opts.name == "cbc":
            solver = pulp.PULP_CBC_CMD(
                msg=False, mip=self.mip, timeLimit=limit, gapRel=gap, threads=self.opts.threads
            )
            self.prob.solve(solver)
            ok = self.prob.sol_status in (pulp.LpSolutionOptimal, pulp.LpSolutionIntegerFeasible)
            proven = self.prob.sol_status == pulp.LpSolutionOptimal
            value = float(pulp.value(self.prob.objective)) if ok else np.inf
            return _MasterResult(
                ok=ok,
                proven=proven,
                infeasible=self.prob.status == pulp.LpStatusInfeasible,
                value=value,
                bound=value * (1 - gap) if proven else -np.inf,
                y=np.array([v.varValue or 0.0 for v in self.y]),
                theta=np.array([v.varValue or 0.0 for v in self.theta]),
            )
        if self.highs is None:
            # First solve: PuLP hands its model to HiGHS; keep it there.
            self.prob.solve(
                pulp.HiGHS(
                    msg=False, mip=self.mip, timeLimit=limit, gapRel=gap, threads=self.opts.threads
                )
            )
            self.highs = self.prob.solverModel
        else:
            h = self.highs
            # HiGHS measures its limit against the object's run time over
            # every run() so far, not this run's: add what it has used.
            h.setOptionValue(
                "time_limit", h.getRunTime() + float(limit) if limit is not None else _INF
            )
            if self.mip:
                h.setOptionValue("objective_bound", _INF if below is None else float(below))
                h.setOptionValue("mip_max_improving_sols", _ALL_SOLUTIONS if below is None else 1)
            h.run()
        h = self.highs
        status = h.getModelStatus()
        info = h.getInfo()
        col = np.asarray(h.getSolution().col_value)
        infeasible = status == highspy.HighsModelStatus.kInfeasible
        proven = status == highspy.HighsModelStatus.kOptimal
        reduced = None
        if self.mip:
            ok = info.primal_solution_status == 2  # kSolutionStatusFeasible
            bound = float(info.mip_dual_bound)
        else:
            ok = proven
            bound = float(info.objective_function_value) if proven else -np.inf
            if ok:
                dual = np.asarray(h.getSolution().col_dual)
                reduced = dual[[v.index for v in self.y]]
        return _MasterResult(
            ok=ok and not infeasible,
            proven=proven,
            infeasible=infeasible,
            value=float(info.objective_function_value) if ok else np.inf,
            bound=bound if np.isfinite(bound) else -np.inf,
            y=col[[v.index for v in self.y]] if ok else np.zeros(len(self.y)),
            theta=col[[v.index for v in self.theta]] if ok else np.zeros(len(self.theta)),
            reduced=reduced,
        )

    def fix_by_reduced_cost(self, lp: _MasterResult, incumbent: float) -> tuple[int, int]:
        """Fix the hubs that no plan cheaper than ``incumbent`` can change.

        ``lp`` is a solved LP relaxation of the master (with some of the
        cuts: still a relaxation of the problem). A plan that opens hub a
        where the LP has it closed costs at least the LP value plus a's
        reduced cost, and one that closes a hub the LP has open at least the
        LP value minus it; where that exceeds the incumbent (currency per
        day), the hub is fixed closed or open for the integer phase.

        Returns the number of hubs fixed closed and fixed open.
        """
        if lp.reduced is None or self.highs is None or not np.isfinite(incumbent):
            return 0, 0
        slack = incumbent - lp.value + 1e-9 * max(1.0, abs(incumbent))
        closed = (lp.y <= 1e-9) & (lp.reduced > slack)
        opened = (lp.y >= 1 - 1e-9) & (-lp.reduced > slack)
        for a in np.nonzero(closed | opened)[0]:
            v = self.y[int(a)]
            lo, hi = (1.0, 1.0) if opened[a] else (0.0, 0.0)
            v.lowBound, v.upBound = lo, hi
            self.highs.changeColBounds(v.index, lo, hi)
        return int(closed.sum()), int(opened.sum())


def _logged(progress: Progress, lines: list[str], t0: float) -> Progress:
    """``progress`` that also keeps each line, stamped with the seconds since ``t0``."""

    def say(message: str) -> None:
        lines.append(f"{time.perf_counter() - t0:9.2f} s  {message}")
        progress(message)

    return say


def _log_text(lines: list[str]) -> str:
    """The kept lines as a log file's text, with a heading."""
    head = "Benders decomposition for multiple allocation: master (hub choice) and routing LPs\n"
    return head + "".join(f"{line}\n" for line in lines)


def solve_multiple_benders(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    opts: SolverParams,
    start_hubs: list[int] | None,
    progress: Progress,
) -> tuple[list[int], SolveStats]:
    """Solve multiple allocation by Benders decomposition.

    Parameters
    ----------
    data, d, params
        Network, distances (km) and model parameters.
    opts
        Solver for the master problem (``highs`` or ``cbc``), time limit
        (s) and relative gap.
    start_hubs
        Matrix indices of a starting plan, or ``None``.
    progress
        Called with one line per iteration.

    Returns
    -------
    tuple
        Best hub set (matrix indices) and the solve report.
    """
    t0 = time.perf_counter()
    # The decomposition's own log (solver.log in the run folder): each round's
    # bound and plan, with the seconds since the start.
    log_lines: list[str] = []
    progress = _logged(progress, log_lines, t0)
    use_threads(opts.threads)
    cand = np.array([k for k, s in enumerate(data.sites) if s.is_candidate])
    q = len(cand)
    costs = _costs(data, d, params, cand)
    senders = [i for i in range(data.n) if costs.flows[i].sum() > 0]

    prob = pulp.LpProblem("benders_master", pulp.LpMinimize)
    y = [prob.add_variable(f"h_{k}", 0, 1) for k in cand]
    theta = {i: prob.add_variable(f"theta_{i}", 0) for i in senders}
    prob += pulp.LpAffineExpression(
        [(y[a], float(costs.fixed[a])) for a in range(q) if costs.fixed[a]]
        + [(v, 1.0) for v in theta.values()]
    )
    if params.hubs is not None:
        prob += pulp.LpAffineExpression([(v, 1.0) for v in y]) == params.hubs, "hub_count"
    for a, k in enumerate(cand):
        if data.sites[k].hub_status == "open":
            prob += y[a] >= 1, f"forced_open_{k}"
    prob += pulp.LpAffineExpression([(v, 1.0) for v in y]) >= 1, "at_least_one_hub"

    senders_list = list(theta)
    master = _Master(prob, y, [theta[i] for i in senders_list], opts)
    copy = _CutCopy(len(senders_list), q)
    n_cuts = 0

    def add_cuts(
        y_sep: np.ndarray, y_now: np.ndarray | None, th_now: np.ndarray | None, tag: str
    ) -> tuple[int, float]:
        """Cut at ``y_sep``; keep only cuts violated at the master point (y_now, th_now)."""
        nonlocal n_cuts
        support = np.nonzero(y_sep > 1e-9)[0]
        added, total = 0, 0.0
        for pos_i, i in enumerate(senders_list):
            const, coef, value = _origin_cut(costs, i, y_sep, support, opts.threads)
            total += value
            if y_now is not None and th_now is not None:
                if th_now[pos_i] >= const - coef @ y_now - 1e-7 * max(1.0, abs(const)):
                    continue
            nz = np.nonzero(coef > 1e-12 * max(1.0, abs(const)))[0]
            master.add_cut(pos_i, {int(a): float(coef[a]) for a in nz}, const, f"cut_{tag}_{i}")
            copy.add(pos_i, const, coef)
            added += 1
        n_cuts += added
        return added, total

    best_hubs: list[int] | None = None
    best_cost = np.inf
    core = np.zeros(q)
    if start_hubs:
        pos = {int(k): a for a, k in enumerate(cand)}
        core[[pos[k] for k in start_hubs if k in pos]] = 1.0
        add_cuts(core, None, None, "start")
        best_hubs, best_cost = sorted(start_hubs), _plan_cost(data, d, params, list(start_hubs))

    forced_open = np.array([data.sites[int(k)].hub_status == "open" for k in cand])

    def cut_around(y0: np.ndarray, below: float) -> tuple[int, float, list[int] | None]:
        """Cut the hub sets near ``y0`` that the master still values under ``below``.

        Starting from the master's plan, every hub set one move away is
        valued with the cuts so far (numpy, no solve); those under the
        cutoff are priced, cut, and their own neighbours looked at in turn,
        up to ``_NEIGHBOUR_CUTS`` of them. Without this, the master would
        offer them one per round. Returns the number of hub sets cut and the
        cheapest of them (cost, hubs; ``inf, None`` when none).
        """
        can_close = np.array([(v.lowBound or 0.0) < 0.5 for v in y]) & ~forced_open
        can_open = np.array([v.upBound is None or v.upBound > 0.5 for v in y])
        seen = {tuple(np.nonzero(y0 > 0.5)[0])}
        queue = [y0]
        n_cut, cheapest, cheapest_hubs = 0, np.inf, None
        while queue and n_cut < _NEIGHBOUR_CUTS and not out_of_time():
            near = _moves(queue.pop(0), can_close, can_open, params.hubs is not None)
            keys = [tuple(np.nonzero(row > 0.5)[0]) for row in near]
            fresh = [r for r, key in enumerate(keys) if key not in seen]
            if not fresh:
                continue
            near = near[fresh]
            th = copy.thetas(near)
            value = th.sum(axis=1) + near @ costs.fixed
            for r in np.argsort(value):
                if value[r] >= below or n_cut >= _NEIGHBOUR_CUTS or out_of_time():
                    break
                key = tuple(np.nonzero(near[r] > 0.5)[0])
                seen.add(key)
                hubs = sorted(int(cand[a]) for a in key)
                cost = _plan_cost(data, d, params, hubs)
                if cost < cheapest:
                    cheapest, cheapest_hubs = cost, hubs
                add_cuts(near[r], near[r], th[r], f"near{n_cut}")
                n_cut += 1
                queue.append(near[r])
        return n_cut, cheapest, cheapest_hubs

    def time_left() -> float | None:
        if opts.time_limit_s is None:
            return None
        return opts.time_limit_s - (time.perf_counter() - t0)

    def out_of_time() -> bool:
        left = time_left()
        return left is not None and left <= 0

    # Phase 1: the LP relaxation of the master, with in-out stabilisation
    # (Ben-Ameur and Neto 2007): cut between the LP point and a core point
    # (the starting plan), which needs fewer rounds than cutting at the LP
    # point alone; cut at the LP point itself once that stops cutting.
    bound = -np.inf
    it = 0
    weight = 0.5 if core.any() else 1.0
    history: list[float] = []
    last_y: np.ndarray | None = None
    last_lp: _MasterResult | None = None
    round_s: float | None = None  # wall time of the last round
    while room_for_round(time_left(), round_s) and it < 500:
        t_round = time.perf_counter()
        it += 1
        res = master.solve(time_left())
        if not res.ok:
            break
        last_y, last_lp = res.y, res
        bound = max(bound, res.bound)
        history.append(bound)
        if len(history) > 4 and bound - history[-5] <= 1e-6 * max(1.0, abs(bound)):
            progress(f"LP phase, round {it}: bound {bound:,.2f} has stopped rising")
            break
        y_sep = weight * res.y + (1 - weight) * core
        added, _ = add_cuts(y_sep, res.y, res.theta, f"lp{it}")
        if it % 5 == 1 or added == 0:
            progress(f"LP phase, round {it}: bound {bound:,.2f}, {n_cuts} cuts")
        if added == 0:
            if weight >= 1.0:
                break
            weight = 1.0
            added, _ = add_cuts(res.y, res.y, res.theta, f"lp{it}b")
            if added == 0:
                break
        core = 0.5 * (core + res.y) if core.any() else core
        round_s = time.perf_counter() - t_round

    # Between the phases: a plan from the LP solution, improved by swaps
    # within its support (exactly priced), tightens the incumbent cheaply.
    pool: list[int] = []
    if last_y is not None and params.hubs is not None:
        pool = sorted(int(cand[a]) for a in np.nonzero(last_y > 1e-6)[0])
        seed = sorted(int(cand[a]) for a in np.argsort(-last_y)[: params.hubs])
        if best_hubs is not None:
            pool = sorted(set(pool) | set(best_hubs))
        budget = 30.0 if time_left() is None else max(0.0, min(30.0, 0.2 * (time_left() or 0)))
        for first in [seed] + ([best_hubs] if best_hubs is not None else []):
            hubs_p, cost_p = polish_multiple(data, d, params, first, pool, budget)
            if cost_p < best_cost:
                best_cost, best_hubs = cost_p, hubs_p
                progress(f"plan from the LP solution: cost {best_cost:,.2f}")
        if best_hubs is not None:
            pos = {int(k): a for a, k in enumerate(cand)}
            y_best = np.zeros(q)
            y_best[[pos[k] for k in best_hubs]] = 1.0
            add_cuts(y_best, None, None, "lpplan")

    # Reduced-cost fixing: hubs that only plans dearer than the best one in
    # hand could open (or close) are fixed, which shrinks the integer master.
    fixed = False
    if last_lp is not None and best_hubs is not None:
        n_closed, n_open = master.fix_by_reduced_cost(last_lp, best_cost)
        fixed = n_closed + n_open > 0
        if fixed:
            progress(
                f"reduced cost against plan {best_cost:,.2f}: {n_closed} of {q} candidate hubs "
                f"ruled out, {n_open} fixed open"
            )

    # Phase 2: integer master, one exact pricing and cut per new hub set.
    # With HiGHS and a plan in hand, each round asks the master only for a
    # hub set that might beat the plan (the first one found under a cutoff
    # half the gap below it) instead of the master's optimum: rounds take a
    # fraction of the time, and the last round, with no such hub set left,
    # is the proof (AP n = 100, p = 5: benchmarks/README.md).
    master.make_integer()
    status: RunStatus = "time_limit"
    rounds = 0
    full_solve = opts.name == "cbc"
    # The first integer round starts whenever time is left, as a proof may
    # be one quick round away (after reduced-cost fixing, or under the
    # cutoff); the others by their predecessor's time.
    round_s = None
    t_int: float | None = None
    while True:
        if t_int is not None:
            round_s = time.perf_counter() - t_int
        if not room_for_round(time_left(), round_s):
            break
        t_int = time.perf_counter()
        rounds += 1
        below = None if full_solve or not np.isfinite(best_cost) else best_cost
        if below is not None:
            below -= 0.5 * opts.gap * abs(below)
        res = master.solve(time_left(), below)
        # What a bound from a solve under the cutoff is worth: HiGHS may
        # have pruned hub sets between the cutoff and the plan in hand, with
        # its own gap (a tenth of ours) on top, so it holds up to this.
        cap = np.inf if below is None else below - opts.gap / 10 * abs(below)
        if below is not None and (res.infeasible or (res.proven and res.ok and res.value >= below)):
            # No hub set is under the cutoff: none beats the plan in hand by
            # more than the gap. HiGHS 1.16 says so as "infeasible" or, more
            # often, as "optimal" with a hub set at or above the cutoff.
            bound = max(bound, cap)
            status = "optimal"
            break
        if res.infeasible and fixed:
            # No hub set left open beats the plan in hand: it is optimal.
            bound = best_cost
            status = "optimal"
            break
        if res.infeasible:
            status = "infeasible"
            break
        if not res.ok:
            break
        if np.isfinite(res.bound):
            bound = max(bound, min(res.bound, cap))
        if fixed or below is not None:
            # The master bounds only the plans cheaper than the best one.
            bound = min(bound, best_cost)
        yv = np.round(res.y)
        hubs = sorted(int(cand[a]) for a in np.nonzero(yv > 0.5)[0])
        cost = _plan_cost(data, d, params, hubs)
        if cost < best_cost:
            best_cost, best_hubs = cost, hubs
        if pool and params.hubs is not None:
            # Swaps from the master's plan within the LP support and its hubs.
            left = time_left()
            budget = 10.0 if left is None else max(0.0, min(10.0, 0.1 * left))
            hubs_p, cost_p = polish_multiple(
                data, d, params, hubs, sorted(set(pool) | set(hubs)), budget
            )
            if cost_p < best_cost - 1e-9 * max(1.0, abs(best_cost)):
                best_cost, best_hubs = cost_p, hubs_p
                pos = {int(k): a for a, k in enumerate(cand)}
                y_best = np.zeros(q)
                y_best[[pos[k] for k in hubs_p]] = 1.0
                add_cuts(y_best, None, None, f"polish{rounds}")
        gap = (best_cost - bound) / max(abs(best_cost), 1e-9)
        progress(
            f"integer phase, round {rounds}: best plan {best_cost:,.2f}, bound {bound:,.2f}, "
            f"gap {100 * max(gap, 0):.4f} %"
        )
        if res.proven and gap <= opts.gap:
            status = "optimal"
            break
        added, _ = add_cuts(yv, yv, res.theta, f"ip{rounds}")
        if below is not None and added > 0:
            n_near, cost_near, hubs_near = cut_around(yv, below)
            if cost_near < best_cost:
                best_cost, best_hubs = cost_near, hubs_near
            if n_near:
                progress(f"integer phase, round {rounds}: {n_near} hub sets near it cut too")
        if added == 0 and not res.proven and below is not None:
            # A hub set the master already prices exactly came back from an
            # early stop: prove the master's optimum from now on.
            full_solve = True
            continue
        if added == 0:
            # The master prices this hub set exactly already, so its value is
            # both a bound and the plan's cost: nothing is left to prove.
            if res.proven:
                bound = max(bound, min(res.value * (1 - opts.gap / 10), cap))
                if best_cost - bound <= opts.gap * abs(best_cost):
                    status = "optimal"
            break

    seconds = time.perf_counter() - t0
    if best_hubs is None:
        stats_status: RunStatus = "infeasible" if status == "infeasible" else "error"
        return [], SolveStats(
            solver=opts.name,
            status=stats_status,
            objective=None,
            best_bound=None,
            gap=None,
            solve_seconds=seconds,
            build_seconds=0.0,
            formulation="multiple-allocation Benders (EK98 flows projected out)",
            log=_log_text(log_lines),
        )
    finite_bound = float(bound) if np.isfinite(bound) else None
    gap_value = (
        max(0.0, (best_cost - finite_bound) / max(abs(best_cost), 1e-9))
        if finite_bound is not None
        else None
    )
    return best_hubs, SolveStats(
        solver=opts.name,
        status=status,
        objective=float(best_cost),
        best_bound=finite_bound,
        gap=gap_value,
        solve_seconds=seconds,
        build_seconds=0.0,
        formulation="multiple-allocation Benders (EK98 flows projected out)",
        options={
            **solver_options(opts),
            "lp_rounds": it,
            "integer_rounds": rounds,
            "cuts": n_cuts,
        },
        log=_log_text(log_lines),
    )
