"""Sweeps on Dask: real scheduler and worker processes on 127.0.0.1.

The cluster is started with the ``dask scheduler`` and ``dask worker``
commands (no nanny, so a worker's process id is the process the test
kills). The sweeps use the Iberia demo with overrides and CBC, which solves
each scenario in about a second.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import threading
import time
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

import pytest
from rich.console import Console
from typer.testing import CliRunner

from hubnet.cli import app
from hubnet.cli_sweep import _report_table
from hubnet.errors import EXIT_OUTPUT_EXISTS, OutputExistsError
from hubnet.history import History, RunRecord
from hubnet.jobs import run_job
from hubnet.runfolder import STANDARD_FILES
from hubnet.scenarios import load_sweep
from hubnet.sweep import (
    EXIT_SCENARIOS_FAILED,
    SweepState,
    SweepTask,
    longest_first,
    run_sweep,
    run_task,
)

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "configs" / "demo.toml"
DASK = Path(sys.executable).parent / "dask"

runner = CliRunner()


# --------------------------------------------------------------------------
# A real cluster
# --------------------------------------------------------------------------


@dataclass
class Cluster:
    address: str
    scheduler: subprocess.Popen[bytes]
    workers: list[subprocess.Popen[bytes]] = field(default_factory=list)

    def pids(self) -> dict[str, int]:
        """Worker address -> process id, asked of the workers themselves."""
        from distributed import Client

        with Client(self.address, timeout="20s") as client:
            return {addr: int(pid) for addr, pid in client.run(os.getpid).items()}


def _wait_for(predicate, timeout: float, what: str) -> None:  # type: ignore[no-untyped-def]
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if predicate():
            return
        time.sleep(0.1)
    raise TimeoutError(what)


@pytest.fixture
def cluster(tmp_path: Path) -> Iterator[Cluster]:
    if not DASK.exists():
        pytest.skip("the dask command is not installed")
    info = tmp_path / "scheduler.json"
    logs = open(tmp_path / "dask.log", "wb")  # noqa: SIM115
    common = ["--no-dashboard"]
    sched = subprocess.Popen(
        [
            str(DASK),
            "scheduler",
            "--host",
            "127.0.0.1",
            "--port",
            "0",
            "--scheduler-file",
            str(info),
            *common,
        ],
        stdout=logs,
        stderr=logs,
    )
    c = Cluster("", sched)
    try:
        _wait_for(lambda: info.exists() and info.stat().st_size > 0, 60, "scheduler start")
        c.address = json.loads(info.read_text())["address"]
        for _ in range(2):
            c.workers.append(
                subprocess.Popen(
                    [
                        str(DASK),
                        "worker",
                        "--scheduler-file",
                        str(info),
                        "--nthreads",
                        "1",
                        "--no-nanny",
                        "--host",
                        "127.0.0.1",
                        *common,
                    ],
                    stdout=logs,
                    stderr=logs,
                )
            )
        _wait_for(lambda: len(c.pids()) == 2, 90, "two workers")
        yield c
    finally:
        for p in [*c.workers, sched]:
            if p.poll() is None:
                p.send_signal(signal.SIGTERM)
        for p in [*c.workers, sched]:
            try:
                p.wait(5)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait()
        logs.close()


def write_sweep(tmp_path: Path, scenarios: str) -> Path:
    path = tmp_path / "sweep.toml"
    path.write_text(
        f'[sweep]\nbase = "{DEMO}"\nname = "test-sweep"\n\n'
        '[defaults]\n"solver.name" = "cbc"\n\n' + scenarios,
        encoding="utf-8",
    )
    return path


EIGHT = """
[scenarios.base]
[scenarios.growth]
demand_scale = 1.1
[scenarios.close-sev]
close_hubs = ["SEV"]
[scenarios.multiple]
model = { allocation = "multiple" }
[scenarios.fuel-up]
transport_cost_scale = 1.1
[scenarios.madrid]
demand_scale_by_site = { MAD = 1.3 }
[grid]
"model.hubs" = [3, 4]
"""


def complete(folder: Path) -> dict[str, object]:
    for name in STANDARD_FILES:
        assert (folder / name).is_file(), folder / name
    return json.loads((folder / "run.json").read_text())


# --------------------------------------------------------------------------
# The worker-loss test
# --------------------------------------------------------------------------


@pytest.mark.slow
def test_lost_worker_scenario_is_rerun_and_recorded_once(cluster: Cluster, tmp_path: Path) -> None:
    sweep = load_sweep(write_sweep(tmp_path, EIGHT), check=True)
    assert len(sweep.scenarios) == 8
    pids = cluster.pids()
    db = str(tmp_path / "history.sqlite")
    out = tmp_path / "out"
    target = "multiple"  # multiple allocation: the longest solve of the eight
    killed: dict[str, str] = {}
    seen_running = threading.Event()
    states: list[SweepState] = []

    def on_update(state: SweepState) -> None:
        states.append(state)
        if target in state.running and not killed:
            killed["worker"] = state.running[target]
            seen_running.set()

    def killer() -> None:
        if not seen_running.wait(240):
            return
        time.sleep(0.5)  # well inside the task: loading, solving or writing
        os.kill(pids[killed["worker"]], signal.SIGKILL)
        killed["at"] = str(time.monotonic())

    thread = threading.Thread(target=killer, daemon=True)
    thread.start()
    report = run_sweep(
        sweep, out, scheduler=cluster.address, history=db, checked=True, on_update=on_update
    )
    thread.join(10)
    assert "at" in killed, "the worker was not killed during the sweep"
    victim = next(w for w in cluster.workers if w.pid == pids[killed["worker"]])
    assert victim.wait(10) == -signal.SIGKILL

    # Every scenario finished, once, with a plan.
    names = [s.name for s in sweep.scenarios]
    assert [o.name for o in report.outcomes] == names
    assert all(o.status == "optimal" for o in report.outcomes), report.rows()
    by_name = {o.name: o for o in report.outcomes}
    assert by_name[target].attempts == 2, "the lost worker's scenario was not rerun"
    assert by_name[target].worker != killed["worker"]
    assert all(o.attempts <= 2 for o in report.outcomes)
    # One run folder each, holding its own run id; nothing half-written beside them.
    for name in names:
        assert complete(out / name)["run_id"] == by_name[name].run_id
    hidden = sorted(p.name for p in out.iterdir() if p.name.startswith("."))
    assert all(h.endswith(".lock") for h in hidden), hidden
    assert sorted(p.name for p in out.iterdir() if not p.name.startswith(".")) == sorted(
        [*names, "sweep.csv", "sweep.json"]
    )
    # Exactly one history row per scenario.
    with History(db) as h:
        rows = h.runs(sweep="test-sweep")
    assert sorted(r.scenario for r in rows) == sorted(names)
    assert {r.run_id for r in rows} == {o.run_id for o in report.outcomes}
    assert all(r.run_folder == str(out / r.scenario) for r in rows)
    # The display saw the work in progress.
    assert max(len(s.running) for s in states) >= 1 and states[-1].done == 8


# --------------------------------------------------------------------------
# CLI against a real cluster: failures do not stop the others
# --------------------------------------------------------------------------


@pytest.mark.slow
def test_cli_sweep_on_a_scheduler_with_one_failing_scenario(
    cluster: Cluster, tmp_path: Path
) -> None:
    path = write_sweep(
        tmp_path,
        """
