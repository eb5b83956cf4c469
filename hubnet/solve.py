"""Solve a built model with HiGHS or CBC and report honestly what was proven.

``solve_network`` is the library entry point: distances and data in, a
priced :class:`~hubnet.solution.Solution` out. It builds the MILP, finds a
starting plan by local search, hands it to the solver as a MIP start, and
reads back the status, the objective, the best bound and the gap. A plan
stopped by the time limit is reported as ``time_limit``, never as optimal.
"""

from __future__ import annotations

import contextlib
import dataclasses
import os
import re
import shutil
import tempfile
import threading
import time
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path

import highspy
import numpy as np
import psutil
import pulp

from hubnet._highs import silence_highs_banner, use_threads
from hubnet.benders import solve_multiple_benders
from hubnet.config import HubModelParams, SolverName, SolverParams
from hubnet.data import NetworkData
from hubnet.errors import InfeasibleError, InputError, NoSolutionError, SolverError
from hubnet.heuristics import (
    allocate_to_hubs,
    single_allocation_cost,
    starting_plan,
)
from hubnet.hubsets import MAX_WORK as ENUMERATION_MAX_WORK
from hubnet.hubsets import WORK_PER_S as ENUMERATION_WORK_PER_S
from hubnet.hubsets import cheapest_hub_set, enumeration_work, split_workers, usable_cores
from hubnet.model import (
    HubModel,
    build_model,
    check_plan_possible,
    check_start_hubs,
    sort_capacities,
    start_misfit,
)
from hubnet.pathlp import MAX_COLUMNS as PATH_MAX_COLUMNS
from hubnet.pathlp import (
    PathModel,
    PathRelaxation,
    branch_on_path,
    fixable,
    hub_hop_costs,
    relax_path,
    relaxation_columns,
    satisfies_triangle,
)
from hubnet.screen import MAX_WORK as SCREEN_MAX_WORK
from hubnet.screen import TOP_SETS, screen_allocations, screening_work
from hubnet.setsearch import MAX_WORK as SET_SEARCH_MAX_WORK
from hubnet.setsearch import WORK_PER_S as SET_SEARCH_WORK_PER_S
from hubnet.setsearch import search_hub_sets, search_work
from hubnet.solution import RunStatus, Solution, SolveStats, evaluate_plan, solver_options

Progress = Callable[[str], None]
#: A starting plan: open hubs, each site's hub (``None`` for multiple
#: allocation) and its cost, currency per day (``nan`` where not priced).
Start = tuple[list[int], np.ndarray | None, float]


def _quiet(_: str) -> None:
    return None


def pick_solver(name: SolverName, allocation: str) -> SolverName:
    """Resolve ``auto`` to a solver: CBC for single, HiGHS for multiple allocation.

    On the AP benchmarks CBC proves single-allocation optima (Ernst-
    Krishnamoorthy flow formulation) 10-20x faster than HiGHS, while HiGHS
    is faster on the multiple-allocation formulation (benchmarks/README.md).
    """
    if name != "auto":
        return name
    return "cbc" if allocation == "single" else "highs"


class _HighsWithStart(pulp.HiGHS):
    """PuLP's HiGHS interface, plus a MIP start, a log file and progress reports.

    Parameters
    ----------
    log_path
        File the HiGHS log is written to (kept for the run folder).
    progress
        Called about every ``every_s`` seconds with the incumbent, the bound
        and the elapsed time while the branch-and-bound runs.
    """

    def __init__(
        self, *, log_path: str, progress: Progress, every_s: float = 5.0, **kwargs: object
    ) -> None:
        super().__init__(**kwargs)
        self.log_path = log_path
        self.report = progress
        self.every_s = every_s

    def createAndConfigureSolver(self, lp: pulp.LpProblem) -> None:  # noqa: N802 (PuLP's name)
        silence_highs_banner()
        super().createAndConfigureSolver(lp)
        model = lp.solverModel
        model.setOptionValue("output_flag", True)
        model.setOptionValue("log_to_console", bool(self.msg))
        model.setOptionValue("log_file", self.log_path)

    def callSolver(self, lp: pulp.LpProblem) -> None:  # noqa: N802 (PuLP's name)
        start = [
            (v.index, float(v.varValue))
            for v in lp.variables()
            if v.varValue is not None and v.cat == pulp.LpInteger
        ]
        if start:
            idx, val = zip(*start, strict=True)
            lp.solverModel.setSolution(len(idx), np.array(idx), np.array(val))
        last = [time.perf_counter()]

        def heartbeat(event: object) -> None:
            now = time.perf_counter()
            if now - last[0] < self.every_s:
                return
            last[0] = now
            out = event.data_out  # type: ignore[attr-defined]
            self.report(_progress_line(out.mip_primal_bound, out.mip_dual_bound, out.running_time))

        lp.solverModel.cbMipInterrupt.subscribe(heartbeat)
        lp.solverModel.run()


def _progress_line(incumbent: float, bound: float, seconds: float) -> str:
    parts = [f"still solving, {seconds:.0f} s"]
    if np.isfinite(incumbent):
        parts.append(f"solver's best plan {incumbent:,.2f}")
    if np.isfinite(bound):
        parts.append(f"bound {bound:,.2f}")
    if np.isfinite(incumbent) and np.isfinite(bound) and incumbent:
        parts.append(f"gap {100 * max(0.0, incumbent - bound) / abs(incumbent):.3f} %")
    return ", ".join(parts)


_CBC_PROGRESS = re.compile(
    r"Cbc0010I After \d+ nodes, \d+ on tree, (\S+) best solution, best possible (\S+) "
    r"\(([\d.]+) seconds\)"
)


#: CBC gets this long past its time limit (s), plus :data:`CBC_GRACE_SHARE`
#: of the limit, before it is stopped from outside (see :class:`_LogWatcher`).
CBC_GRACE_S = 1.0
CBC_GRACE_SHARE = 0.05


def _stop_cbc_children(marker: str) -> bool:
    """Terminate (then kill) the CBC processes of this run.

    A CBC of this run is a child process whose command line names
    ``marker`` (the run's own folder for PuLP's files), so the CBC of
    another solve in the same process is left alone. Returns whether any
    was found. PuLP runs CBC as a child process and waits for it; CBC
    checks its own time limit only between nodes, never inside the root LP
    and its cuts, so on large models a run asked for 3 s went on for 40 s
    (AP, 50 sites, flow model) and one asked for 20 s for over 10 minutes
    (100 sites). A SIGINT does not stop the root LP either.
    """
    found = []
    try:
        children = psutil.Process().children(recursive=True)
    except psutil.Error:
        return False
    for c in children:
        with contextlib.suppress(psutil.Error):
            if any(marker in part for part in c.cmdline()):
                found.append(c)
    for c in found:
        with contextlib.suppress(psutil.Error):
            c.terminate()
    _gone, alive = psutil.wait_procs(found, timeout=1.0)
    for c in alive:
        with contextlib.suppress(psutil.Error):
            c.kill()
    return bool(found)


