"""Textbook path formulations of the classic hub location problems, as plain PuLP models.

These are the point of comparison for ``classic.py``: they share no code with
hubnet's model, only the instance (flows, distances, cost factors). Both use
one variable per origin-destination pair and hub pair, so they grow as n^4.

Multiple allocation, path formulation
    Campbell (1994), "Integer programming formulations of discrete hub
    location problems", EJOR 72:387-405 [page numbers from memory].
    ``x[i, j, k, m]`` is the fraction of the flow i -> j routed via hub k
    then hub m; ``sum_km x = 1``; ``x[i, j, k, m] <= y[k]`` and ``<= y[m]``;
    ``sum_k y[k] = p``.

Multiple allocation, tightened path formulation (option, not the default)
    The same variables with the two rows per path replaced by one row per
    pair and hub, ``sum_m x[i, j, k, m] + sum_{m != k} x[i, j, m, k] <= y[k]``
    (Hamacher, Labbe, Nickel and Sonneborn 2004, "Adapting polyhedral
    properties from facility to hub location problems", Discrete Applied
    Mathematics 145:104-116 [from memory]). Fewer rows and a tighter LP
    bound; available as ``variant="tight"`` to show how much the choice of
    textbook model moves the ratio.

Single allocation, linearised quadratic formulation
    The quadratic model of O'Kelly (1987), "A quadratic integer program for
    the location of interacting hub facilities", EJOR 32:393-404, in the
    linearisation of Skorin-Kapov, Skorin-Kapov and O'Kelly (1996), "Tight
    linear programming relaxations of uncapacitated p-hub median problems",
    EJOR 94:582-593. ``z[i, k]`` allocates terminal i to hub k (``z[k, k]``
    opens hub k); ``sum_m x[i, j, k, m] = z[i, k]``; ``sum_k x[i, j, k, m] =
    z[j, m]``; ``z[i, k] <= z[k, k]``; ``sum_k z[k, k] = p``. For the
    capacitated problem with fixed hub costs (CSAHLP) the hub count is
    replaced by the fixed costs in the objective and each hub gets
    ``sum_i O[i] z[i, k] <= cap[k] z[k, k]`` with ``O[i] = sum_j W[i, j]``
    (the usual capacity row of Ernst and Krishnamoorthy 1999, Annals of OR
    86:141-159, added to the same path model).

Path cost per unit of flow i -> k -> m -> j:
``rate * (chi d[i, k] + alpha d[k, m] + delta d[m, j])``. Path variables are
created only for pairs with positive flow; for the other pairs the two
assignment rows of the single-allocation model are always satisfiable (a
transportation problem with equal totals), so leaving them out changes
neither the optimum nor the LP bound.
"""

from __future__ import annotations

import multiprocessing
import os
import signal
import time
from dataclasses import dataclass
from multiprocessing.connection import Connection

import numpy as np
import pulp

#: Skip a baseline whose path-variable count would exceed this (memory and build time).
MAX_VARIABLES = 2_000_000


@dataclass(frozen=True, slots=True)
class Instance:
    """The data both formulations need.

    Attributes
    ----------
    w
        ``(n, n)`` flows, ``w[i, j]`` from i to j.
    d
        ``(n, n)`` distances.
    chi, alpha, delta
        Collection, transfer and distribution factors.
    rate
        Cost per unit of flow and unit of distance.
    p
        Number of hubs, or ``None`` when fixed costs decide it.
    fixed
        Fixed cost per hub site, or ``None``.
    capacity
        Capacity per hub site on the outgoing flow of its terminals, or ``None``.
    """

    w: np.ndarray
    d: np.ndarray
    chi: float
    alpha: float
    delta: float
    rate: float = 1.0
    p: int | None = None
    fixed: np.ndarray | None = None
    capacity: np.ndarray | None = None


@dataclass(frozen=True, slots=True)
class BaselineResult:
    """Outcome of one baseline run.

    ``status`` is ``optimal``, ``time_limit``, ``skipped``, ``infeasible`` or
    ``error``; ``seconds`` is wall time, model build included.
    """

    formulation: str
    status: str
    objective: float | None
    bound: float | None
    seconds: float
    variables: int
    killed: bool = False
    message: str = ""


