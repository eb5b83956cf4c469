"""Runs a scheduler can trust: locked, recorded, restartable, logged.

:func:`run_job` is what ``hubnet solve`` and every scenario of a sweep run:

1. take the run folder's lock (:class:`~hubnet.runlock.RunLock`), so two
   runs on the same folder cannot collide, and tidy what a killed run left
   beside the folder (its hidden temporary folder; an earlier run folder
   that was being replaced is put back);
2. with ``reuse``, return at once when this ``run_id`` is already complete
   (its row is in the history, or its run folder holds its ``run.json``):
   a retried task never solves or records twice;
3. load the config with overrides and data edits, solve, and write the
   run folder atomically with a ``run.json`` saying what went in (run id,
   hashes of the settings and of every input file, versions, start time);
4. add one row to the run history (also for an infeasible or failed run).

:class:`JobLog` writes a log file for unattended runs, as plain text or JSON
lines.
"""

from __future__ import annotations

import json
import os
import shutil
import time
import uuid
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from types import TracebackType
from typing import Any, TextIO

from hubnet.config import ScenarioConfig
from hubnet.data import NetworkData
from hubnet.errors import (
    HubnetError,
    InfeasibleError,
    InputError,
    NoSolutionError,
    Problem,
    SolverError,
)
from hubnet.history import (
    RUN_INFO_FILE,
    History,
    HistoryError,
    RunRecord,
    failure_record,
    read_json,
    record_from_folder,
    run_info,
    utc_now,
)
from hubnet.runlock import RunLock
from hubnet.solution import Solution

Progress = Callable[[str], None]
LOG_FORMATS = ("plain", "json")


def _quiet(_: str) -> None:
    return None


def new_run_id() -> str:
    """A fresh, unique run id (32 hex digits)."""
    return uuid.uuid4().hex


@dataclass(frozen=True, eq=False)
class JobResult:
    """What one run produced.

    Attributes
    ----------
    run_id, scenario, status
        The run's id, scenario name and status (see
        :class:`~hubnet.history.RunRecord`).
    run_folder
        The run folder, or ``None`` when none was written.
    summary
        The run's ``summary.json`` content, or ``None``.
    solution
        The plan, when solved by this call (``None`` when reused).
    record
        The history row (recorded or not).
    history_id
        The row's id in the history (``None`` when not recorded by this
        call: history off, or recorded before).
    reused
        True when an earlier attempt of the same ``run_id`` had completed
        and nothing was solved.
    """

    run_id: str
    scenario: str
    status: str
    run_folder: Path | None
    summary: Mapping[str, Any] | None
    solution: Solution | None
    record: RunRecord
    history_id: int | None = None
    reused: bool = False


# --------------------------------------------------------------------------
# Warm start
# --------------------------------------------------------------------------


def warm_start_hubs(run_dir: str | Path) -> list[str]:
    """The hubs of an earlier run, read from its ``summary.json``.

    Raises
    ------
    InputError
        When the folder has no readable ``summary.json`` with a list of hubs.
    """
    path = Path(run_dir) / "summary.json"
    try:
        summary = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError(
            Problem(str(path), None, None, "warm start: no summary.json in this run folder")
        ) from None
    except (OSError, ValueError) as err:
        raise InputError(
            Problem(str(path), None, None, f"warm start: cannot read: {err}")
        ) from None
    hubs = summary.get("hubs") if isinstance(summary, dict) else None
    if not isinstance(hubs, list) or not all(isinstance(h, str) for h in hubs):
        raise InputError(Problem(str(path), None, "hubs", "warm start: expected a list of hub ids"))
    return list(hubs)


# --------------------------------------------------------------------------
# Tidying after a killed run
# --------------------------------------------------------------------------


def recover_run_folder(out_dir: str | Path, progress: Progress = _quiet) -> None:
    """Tidy what a killed run left beside a run folder (call with its lock held).

    - ``.{name}.tmp-*``: a half-written new folder; deleted.
    - ``.{name}.old-*`` while the run folder is missing: a complete earlier
      folder that was being replaced; renamed back, so earlier results
      stay as they were.
    - ``.{name}.old-*`` beside the run folder: the replacement finished but
      the old copy was not yet deleted; deleted.
    """
    out = Path(out_dir).absolute()
    parent = out.parent
    if not parent.is_dir():
        return
    for tmp in parent.glob(f".{out.name}.tmp-*"):
        if tmp.is_dir() and not tmp.is_symlink():
            shutil.rmtree(tmp, ignore_errors=True)
            progress(f"removed {tmp.name}, left by an interrupted run")
    olds = [p for p in parent.glob(f".{out.name}.old-*") if p.is_dir() and not p.is_symlink()]
    if not os.path.lexists(out):
        complete = [p for p in olds if (p / "summary.json").is_file()]
        if len(complete) == 1:
            os.rename(complete[0], out)
            progress(f"put back {out.name}, which an interrupted run was replacing")
            olds.remove(complete[0])
        else:
            return
    for old in olds:
        shutil.rmtree(old, ignore_errors=True)