class _LogWatcher(threading.Thread):
    """Reads CBC's log while it runs and reports its latest progress line.

    With a ``deadline`` (a ``time.perf_counter()`` value) it also stops the
    CBC whose command line names ``marker`` once the deadline has passed
    (waiting for it to start if PuLP is still writing the model out), and
    sets :attr:`stopped`.
    """

    def __init__(
        self,
        path: str,
        progress: Progress,
        every_s: float = 5.0,
        deadline: float | None = None,
        marker: str = "",
    ) -> None:
        super().__init__(daemon=True)
        self.path = path
        self.report = progress
        self.every_s = every_s
        self.deadline = deadline
        self.marker = marker
        self.done = threading.Event()
        self.stopped = False
        self._next_report = time.perf_counter() + every_s

    def _wait_s(self) -> float:
        until = self._next_report
        if self.deadline is not None and not self.stopped:
            until = min(until, self.deadline)
        return max(0.05, until - time.perf_counter())

    def run(self) -> None:
        while not self.done.wait(self._wait_s()):
            now = time.perf_counter()
            if self.deadline is not None and not self.stopped and now >= self.deadline:
                # Set first: PuLP raises as soon as CBC is gone. Reset when
                # CBC has not started yet, to look again in 0.05 s.
                self.stopped = True
                self.stopped = _stop_cbc_children(self.marker)
            if now < self._next_report:
                continue
            self._next_report = now + self.every_s
            try:
                text = Path(self.path).read_text(errors="replace")
            except OSError:
                continue
            found = _CBC_PROGRESS.findall(text)
            if found:
                inc, bnd, secs = found[-1]
                try:
                    self.report(_progress_line(float(inc), float(bnd), float(secs)))
                except ValueError:
                    continue


def _highs(
    opts: SolverParams, log_path: str, progress: Progress, extra: Mapping[str, float] | None = None
) -> pulp.LpSolver:
    return _HighsWithStart(
        log_path=log_path,
        progress=progress,
        msg=opts.log,
        timeLimit=opts.time_limit_s,
        gapRel=opts.gap,
        threads=opts.threads,
        mip_abs_gap=0.0,
        **(extra or {}),
    )


def _cbc(opts: SolverParams, log_path: str, extra: Sequence[str] = ()) -> pulp.LpSolver:
    return pulp.PULP_CBC_CMD(
        options=list(extra),
        msg=opts.log,
        timeLimit=opts.time_limit_s,
        gapRel=opts.gap,
        gapAbs=0.0,
        threads=opts.threads,
        warmStart=True,
        logPath=log_path,
    )


def _cbc_bound(log_text: str) -> float | None:
    for pattern in (r"Lower bound:\s+(-?[\d.eE+-]+)", r"best possible\s+(-?[\d.eE+-]+)"):
        found = re.findall(pattern, log_text)
        if found:
            try:
                return float(found[-1])
            except ValueError:
                continue
    return None


def run_solver(
    model: HubModel,
    opts: SolverParams,
    progress: Progress = _quiet,
    cbc_options: Sequence[str] = (),
    highs_options: Mapping[str, float] | None = None,
) -> SolveStats:
    """Run the chosen solver on a built model.

    ``cbc_options`` are extra CBC command-line options (for example
    ``"preprocess on"``), used only when CBC solves; ``highs_options`` are
    extra HiGHS options (name to value), used only when HiGHS solves.

    Returns
    -------
    SolveStats
        With status ``optimal``, ``time_limit``, ``infeasible`` or ``error``,
        the objective (currency per day), best bound and relative gap.
    """
    prob = model.problem
    options = {
        "time_limit_s": None if opts.time_limit_s is None else round(opts.time_limit_s, 1),
        "gap": opts.gap,
        "threads": opts.threads,
    }
    if opts.name == "auto":
        opts = dataclasses.replace(
            opts, name=pick_solver("auto", "single" if model.assign else "multiple")
        )
    fd, log_path = tempfile.mkstemp(suffix=".log", prefix=f"hubnet-{opts.name}-")
    os.close(fd)
    start = time.perf_counter()
    bound: float | None
    if opts.name == "highs":
        if not pulp.HiGHS().available():
            raise SolverError("HiGHS is not available: pip install highspy")
        use_threads(opts.threads)
        try:
            prob.solve(_highs(opts, log_path, progress, highs_options))
            log_text = Path(log_path).read_text(errors="replace")
        finally:
            Path(log_path).unlink(missing_ok=True)
        seconds = time.perf_counter() - start
        info = prob.solverModel.getInfo()
        model_status = prob.solverModel.getModelStatus()
        import highspy

        has_plan = prob.sol_status in (pulp.LpSolutionOptimal, pulp.LpSolutionIntegerFeasible)
        if model_status == highspy.HighsModelStatus.kInfeasible:
            status: RunStatus = "infeasible"
        elif model_status == highspy.HighsModelStatus.kOptimal:
            status = "optimal"
        elif has_plan:
            status = "time_limit"
        else:
            status = "error"
        objective = float(info.objective_function_value) if has_plan else None
        bound = float(info.mip_dual_bound)
        if not np.isfinite(bound):
            bound = None
    else:
        deadline = None
        if opts.time_limit_s is not None:
            deadline = start + opts.time_limit_s * (1 + CBC_GRACE_SHARE) + CBC_GRACE_S
        # PuLP's files for this run in a folder of their own: it names the
        # run's CBC for the watcher, and goes with whatever a stopped CBC
        # left behind (PuLP deletes its files only after a clean exit).
        tmp = tempfile.mkdtemp(prefix="hubnet-cbc-")
        watcher = _LogWatcher(log_path, progress, deadline=deadline, marker=tmp)
        watcher.start()
        try:
            solver = _cbc(opts, log_path, cbc_options)
            solver.tmpDir = tmp
            try:
                prob.solve(solver)
            except pulp.PulpSolverError:
                if not watcher.stopped:
                    raise
            # PuLP reads no solution from a stopped CBC (and may not notice:
            # psutil can reap the process before PuLP sees its exit code).
            stopped = watcher.stopped
            log_text = Path(log_path).read_text(errors="replace")
        finally:
            watcher.done.set()
            watcher.join()
            Path(log_path).unlink(missing_ok=True)
            shutil.rmtree(tmp, ignore_errors=True)
        seconds = time.perf_counter() - start
        has_plan = not stopped and prob.sol_status in (
            pulp.LpSolutionOptimal,
            pulp.LpSolutionIntegerFeasible,
        )
        if stopped:
            over = seconds - (opts.time_limit_s or 0.0)
            progress(f"CBC stopped from outside, {over:.1f} s past its time limit")
            status = "time_limit"
        elif prob.status == pulp.LpStatusInfeasible:
            status = "infeasible"
        elif prob.sol_status == pulp.LpSolutionOptimal:
            status = "optimal"
        elif has_plan:
            status = "time_limit"
        else:
            status = "error"
        objective = float(pulp.value(prob.objective)) if has_plan else None
        bound = objective if status == "optimal" else _cbc_bound(log_text)
    gap = None
    if objective is not None and bound is not None:
        gap = max(0.0, (objective - bound) / max(abs(objective), 1e-9))
    return SolveStats(
        solver=opts.name,
        status=status,
        objective=objective,
        best_bound=bound,
        gap=gap,
        solve_seconds=seconds,
        build_seconds=0.0,
        formulation=model.formulation,
        options=options,
        log=log_text,
    )


