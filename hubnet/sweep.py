"""Solve the scenarios of a sweep in parallel on Dask, each exactly once.

:func:`run_sweep` checks every scenario first (nothing is solved when one
is invalid), then submits one task per scenario, :func:`run_task`, to a Dask
cluster: a :class:`distributed.LocalCluster` of worker processes on this
machine by default, or an existing cluster given its scheduler address.

Each task solves its scenario into its own run folder ``OUT/<scenario>``
through :func:`hubnet.jobs.run_job`: under the folder's lock, atomically,
and recorded in the run history. The tasks are idempotent: every scenario
has a run id fixed before submission, so when a worker dies and Dask runs
the task again, the new attempt finds the folder or the history row of a
completed attempt and neither solves nor records a second time. A scenario
that fails (infeasible, no plan in the time limit, a bug) is reported and
recorded; the other scenarios go on.

Without Dask (``workers=0``) the same tasks run one after another in this
process.

The outcome, :class:`SweepReport`, is also written to ``OUT/sweep.json``
and ``OUT/sweep.csv``: one row per scenario with its status, hubs, cost,
gap, and the difference in cost to the first scenario.
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import logging
import os
import threading
import time
import uuid
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Any

from hubnet.errors import EXIT_OUTPUT_EXISTS, HubnetError, InputError, OutputExistsError
from hubnet.history import RUN_INFO_FILE, History, failure_record, utc_now
from hubnet.scenarios import Sweep, check_sweep

#: Exit code of ``hubnet sweep`` when some scenarios failed and the others were written.
EXIT_SCENARIOS_FAILED = 6
#: How long a task waits for the lock of its run folder (a duplicate attempt), seconds.
LOCK_WAIT_S = 900.0
#: Statuses that count as a plan.
PLAN_STATUSES = ("optimal", "time_limit")


# --------------------------------------------------------------------------
# The task
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class SweepTask:
    """Everything one scenario's task needs (plain data, sent to a worker).

    Attributes
    ----------
    name
        Scenario name.
    base
        Base config file (absolute path).
    overrides, edits
        Config overrides and data edits of the scenario.
    out_dir
        The scenario's run folder (absolute path).
    history
        Run history URL, or ``None``.
    run_id
        Fixed before submission: the same for every attempt.
    sweep
        Sweep name.
    topic
        Dask event topic the task reports ``started`` / ``finished`` on.
    force
        Replace an existing run folder.
    """

    name: str
    base: str
    overrides: Mapping[str, Any]
    edits: Mapping[str, Any]
    out_dir: str
    history: str | None
    run_id: str
    sweep: str
    topic: str = ""
    force: bool = False
    lock_wait_s: float = LOCK_WAIT_S


@dataclass(frozen=True)
class ScenarioOutcome:
    """The result of one scenario.

    Attributes
    ----------
    name, run_id, status
        Scenario, run id, and status: ``optimal``, ``time_limit``,
        ``infeasible``, ``no_solution``, ``bad_input``, ``output_exists``
        or ``error``.
    run_folder
        The run folder, or ``""``.
    objective, gap, total_cost
        Solver objective, relative gap, re-priced cost (currency per day).
    hubs
        Open hubs.
    solve_seconds, wall_seconds
        Solver time and the task's whole time, seconds.
    error
        The message of a failed scenario.
    exit_code
        What ``hubnet solve`` would have exited with.
    reused
        The scenario was complete from an earlier attempt: not solved again.
    attempts
        How many times a worker started the task (more than one when a
        worker was lost); filled in by :func:`run_sweep`.
    worker
        Address (or ``local``) and process id of the worker that finished it.
    """

    name: str
    run_id: str
    status: str
    run_folder: str = ""
    objective: float | None = None
    gap: float | None = None
    total_cost: float | None = None
    hubs: tuple[str, ...] = ()
    solve_seconds: float | None = None
    wall_seconds: float | None = None
    error: str = ""
    exit_code: int = 0
    reused: bool = False
    attempts: int = 1
    worker: str = ""

    @property
    def ok(self) -> bool:
        """True when the scenario has a plan."""
        return self.status in PLAN_STATUSES


def _emit(topic: str, message: Mapping[str, Any]) -> str:
    """Send an event to the client when running on a Dask worker; return the worker name."""
    try:
        from distributed import get_worker

        worker = get_worker()
    except (ImportError, ValueError):
        return "local"
    if topic:
        with contextlib.suppress(Exception):  # progress only: never fail the task for it
            worker.log_event(topic, dict(message, worker=worker.address, pid=os.getpid()))
    return str(worker.address)


def run_task(task: SweepTask) -> ScenarioOutcome:
    """Solve one scenario into its run folder and record it; never raises.

    Idempotent: an attempt that finds the scenario complete (run folder with
    this run id, or its history row) returns that result without solving
    or recording again.
    """
    from hubnet.jobs import run_job

    t0 = time.perf_counter()
    worker = _emit(task.topic, {"scenario": task.name, "state": "started"})
    outcome: ScenarioOutcome
    try:
        result = run_job(
            task.base,
            task.out_dir,
            overrides=task.overrides,
            edits=task.edits,
            force=task.force,
            history=task.history,
            run_id=task.run_id,
            sweep=task.sweep,
            lock_wait_s=task.lock_wait_s,
            reuse=True,
        )
        rec = result.record
        outcome = ScenarioOutcome(
            name=task.name,
            run_id=task.run_id,
            status=result.status,
            run_folder=str(result.run_folder or ""),
            objective=rec.objective,
            gap=rec.gap,
            total_cost=rec.total_cost,
            hubs=tuple(rec.hubs),
            solve_seconds=rec.solve_seconds,
            error=rec.error,
            exit_code=rec.exit_code,
            reused=result.reused,
        )
    except HubnetError as err:
        outcome = ScenarioOutcome(
            task.name, task.run_id, _failure_status(err), error=str(err), exit_code=err.exit_code
        )
    except Exception as err:  # a bug: record it, and let the other scenarios go on
        message = f"{type(err).__name__}: {err}"
        outcome = ScenarioOutcome(task.name, task.run_id, "error", error=message, exit_code=1)
        if task.history is not None:
            info = {"run_id": task.run_id, "scenario": task.name, "sweep": task.sweep}
            with contextlib.suppress(Exception), History(task.history) as h:
                h.record(failure_record(info | {"started_at": utc_now()}, "error", message, 1))
    outcome = replace(outcome, wall_seconds=round(time.perf_counter() - t0, 3), worker=worker)
    _emit(task.topic, {"scenario": task.name, "state": "finished", "status": outcome.status})
    return outcome


def _failure_status(err: HubnetError) -> str:
    from hubnet.errors import InfeasibleError, NoSolutionError
    from hubnet.runlock import RunLockedError

    if isinstance(err, InfeasibleError):
        return "infeasible"
    if isinstance(err, NoSolutionError):
        return "no_solution"
    if isinstance(err, InputError):
        return "bad_input"
    if isinstance(err, OutputExistsError | RunLockedError):
        return "output_exists"
    return "error"


# --------------------------------------------------------------------------
# Progress
# --------------------------------------------------------------------------


@dataclass
class SweepState:
    """Live counts of a running sweep (a snapshot is passed to ``on_update``).

    Attributes
    ----------
    total
        Scenarios in the sweep.
    done, failed
        Scenarios finished with a plan, and without one.
    running
        Scenarios a worker is working on now.
    attempts
        Times each scenario was started.
    started
        ``time.monotonic()`` at the start of the sweep.
    last
        The latest outcome, when the update is about one.
    """

    total: int
    done: int = 0
    failed: int = 0
    running: dict[str, str] = field(default_factory=dict)
    attempts: dict[str, int] = field(default_factory=dict)
    started: float = field(default_factory=time.monotonic)
    last: ScenarioOutcome | None = None

    @property
    def elapsed(self) -> float:
        """Seconds since the sweep started."""
        return time.monotonic() - self.started

    @property
    def queued(self) -> int:
        """Scenarios not yet started nor finished."""
        return max(0, self.total - self.done - self.failed - len(self.running))


# --------------------------------------------------------------------------
# The report
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class SweepReport:
    """The outcome of a sweep, scenarios in the sweep file's order.

    Attributes
    ----------
    sweep
        Sweep name.
    sweep_id
        Id of this execution (prefix of every run id).
    out_dir
        Folder holding the run folders.
    outcomes
        One per scenario.
    seconds
        Wall time of the whole sweep, seconds.
    workers
        ``local cluster, N workers``, the scheduler address, or ``serial``.
    """

    sweep: str
    sweep_id: str
    out_dir: Path
    outcomes: tuple[ScenarioOutcome, ...]
    seconds: float
    workers: str

    @property
    def failed(self) -> list[ScenarioOutcome]:
        """Scenarios without a plan."""
        return [o for o in self.outcomes if not o.ok]

    @property
    def exit_code(self) -> int:
        """0 when every scenario has a plan, else :data:`EXIT_SCENARIOS_FAILED`."""
        return 0 if not self.failed else EXIT_SCENARIOS_FAILED

    def rows(self) -> list[dict[str, Any]]:
        """The comparison table: one dict per scenario, costs against the first.

        Keys: ``scenario``, ``status``, ``hub_count``, ``hubs`` (joined by
        ``;``), ``cost_per_day``, ``cost_change`` and ``cost_change_pct``
        (against the first scenario, when both have a plan), ``gap``,
        ``solve_seconds``, ``attempts``, ``run_folder``, ``error``.
        """
        ref = self.outcomes[0].total_cost if self.outcomes else None
        rows = []
        for o in self.outcomes:
            change = pct = None
            if o.ok and ref is not None and o.total_cost is not None:
                change = round(o.total_cost - ref, 4)
                pct = round(100 * change / ref, 4) if ref else None
            rows.append(
                {
                    "scenario": o.name,
                    "status": o.status,
                    "hub_count": len(o.hubs) if o.ok else None,
                    "hubs": ";".join(o.hubs),
                    "cost_per_day": o.total_cost,
                    "cost_change": change,
                    "cost_change_pct": pct,
                    "gap": o.gap,
                    "solve_seconds": o.solve_seconds,
                    "attempts": o.attempts,
                    "run_folder": o.run_folder,
                    "error": o.error.splitlines()[0] if o.error else "",
                }
            )
        return rows

    def to_json(self) -> dict[str, Any]:
        """Everything, as JSON-ready data."""
        return {
            "sweep": self.sweep,
            "sweep_id": self.sweep_id,
            "out_dir": str(self.out_dir),
            "seconds": round(self.seconds, 3),
            "workers": self.workers,
            "scenarios": self.rows(),
            "outcomes": [asdict(o) for o in self.outcomes],
        }

    def write(self) -> None:
        """Write ``sweep.json`` and ``sweep.csv`` into :attr:`out_dir` (each atomically)."""
        text = json.dumps(self.to_json(), indent=2, ensure_ascii=False) + "\n"
        _write_atomic(self.out_dir / "sweep.json", text)
        buf = io.StringIO()
        rows = self.rows()
        writer = csv.DictWriter(buf, fieldnames=list(rows[0]) if rows else [], lineterminator="\n")
        writer.writeheader()
        writer.writerows(rows)
        _write_atomic(self.out_dir / "sweep.csv", buf.getvalue())


def _write_atomic(path: Path, text: str) -> None:
    tmp = path.with_name(f".{path.name}.tmp-{uuid.uuid4().hex[:8]}")
    with open(tmp, "w", encoding="utf-8") as fh:
        fh.write(text)
        fh.flush()
        os.fsync(fh.fileno())
    os.replace(tmp, path)


# --------------------------------------------------------------------------
# Running a sweep
# --------------------------------------------------------------------------


def plan_tasks(
    sweep: Sweep,
    out_dir: str | Path,
    *,
    history: str | None,
    force: bool = False,
    resume: bool = False,
    sweep_id: str | None = None,
) -> tuple[str, list[SweepTask]]:
    """One task per scenario, with run ids fixed now.

    With ``resume``, a scenario whose run folder is already complete keeps
    that folder's run id, so its task just makes sure it is recorded.

    Returns
    -------
    tuple
        The sweep id and the tasks.

    Raises
    ------
    OutputExistsError
        When run folders exist and neither ``force`` nor ``resume`` is given
        (all of them named; nothing is solved).
    """
    out = Path(out_dir).absolute()
    sweep_id = sweep_id or uuid.uuid4().hex[:12]
    topic = f"hubnet-sweep-{sweep_id}"
    tasks = []
    existing = []
    for spec in sweep.scenarios:
        folder = out / spec.name
        run_id = f"{sweep_id}.{spec.name}"
        if os.path.lexists(folder):
            info = folder / RUN_INFO_FILE
            if resume and info.is_file() and (folder / "summary.json").is_file():
                with contextlib.suppress(OSError, ValueError, KeyError, TypeError):
                    run_id = str(json.loads(info.read_text(encoding="utf-8"))["run_id"])
            elif not force:
                existing.append(spec.name)
        tasks.append(
            SweepTask(
                name=spec.name,
                base=str(sweep.base.absolute()),
                overrides=dict(spec.overrides),
                edits=dict(spec.edits),
                out_dir=str(folder),
                history=history,
                run_id=run_id,
                sweep=sweep.name,
                topic=topic,
                force=force,
            )
        )
    if existing:
        shown = ", ".join(existing[:10]) + (" ..." if len(existing) > 10 else "")
        raise OutputExistsError(
            f"{len(existing)} run folder(s) already exist in {str(out)!r} ({shown}): "
            "choose another folder, finish an interrupted sweep (--resume; resume=True from "
            "Python), or replace them (--force; force=True from Python)"
        )
    return sweep_id, tasks


def _local_cluster(workers: int) -> str:
    """``local cluster, N worker(s)`` for the sweep's report."""
    return f"local cluster, {workers} worker{'' if workers == 1 else 's'}"