def variable_count(inst: Instance, allocation: str) -> int:
    """Number of variables the path formulation would have."""
    n = inst.w.shape[0]
    pairs = int(np.count_nonzero(inst.w > 0))
    return pairs * n * n + (n * n if allocation == "single" else n)


def baseline_name(allocation: str, variant: str = "campbell") -> str:
    """Short name of the formulation used for an allocation rule."""
    return "SSO96 path" if allocation == "single" else f"{variant} path"


def _pairs(w: np.ndarray) -> list[tuple[int, int]]:
    rows, cols = np.nonzero(w > 0)
    return list(zip(rows.tolist(), cols.tolist(), strict=True))


def _le(prob: pulp.LpProblem, terms: list[tuple[pulp.LpVariable, float]], name: str) -> None:
    prob.addConstraint(
        pulp.LpConstraint(pulp.LpAffineExpression(terms), pulp.LpConstraintLE, name, 0.0)
    )


def _eq(
    prob: pulp.LpProblem, terms: list[tuple[pulp.LpVariable, float]], rhs: float, name: str
) -> None:
    prob.addConstraint(
        pulp.LpConstraint(pulp.LpAffineExpression(terms), pulp.LpConstraintEQ, name, rhs)
    )


def _unit_costs(inst: Instance) -> tuple[np.ndarray, np.ndarray]:
    """Per-unit costs ``(ct[i, k, m], dist[m, j])``: collection plus transfer, distribution."""
    r = inst.rate
    ct = r * (inst.chi * inst.d[:, :, None] + inst.alpha * inst.d[None, :, :])  # [i, k, m]
    dist = r * inst.delta * inst.d  # [m, j]
    return ct, dist


def multiple_allocation_path(inst: Instance, variant: str = "campbell") -> pulp.LpProblem:
    """Path formulation for multiple allocation (Campbell 1994; ``tight``: Hamacher et al. 2004)."""
    n = inst.w.shape[0]
    ct, dist = _unit_costs(inst)
    prob = pulp.LpProblem("ma_path", pulp.LpMinimize)
    y = [pulp.LpVariable(f"y_{k}", cat=pulp.LpBinary) for k in range(n)]
    obj: list[tuple[pulp.LpVariable, float]] = []
    if inst.fixed is not None:
        obj += [(y[k], float(inst.fixed[k])) for k in range(n)]
    if inst.p is not None:
        _eq(prob, [(v, 1.0) for v in y], float(inst.p), "hub_count")
    for i, j in _pairs(inst.w):
        wij = float(inst.w[i, j])
        row: list[tuple[pulp.LpVariable, float]] = []
        uses: list[list[tuple[pulp.LpVariable, float]]] = [[] for _ in range(n)]
        for k in range(n):
            for m in range(n):
                x = pulp.LpVariable(f"x_{i}_{j}_{k}_{m}", 0, 1)
                row.append((x, 1.0))
                obj.append((x, wij * float(ct[i, k, m] + dist[m, j])))
                if variant == "tight":
                    uses[k].append((x, 1.0))
                    if m != k:
                        uses[m].append((x, 1.0))
                    continue
                _le(prob, [(x, 1.0), (y[k], -1.0)], f"via_first_{i}_{j}_{k}_{m}")
                if m != k:
                    _le(prob, [(x, 1.0), (y[m], -1.0)], f"via_second_{i}_{j}_{k}_{m}")
        _eq(prob, row, 1.0, f"route_{i}_{j}")
        if variant == "tight":
            for k in range(n):
                _le(prob, uses[k] + [(y[k], -1.0)], f"via_{i}_{j}_{k}")
    prob.setObjective(pulp.LpAffineExpression(obj))
    return prob