def solve_network(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    opts: SolverParams,
    *,
    scenario: str = "",
    progress: Progress = _quiet,
    start_hubs: Sequence[str] | None = None,
) -> Solution:
    """Choose hubs and routes: build, start, solve, re-price.

    Parameters
    ----------
    data
        Validated network.
    d
        ``(n, n)`` distances, km.
    params
        Model parameters.
    opts
        Solver choice and limits.
    scenario
        Scenario name for the outputs.
    progress
        Called with one-line messages as the work goes on.
    start_hubs
        Site ids of a known plan's hubs (for example last night's) to start
        from instead of the local search.

    Returns
    -------
    Solution
        The plan with every figure re-priced from the hubs and allocation.

    Raises
    ------
    InfeasibleError
        No plan satisfies the constraints (e.g. sort capacity below demand).
    NoSolutionError
        The time limit ran out before any plan was found.
    """
    t_run = time.perf_counter()
    requested = opts.name
    opts = dataclasses.replace(opts, name=pick_solver(opts.name, params.allocation))
    check_plan_possible(data, params)
    check_start_hubs(data, start_hubs)
    if params.hubs == 1 and not params.capacitated:
        return _solve_one_hub(data, d, params, opts, scenario, progress)
    if requested == "auto" and params.formulation == "auto":
        enumerated = _solve_by_enumeration(data, d, params, opts, scenario, progress)
        if enumerated is not None:
            return enumerated
    relaxed: PathRelaxation | None = None
    path_model: PathModel | None = None
    start: Start | None = None
    start_seconds = 0.0
    started = False
    if _path_relaxation_applies(params, requested):
        screened: _Screened | None = None
        if _screening_applies(data, params):
            # The screen needs a plan in hand: the given hubs', or its own.
            if start_hubs is not None:
                t_start = time.perf_counter()
                start = _start(data, d, params, start_hubs, progress, opts.time_limit_s)
                start_seconds = time.perf_counter() - t_start
            screened, start = _screen(data, d, params, start, _left(opts, t_run), progress)
            started = start is not None
        allowed = None if screened is None else screened.allowed
        if relaxation_columns(data, allowed) <= PATH_MAX_COLUMNS:
            proven, relaxed, path_model = _solve_by_path_relaxation(
                data, d, params, opts, scenario, progress, screened
            )
            if proven is not None:
                return dataclasses.replace(
                    proven, stats=dataclasses.replace(proven.stats, start_seconds=start_seconds)
                )
    if not started:
        t_start = time.perf_counter()
        start = _start(data, d, params, start_hubs, progress, opts.time_limit_s)
        start_seconds = time.perf_counter() - t_start
    if relaxed is None and _set_search_applies(data, params, requested, opts, start):
        assert start is not None and start[1] is not None
        searched, start = _solve_by_hub_sets(
            data, d, params, _left(opts, t_run), (start[0], start[1], start[2]), progress
        )
        if searched is not None:
            stats = _run_facts(searched[2], opts, start_seconds)
            return evaluate_plan(
                data, d, params, searched[0], searched[1], stats, scenario=scenario
            )
    if relaxed is not None and path_model is not None:
        branched, start = _branch_on_path_model(
            data, d, params, _left(opts, t_run), (relaxed, path_model), start, progress
        )
        if branched is not None:
            stats = _run_facts(branched[2], opts, start_seconds)
            return evaluate_plan(
                data, d, params, branched[0], branched[1], stats, scenario=scenario
            )
    if params.allocation == "multiple" and params.formulation in ("auto", "benders"):
        left = _left(opts, t_run)
        progress(
            f"solving by Benders decomposition, master on {opts.name}{_limit_text(left, opts)}"
        )
        hubs, stats = solve_multiple_benders(
            data, d, params, left, None if start is None else start[0], progress
        )
        stats = _run_facts(stats, opts, start_seconds)
        assign = None
    else:
        t0 = time.perf_counter()
        progress(f"building the {params.allocation}-allocation model for {data.n} sites")
        model = build_model(data, d, params)
        build_seconds = time.perf_counter() - t0
        progress(
            f"model built in {build_seconds:.1f} s: {len(model.problem.variables())} variables, "
            f"{model.problem.numConstraints()} constraints"
        )
        if start is not None:
            if relaxed is not None and start[1] is not None:
                _fix_by_reduced_cost(model, relaxed, start[2], progress)
            elif _flow_fixing_pays(params, requested, start, _left(opts, t_run), build_seconds):
                start, allowed = _narrow_by_flow_relaxation(
                    model,
                    data,
                    d,
                    params,
                    start,
                    _left(opts, t_run),
                    progress,
                    searched=start_hubs is None,
                )
                branched, start = _branch_on_narrowed_path(
                    data, d, params, _left(opts, t_run), allowed, start, progress
                )
                if branched is not None:
                    stats = _run_facts(branched[2], opts, start_seconds)
                    return evaluate_plan(
                        data, d, params, branched[0], branched[1], stats, scenario=scenario
                    )
                model = _narrowed_model(model, data, d, params, allowed, progress)
            model.set_start(start[0], start[1])
        left = _left(opts, t_run)
        if start is not None and _no_time_to_solve(left, build_seconds):
            progress(
                f"{left.time_limit_s or 0.0:.1f} s left of the {opts.time_limit_s:g} s limit, "
                f"less than handing the model to {opts.name} takes: the starting plan stands"
            )
            stats = SolveStats(
                opts.name,
                "time_limit",
                None,
                None,
                None,
                0.0,
                build_seconds,
                model.formulation,
                options=solver_options(left),
            )
        else:
            progress(f"solving with {opts.name}{_limit_text(left, opts)}")
            stats = run_solver(model, left, progress)
        stats = _run_facts(
            dataclasses.replace(stats, build_seconds=build_seconds), opts, start_seconds
        )
        hubs, assign = model.open_hubs(), model.allocation()
        if (
            stats.objective is None
            and stats.status == "time_limit"
            and start is not None
            and (start[1] is not None or params.allocation == "multiple")
        ):
            # The solver found nothing better within the limit (or was
            # stopped at it): the starting plan is the best plan in hand.
            hubs, assign = list(start[0]), start[1]
            cost = start[2]
            if not np.isfinite(cost):  # given hubs, multiple allocation: price them
                cost = evaluate_plan(data, d, params, hubs, assign, stats).costs["total"]
            stats = dataclasses.replace(stats, objective=cost, best_bound=None, gap=None)
            progress("no plan from the solver within the time limit: reporting the starting plan")
    if stats.status == "infeasible":
        raise InfeasibleError(
            "no plan satisfies the constraints: check sort capacities against volumes, "
            "forced-open and closed hubs, and the number of hubs asked"
        )
    if stats.objective is None:
        if opts.time_limit_s is not None:
            raise NoSolutionError(f"no plan found within the time limit of {opts.time_limit_s:g} s")
        raise SolverError(f"{opts.name} returned no plan")
    progress(
        f"{stats.status}: cost {stats.objective:,.2f}, {stats.bound_text()} "
        f"in {stats.solve_seconds:.1f} s"
    )
    return evaluate_plan(data, d, params, hubs, assign, stats, scenario=scenario)


def _run_facts(stats: SolveStats, opts: SolverParams, start_seconds: float) -> SolveStats:
    """``stats`` with the run's own time limit (s) and starting-search time (s).

    Each route is handed the time left of the run; the summary reports the
    limit the user set, and the starting search that ran before the route.
    """
    return dataclasses.replace(
        stats,
        start_seconds=start_seconds,
        options={**stats.options, "time_limit_s": opts.time_limit_s},
    )


def _proven(
    solver: str,
    cost: float,
    solve_seconds: float,
    formulation: str,
    opts: SolverParams,
    *,
    log: str,
    build_seconds: float = 0.0,
) -> SolveStats:
    """Stats of a plan proven optimal without a MILP solver's own proof.

    ``cost`` is the plan's cost and its bound (currency per day); times in s.
    """
    return SolveStats(
        solver=solver,
        status="optimal",
        objective=cost,
        best_bound=cost,
        gap=0.0,
        solve_seconds=solve_seconds,
        build_seconds=build_seconds,
        formulation=formulation,
        options=solver_options(opts),
        log=log,
    )