# --------------------------------------------------------------------------
# One run
# --------------------------------------------------------------------------


def _status_of(err: HubnetError) -> str:
    if isinstance(err, InfeasibleError):
        return "infeasible"
    if isinstance(err, NoSolutionError):
        return "no_solution"
    return "error"


def _completed(out: Path, run_id: str, history: str | None) -> JobResult | None:
    """The result of an earlier, complete attempt of ``run_id``, or None."""
    recorded: RunRecord | None = None
    if history is not None:
        with History(history) as h:
            recorded = h.get_run_id(run_id)
    folder_done = False
    if (out / RUN_INFO_FILE).is_file():
        try:
            folder_done = read_json(out / RUN_INFO_FILE).get("run_id") == run_id
        except HubnetError:
            folder_done = False
    if recorded is None and not folder_done:
        return None
    summary = read_json(out / "summary.json") if folder_done else None
    history_id = None
    if recorded is None:  # solved and written, killed before recording
        recorded = record_from_folder(out)
        if history is not None:
            with History(history) as h:
                history_id = h.record(recorded)
    return JobResult(
        run_id=run_id,
        scenario=recorded.scenario,
        status=recorded.status,
        run_folder=out if folder_done else None,
        summary=summary,
        solution=None,
        record=recorded,
        history_id=history_id,
        reused=True,
    )


def run_job(
    config: str | Path | ScenarioConfig,
    out_dir: str | Path,
    *,
    overrides: Mapping[str, Any] | None = None,
    edits: Mapping[str, Any] | None = None,
    force: bool = False,
    progress: Progress = _quiet,
    start_hubs: Sequence[str] | None = None,
    warm_start_from: str | Path | None = None,
    history: str | None = None,
    run_id: str | None = None,
    sweep: str = "",
    lock_wait_s: float = 0.0,
    reuse: bool = False,
) -> JobResult:
    """Solve one scenario into a locked run folder and record it in the history.

    Parameters
    ----------
    config
        The config file (or a loaded config, then without ``overrides``).
    out_dir
        The run folder.
    overrides
        Nested config overrides.
    edits
        Data edits (:class:`~hubnet.scenarios.DataEdits` fields).
    force
        Replace an existing run folder.
    progress
        Called with one-line messages.
    start_hubs
        Hub ids for the solver's starting plan (a warm start); ids that are
        not candidate hubs in this scenario are dropped with a message.
    warm_start_from
        The run folder ``start_hubs`` came from, for ``run.json``.
    history
        Where to record (a SQLAlchemy URL or SQLite file), or ``None``.
    run_id
        The run's id; a new one by default. A sweep passes its own, so a
        retried task is recognised.
    sweep
        The sweep this run belongs to.
    lock_wait_s
        How long to wait for another run holding the folder's lock, seconds.
    reuse
        Return an earlier complete attempt of ``run_id`` instead of solving.

    Returns
    -------
    JobResult

    Raises
    ------
    InputError
        Config, inputs or edits invalid (nothing written, nothing recorded).
    OutputExistsError, RunLockedError
        The run folder exists (without ``force``) or is being written.
    InfeasibleError, NoSolutionError, SolverError
        No plan; the failure is recorded in the history first.
    HistoryError
        The run folder was written but the history could not be updated.
    """
    from hubnet.api import LoadedScenario, run_scenario
    from hubnet.distances import distance_matrix
    from hubnet.runfolder import preflight
    from hubnet.scenarios import load_scenario_data, parse_edits

    run_id = run_id or new_run_id()
    started = utc_now()
    out = Path(out_dir)
    with RunLock(out, wait_s=lock_wait_s):
        if reuse:
            done = _completed(out, run_id, history)
            if done is not None:
                progress(f"run {run_id} of {done.scenario} was already complete: not solved again")
                return done
        recover_run_folder(out, progress)
        preflight(out, force)
        data_edits = parse_edits(edits or {})
        cfg, data = load_scenario_data(config, overrides, data_edits)
        scenario = LoadedScenario(cfg, data, distance_matrix(data, cfg.distances))
        start = _usable_start(start_hubs, data, progress)
        warm = None
        if start_hubs is not None:
            warm = {"run_folder": str(warm_start_from or ""), "hubs": list(start_hubs)}
        info = run_info(
            run_id=run_id,
            config=cfg,
            sweep=sweep,
            overrides=overrides,
            edits=data_edits.as_dict(),
            warm_start=warm,
            started_at=started,
        )
        text = json.dumps(info, indent=2, ensure_ascii=False) + "\n"
        try:
            sol, path = run_scenario(
                scenario,
                out,
                force=force,
                progress=progress,
                start_hubs=start,
                extra_files={RUN_INFO_FILE: text},
            )
        except (InfeasibleError, NoSolutionError, SolverError) as err:
            failed = failure_record(info, _status_of(err), str(err), err.exit_code)
            _record(history, failed, progress)
            raise
        record = record_from_folder(path)
        history_id = _record(history, record, progress)
        summary = read_json(path / "summary.json")
    return JobResult(
        run_id=run_id,
        scenario=record.scenario,
        status=record.status,
        run_folder=path,
        summary=summary,
        solution=sol,
        record=record,
        history_id=history_id,
    )