def single_allocation_path(inst: Instance) -> pulp.LpProblem:
    """Linearised quadratic formulation for single allocation (Skorin-Kapov et al. 1996)."""
    n = inst.w.shape[0]
    ct, dist = _unit_costs(inst)
    prob = pulp.LpProblem("sa_path", pulp.LpMinimize)
    z = [[pulp.LpVariable(f"z_{i}_{k}", cat=pulp.LpBinary) for k in range(n)] for i in range(n)]
    obj: list[tuple[pulp.LpVariable, float]] = []
    if inst.fixed is not None:
        obj += [(z[k][k], float(inst.fixed[k])) for k in range(n)]
    if inst.p is not None:
        _eq(prob, [(z[k][k], 1.0) for k in range(n)], float(inst.p), "hub_count")
    out_vol = inst.w.sum(axis=1)
    for i in range(n):
        _eq(prob, [(z[i][k], 1.0) for k in range(n)], 1.0, f"assign_{i}")
        for k in range(n):
            if k != i:
                _le(prob, [(z[i][k], 1.0), (z[k][k], -1.0)], f"open_{i}_{k}")
    if inst.capacity is not None:
        for k in range(n):
            terms = [(z[i][k], float(out_vol[i])) for i in range(n) if out_vol[i] > 0]
            merged = dict(terms)
            merged[z[k][k]] = merged.get(z[k][k], 0.0) - float(inst.capacity[k])
            _le(prob, list(merged.items()), f"capacity_{k}")
    for i, j in _pairs(inst.w):
        wij = float(inst.w[i, j])
        x = [
            [pulp.LpVariable(f"x_{i}_{j}_{k}_{m}", lowBound=0) for m in range(n)] for k in range(n)
        ]
        for k in range(n):
            for m in range(n):
                obj.append((x[k][m], wij * float(ct[i, k, m] + dist[m, j])))
        for k in range(n):
            _eq(
                prob,
                [(x[k][m], 1.0) for m in range(n)] + [(z[i][k], -1.0)],
                0.0,
                f"out_{i}_{j}_{k}",
            )
        for m in range(n):
            _eq(
                prob, [(x[k][m], 1.0) for k in range(n)] + [(z[j][m], -1.0)], 0.0, f"in_{i}_{j}_{m}"
            )
    prob.setObjective(pulp.LpAffineExpression(obj))
    return prob


def _solver(name: str, time_limit: float, gap: float) -> pulp.LpSolver:
    if name == "highs":
        return pulp.HiGHS(msg=False, timeLimit=time_limit, gapRel=gap, threads=1)
    return pulp.PULP_CBC_CMD(msg=False, timeLimit=time_limit, gapRel=gap, threads=1)


def solve_baseline(
    inst: Instance,
    allocation: str,
    solver: str = "highs",
    time_limit: float = 600.0,
    gap: float = 1e-6,
    max_variables: int = MAX_VARIABLES,
    variant: str = "campbell",
) -> BaselineResult:
    """Build and solve the textbook formulation; time the whole run.

    Parameters
    ----------
    inst
        The instance.
    allocation
        ``single`` or ``multiple``.
    solver
        ``highs`` or ``cbc`` (one thread either way).
    time_limit
        Seconds for build plus solve; the solver gets what the build left.
    gap
        Relative MIP gap for a proof of optimality.
    max_variables
        Above this many variables the run is skipped.
    variant
        Multiple allocation only: ``campbell`` (two rows per path) or
        ``tight`` (one row per pair and hub).
    """
    name = baseline_name(allocation, variant)
    count = variable_count(inst, allocation)
    if count > max_variables:
        return BaselineResult(name, "skipped", None, None, 0.0, count)
    start = time.perf_counter()
    if allocation == "single":
        prob = single_allocation_path(inst)
    else:
        prob = multiple_allocation_path(inst, variant)
    left = max(1.0, time_limit - (time.perf_counter() - start))
    prob.solve(_solver(solver, left, gap))
    seconds = time.perf_counter() - start
    has_plan = prob.sol_status in (pulp.LpSolutionOptimal, pulp.LpSolutionIntegerFeasible)
    objective = float(pulp.value(prob.objective)) if has_plan else None
    bound: float | None = None
    if solver == "highs":
        import highspy

        model_status = prob.solverModel.getModelStatus()
        if model_status == highspy.HighsModelStatus.kOptimal:
            status = "optimal"
        elif model_status == highspy.HighsModelStatus.kInfeasible:
            status = "infeasible"
        elif model_status == highspy.HighsModelStatus.kTimeLimit:
            status = "time_limit"
        else:
            status = "error"
        dual = float(prob.solverModel.getInfo().mip_dual_bound)
        bound = dual if np.isfinite(dual) else None
    else:
        if prob.status == pulp.LpStatusInfeasible:
            status = "infeasible"
        elif prob.sol_status == pulp.LpSolutionOptimal:
            status = "optimal"
        elif has_plan or prob.status == pulp.LpStatusNotSolved:
            status = "time_limit"
        else:
            status = "error"
        bound = objective if status == "optimal" else None
    if status == "optimal" and bound is None:
        bound = objective
    return BaselineResult(name, status, objective, bound, seconds, count)