def _solve_one_hub(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    opts: SolverParams,
    scenario: str,
    progress: Progress,
) -> Solution:
    """One hub, no sort capacity: price every candidate, take the cheapest.

    With a single hub every unit goes origin -> hub -> destination, under
    single and multiple allocation alike, so nothing is left to choose but
    the hub (a forced-open one if the scenario has it): pricing each of the
    q candidates (O(q n^2)) is the proof of optimality, no solver needed.
    """
    t0 = time.perf_counter()
    cand = [k for k, s in enumerate(data.sites) if s.is_candidate]
    cand = [k for k in cand if data.sites[k].hub_status == "open"] or cand
    costs = [single_allocation_cost(data, d, params, np.full(data.n, k)) for k in cand]
    best = int(np.argmin(costs))
    hub, cost = cand[best], float(costs[best])
    seconds = time.perf_counter() - t0
    stats = _proven(
        "enumeration",
        cost,
        seconds,
        "one hub: every candidate priced",
        opts,
        log=(
            f"One hub asked: each of the {len(cand)} candidate hubs priced with every site "
            f"allocated to it; the cheapest, {data.sites[hub].id}, costs {cost:.6f} "
            f"per day ({seconds:.3f} s).\n"
        ),
    )
    progress(f"optimal: one hub, {len(cand)} candidates priced, cost {cost:,.2f}")
    assign = np.full(data.n, hub) if params.allocation == "single" else None
    return evaluate_plan(data, d, params, [hub], assign, stats, scenario=scenario)


def _solve_by_enumeration(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    opts: SolverParams,
    scenario: str,
    progress: Progress,
) -> Solution | None:
    """Multiple allocation, p hubs, few enough hub sets: price them all.

    See :mod:`hubnet.hubsets`. Only when the solver and the formulation
    are left to hubnet (``auto``): a solver or formulation named by the
    user (and the second-solver cross-checks) gets the model. Returns
    ``None`` when enumeration does not apply, would price more than
    :data:`~hubnet.hubsets.MAX_WORK` (hub sets x OD pairs), would likely
    take over half the time limit (at
    :data:`~hubnet.hubsets.WORK_PER_S`), or does not finish in half of it.
    """
    work = enumeration_work(data, params)
    if work is None or work > ENUMERATION_MAX_WORK:
        return None
    limit = opts.time_limit_s
    workers, fits = _walk_plan(opts, work, ENUMERATION_WORK_PER_S)
    if not fits:
        # Likely not to finish: the model, with its start and bound, gets
        # the time instead of an enumeration cut short.
        return None
    progress(
        f"pricing every set of {params.hubs} hubs (multiple allocation)"
        + (f", split over {workers} processes" if workers > 1 else "")
    )
    # At most half the limit, so that the model keeps the rest if it is cut short.
    found = cheapest_hub_set(
        data, d, params, time_limit_s=None if limit is None else 0.5 * limit, workers=workers
    )
    if found is None:
        progress("hub sets not all priced within the time limit: solving the model instead")
        return None
    stats = _proven(
        "enumeration",
        found.cost,
        found.seconds,
        f"{params.hubs} hubs, multiple allocation: every hub set priced or bounded",
        opts,
        log=(
            f"Multiple allocation with {params.hubs} hubs: each of the {found.sets} hub sets "
            "bounded from its sites' nearest hubs, and those within the cheapest so far priced "
            "with every OD pair on its cheapest route through the set; the cheapest, "
            f"{', '.join(data.sites[h].id for h in found.hubs)}, costs {found.cost:.6f} per day "
            f"({found.seconds:.3f} s).\n"
        ),
    )
    progress(
        f"optimal: {found.sets} hub sets priced or bounded in {found.seconds:.2f} s, "
        f"cost {found.cost:,.2f}"
    )
    return evaluate_plan(data, d, params, found.hubs, None, stats, scenario=scenario)


def _left(opts: SolverParams, t_run: float) -> SolverParams:
    """``opts`` with the time limit cut by what the run has used since ``t_run``.

    The checks, the path relaxation, the starting plan and the model build
    all come out of the run's time limit (s); the solver gets the rest, at
    least 0.01 s.
    """
    if opts.time_limit_s is None:
        return opts
    used = time.perf_counter() - t_run
    return dataclasses.replace(opts, time_limit_s=max(opts.time_limit_s - used, 0.01))


def _limit_text(left: SolverParams, run: SolverParams) -> str:
    """``, 57.3 s left of the 60 s limit`` for a time-limited run, else empty."""
    if left.time_limit_s is None or run.time_limit_s is None:
        return ""
    return f", {left.time_limit_s:.1f} s left of the {run.time_limit_s:g} s limit"


def _path_relaxation_applies(params: HubModelParams, requested: str) -> bool:
    """Try the path relaxation first: single allocation, no sort capacity.

    Not when CBC was asked for by name: that choice must reach CBC (the
    second-solver cross-checks depend on it). The relaxation is then built
    when it is small enough, whole or after screening.
    """
    return (
        requested in ("auto", "highs") and params.allocation == "single" and not params.capacitated
    )


def _screening_applies(data: NetworkData, params: HubModelParams) -> bool:
    """Screen allocations before the path relaxation: p hubs, few enough hub sets.

    See :mod:`hubnet.screen`; at most :data:`~hubnet.screen.MAX_WORK`
    (hub sets x site pairs x hubs), about 0.4 s (CAB, 25 cities, 4 hubs).
    """
    work = screening_work(data, params)
    return work is not None and work <= SCREEN_MAX_WORK


@dataclasses.dataclass(frozen=True)
class _Screened:
    """Allocations left by screening, and what to say about it."""

    allowed: np.ndarray
    incumbent: float
    seconds: float
    text: str


#: Screening rounds at most: each round re-prices every hub set with the
#: allocations ruled out so far left out of both ends of every pair.
SCREEN_ROUNDS = 3
#: Another round only when the last one ruled out at least this share of
#: the allocations left (CAB, 25 cities, 2 hubs, transfer factor 0.8:
#: 306 -> 274 -> 243 -> 243) ...
SCREEN_GAIN = 0.05
#: ... and took less time than the relaxation left would likely take, at
#: this many seconds per column (CAB, 25 cities: 180,000 columns in 1-3.5
#: s). A round costs as much as the first (CAB, 25 cities, 4 hubs: 0.4 s),
#: more than a relaxation of a few thousand columns.
LP_SECONDS_PER_COLUMN = 1e-5