#: Statuses whose recorded wall time says how long a scenario takes.
_TIMED_STATUSES = ("optimal", "time_limit", "no_solution", "infeasible")


def _work_seconds(rec: Any) -> float | None:
    """Model build plus solve time of a recorded run, seconds (else its wall time).

    Not the wall time when the parts are known: the first scenario on a new
    worker also pays for imports, and would look longest next time.
    """
    if rec.solve_seconds is not None:
        return float(rec.solve_seconds) + float(rec.build_seconds or 0.0)
    return None if rec.wall_seconds is None else float(rec.wall_seconds)


def longest_first(
    tasks: Sequence[SweepTask], history: str | None, sweep_name: str
) -> list[SweepTask]:
    """The tasks in the order to start them: the longest expected first.

    A sweep on ``k`` workers ends when its last scenario ends; starting the
    long scenarios first keeps a short one from being the only thing left
    running while the other workers sit idle (longest-processing-time-first
    scheduling). The expected time of a scenario is the build plus solve
    time of its latest finished run of the same sweep name in the run
    history (its wall time when those are not recorded). Scenarios
    the history does not know come first, in the order given (they may be
    long); the known ones follow, longest first (by model build plus solve
    time). Without a history, or when it cannot be read, the order given is
    kept.

    Parameters
    ----------
    tasks
        The sweep's tasks, in the sweep file's order.
    history
        Run history URL, or ``None``.
    sweep_name
        The sweep's name, as recorded with each of its runs.
    """
    if history is None or len(tasks) < 2:
        return list(tasks)
    seconds: dict[str, float] = {}
    try:
        with History(history) as h:
            for rec in h.runs(sweep=sweep_name, status=_TIMED_STATUSES):
                took = _work_seconds(rec)
                if took is not None:
                    seconds[rec.scenario] = took  # oldest first: latest wins
    except Exception:  # the order is only an optimisation: never fail the sweep for it
        return list(tasks)
    unknown = [t for t in tasks if t.name not in seconds]
    known = sorted(
        (t for t in tasks if t.name in seconds), key=lambda t: seconds[t.name], reverse=True
    )
    return unknown + known