def _child(conn: Connection, args: tuple[object, ...]) -> None:
    """Run :func:`solve_baseline` in its own process group and send the result back."""
    os.setsid()
    null = os.open(os.devnull, os.O_WRONLY)
    os.dup2(null, 1)  # the solvers' banners would interleave with the table
    try:
        conn.send(solve_baseline(*args))  # type: ignore[arg-type]
    except Exception as exc:  # reported to the parent as an error result
        conn.send(f"{type(exc).__name__}: {exc}")
    finally:
        conn.close()


def solve_baseline_bounded(
    inst: Instance,
    allocation: str,
    solver: str = "highs",
    time_limit: float = 600.0,
    gap: float = 1e-6,
    max_variables: int = MAX_VARIABLES,
    variant: str = "campbell",
    grace: float = 60.0,
) -> BaselineResult:
    """:func:`solve_baseline` in a child process, killed if it outlives the limit.

    CBC does not look at its time limit while it solves the root LP, which
    on the larger path models can take far longer than the limit; HiGHS may
    overrun in presolve. The run therefore goes to a fresh process (its own
    process group, so a CBC subprocess goes with it) that is killed
    ``grace`` seconds after ``time_limit``. A killed run is reported as
    ``time_limit`` with ``killed=True`` and its wall time at the kill.
    """
    name = baseline_name(allocation, variant)
    count = variable_count(inst, allocation)
    if count > max_variables:
        return BaselineResult(name, "skipped", None, None, 0.0, count)
    ctx = multiprocessing.get_context("spawn")
    recv, send = ctx.Pipe(duplex=False)
    args = (inst, allocation, solver, time_limit, gap, max_variables, variant)
    proc = ctx.Process(target=_child, args=(send, args))
    start = time.perf_counter()
    proc.start()
    send.close()
    try:
        return _wait(proc, recv, name, count, start, time_limit, grace)
    finally:
        if proc.is_alive():  # interrupted (Ctrl-C, SIGTERM): take the solver down too
            _kill(proc)


def _kill(proc: multiprocessing.process.BaseProcess) -> None:
    assert proc.pid is not None
    try:
        os.killpg(proc.pid, signal.SIGKILL)
    except ProcessLookupError:
        proc.kill()
    proc.join()


def _wait(
    proc: multiprocessing.process.BaseProcess,
    recv: Connection,
    name: str,
    count: int,
    start: float,
    time_limit: float,
    grace: float,
) -> BaselineResult:
    try:
        if recv.poll(time_limit + grace):
            got = recv.recv()
            proc.join()
            if isinstance(got, BaselineResult):
                return got
            return BaselineResult(
                name, "error", None, None, time.perf_counter() - start, count, message=str(got)
            )
    except EOFError:
        proc.join()
        return BaselineResult(
            name,
            "error",
            None,
            None,
            time.perf_counter() - start,
            count,
            message=f"baseline process ended with code {proc.exitcode}",
        )
    seconds = time.perf_counter() - start
    _kill(proc)
    return BaselineResult(
        name,
        "time_limit",
        None,
        None,
        seconds,
        count,
        killed=True,
        message=f"killed {grace:g} s after the time limit",
    )
