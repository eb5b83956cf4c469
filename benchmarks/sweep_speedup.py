"""Speed-up of a sweep on a local Dask cluster, and the run history's cost per run.

Every figure is measured in this run. The scenarios are what-ifs of the
Iberia demo as configured in configs/demo.toml.

1. **End to end, 8 scenarios.** ``hubnet sweep`` is run twice in a fresh
   process: one scenario after another in that process (``--workers 0``),
   and on the default local cluster with 2 worker processes
   (``--workers 2``). Both wall times include Python start-up, imports and
   checking every scenario; the cluster's also includes starting the
   cluster and importing hubnet in each worker. Their ratio is the
   speed-up a user sees.
2. **Steady state, 8 scenarios.** In one process, with a local cluster of 2
   workers already started and warmed (hubnet imported), the same sweep is
   timed on the cluster and one after another: the speed-up of the parallel
   part alone, without the fixed start-up costs.
3. **End to end, more scenarios** (``--large``, default 24), showing the
   fixed costs spread over a longer sweep.
4. **History overhead per run.** (a) Recording one run in an SQLite history
   as ``run_job`` does it (open the database, one insert in one
   transaction, close), timed over many runs; (b) the same demo scenario
   run with and without the history, several times each, median run times.

The machine must be otherwise idle for the speed-up to mean anything: Linux
shares the CPUs fairly between sessions (autogroup scheduling), so while
other sessions keep the cores busy, this session gets the same CPU time
whether it runs one worker or two. The script prints the load average and
the autogroup setting so a reader can tell.

Run from the repository root::

    python benchmarks/sweep_speedup.py
    python benchmarks/sweep_speedup.py --large 0 --reps 5
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import os
import platform
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "configs" / "demo.toml"

EIGHT = """
[scenarios.as-planned]
[scenarios.growth-10]
demand_scale = 1.1
[scenarios.madrid-growth]
demand_scale_by_site = { MAD = 1.25 }
[scenarios.close-sevilla]
close_hubs = ["SEV"]
[scenarios.vigo-hub]
add_candidates = { VIG = { hub_fixed_cost = 20000, handling_cost = 2.8 } }
[scenarios.transport-up]
transport_cost_scale = 1.08
[scenarios.fixed-costs-down]
hub_fixed_cost_scale = 0.8
[scenarios.hubs-4]
model = { hubs = 4 }
"""


def scenarios(n: int) -> str:
    """The eight what-ifs, then demand growth steps of 1 % up to ``n`` scenarios."""
    extra = "".join(
        f"[scenarios.growth-step-{k}]\ndemand_scale = {1 + k / 100:.2f}\n" for k in range(1, n - 7)
    )
    return EIGHT + extra


def sweep_file(folder: Path, n: int) -> Path:
    path = folder / f"bench_sweep_{n}.toml"
    path.write_text(f'[sweep]\nbase = "{DEMO}"\nname = "bench"\n{scenarios(n)}')
    return path


def timed_sweep(sweep: Path, out: Path, workers: int) -> tuple[float, dict]:
    cmd = [sys.executable, "-m", "hubnet.cli", "sweep", str(sweep), "--out", str(out)]
    cmd += ["--workers", str(workers), "--history", "off", "--quiet"]
    t0 = time.perf_counter()
    proc = subprocess.run(cmd, capture_output=True, text=True)
    seconds = time.perf_counter() - t0
    if proc.returncode != 0:
        sys.exit(f"sweep failed ({proc.returncode}):\n{proc.stdout}\n{proc.stderr}")
    return seconds, json.loads((out / "sweep.json").read_text())


def history_overhead(root: Path, reps: int, records: int) -> None:
    from hubnet.history import History, record_from_folder
    from hubnet.jobs import run_job

    # (a) recording alone, as run_job does it, on a real run folder
    run = run_job(DEMO, root / "one", overrides={"solver": {"name": "cbc"}})
    assert run.run_folder is not None
    db = root / "alone.sqlite"
    History(db).close()  # the first use creates the tables; not part of a run's cost
    times = []
    for i in range(records):
        rec = record_from_folder(run.run_folder)
        t0 = time.perf_counter()
        with History(db) as h:
            h.record(dataclasses.replace(rec, run_id=f"bench-{i}"))
        times.append(time.perf_counter() - t0)
    with History(db) as h:
        assert h.count() == records
    rec_ms = 1000 * statistics.median(times)
    print(
        f"recording one run (open, insert, commit, close): median {rec_ms:.1f} ms, "
        f"max {1000 * max(times):.1f} ms over {records} runs"
    )

    # (b) whole runs with and without the history
    with_h, without = [], []
    for i in range(reps):
        for target, history in ((without, None), (with_h, str(root / "runs.sqlite"))):
            t0 = time.perf_counter()
            run_job(
                DEMO,
                root / f"r{i}-{len(target)}-{history is None}",
                overrides={"solver": {"name": "cbc"}},
                history=history,
            )
            target.append(time.perf_counter() - t0)
    a, b = statistics.median(without), statistics.median(with_h)
    print(
        f"demo run (CBC) without history: median {a:.2f} s; with history: median {b:.2f} s; "
        f"difference {1000 * (b - a):+.0f} ms ({100 * (b - a) / a:+.1f} %) over {reps} runs each"
    )
    print(
        f"history overhead, recording alone: {rec_ms:.1f} ms = {100 * rec_ms / 1000 / a:.2f} % "
        "of a demo run"
    )


def _spin(n: int) -> int:
    total = 0
    for i in range(n):
        total += i * i % 7
    return total


def calibration(n: int = 6_000_000) -> float:
    """Speed-up of a trivially parallel CPU loop, 2 processes against 1.

    The best any sweep can do on this machine right now: about 2 on an idle
    2-core machine, about 1 while other sessions keep both cores busy.
    """
    import multiprocessing

    ctx = multiprocessing.get_context("spawn")
    with ctx.Pool(2) as pool:
        pool.map(_spin, [1000, 1000])  # start both processes first
        t0 = time.perf_counter()
        pool.map(_spin, [n])
        one = time.perf_counter() - t0
        t0 = time.perf_counter()
        pool.map(_spin, [n, n], chunksize=1)
        two = time.perf_counter() - t0
    ratio = 2 * one / two
    print(
        f"calibration, a pure CPU loop: 1 process {one:.2f} s, 2 processes doing twice the "
        f"work {two:.2f} s: speed-up {ratio:.2f}x (the most any sweep can get right now)"
    )
    return ratio


def _warm() -> int:
    import pulp  # noqa: F401
    import sqlalchemy  # noqa: F401

    import hubnet.api
    import hubnet.jobs
    import hubnet.report.runfiles  # noqa: F401  (folium, openpyxl)

    return os.getpid()


def steady_state(root: Path, workers: int) -> None:
    from hubnet.scenarios import load_sweep
    from hubnet.sweep import dask_client, run_sweep

    sweep = load_sweep(sweep_file(root, 8), check=True)
    run_sweep(sweep, root / "warm-serial-0", workers=0, checked=True)  # warms this process
    serial = run_sweep(sweep, root / "warm-serial", workers=0, checked=True)
    t0 = time.perf_counter()
    with dask_client(workers) as client:
        start = time.perf_counter() - t0
        t1 = time.perf_counter()
        client.run(_warm)
        warm = time.perf_counter() - t1
        par = run_sweep(sweep, root / "warm-par", client=client, checked=True)
    print(
        f"\nsteady state, 8 scenarios (cluster started in {start:.1f} s, workers warmed in "
        f"{warm:.1f} s, both not counted):"
    )
    print(
        f"one after another: {serial.seconds:6.1f} s; {workers} workers: {par.seconds:6.1f} s; "
        f"speed-up {serial.seconds / par.seconds:.2f}x"
    )


def end_to_end(root: Path, n: int, workers: int, detail: bool) -> float:
    sweep = sweep_file(root, n)
    serial_s, serial = timed_sweep(sweep, root / f"serial-{n}", 0)
    par_s, par = timed_sweep(sweep, root / f"parallel-{n}", workers)
    print(f"\nend to end, {n} scenarios of the demo:")
    if detail:
        print(
            f"{'scenario':18s} {'cost serial':>14s} {'cost parallel':>14s} "
            f"{'s serial':>9s} {'s parallel':>10s}"
        )
    for a, b in zip(serial["outcomes"], par["outcomes"], strict=True):
        assert a["name"] == b["name"] and a["status"] == b["status"] == "optimal"
        assert abs(a["total_cost"] - b["total_cost"]) < 1e-6 * abs(a["total_cost"])
        if detail:
            print(
                f"{a['name']:18s} {a['total_cost']:14,.2f} {b['total_cost']:14,.2f} "
                f"{a['wall_seconds']:9.2f} {b['wall_seconds']:10.2f}"
            )
    work_s = sum(o["wall_seconds"] for o in serial["outcomes"])
    work_p = sum(o["wall_seconds"] for o in par["outcomes"])
    print(
        f"one after another (--workers 0): {serial_s:6.1f} s wall, of which the sweep "
        f"{serial['seconds']:.1f} s (scenarios' own time {work_s:.1f} s)"
    )
    print(
        f"local cluster, {workers} workers:       {par_s:6.1f} s wall, of which the sweep "
        f"{par['seconds']:.1f} s (scenarios' own time {work_p:.1f} s)"
    )
    print(f"speed-up end to end: {serial_s / par_s:.2f}x (target >= 1.6x)")
    return serial_s / par_s


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument(
        "--large", type=int, default=24, help="scenarios of the long sweep (0: skip)"
    )
    parser.add_argument("--reps", type=int, default=3, help="runs each with/without history")
    parser.add_argument("--records", type=int, default=40, help="records timed alone")
    args = parser.parse_args()

    print(
        f"machine: {platform.platform()}, {os.cpu_count()} CPUs, python {platform.python_version()}"
    )
    print(f"load average before: {', '.join(f'{x:.2f}' for x in os.getloadavg())}")
    autogroup = Path("/proc/sys/kernel/sched_autogroup_enabled")
    if autogroup.exists():
        print(f"autogroup scheduling (CPU shared per session): {autogroup.read_text().strip()}")
    root = Path(tempfile.mkdtemp(prefix="hubnet-bench-"))
    try:
        calibration()
        end_to_end(root, 8, args.workers, detail=True)
        steady_state(root, args.workers)
        if args.large:
            end_to_end(root, args.large, args.workers, detail=False)
        calibration()
        print()
        history_overhead(root, args.reps, args.records)
        print(f"load average after: {', '.join(f'{x:.2f}' for x in os.getloadavg())}")
    finally:
        shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    main()