#: Modules each worker of a local cluster imports as it starts, so the first
#: scenario on a worker does not wait for them.
WORKER_PRELOAD: tuple[str, ...] = (
    "hubnet.jobs",
    "hubnet.api",
    "hubnet.history",
    "hubnet.report.runfiles",
)


def _distributed() -> Any:
    try:
        import distributed
    except ImportError as err:  # pragma: no cover - a declared dependency
        raise HubnetError("sweeps need Dask: pip install 'dask[distributed]'") from err
    logging.getLogger("distributed").setLevel(logging.ERROR)
    return distributed


def start_local_cluster(workers: int | None = None) -> tuple[Any, Any]:
    """Start a local cluster and a client on it; the caller closes both.

    ``workers`` worker processes (default: one per CPU) of one thread each,
    on 127.0.0.1, without a dashboard; each imports :data:`WORKER_PRELOAD`
    as it starts.
    """
    distributed = _distributed()
    n = workers if workers is not None else (os.cpu_count() or 1)
    import dask

    # Saturation 1.0: a worker is given its next scenario only when it is
    # free (Dask's default, 1.1, queues a second one on each worker of one
    # thread), so scenarios start in the order submitted.
    with dask.config.set({"distributed.scheduler.worker-saturation": 1.0}):
        cluster = distributed.LocalCluster(
            n_workers=n,
            threads_per_worker=1,
            processes=True,
            host="127.0.0.1",
            dashboard_address=None,
            silence_logs=logging.ERROR,
            preload=list(WORKER_PRELOAD),
        )
    try:
        client = distributed.Client(cluster)
    except BaseException:
        cluster.close()
        raise
    return cluster, client