def _screen(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    start: Start | None,
    left: SolverParams,
    progress: Progress,
) -> tuple[_Screened | None, Start | None]:
    """Rule out the allocations that no plan cheaper than the start uses.

    With no ``start`` the first round finds one: the cheapest of the
    hub sets of smallest bound, allocated and priced
    (:func:`~hubnet.screen.screen_allocations`). ``left`` holds the time
    left of the run (s): screening takes at most a quarter of it. Returns
    the allocations left (``None`` when the screen did not finish, or the
    start given has no priced allocation) and the start.
    """
    if start is not None and (start[1] is None or not np.isfinite(start[2])):
        return None, start
    t0 = time.perf_counter()
    budget = None if left.time_limit_s is None else 0.25 * left.time_limit_s
    allowed: np.ndarray | None = None
    rounds = 0
    for _ in range(SCREEN_ROUNDS):
        t_round = time.perf_counter()
        spent = t_round - t0
        if budget is not None and spent >= budget:
            break
        found = screen_allocations(
            data,
            d,
            params,
            None if start is None else start[2],
            time_limit_s=None if budget is None else budget - spent,
            allowed=allowed,
        )
        if found is None:
            break
        if start is None:
            start = found.plan
            assert start is not None
            progress(
                f"plan from the {TOP_SETS} hub sets of smallest bound: {len(start[0])} hubs, "
                f"cost {start[2]:,.2f}"
            )
        rounds += 1
        before = data.n * data.n if allowed is None else int(allowed.sum())
        # The start's own allocations are in (its cost is its own bound's
        # ceiling); kept explicitly against rounding.
        allowed = found.allowed.copy()
        assert start is not None and start[1] is not None
        allowed[np.arange(data.n), start[1]] = True
        if int(allowed.sum()) > (1.0 - SCREEN_GAIN) * before:
            break
        lp_guess = LP_SECONDS_PER_COLUMN * relaxation_columns(data, allowed)
        if time.perf_counter() - t_round > lp_guess:
            break
    if allowed is None or start is None:
        progress("allocations not screened within the time limit")
        return None, start
    seconds = time.perf_counter() - t0
    cand = [k for k, s in enumerate(data.sites) if s.is_candidate]
    total = data.n * len(cand)
    text = (
        f"{int(allowed.sum())} of {total} allocations left by screening every set of "
        f"{params.hubs} hubs against the plan {start[2]:,.2f} "
        f"({rounds} round{'s' if rounds > 1 else ''}, {seconds:.2f} s)"
    )
    progress(text)
    return _Screened(allowed, start[2], seconds, text), start


def _fix_by_reduced_cost(
    model: HubModel, relaxed: PathRelaxation, incumbent: float, progress: Progress
) -> None:
    """Leave out of the MILP the allocations the relaxation proves too dear.

    Every allocation whose reduced cost in the path relaxation exceeds the
    starting plan's distance (``incumbent``, its cost per day) from the
    relaxation's bound can be in no plan cheaper than the start (which the
    solver has), so its variable is fixed at 0.
    """
    if not np.isfinite(incumbent):
        return
    out = fixable(relaxed, incumbent)
    fixed = 0
    for (i, k), var in model.assign.items():
        if out[i, k]:  # i == k too: a hub that no cheaper plan opens
            var.upBound = 0
            fixed += 1
    progress(
        f"start {incumbent:,.2f} against the relaxation's bound {relaxed.objective:,.2f}: "
        f"{fixed} of {len(model.assign)} allocations ruled out by reduced cost"
    )


#: Share of the time left that the flow model's LP may take before narrowing
#: is given up (:func:`_narrow_by_flow_relaxation`).
LP_SHARE = 0.5


def _no_time_to_solve(left: SolverParams, build_seconds: float) -> bool:
    """Too little of the time limit left to start the MILP solver at all.

    Handing a model over (PuLP writes it out for CBC, or copies it into
    HiGHS) takes about as long as building it (AP, 100 sites, flow model:
    14 s), and neither solver can be stopped before it has the whole model.
    ``left`` holds the time left of the run (s); ``build_seconds``, the
    model's build time (s).
    """
    return left.time_limit_s is not None and left.time_limit_s <= max(0.5, build_seconds)


def _flow_fixing_pays(
    params: HubModelParams,
    requested: str,
    start: Start,
    left: SolverParams,
    build_seconds: float,
) -> bool:
    """Fix allocations by the flow model's own relaxation before its MILP.

    Single allocation whose path relaxation was not built (too large, or
    sort capacities, which it does not model), a priced starting plan, and
    not CBC asked for by name (that choice must reach CBC unaided; the
    cross-checks depend on it). With sort capacities the LP has them too
    (AP capacitated, 25 sites, tight fixed costs and capacities: 69 s ->
    15 s). Not when less than twice the model's build time
    (``build_seconds``, s) is left of the run (``left``): copying the model
    into HiGHS takes about that long before the LP's own time limit starts
    to count (AP, 100 sites, 20 s limit: 15 s for an LP given 1 s).
    """
    short = left.time_limit_s is not None and left.time_limit_s < 2.0 * build_seconds
    return (
        params.allocation == "single"
        and requested in ("auto", "highs")
        and start[1] is not None
        and bool(np.isfinite(start[2]))
        and not short
    )


def _narrow_by_flow_relaxation(
    model: HubModel,
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    start: Start,
    left: SolverParams,
    progress: Progress,
    searched: bool = False,
) -> tuple[Start, np.ndarray | None]:
    """The allocations that a plan cheaper than the start may use.

    The linear relaxation of the flow model (solved by HiGHS's dual simplex
    without presolve: AP, 50 sites, 7-10 s; with presolve over 170 s) lies
    within about 1 % of the optimum on the classic instances. First the
    swap search runs again from the LP's favourite hubs
    (:func:`_lp_guided_start`) and the cheaper plan becomes the start.
    Every allocation whose reduced cost exceeds the start's distance (its
    cost per day) from the LP bound is in no cheaper plan (AP, 50 sites, 3
    hubs: 1,634 of 2,500, 29 of 50 hubs); then each hub left is forced open
    in turn (:func:`_probe_hubs`; 5 hubs: 12 closed by reduced cost, 24
    more by probing). ``start`` is ``(hubs, allocation, cost)``; ``left``
    holds the time left of the run (s); ``searched`` says the start came
    from the local search (not from hubs given). Returns the start (perhaps a
    cheaper one) and the ``(n, n)`` allocations left in (``None`` when the
    LP was not solved); ``model`` is left with no value set.
    """
    t0 = time.perf_counter()
    # At most half the time left: the MILP that may follow needs the rest.
    limit = None if left.time_limit_s is None else LP_SHARE * left.time_limit_s
    lp = pulp.HiGHS(msg=False, mip=False, timeLimit=limit, threads=left.threads, presolve="off")
    progress("solving the flow model's linear relaxation (HiGHS) to rule out allocations")
    model.problem.solve(lp)
    lp_seconds = time.perf_counter() - t0
    bound = pulp.value(model.problem.objective)
    # PuLP reports a time-limited HiGHS run as solved, with the objective
    # and duals of wherever the simplex stopped: only HiGHS's own status
    # says whether they are optimal (and the reduced costs valid).
    h = getattr(model.problem, "solverModel", None)
    solved = h is not None and h.getModelStatus() == highspy.HighsModelStatus.kOptimal
    try:
        if not solved or bound is None:
            progress("linear relaxation not solved in time: no allocation ruled out")
            return start, None
        budget = start_budget(data.n, params.allocation, left.time_limit_s, params.hubs)
        start = _lp_guided_start(
            model, data, d, params, start, (budget, left.threads), progress, searched
        )
        slack = start[2] - float(bound) + 1e-7 * max(1.0, abs(start[2]))
        # At its upper bound a reduced cost is <= 0 and says nothing.
        out = {key for key, var in model.assign.items() if max(var.dj or 0.0, 0.0) > slack}
        closed = {k for (i, k) in out if i == k}
        probe_s = lp_seconds
        if left.time_limit_s is not None:
            probe_s = min(probe_s, START_SHARE * left.time_limit_s)
        probed = _probe_hubs(model, closed | set(start[0]), start[2], probe_s)
        closed |= probed
        out |= {(i, k) for (i, k) in model.assign if k in closed}
    finally:
        # The MILP that may follow gets the start, not the LP's values.
        for var in model.problem.variables():
            var.varValue = None
    allowed = np.zeros((data.n, data.n), dtype=bool)
    for key in model.assign:
        allowed[key] = key not in out
    progress(
        f"start {start[2]:,.2f} against the relaxation's bound {float(bound):,.2f} "
        f"({time.perf_counter() - t0:.1f} s): {len(out)} of {len(model.assign)} allocations "
        f"ruled out, {len(closed)} of {len(model.candidates)} hubs ({len(probed)} by probing)"
    )
    return start, allowed


