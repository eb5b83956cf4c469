"""Run history, run-folder lock, log files, determinism, and runs killed with SIGKILL.

Everything here uses real SQLite files in ``tmp_path`` (through SQLAlchemy,
as a file path and as a URL), real processes and real run folders.
"""

from __future__ import annotations

import hashlib
import json
import multiprocessing
import os
import random
import signal
import socket
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest
from typer.testing import CliRunner

from hubnet.cli import app
from hubnet.errors import EXIT_BAD_INPUT, EXIT_OUTPUT_EXISTS, InfeasibleError
from hubnet.history import (
    DEFAULT_HISTORY,
    History,
    RunRecord,
    config_hash,
    resolve_history,
    sha256_file,
)
from hubnet.jobs import JobLog, recover_run_folder, run_job, warm_start_hubs
from hubnet.runfolder import STANDARD_FILES
from hubnet.runlock import RunLock, RunLockedError, lock_path

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "configs" / "demo.toml"
IBERIA = REPO / "demo_regions" / "iberia"
FAST = {"solver": {"name": "cbc"}}  # CBC proves the demo's optimum in about a second

runner = CliRunner()


def integrity(db: Path) -> str:
    with sqlite3.connect(db) as conn:
        return str(conn.execute("PRAGMA integrity_check").fetchone()[0])