class ClusterStart:
    """A local cluster starting in a background thread (while the scenarios are checked).

    Parameters
    ----------
    workers
        Worker processes (default: one per CPU).

    Examples
    --------
    ``starting = ClusterStart(2)``, check the scenarios, then
    ``run_sweep(..., client=starting.client())`` and ``starting.close()``.
    """

    def __init__(self, workers: int | None = None):
        self._started: tuple[Any, Any] | None = None
        self._error: BaseException | None = None
        self._thread = threading.Thread(
            target=self._start, args=(workers,), name="hubnet-cluster-start", daemon=True
        )
        self._thread.start()

    def _start(self, workers: int | None) -> None:
        try:
            self._started = start_local_cluster(workers)
        except BaseException as err:  # handed to the caller by client()
            self._error = err

    def client(self) -> Any:
        """The client, once the cluster is up (re-raises a failure to start it)."""
        self._thread.join()
        if isinstance(self._error, HubnetError | KeyboardInterrupt):
            raise self._error
        if self._error is not None:
            raise HubnetError(f"cannot start the local Dask cluster: {self._error}") from (
                self._error
            )
        assert self._started is not None
        return self._started[1]

    def close(self) -> None:
        """Close the client and the cluster (waits for the start to finish first)."""
        self._thread.join()
        if self._started is not None:
            cluster, client = self._started
            self._started = None
            with contextlib.suppress(Exception):
                client.close()
            cluster.close()