[scenarios.base]
[scenarios.too-small]
model = { capacitated = true }
sort_capacity_scale = 0.1
[scenarios.close-sev]
close_hubs = ["SEV"]
""",
    )
    out = tmp_path / "out"
    db = tmp_path / "h.sqlite"
    args = ["sweep", str(path), "--out", str(out), "--scheduler", cluster.address]
    result = runner.invoke(app, [*args, "--history", str(db)])
    assert result.exit_code == EXIT_SCENARIOS_FAILED, result.output
    assert "failed too-small: infeasible" in result.output
    assert "sweep test-sweep: 3 scenarios" in result.output
    rows = {r["scenario"]: r for r in json.loads((out / "sweep.json").read_text())["scenarios"]}
    assert rows["too-small"]["status"] == "infeasible"
    assert rows["base"]["cost_change"] == 0.0
    assert rows["close-sev"]["cost_change"] > 0
    assert (out / "base").is_dir() and (out / "close-sev").is_dir()
    assert not (out / "too-small").exists()
    with History(db) as h:
        assert sorted((r.scenario, r.status) for r in h.runs()) == [
            ("base", "optimal"),
            ("close-sev", "optimal"),
            ("too-small", "infeasible"),
        ]
    # Run again: the folders exist, nothing is solved.
    result = runner.invoke(app, [*args, "--history", str(db)])
    assert result.exit_code == EXIT_OUTPUT_EXISTS
    assert "2 run folder(s) already exist" in result.output
    assert "--resume" in result.output and "--force" in result.output


# --------------------------------------------------------------------------
# Idempotent tasks and resuming, without a cluster
# --------------------------------------------------------------------------


def test_task_done_before_is_not_solved_or_recorded_again(tmp_path: Path) -> None:
    db = f"sqlite:///{tmp_path / 'h.sqlite'}"
    task = SweepTask(
        name="close-sev",
        base=str(DEMO),
        overrides={"solver": {"name": "cbc"}, "scenario": {"name": "close-sev"}},
        edits={"close_hubs": ["SEV"]},
        out_dir=str(tmp_path / "close-sev"),
        history=db,
        run_id="sweep1.close-sev",
        sweep="s",
    )
    first = run_task(task)
    assert first.status == "optimal" and not first.reused and first.worker == "local"
    mtime = (tmp_path / "close-sev" / "summary.json").stat().st_mtime_ns
    again = run_task(task)
    assert again.reused and again.total_cost == first.total_cost
    assert (tmp_path / "close-sev" / "summary.json").stat().st_mtime_ns == mtime
    with History(db) as h:
        assert h.count() == 1
    # Solved and written, then killed before recording: the retry records it.
    task2 = SweepTask(**{**task.__dict__, "out_dir": str(tmp_path / "b"), "run_id": "sweep1.b"})
    run_job(
        task2.base,
        task2.out_dir,
        overrides=task2.overrides,
        edits=task2.edits,
        run_id=task2.run_id,
        history=None,
    )
    retry = run_task(task2)
    assert retry.reused and retry.status == "optimal"
    with History(db) as h:
        assert [r.run_id for r in h.runs()] == ["sweep1.close-sev", "sweep1.b"]


def test_serial_sweep_resume_and_force(tmp_path: Path) -> None:
    sweep = load_sweep(
        write_sweep(tmp_path, "[scenarios.a]\n[scenarios.b]\nclose_hubs = ['SEV']\n"), check=True
    )
    out = tmp_path / "out"
    db = f"sqlite:///{tmp_path / 'h.sqlite'}"
    first = run_sweep(sweep, out, workers=0, history=db, checked=True)
    assert [o.status for o in first.outcomes] == ["optimal", "optimal"]
    assert first.workers == "serial" and first.exit_code == 0
    with pytest.raises(OutputExistsError, match="2 run folder"):
        run_sweep(sweep, out, workers=0, history=db, checked=True)
    # An interrupted sweep: one folder gone, resume solves just that one.
    shutil.rmtree(out / "b")
    again = run_sweep(sweep, out, workers=0, history=db, resume=True, checked=True)
    assert [o.reused for o in again.outcomes] == [True, False]
    assert again.outcomes[0].run_id == first.outcomes[0].run_id
    with History(db) as h:
        assert sorted(r.scenario for r in h.runs()) == ["a", "b", "b"]
    # sweep.csv: the comparison table, costs against the first scenario.
    lines = (out / "sweep.csv").read_text().splitlines()
    assert lines[0].startswith("scenario,status,hub_count,hubs,cost_per_day,cost_change")
    assert lines[1].startswith("a,optimal,") and ",0.0,0.0," in lines[1]
    # On an 80-column terminal the table leaves columns out rather than cut
    # figures short (new-user trial: "466,9…" for a cost).
    console = Console(width=80, record=True, color_system=None)
    console.print(_report_table(again, console.width))
    shown = console.export_text()
    assert all(len(line) <= 80 for line in shown.splitlines())
    assert "…" not in shown
    for o in again.outcomes:
        assert f"{o.total_cost:,.2f}" in shown
    assert "left out for the terminal's width" in shown
    wide = Console(width=200, record=True, color_system=None)
    wide.print(_report_table(again, wide.width))
    assert "left out" not in wide.export_text()


@pytest.mark.slow
def test_cli_sweep_on_the_default_local_cluster(tmp_path: Path) -> None:
    path = write_sweep(tmp_path, "[scenarios.a]\n[scenarios.b]\ndemand_scale = 1.2\n")
    out = tmp_path / "out"
    args = ["sweep", str(path), "--out", str(out), "--workers", "2", "--history", "off"]
    result = runner.invoke(app, args)
    assert result.exit_code == 0, result.output
    assert "2 scenarios solved, 0 failed" in result.output
    report = json.loads((out / "sweep.json").read_text())
    assert report["workers"] == "local cluster, 2 workers"
    assert [o["status"] for o in report["outcomes"]] == ["optimal", "optimal"]
    assert all(o["worker"].startswith("tcp://127.0.0.1:") for o in report["outcomes"])
    assert report["scenarios"][1]["cost_change"] > 0


# --------------------------------------------------------------------------
# Start order: the longest scenarios (by the run history) first
# --------------------------------------------------------------------------


def _task(name: str, tmp_path: Path) -> SweepTask:
    return SweepTask(
        name=name,
        base=str(DEMO),
        overrides={},
        edits={},
        out_dir=str(tmp_path / name),
        history=None,
        run_id=f"s1.{name}",
        sweep="s",
    )


def test_longest_first_orders_by_the_latest_recorded_time(tmp_path: Path) -> None:
    db = f"sqlite:///{tmp_path / 'h.sqlite'}"
    rows = [
        ("r1", "a", "s", "optimal", 5.0),
        ("r2", "b", "s", "time_limit", 50.0),  # of which build + solve 1.5 s (below)
        ("r3", "c", "s", "optimal", 20.0),
        ("r4", "a", "s", "optimal", 100.0),  # later than r1: this one counts
        ("r5", "c", "s", "error", 900.0),  # a failed run says nothing of the time
        ("r6", "d", "other", "optimal", 999.0),  # another sweep's scenario of that name
    ]
    with History(db) as h:
        for run_id, scenario, sweep, status, wall in rows:
            parts = {"build_seconds": 0.5, "solve_seconds": 1.0} if run_id == "r2" else {}
            h.record(RunRecord(run_id, scenario, status, sweep=sweep, wall_seconds=wall, **parts))
    tasks = [_task(n, tmp_path) for n in "abcde"]
    # Unknown scenarios first in the order given (they may be long), then
    # the known ones by their latest build + solve time (else wall time),
    # longest first: a 100 s, c 20 s, b 1.5 s (its 50 s wall time was mostly
    # something else, such as a new worker's imports).
    assert [t.name for t in longest_first(tasks, db, "s")] == ["d", "e", "a", "c", "b"]
    assert [t.name for t in longest_first(tasks, None, "s")] == list("abcde")
    assert [t.name for t in longest_first(tasks, db, "never-run")] == list("abcde")
    # An unreadable history only costs the optimisation, never the sweep.
    (tmp_path / "not-a-db.sqlite").write_text("this is not SQLite", encoding="utf-8")
    bad = f"sqlite:///{tmp_path / 'not-a-db.sqlite'}"
    assert [t.name for t in longest_first(tasks, bad, "s")] == list("abcde")


@pytest.mark.slow
def test_cluster_starts_the_longest_scenarios_first(tmp_path: Path) -> None:
    sweep = load_sweep(
        write_sweep(tmp_path, "[scenarios.a]\n[scenarios.b]\n[scenarios.c]\ndemand_scale = 1.1\n"),
        check=True,
    )
    db = f"sqlite:///{tmp_path / 'h.sqlite'}"
    with History(db) as h:  # as if an earlier night had found c slowest, then a
        for name, wall in (("a", 30.0), ("b", 2.0), ("c", 60.0)):
            h.record(
                RunRecord(f"old.{name}", name, "optimal", sweep="test-sweep", wall_seconds=wall)
            )
    starts: list[str] = []
    most_running = [0]

    def seen(state: SweepState) -> None:
        most_running[0] = max(most_running[0], len(state.running))
        for name in state.running:
            if name not in starts:
                starts.append(name)

    # One worker runs one scenario at a time, so the start order is the order
    # the scheduler hands them out.
    report = run_sweep(sweep, tmp_path / "out", workers=1, history=db, checked=True, on_update=seen)
    assert starts == ["c", "a", "b"]
    assert most_running[0] == 1  # the live display never counts more than the one worker
    assert [o.name for o in report.outcomes] == ["a", "b", "c"]  # reported in the file's order
    assert report.exit_code == 0
    starts.clear()
    run_sweep(
        sweep,
        tmp_path / "out2",
        workers=1,
        history=None,
        checked=True,
        on_update=seen,
        longest=False,
    )
    assert starts == ["a", "b", "c"]


def test_error_messages_keep_their_square_brackets(tmp_path: Path) -> None:
    # Messages name TOML tables such as [sweep]; printed as console markup,
    # the brackets and their contents used to vanish.
    path = tmp_path / "no-head.toml"
    path.write_text("[scenarios.a]\n", encoding="utf-8")
    result = runner.invoke(app, ["sweep", str(path), "--out", str(tmp_path / "out")])
    assert result.exit_code == 2, result.output
    assert "a [sweep] table with base" in result.output
    assert not (tmp_path / "out").exists()