def _narrowed_model(
    model: HubModel,
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    allowed: np.ndarray | None,
    progress: Progress,
) -> HubModel:
    """The flow model with only the ``allowed`` allocations (``(n, n)``) left open.

    When the hub-to-hub costs obey the triangle inequality no unit gains by
    passing through a hub that is not open, so the model is built again
    without the hubs ruled out (AP, 50 sites, 3 hubs: 125,000 columns ->
    22,050; CBC then proved the start optimal in 13 s instead of 86 s);
    otherwise the allocations are fixed at 0 in ``model`` itself.
    """
    if allowed is None:
        return model
    cand = np.array(model.candidates, dtype=np.int64)
    closed = {int(k) for k in cand if not allowed[k, k]}
    if closed and satisfies_triangle(hub_hop_costs(data, d, params, cand)):
        sites = tuple(
            dataclasses.replace(s, hub_status="closed") if k in closed else s
            for k, s in enumerate(data.sites)
        )
        model = build_model(dataclasses.replace(data, sites=sites), d, params)
    for (i, k), var in model.assign.items():
        if not allowed[i, k]:
            var.upBound = 0
    progress(f"flow model narrowed: {len(model.problem.variables())} variables left")
    return model


#: Dual simplex iterations a probe of one hub may take (see :func:`_probe_hubs`).
PROBE_ITERATIONS = 300


def _probe_hubs(model: HubModel, skip: set[int], incumbent: float, budget_s: float) -> set[int]:
    """Hubs that no plan cheaper than ``incumbent`` opens, found by probing.

    ``model``'s relaxation has just been solved by HiGHS (PuLP keeps the
    ``Highs`` object, with its optimal basis). Each hub not in ``skip`` is
    forced open in turn and the LP re-solved from that basis by the dual
    simplex, whose objective is a lower bound at every step: once it
    passes ``incumbent`` (currency per day; HiGHS's ``objective_bound``)
    the hub is closed. A probe stops after :data:`PROBE_ITERATIONS`
    iterations without deciding; all stop after ``budget_s`` seconds. On
    AP, 50 sites, 5 hubs, reduced costs close 12 hubs and probing 23 more
    in 10 s.
    """
    h = getattr(model.problem, "solverModel", None)
    if h is None or not np.isfinite(incumbent) or budget_s <= 0:
        return set()
    basis = h.getBasis()
    cutoff = incumbent + 1e-7 * max(1.0, abs(incumbent))
    h.setOptionValue("objective_bound", cutoff)
    h.setOptionValue("simplex_iteration_limit", PROBE_ITERATIONS)
    # HiGHS counts its time limit over every run of one object.
    h.setOptionValue("time_limit", h.getRunTime() + budget_s + 1.0)
    hubs = [(k, v) for k, v in enumerate(model.hub) if v is not None and k not in skip]
    hubs.sort(key=lambda kv: -(kv[1].dj or 0.0))
    decided = (highspy.HighsModelStatus.kObjectiveBound, highspy.HighsModelStatus.kInfeasible)
    closed: set[int] = set()
    t_end = time.perf_counter() + budget_s
    for k, var in hubs:
        if time.perf_counter() > t_end:
            break
        lo = float(var.lowBound or 0.0)
        hi = 1.0 if var.upBound is None else float(var.upBound)
        h.changeColBounds(var.index, 1.0, 1.0)
        h.run()
        status = h.getModelStatus()
        value = float(h.getInfo().objective_function_value)
        if status in decided or (status == highspy.HighsModelStatus.kOptimal and value > cutoff):
            closed.add(k)
        h.changeColBounds(var.index, lo, hi)
        h.setBasis(basis)
    return closed


def _branch_on_narrowed_path(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    left: SolverParams,
    allowed: np.ndarray | None,
    start: Start,
    progress: Progress,
) -> tuple[
    tuple[list[int], np.ndarray, SolveStats] | None,
    Start,
]:
    """Branch and bound on the path relaxation over the allocations left.

    After :func:`_narrow_by_flow_relaxation` the path relaxation over the
    allocations that survived may be small enough to build although the
    whole one is not (AP, 50 sites, 5 hubs: 370,000 columns instead of 3
    million); it bounds every plan cheaper than ``start`` and is far
    tighter than the flow model's. Returns the plan and its stats, or
    ``None`` (too large, not solved, or handed back) to go on with the
    flow model's MILP; and the best start for that MILP.
    """
    if allowed is None or start[1] is None or params.capacitated:
        return None, start  # (the path relaxation has no sort capacities)
    columns = relaxation_columns(data, allowed)
    if columns > PATH_MAX_COLUMNS:
        return None, start
    progress(f"solving the path relaxation over the allocations left ({columns} columns)")
    out = relax_path(
        data, d, params, time_limit_s=left.time_limit_s, threads=left.threads, allowed=allowed
    )
    if out is None:
        progress("path relaxation not solved: solving the flow model")
        return None, start
    branched, better = _branch_on_path_model(data, d, params, left, out, start, progress)
    return branched, start if better is None else better


def _lp_guided_start(
    model: HubModel,
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    start: Start,
    limits: tuple[float, int | None],
    progress: Progress,
    searched: bool = False,
) -> Start:
    """The cheaper of ``start`` and a local search from the LP's favourite hubs.

    Reads the flow model's solved relaxation: the hubs with the largest
    "hub open" values (as many as asked; with a free count those at 0.5 or
    more) seed the swap search. On AP, 40 sites, 3 hubs the greedy start
    was 1.9 % above the optimum and this one is the optimum, which makes
    the reduced-cost fixing far stronger. ``limits``: the search's wall
    time at most (s), and the run's HiGHS threads. When ``searched`` (the
    start came from the same search) and the LP favours the start's own
    hubs, the search is not run again.
    """
    budget_s, threads = limits
    value = {k: float(v.varValue or 0.0) for k, v in enumerate(model.hub) if v is not None}
    ranked = sorted(value, key=lambda k: -value[k])
    forced = [k for k, s in enumerate(data.sites) if s.hub_status == "open"]
    if params.hubs is not None:
        seed = list(forced)
        for k in ranked:
            if len(seed) >= params.hubs:
                break
            if k not in seed:
                seed.append(k)
    else:
        seed = sorted({k for k in ranked if value[k] >= 0.5} | set(forced)) or ranked[:1]
    # From the start's own hubs the same search would only retrace its
    # steps (AP capacitated, 20-25 sites: 0.3-0.5 s).
    same = sorted(seed) == sorted(start[0])
    found = (
        None
        if same and searched
        else starting_plan(data, d, params, max_seconds=budget_s, initial_hubs=seed)
    )
    if found is not None and found[2] < start[2]:
        progress(f"plan from the relaxation's hubs: cost {found[2]:,.2f} (start {start[2]:,.2f})")
        start = found
    if params.capacitated:
        # Under tight sort capacities the search's allocation rule can miss
        # by several per cent on the right hubs (AP, 25 sites, LL: 4.4 %):
        # allocate the relaxation's hubs and the start's exactly.
        for hubs in [seed] + ([] if sorted(seed) == sorted(start[0]) else [start[0]]):
            exact = _allocate_exactly(
                data, d, params, hubs, (min(EXACT_ALLOCATION_S, budget_s), threads)
            )
            if exact is not None and exact[2] < start[2] - 1e-9 * max(1.0, abs(start[2])):
                progress(
                    f"hubs {', '.join(data.sites[k].id for k in exact[0])} allocated exactly: "
                    f"cost {exact[2]:,.2f} (start {start[2]:,.2f})"
                )
                start = exact
    return start