@contextlib.contextmanager
def dask_client(workers: int | None = None, scheduler: str | None = None) -> Iterator[Any]:
    """A Dask client: on ``scheduler`` when given, else on a new local cluster.

    The local cluster (:func:`start_local_cluster`) is closed on exit; an
    existing cluster is left running.

    Raises
    ------
    HubnetError
        When Dask is not installed or the scheduler cannot be reached.
    """
    distributed = _distributed()
    if scheduler is not None:
        try:
            client = distributed.Client(scheduler, timeout="20s")
        except (OSError, TimeoutError) as err:
            raise HubnetError(f"cannot reach the Dask scheduler at {scheduler!r}: {err}") from None
        try:
            yield client
        finally:
            client.close()
        return
    cluster, client = start_local_cluster(workers)
    try:
        yield client
    finally:
        client.close()
        cluster.close()


def run_sweep(
    sweep: Sweep,
    out_dir: str | Path,
    *,
    workers: int | None = None,
    scheduler: str | None = None,
    history: str | None = None,
    force: bool = False,
    resume: bool = False,
    checked: bool = False,
    on_update: Callable[[SweepState], None] | None = None,
    client: Any = None,
    longest: bool = True,
) -> SweepReport:
    """Check every scenario, then solve them all, in parallel on Dask.

    Parameters
    ----------
    sweep
        The sweep (:func:`hubnet.scenarios.load_sweep`).
    out_dir
        Folder for the run folders (``OUT/<scenario>``), ``sweep.json`` and
        ``sweep.csv``; created when missing.
    workers
        Worker processes of the local cluster (default one per CPU);
        ``0`` runs the scenarios one after another in this process.
    scheduler
        Address of an existing Dask scheduler (``tcp://host:8786``); its
        workers must see ``out_dir``, the input files and the history.
    history
        Run history URL (:func:`hubnet.history.resolve_history`), or ``None``.
    force, resume
        Replace existing run folders; or keep the complete ones (an
        interrupted sweep carries on where it stopped).
    checked
        The scenarios were already checked (:func:`~hubnet.scenarios.load_sweep`
        with ``check=True``): skip checking them again.
    on_update
        Called with a :class:`SweepState` snapshot when a scenario starts or
        finishes (from another thread, for a live display).
    client
        A ``distributed.Client`` to use instead of making one.
    longest
        On Dask, start the scenarios the history says take longest first
        (:func:`longest_first`); ``False`` starts them in the sweep's order.
        Results are reported in the sweep's order either way.

    Returns
    -------
    SweepReport

    Raises
    ------
    InputError
        When any scenario is invalid (nothing is solved).
    OutputExistsError
        When run folders exist (see :func:`plan_tasks`).
    """
    if not checked:
        check_sweep(sweep)
    out = Path(out_dir).absolute()
    sweep_id, tasks = plan_tasks(sweep, out, history=history, force=force, resume=resume)
    out.mkdir(parents=True, exist_ok=True)
    state = SweepState(total=len(tasks))
    lock = threading.Lock()

    def notify() -> None:
        if on_update is not None:
            with lock:
                snapshot = replace(
                    state, running=dict(state.running), attempts=dict(state.attempts)
                )
            on_update(snapshot)

    ended: set[str] = set()

    def started(name: str, worker: str) -> None:
        with lock:
            if name not in ended:  # an event may come after the result
                state.running[name] = worker
            state.attempts[name] = state.attempts.get(name, 0) + 1
            state.last = None
        notify()

    def left(name: str) -> None:
        # The worker is done with it; the result may reach us a moment later.
        with lock:
            state.running.pop(name, None)
        notify()

    def finished(outcome: ScenarioOutcome) -> None:
        with lock:
            ended.add(outcome.name)
            state.running.pop(outcome.name, None)
            if outcome.ok:
                state.done += 1
            else:
                state.failed += 1
            state.last = outcome
        notify()

    t0 = time.perf_counter()
    outcomes: dict[str, ScenarioOutcome] = {}
    if workers == 0 and scheduler is None and client is None:
        where = "serial"
        for task in tasks:
            started(task.name, "local")
            outcomes[task.name] = run_task(task)
            finished(outcomes[task.name])
    else:
        with contextlib.ExitStack() as stack:
            if client is None:
                client = stack.enter_context(dask_client(workers, scheduler))
            where = scheduler or _local_cluster(len(client.scheduler_info()["workers"]))

            def on_event(event: Any) -> None:
                _, msg = event
                if isinstance(msg, dict) and msg.get("state") == "started":
                    started(str(msg.get("scenario")), str(msg.get("worker", "")))
                elif isinstance(msg, dict) and msg.get("state") == "finished":
                    left(str(msg.get("scenario")))

            client.subscribe_topic(tasks[0].topic, on_event)
            stack.callback(_unsubscribe, client, tasks[0].topic)
            order = longest_first(tasks, history, sweep.name) if longest else list(tasks)
            outcomes = _gather(client, order, finished)
    seconds = time.perf_counter() - t0
    ordered = tuple(
        replace(outcomes[t.name], attempts=max(1, state.attempts.get(t.name, 1))) for t in tasks
    )
    report = SweepReport(sweep.name, sweep_id, out, ordered, seconds, where)
    report.write()
    return report