def _record(history: str | None, record: RunRecord, progress: Progress) -> int | None:
    if history is None:
        return None
    t0 = time.perf_counter()
    try:
        with History(history) as h:
            row = h.record(record)
    except HistoryError as err:
        done = f"the run folder {record.run_folder} was written, but " if record.run_folder else ""
        raise HistoryError(f"{done}the run was not recorded: {err}") from None
    progress(f"recorded run {record.run_id} in the history ({time.perf_counter() - t0:.2f} s)")
    return row


def _usable_start(
    start_hubs: Sequence[str] | None, data: NetworkData, progress: Progress
) -> list[str] | None:
    """Keep the warm-start hubs that can be hubs in this scenario."""
    if start_hubs is None:
        return None
    can = {s.id for s in data.sites if s.is_candidate}
    unknown = [h for h in start_hubs if h not in set(data.ids)]
    if unknown:
        raise InputError(
            Problem(
                "warm start",
                None,
                "hubs",
                f"hubs {', '.join(unknown)} of the earlier run are not sites of this scenario",
            )
        )
    kept = [h for h in start_hubs if h in can]
    dropped = [h for h in start_hubs if h not in can]
    if dropped:
        progress(f"warm start: {', '.join(dropped)} cannot be a hub in this scenario; left out")
    progress(f"warm start from {len(kept)} hubs: {', '.join(kept)}")
    return kept


# --------------------------------------------------------------------------
# Log file for unattended runs
# --------------------------------------------------------------------------


class JobLog:
    """A log file for unattended runs, appended to, one line per event.

    Parameters
    ----------
    path
        The log file (created with its folder when missing), or ``None``
        for no log file.
    fmt
        ``plain`` (time, level, elapsed seconds, message, then
        ``key=value`` fields) or ``json`` (one JSON object per line with
        ``time``, ``level``, ``event``, ``elapsed_s``, ``message`` and the
        fields).

    Raises
    ------
    InputError
        When ``fmt`` is unknown or the file cannot be opened.

    Examples
    --------
    >>> import tempfile, pathlib, json
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "run.log"
    >>> with JobLog(f, "json") as log:
    ...     log.event("finished", "done", status="optimal")
    >>> json.loads(f.read_text())["status"]
    'optimal'
    """

    def __init__(self, path: str | Path | None, fmt: str = "plain"):
        if fmt not in LOG_FORMATS:
            raise InputError(
                Problem("--log-format", None, None, f"expected plain or json, got {fmt!r}")
            )
        self.fmt = fmt
        self.path = Path(path) if path is not None else None
        self._start = time.perf_counter()
        self._fh: TextIO | None = None
        if self.path is not None:
            try:
                self.path.parent.mkdir(parents=True, exist_ok=True)
                self._fh = open(self.path, "a", encoding="utf-8")  # noqa: SIM115
            except OSError as err:
                raise InputError(
                    Problem(str(self.path), None, None, f"cannot open the log file: {err}")
                ) from None

    def event(self, event: str, message: str, *, level: str = "info", **fields: Any) -> None:
        """Write one line (nothing without a log file)."""
        if self._fh is None:
            return
        elapsed = round(time.perf_counter() - self._start, 3)
        if self.fmt == "json":
            from hubnet.report.summary import jsonable

            entry = {
                "time": utc_now(),
                "level": level,
                "event": event,
                "elapsed_s": elapsed,
                "message": message,
                **jsonable(fields),
            }
            line = json.dumps(entry, ensure_ascii=False)
        else:
            extra = " ".join(f"{k}={v}" for k, v in fields.items() if v is not None)
            one_line = message.replace("\n", " | ")
            line = f"{utc_now()} {level.upper():5s} {elapsed:8.1f} s  {one_line}"
            if extra:
                line += f"  [{extra}]"
        self._fh.write(line + "\n")
        self._fh.flush()

    def tee(self, say: Progress) -> Progress:
        """A progress function that also writes each message to the log."""

        def both(message: str) -> None:
            say(message)
            self.event("progress", message)

        return both

    def close(self) -> None:
        """Close the file."""
        if self._fh is not None:
            self._fh.close()
            self._fh = None

    def __enter__(self) -> JobLog:
        return self

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.close()