def tree(folder: Path) -> dict[str, str]:
    return {
        str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


# --------------------------------------------------------------------------
# Where the history lives
# --------------------------------------------------------------------------


def test_history_location(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    monkeypatch.delenv("HUBNET_HISTORY", raising=False)
    monkeypatch.setenv("HOME", str(tmp_path))
    assert resolve_history() == f"sqlite:///{Path(str(DEFAULT_HISTORY)).expanduser()}"
    assert resolve_history() == f"sqlite:///{tmp_path}/.hubnet/history.sqlite"
    monkeypatch.setenv("HUBNET_HISTORY", str(tmp_path / "x.sqlite"))
    assert resolve_history() == f"sqlite:///{tmp_path}/x.sqlite"
    assert resolve_history("postgresql://u@db/runs") == "postgresql://u@db/runs"
    monkeypatch.setenv("HUBNET_HISTORY", "off")
    assert resolve_history() is None
    assert resolve_history("rel.sqlite") == f"sqlite:///{Path.cwd() / 'rel.sqlite'}"


# --------------------------------------------------------------------------
# The database
# --------------------------------------------------------------------------


def test_record_list_and_filter(tmp_path: Path) -> None:
    db = tmp_path / "deep" / "h.sqlite"
    with History(db) as h:
        ids = [
            h.record(RunRecord(run_id=f"r{i}", scenario=s, status=st, sweep=sw, hubs=("A", "B")))
            for i, (s, st, sw) in enumerate(
                [
                    ("close-sev", "optimal", "n1"),
                    ("close-mad", "infeasible", "n1"),
                    ("base", "optimal", ""),
                    ("close-sev", "time_limit", "n2"),
                ]
            )
        ]
        assert ids == [1, 2, 3, 4]
        # Recording a run id again changes nothing (a retried task).
        assert h.record(RunRecord(run_id="r0", scenario="other", status="error")) is None
        assert h.count() == 4
        assert [r.run_id for r in h.runs(scenario="close-*")] == ["r0", "r1", "r3"]
        assert [r.run_id for r in h.runs(status="optimal")] == ["r0", "r2"]
        assert [r.run_id for r in h.runs(sweep="n1", last=1)] == ["r1"]
        assert [r.run_id for r in h.runs(last=2)] == ["r2", "r3"]
        assert h.get(3) is not None and h.get(3).hubs == ("A", "B")  # type: ignore[union-attr]
        assert h.get_run_id("nope") is None
    with sqlite3.connect(db) as conn:
        assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert integrity(db) == "ok"


def test_sqlalchemy_url(tmp_path: Path) -> None:
    url = f"sqlite:///{tmp_path / 'u.sqlite'}"
    with History(url) as h:
        h.record(RunRecord(run_id="x", scenario="s", status="optimal", kpis={"unit_km": 1.5}))
    with History(tmp_path / "u.sqlite") as h:  # the same file by path
        (row,) = h.runs()
    assert row.kpis == {"unit_km": 1.5} and row.id == 1


def _writer(db: str, start: int) -> None:
    with History(db) as h:
        for i in range(start, start + 25):
            h.record(RunRecord(run_id=f"w{i}", scenario=f"s{i % 3}", status="optimal"))


def test_two_processes_write_at_once(tmp_path: Path) -> None:
    db = str(tmp_path / "h.sqlite")
    History(db).close()
    ctx = multiprocessing.get_context("spawn")
    procs = [ctx.Process(target=_writer, args=(db, k * 100)) for k in range(2)]
    for p in procs:
        p.start()
    for p in procs:
        p.join(120)
        assert p.exitcode == 0
    with History(db) as h:
        assert h.count() == 50
    assert integrity(Path(db)) == "ok"


# --------------------------------------------------------------------------
# Recording real runs
# --------------------------------------------------------------------------


def test_run_job_records_what_went_in_and_out(tmp_path: Path) -> None:
    db = str(tmp_path / "h.sqlite")
    result = run_job(DEMO, tmp_path / "run", overrides=FAST, history=db)
    assert result.history_id == 1 and result.status == "optimal"
    with History(db) as h:
        (row,) = h.runs()
    summary = json.loads((tmp_path / "run" / "summary.json").read_text())
    info = json.loads((tmp_path / "run" / "run.json").read_text())
    assert row.run_id == info["run_id"] == result.run_id
    assert row.run_folder == str((tmp_path / "run").absolute())
    assert row.objective == summary["objective"] and row.gap == summary["gap"]
    assert list(row.hubs) == summary["hubs"] and row.hub_count == len(row.hubs)
    assert row.kpis["costs"] == summary["costs"]
    assert row.solver == "cbc" and row.hubnet_version == summary["hubnet_version"]
    assert set(row.solver_versions) == {"highspy", "pulp"}
    assert row.inputs["sites"]["sha256"] == sha256_file(IBERIA / "sites.csv")
    assert row.inputs["demand"]["sha256"] == sha256_file(IBERIA / "demand.csv")
    assert row.config_hash == info["config_hash"] == config_hash(result_config(), {})
    assert row.started_at < row.finished_at and row.wall_seconds is not None
    assert row.solve_seconds == summary["solve_seconds"]


def result_config():  # type: ignore[no-untyped-def]
    from hubnet.config import load_config

    return load_config(DEMO, FAST)


def test_infeasible_run_is_recorded_without_a_folder(tmp_path: Path) -> None:
    db = str(tmp_path / "h.sqlite")
    with pytest.raises(InfeasibleError):
        run_job(
            DEMO,
            tmp_path / "run",
            overrides={"model": {"capacitated": True}, **FAST},
            edits={"sort_capacity_scale": 0.1},
            history=db,
        )
    with History(db) as h:
        (row,) = h.runs()
    assert (row.status, row.exit_code, row.run_folder) == ("infeasible", 3, "")
    assert "no plan satisfies the constraints" in row.error
    assert row.inputs["sites"]["sha256"] == sha256_file(IBERIA / "sites.csv")
    assert not (tmp_path / "run").exists()


def test_cli_solve_records_and_runs_lists(tmp_path: Path) -> None:
    db = tmp_path / "h.sqlite"
    out = tmp_path / "a"
    result = runner.invoke(
        app, ["solve", str(DEMO), "--out", str(out), "--solver", "cbc", "--history", str(db)]
    )
    assert result.exit_code == 0, result.output
    result = runner.invoke(app, ["runs", "--history", str(db), "--json"])
    (line,) = result.output.strip().splitlines()
    row = json.loads(line)
    assert (row["scenario"], row["status"], row["run_folder"]) == (
        "iberia-demo",
        "optimal",
        str(out.absolute()),
    )
    result = runner.invoke(app, ["runs", "--history", str(db), "--status", "infeasible"])
    assert result.exit_code == 0 and "0 runs" in result.output
    # A misspelt status is refused, not answered with an empty list.
    result = runner.invoke(app, ["runs", "--history", str(db), "--status", "optimall"])
    assert result.exit_code == 2 and "'optimall' is not a run status" in result.output
    result = runner.invoke(app, ["runs", "--history", str(db), "--scenario", "iberia-*"])
    assert "iberia-demo" in result.output and "optimal" in result.output
    # Off: nothing recorded, nothing created.
    result = runner.invoke(
        app, ["solve", str(DEMO), "-o", str(tmp_path / "b"), "--solver", "cbc", "--history", "off"]
    )
    assert result.exit_code == 0
    with History(db) as h:
        assert h.count() == 1


def test_same_inputs_give_the_same_summary(tmp_path: Path) -> None:
    """Deterministic: two runs differ only in timings (and their run ids and times)."""
    a = run_job(DEMO, tmp_path / "a", overrides=FAST, edits={"close_hubs": ["SEV"]})
    b = run_job(DEMO, tmp_path / "b", overrides=FAST, edits={"close_hubs": ["SEV"]})
    timing = {"solve_seconds", "build_seconds", "start_seconds"}
    sa = {k: v for k, v in (a.summary or {}).items() if k not in timing}
    sb = {k: v for k, v in (b.summary or {}).items() if k not in timing}
    assert sa == sb
    for name in ("hubs.csv", "legs.csv", "routes.csv", "hierarchy.csv", "rank_size.csv"):
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes()
    assert a.record.config_hash == b.record.config_hash
    assert a.run_id != b.run_id
    # The history's build time holds the starting-plan search too (what the
    # sweep orders scenarios by).
    s = a.summary or {}
    assert a.record.build_seconds == pytest.approx(s["build_seconds"] + s["start_seconds"])


# --------------------------------------------------------------------------
# The lock
# --------------------------------------------------------------------------

_HOLD = """
import sys, time
from hubnet.runlock import RunLock
with RunLock(sys.argv[1]):
    print("locked", flush=True)
    time.sleep(60)
"""


def test_a_live_lock_stops_a_second_run(tmp_path: Path) -> None:
    out = tmp_path / "run"
    holder = subprocess.Popen(
        [sys.executable, "-c", _HOLD, str(out)], stdout=subprocess.PIPE, text=True
    )
    try:
        assert holder.stdout is not None and holder.stdout.readline().strip() == "locked"
        with pytest.raises(RunLockedError, match=f"process {holder.pid}"):
            RunLock(out, wait_s=0.3).acquire()
        result = runner.invoke(
            app, ["solve", str(DEMO), "--out", str(out), "--history", "off", "--solver", "cbc"]
        )
        assert result.exit_code == EXIT_OUTPUT_EXISTS
        assert "is being written by another run" in result.output
        assert not out.exists()
    finally:
        holder.kill()
        holder.wait()
    # Killed: its lock is stale and the next run takes it.
    assert lock_path(out).exists()
    with RunLock(out) as lock:
        assert json.loads(lock.path.read_text())["pid"] == os.getpid()
    assert not lock_path(out).exists()


def test_stale_lock_of_a_dead_process(tmp_path: Path) -> None:
    dead = subprocess.Popen([sys.executable, "-c", "pass"])
    dead.wait()
    out = tmp_path / "run"
    lock_path(out).write_text(json.dumps({"pid": dead.pid, "host": socket.gethostname()}))
    with RunLock(out):
        pass
    # An empty lock file, just made, may be a run setting up: it is respected.
    lock_path(out).write_text("")
    with pytest.raises(RunLockedError):
        RunLock(out).acquire()
    old = time.time() - 60
    os.utime(lock_path(out), (old, old))
    with RunLock(out):
        pass


def test_recover_after_a_killed_replacement(tmp_path: Path) -> None:
    out = tmp_path / "run"
    old = tmp_path / ".run.old-1234abcd"
    old.mkdir()
    (old / "summary.json").write_text("{}")
    half = tmp_path / ".run.tmp-9999ffff"
    half.mkdir()
    (half / "hubs.csv").write_text("half")
    recover_run_folder(out)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run"]
    assert (out / "summary.json").read_text() == "{}"


# --------------------------------------------------------------------------
# Unattended runs: log file, warm start
# --------------------------------------------------------------------------


def test_log_file_json_lines(tmp_path: Path) -> None:
    log = tmp_path / "logs" / "night.jsonl"
    args = ["solve", str(DEMO), "-o", str(tmp_path / "a"), "--solver", "cbc", "-q"]
    args += ["--history", "off", "--log-file", str(log), "--log-format", "json"]
    assert runner.invoke(app, args).exit_code == 0
    # A second run into the same folder fails; the log gets its error too.
    assert runner.invoke(app, args).exit_code == EXIT_OUTPUT_EXISTS
    entries = [json.loads(line) for line in log.read_text().splitlines()]
    events = [e["event"] for e in entries]
    assert events[0] == "start" and "progress" in events and events.count("start") == 2
    finished = next(e for e in entries if e["event"] == "finished")
    assert finished["status"] == "optimal" and finished["exit_code"] == 0
    assert finished["run_folder"] == str(tmp_path / "a")
    assert entries[-1]["event"] == "error" and entries[-1]["exit_code"] == EXIT_OUTPUT_EXISTS
    assert all({"time", "level", "elapsed_s", "message"} <= set(e) for e in entries)


def test_log_file_plain_and_bad_format(tmp_path: Path) -> None:
    log = tmp_path / "run.log"
    with JobLog(log) as j:
        j.event("start", "two\nlines", run_id="x")
    (line,) = log.read_text().splitlines()
    assert line.endswith("two | lines  [run_id=x]") and " INFO " in line
    result = runner.invoke(
        app, ["solve", str(DEMO), "-o", str(tmp_path / "a"), "--log-format", "xml"]
    )
    assert result.exit_code == EXIT_BAD_INPUT and "expected plain or json" in result.output


def test_warm_start_reads_the_hubs(tmp_path: Path) -> None:
    first = run_job(DEMO, tmp_path / "a", overrides=FAST)
    assert warm_start_hubs(tmp_path / "a") == list(first.record.hubs)
    with pytest.raises(Exception, match="no summary.json"):
        warm_start_hubs(tmp_path)
    again = run_job(
        DEMO, tmp_path / "b", overrides=FAST, start_hubs=first.record.hubs, warm_start_from="a"
    )
    assert again.record.hubs == first.record.hubs
    info = json.loads((tmp_path / "b" / "run.json").read_text())
    assert info["warm_start"]["hubs"] == list(first.record.hubs)
    # A hub closed in this scenario is left out of the start.
    said: list[str] = []
    run_job(
        DEMO,
        tmp_path / "e",
        overrides=FAST,
        edits={"close_hubs": ["SEV"]},
        start_hubs=["SEV", "MAD"],
        progress=said.append,
    )
    assert "warm start: SEV cannot be a hub in this scenario; left out" in said
    assert "starting plan given: 1 hubs" in said
    # From the command line (CBC by name: the start is for the MILP, which the
    # demo's integral path relaxation would otherwise make unnecessary).
    args = ["solve", str(DEMO), "-o", str(tmp_path / "c"), "--history", "off", "--solver", "cbc"]
    result = runner.invoke(app, [*args, "--warm-start", str(tmp_path / "a")])
    assert result.exit_code == 0, result.output
    assert f"starting plan given: {len(first.record.hubs)} hubs" in result.output
    result = runner.invoke(
        app,
        [
            "solve",
            str(DEMO),
            "-o",
            str(tmp_path / "d"),
            "--history",
            "off",
            "--warm-start",
            str(tmp_path),
        ],
    )
    assert result.exit_code == EXIT_BAD_INPUT and "no summary.json" in result.output


# --------------------------------------------------------------------------
# SIGKILL at random moments
# --------------------------------------------------------------------------


def _visible_folders_are_complete(root: Path) -> list[str]:
    names = []
    for p in sorted(root.iterdir()):
        if p.name.startswith("."):
            continue
        names.append(p.name)
        assert p.is_dir()
        for f in STANDARD_FILES:
            assert (p / f).is_file(), f"{p / f} missing: a half-written run folder is visible"
        json.loads((p / "summary.json").read_text())
        json.loads((p / "run.json").read_text())
    return names


_RECORD_LOOP = """
import sys
from hubnet.history import History, RunRecord
with History(sys.argv[1]) as h:
    print("open", flush=True)
    for i in range(100000):
        h.record(RunRecord(run_id=f"{sys.argv[2]}-{i}", scenario="s", status="optimal",
                           kpis={"costs": {"total": float(i)}}))
"""


def test_sigkill_while_recording_keeps_the_database_sound(tmp_path: Path) -> None:
    db = tmp_path / "h.sqlite"
    rng = random.Random(7)
    counts = []
    for k in range(4):
        proc = subprocess.Popen(
            [sys.executable, "-c", _RECORD_LOOP, str(db), f"p{k}"], stdout=subprocess.PIPE
        )
        assert proc.stdout is not None and proc.stdout.readline().strip() == b"open"
        time.sleep(rng.uniform(0.05, 0.6))
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        assert integrity(db) == "ok"
        with History(db) as h:
            rows = h.runs()
        counts.append(len(rows))
        # Every row is whole: its JSON parses and matches its run id.
        for r in rows:
            assert r.kpis["costs"]["total"] == float(r.run_id.split("-")[1])
    assert counts == sorted(counts) and counts[-1] > 0


@pytest.mark.slow
def test_sigkill_at_random_moments_leaves_history_and_folders_consistent(tmp_path: Path) -> None:
    db = tmp_path / "history.sqlite"
    runs = tmp_path / "runs"
    env = dict(os.environ, HUBNET_HISTORY=str(db))
    cmd = [sys.executable, "-m", "hubnet.cli", "solve", str(DEMO), "--solver", "cbc", "-q"]
    # A complete earlier run, which must stay exactly as it is.
    t0 = time.perf_counter()
    subprocess.run([*cmd, "--out", str(runs / "earlier")], env=env, check=True, timeout=120)
    full = time.perf_counter() - t0
    before = tree(runs / "earlier")
    rng = random.Random(20240611)
    kills = [rng.uniform(0.3, 1.1) * full for _ in range(5)]
    for k, delay in enumerate(kills):
        proc = subprocess.Popen([*cmd, "--out", str(runs / f"k{k}")], env=env)
        time.sleep(delay)
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        assert integrity(db) == "ok"
        visible = _visible_folders_are_complete(runs)
        with History(db) as h:
            rows = h.runs()
        # Every recorded run points to a complete folder; recorded runs are unique.
        assert len({r.run_id for r in rows}) == len(rows)
        for r in rows:
            assert Path(r.run_folder).name in visible
    assert tree(runs / "earlier") == before
    # A run into a folder a killed run left half-done (stale lock, temporary
    # folder) completes and leaves no trace of the killed one.
    for k in range(len(kills)):
        if not (runs / f"k{k}").exists():
            subprocess.run([*cmd, "--out", str(runs / f"k{k}")], env=env, check=True, timeout=120)
    assert _visible_folders_are_complete(runs) == ["earlier"] + [f"k{k}" for k in range(5)]
    # Only the lock files of runs killed after their folder was complete remain
    # (hidden, and stale: the next run on such a folder takes the lock over).
    hidden = [p.name for p in runs.iterdir() if p.name.startswith(".")]
    assert all(name.endswith(".lock") for name in hidden), hidden
    with History(db) as h:
        assert {Path(r.run_folder).name for r in h.runs()} >= {"earlier"}
    assert integrity(db) == "ok"