def _unsubscribe(client: Any, topic: str) -> None:
    with contextlib.suppress(Exception):
        client.unsubscribe_topic(topic)


def _gather(
    client: Any, tasks: Sequence[SweepTask], finished: Callable[[ScenarioOutcome], None]
) -> dict[str, ScenarioOutcome]:
    """Submit every task and collect the outcomes as they finish."""
    from distributed import as_completed

    # Dask does not keep the submission order of independent tasks by itself
    # (measured: a sweep's sixth scenario started last); a falling priority
    # makes the scenarios start in the order given.
    futures = {
        client.submit(
            run_task,
            task,
            key=f"hubnet-{task.run_id}",
            pure=False,
            retries=1,
            priority=len(tasks) - i,
        ): task
        for i, task in enumerate(tasks)
    }
    outcomes: dict[str, ScenarioOutcome] = {}
    pending = as_completed(list(futures))
    for future in pending:
        task = futures.pop(future)
        try:
            outcome = future.result()
        except Exception as err:  # the task could not run at all (workers kept dying)
            outcome = _lost(task, err)
        # Let the cluster forget the result: a worker lost later must not make
        # Dask run a finished scenario again.
        future.release()
        outcomes[task.name] = outcome
        finished(outcome)
    return outcomes


def _lost(task: SweepTask, err: BaseException) -> ScenarioOutcome:
    """Outcome (recorded in the history) of a task Dask gave up on."""
    message = f"the task could not be completed by any worker: {type(err).__name__}: {err}"
    if task.history is not None:
        info = {"run_id": task.run_id, "scenario": task.name, "sweep": task.sweep}
        with contextlib.suppress(Exception), History(task.history) as h:
            if h.get_run_id(task.run_id) is None:
                h.record(failure_record(info | {"started_at": utc_now()}, "error", message, 1))
    return ScenarioOutcome(task.name, task.run_id, "error", error=message, exit_code=1)


__all__ = [
    "EXIT_OUTPUT_EXISTS",
    "EXIT_SCENARIOS_FAILED",
    "ScenarioOutcome",
    "SweepReport",
    "SweepState",
    "SweepTask",
    "ClusterStart",
    "dask_client",
    "longest_first",
    "plan_tasks",
    "run_sweep",
    "run_task",
    "start_local_cluster",
]