#: Time limit of one exact allocation of a given hub set (s).
EXACT_ALLOCATION_S = 1.0


def _allocate_exactly(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    hubs: Sequence[int],
    limits: tuple[float, int | None],
) -> Start | None:
    """The cheapest single allocation to exactly these ``hubs`` (sort capacities kept).

    The flow model with every other site closed, solved by HiGHS within
    ``limits[0]`` seconds on the run's ``limits[1]`` threads (AP, 25 sites,
    2-3 hubs: 0.02-0.3 s). ``None`` when the hubs are not as many as asked
    or leave out a forced-open hub, or no allocation fits in time.
    """
    limit_s, threads = limits
    chosen = set(hubs)
    if not chosen or (params.hubs is not None and len(chosen) != params.hubs):
        return None
    if any(s.hub_status == "open" and k not in chosen for k, s in enumerate(data.sites)):
        return None
    sites = tuple(
        dataclasses.replace(s, hub_status="open" if k in chosen else "closed")
        for k, s in enumerate(data.sites)
    )
    try:
        model = build_model(dataclasses.replace(data, sites=sites), d, params)
    except InputError:
        return None
    use_threads(threads)
    model.problem.solve(pulp.HiGHS(msg=False, timeLimit=limit_s, threads=threads))
    if model.problem.status != pulp.LpStatusOptimal:
        return None
    assign = model.allocation()
    if assign is None or (assign < 0).any() or sorted(set(assign.tolist())) != sorted(chosen):
        return None
    # Trust only a whole allocation that fits every sort capacity.
    if any((v.varValue or 0.0) < 0.5 for (i, k), v in model.assign.items() if assign[i] == k):
        return None
    load = np.bincount(assign, weights=data.flow_matrix().sum(axis=1), minlength=data.n)
    if (load > sort_capacities(data) * (1 + 1e-9) + 1e-9).any():
        return None
    return sorted(chosen), assign, single_allocation_cost(data, d, params, assign)


def _solve_by_path_relaxation(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    opts: SolverParams,
    scenario: str,
    progress: Progress,
    screened: _Screened | None = None,
) -> tuple[Solution | None, PathRelaxation | None, PathModel | None]:
    """The plan, proven optimal, when the path relaxation is integral; else ``None``.

    With ``screened``, the relaxation covers only the allocations left,
    which every plan costing no more than the start uses; the start is one
    of those plans, so an integral optimum is optimal overall.

    Returns the plan (or ``None``), the relaxation and its model in HiGHS
    (both ``None`` when it was not solved or cannot be trusted).
    """
    allowed = None if screened is None else screened.allowed
    progress(f"solving the path relaxation for {data.n} sites with HiGHS")
    out = relax_path(
        data, d, params, time_limit_s=opts.time_limit_s, threads=opts.threads, allowed=allowed
    )
    if out is None:
        progress("path relaxation not solved: solving the flow model")
        return None, None, None
    relaxed, model = out
    if screened is not None and relaxed.objective > screened.incumbent + 1e-7 * max(
        1.0, abs(screened.incumbent)
    ):
        # The start is one of the plans left in, so this cannot happen
        # unless the screen is wrong: trust neither.
        progress("screened relaxation above the start's cost: solving the flow model")
        return None, None, None
    if not relaxed.integral:
        progress(
            f"path relaxation bound {relaxed.objective:,.2f} is not a plan "
            f"({relaxed.solve_seconds:.1f} s): branching on it"
        )
        return None, relaxed, model
    formulation = "single-allocation path relaxation (integral, so optimal)"
    log = "" if screened is None else f"Screening: {screened.text}.\n"
    stats = _proven(
        "highs",
        relaxed.objective,
        relaxed.solve_seconds + (0.0 if screened is None else screened.seconds),
        formulation,
        opts,
        build_seconds=relaxed.build_seconds,
        log=log
        + (
            "HiGHS solved the linear relaxation of the single-allocation path formulation "
            f"({relaxed.columns} columns) in {relaxed.solve_seconds:.3f} s: objective "
            f"{relaxed.objective:.6f}; every allocation is 0 or 1, so this plan is optimal.\n"
        ),
    )
    sol = evaluate_plan(data, d, params, relaxed.hubs, relaxed.assign, stats, scenario=scenario)
    if abs(sol.costs["total"] - relaxed.objective) > 1e-6 * max(1.0, abs(relaxed.objective)):
        # The re-priced plan must cost what the relaxation says; if not, trust neither.
        progress("path relaxation and re-priced plan disagree: solving the flow model")
        return None, None, None
    progress(
        f"optimal: cost {relaxed.objective:,.2f} (path relaxation integral, "
        f"{relaxed.solve_seconds:.1f} s)"
    )
    return sol, relaxed, model


def _branch_on_path_model(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    left: SolverParams,
    path: tuple[PathRelaxation, PathModel],
    start: Start | None,
    progress: Progress,
) -> tuple[
    tuple[list[int], np.ndarray, SolveStats] | None,
    Start | None,
]:
    """Branch and bound on the path model when its relaxation was fractional.

    ``left`` holds the time left of the run (s). Returns the plan's hubs,
    allocation and stats when the search proved it optimal or ran out of
    time with a plan; else ``None`` (no plan found, too many nodes, or its
    plan and its re-priced cost disagree), with the best start for the flow
    model that follows (the search's plan when cheaper than ``start``).
    """
    relaxed, model = path
    incumbent = None if start is None or start[1] is None else (start[2], start[1])
    progress("branching on the path relaxation (HiGHS, warm-started dual simplex)")
    found = branch_on_path(model, relaxed, incumbent, gap=left.gap, time_limit_s=left.time_limit_s)
    if found.assign is None:
        progress(f"no plan after {found.nodes} nodes: solving the flow model")
        return None, start
    cost = single_allocation_cost(data, d, params, found.assign)
    if abs(cost - found.objective) > 1e-6 * max(1.0, abs(found.objective)):
        progress("branching and re-priced plan disagree: solving the flow model")
        return None, start
    better = (found.hubs, found.assign, cost)  # the start was its first incumbent
    if not found.proven and not found.out_of_time:
        progress(f"branching stopped after {found.nodes} nodes: solving the flow model")
        return None, better
    bound = min(found.bound, found.objective)
    stats = SolveStats(
        solver="highs",
        status="optimal" if found.proven else "time_limit",
        objective=found.objective,
        best_bound=bound,
        gap=(found.objective - bound) / max(abs(found.objective), 1e-12),
        solve_seconds=relaxed.solve_seconds + found.seconds,
        build_seconds=relaxed.build_seconds,
        formulation="single-allocation path formulation, branch and bound on its relaxation",
        options={"time_limit_s": left.time_limit_s, "gap": left.gap, "threads": left.threads},
        log=(
            f"HiGHS solved the linear relaxation of the single-allocation path formulation "
            f"({relaxed.columns} columns) in {relaxed.solve_seconds:.3f} s: objective "
            f"{relaxed.objective:.6f}, {'integral' if relaxed.integral else 'fractional'}. "
            f"Branch and bound on it: {found.nodes} "
            f"nodes in {found.seconds:.3f} s, best plan {found.objective:.6f}, bound "
            f"{bound:.6f}"
            + (" (finished)" if found.proven else " (stopped by the time limit)")
            + ".\n"
        ),
    )
    progress(
        f"{stats.status}: cost {found.objective:,.2f}, bound {bound:,.2f} after "
        f"{found.nodes} nodes ({found.seconds:.1f} s)"
    )
    return (found.hubs, found.assign, stats), better


def _set_search_applies(
    data: NetworkData,
    params: HubModelParams,
    requested: str,
    opts: SolverParams,
    start: Start | None,
) -> bool:
    """Search the hub sets (:mod:`hubnet.setsearch`) before the flow model.

    Single allocation, a fixed hub count, no sort capacities, solver and
    formulation left to hubnet (a named one gets its model: the
    cross-checks depend on it), a priced starting plan, and an enumeration
    of at most :data:`~hubnet.setsearch.MAX_WORK` that likely takes at most
    half the time limit (at :data:`~hubnet.setsearch.WORK_PER_S`).
    """
    if requested != "auto" or params.formulation != "auto":
        return False
    if start is None or start[1] is None or not np.isfinite(start[2]):
        return False
    work = search_work(data, params)
    if work is None or work > SET_SEARCH_MAX_WORK:
        return False
    return _walk_plan(opts, work, SET_SEARCH_WORK_PER_S)[1]


def walk_workers(opts: SolverParams) -> int:
    """Processes the hub-set walks may use: the run's threads, else every usable core."""
    return opts.threads if opts.threads else usable_cores()


def _walk_plan(opts: SolverParams, work: int, work_per_s: float) -> tuple[int, bool]:
    """Processes a hub-set walk of ``work`` gets, and whether it likely fits half the limit.

    ``work`` is in (hub sets) x (OD pairs) and ``work_per_s`` what one
    process gets through per second; a run without a time limit always fits.
    """
    workers = split_workers(walk_workers(opts), work)
    limit = opts.time_limit_s
    return workers, limit is None or work / (work_per_s * workers) <= 0.5 * limit


def _solve_by_hub_sets(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    left: SolverParams,
    start: tuple[list[int], np.ndarray, float],
    progress: Progress,
) -> tuple[tuple[list[int], np.ndarray, SolveStats] | None, Start]:
    """Every hub set bounded, the few left allocated exactly (:mod:`hubnet.setsearch`).

    ``left`` holds the time left of the run (s). Returns the plan's hubs,
    allocation and stats when the search proved it optimal, else ``None``
    (the flow model follows); and the best plan found, as the start for
    what follows.
    """
    workers = _walk_plan(left, search_work(data, params) or 0, SET_SEARCH_WORK_PER_S)[0]
    progress(
        f"pricing every set of {params.hubs} hubs under multiple allocation, "
        f"a lower bound on single allocation (start {start[2]:,.2f})"
        + (f", split over {workers} processes" if workers > 1 else "")
    )
    found = search_hub_sets(
        data,
        d,
        params,
        start,
        threads=left.threads,
        time_limit_s=left.time_limit_s,
        workers=workers,
    )
    if found is None:
        progress("hub sets not all priced within the time limit: solving the flow model")
        return None, start
    better: Start = (found.hubs, found.assign, found.cost)
    if not found.proven:
        progress(
            f"hub-set search stopped ({found.stopped}: {found.kept} sets within the start's "
            f"cost, {found.allocated} allocated exactly; best {found.cost:,.2f}): "
            "solving the flow model"
        )
        return None, better
    seconds = found.bound_seconds + found.allocate_seconds
    stats = _proven(
        "highs",
        found.cost,
        seconds,
        "single allocation: hub sets bounded by multiple allocation, each left allocated "
        "exactly on the path relaxation",
        left,
        log=(
            f"Each of the {found.sets} sets of {params.hubs} hubs priced under multiple "
            f"allocation, a lower bound on its single-allocation plans "
            f"({found.bound_seconds:.3f} s): {found.kept} at or below the starting plan's "
            f"{start[2]:.6f}. The {found.allocated} of them with a bound below the best plan "
            "so far were allocated exactly by HiGHS on the path relaxation with only their "
            f"hubs open ({found.nodes} branch-and-bound nodes, {found.allocate_seconds:.3f} s); "
            f"every other set's bound is at or above the best plan, {found.cost:.6f}, so it "
            "is optimal.\n"
        ),
    )
    progress(
        f"optimal: cost {found.cost:,.2f}; {found.kept} of {found.sets} hub sets within the "
        f"start's cost, {found.allocated} allocated exactly ({seconds:.1f} s)"
    )
    return (found.hubs, found.assign, stats), better


#: Share of the run's time limit the multiple-allocation starting search may use.
START_SHARE = 0.25
#: Most wall time the multiple-allocation starting search may take, s.
MAX_START_S = 300.0


def start_budget(
    n: int, allocation: str, time_limit_s: float | None, hubs: int | None = None
) -> float:
    """Wall-clock budget of the starting plan's local search, s.

    Single allocation: 60 s (it stops earlier at a local optimum). Multiple
    allocation: the iterated search stops by itself after 20 kicks without
    gain, so the budget only caps it on large networks. A kick's descent
    prices about p q n^2 routes per step over about p steps, so the cap
    grows with the hub count ``hubs`` (p, 4 when free): n^2 p / 4000 s, at
    least 5 and at most :data:`MAX_START_S` (AP, 200 sites, 15 hubs: 150
    s; the search's best plan, 92,646.39, came after 27 kicks, 72 s on a
    quiet machine and 121 s beside another job, where 40 s had left
    92,806.88). Either way at most a quarter of the run's time limit
    ``time_limit_s`` (s).
    """
    if allocation != "multiple":
        budget = 60.0
    else:
        budget = min(MAX_START_S, max(5.0, n * n * max(hubs or 4, 4) / 4000.0))
    if time_limit_s is not None:
        budget = min(budget, START_SHARE * time_limit_s)
    return budget


def _start(
    data: NetworkData,
    d: np.ndarray,
    params: HubModelParams,
    start_hubs: Sequence[str] | None,
    progress: Progress,
    time_limit_s: float | None = None,
) -> Start | None:
    """A starting plan: the given hubs (e.g. last night's plan) or local search.

    The local search's budget is :func:`start_budget` of the run's time
    limit ``time_limit_s`` (s).

    Returns the hubs, the single allocation (``None`` for multiple
    allocation) and the plan's cost, currency per day (``nan`` where not
    priced: given hubs under multiple allocation, or no allocation found).
    """
    misfit = None if start_hubs is None else start_misfit(data, params, start_hubs)
    if misfit is not None:
        progress(f"the starting hubs given do not fit this scenario ({misfit}): searching instead")
        start_hubs = None
    if start_hubs is not None:
        hubs = sorted(data.index(h) for h in start_hubs)
        assign = None
        cost = float("nan")
        if params.allocation == "single":
            assign = allocate_to_hubs(data, d, params, hubs)
            if assign is not None:
                cost = single_allocation_cost(data, d, params, assign)
        progress(f"starting plan given: {len(hubs)} hubs")
        return hubs, assign, cost
    t0 = time.perf_counter()
    budget = start_budget(data.n, params.allocation, time_limit_s, params.hubs)
    found = starting_plan(data, d, params, max_seconds=budget)
    if found is None:
        return None
    hubs, assign, cost = found
    progress(
        f"starting plan from local search: {len(hubs)} hubs, cost {cost:,.2f} "
        f"({time.perf_counter() - t0:.1f} s)"
    )
    return hubs, assign, cost
