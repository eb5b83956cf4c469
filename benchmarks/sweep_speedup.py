"""Speed-up of a sweep on a local Dask cluster, and the run history's cost per run.

Every figure is measured in this run. The scenarios are what-ifs of a
base config: by default the Iberia demo as configured in configs/demo.toml
(``--scenarios classic``); ``--scenarios freight`` runs eight what-ifs of the
French freight demo, configs/national_small.toml (vehicle classes,
deadlines, drivers' hours), listed in ``FREIGHT_EIGHT``. ``--base CONFIG``
runs a set against another config with the same site ids.

1. **End to end, 8 scenarios.** ``hubnet sweep`` is run three times, each in
   a fresh process: one scenario after another in that process
   (``--workers 0``, recording into a fresh run history), then on the
   default local cluster with 2 worker processes (``--workers 2``) twice:
   without a history (the scenarios start in the file's order, as on a
   sweep's first night) and with the serial run's history (the scenarios
   that took longest start first, as on every later night). All wall times
   include Python start-up, imports and checking every scenario; the
   cluster's also include starting the cluster and importing hubnet in each
   worker. Their ratios are the speed-ups a user sees.
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
   Always on configs/demo.toml: the cost of recording does not depend on
   the scenario.

The machine must be otherwise idle for the speed-up to mean anything: Linux
shares the CPUs fairly between sessions (autogroup scheduling), so while
other sessions keep the cores busy, this session gets the same CPU time
whether it runs one worker or two. The script prints the load average and
the autogroup setting so a reader can tell.

Run from the repository root::

    python benchmarks/sweep_speedup.py
    python benchmarks/sweep_speedup.py --large 0 --reps 5
    python benchmarks/sweep_speedup.py --scenarios freight      # --large 0 by default
    python benchmarks/sweep_speedup.py --scenarios freight --check-only

``--check-only`` writes the sweep files and checks every scenario against
its data (as ``hubnet sweep`` does before solving), then stops: a quick
test of the scenario sets, without timing anything.
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
NATIONAL_SMALL = REPO / "configs" / "national_small.toml"

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

# Eight what-ifs of configs/national_small.toml. Its next-day deadlines need
# all eight candidate hubs: with a hub closed, or 6 hubs, some terminal has
# no hub that gets all its OD pairs in on time (the freight model's deadline
# checks report it in a few seconds, before the solver starts), so those two
# come with a two-day service.
# Paris is the Ile-de-France region of sites.csv (PAR, PCE, SDN, NAN); its
# terminals' cut-offs move 30 minutes later (19:30 -> 20:00).
FREIGHT_EIGHT = """
[scenarios.as-planned]
[scenarios.growth-10]
demand_scale = 1.1
[scenarios.paris-growth]
demand_scale_by_region = { "Île-de-France" = 1.25 }
[scenarios.close-bordeaux-two-day]
close_hubs = ["BDX"]
service = { days = 2 }
[scenarios.fixed-costs-down]
hub_fixed_cost_scale = 0.8
[scenarios.hubs-6-two-day]
model = { hubs = 6 }
service = { days = 2 }
[scenarios.carbon-80]
freight = { carbon_price_per_t = 80 }
[scenarios.paris-cutoff-later]
cutoff = { PAR = "20:00", PCE = "20:00", SDN = "20:00", NAN = "20:00" }
"""

#: The built-in scenario sets (``--scenarios``): the eight what-ifs and their base config.
SETS: dict[str, tuple[str, Path]] = {
    "classic": (EIGHT, DEMO),
    "freight": (FREIGHT_EIGHT, NATIONAL_SMALL),
}


def scenarios(n: int, eight: str = EIGHT) -> str:
    """The eight what-ifs, then demand growth steps of 1 % up to ``n`` scenarios."""
    extra = "".join(
        f"[scenarios.growth-step-{k}]\ndemand_scale = {1 + k / 100:.2f}\n" for k in range(1, n - 7)
    )
    return eight + extra


def sweep_file(folder: Path, n: int, base: Path = DEMO, eight: str = EIGHT) -> Path:
    path = folder / f"bench_sweep_{n}.toml"
    text = f'[sweep]\nbase = "{base.resolve().as_posix()}"\nname = "bench"\n{scenarios(n, eight)}'
    path.write_text(text, encoding="utf-8")
    return path


def timed_sweep(
    sweep: Path, out: Path, workers: int, history: Path | None = None
) -> tuple[float, dict]:
    cmd = [sys.executable, "-m", "hubnet.cli", "sweep", str(sweep), "--out", str(out)]
    where = "off" if history is None else str(history)
    cmd += ["--workers", str(workers), "--history", where, "--quiet"]
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


def steady_state(
    root: Path, workers: int, base: Path = DEMO, eight: str = EIGHT, warm_all: bool = True
) -> None:
    """Time the sweep on a started, warmed cluster and one after another in this process.

    This process is warmed first by solving the sweep (``warm_all``) or its
    first scenario only (freight scenarios take tens of seconds each).
    """
    from hubnet.scenarios import load_sweep
    from hubnet.sweep import dask_client, run_sweep

    sweep = load_sweep(sweep_file(root, 8, base, eight), check=True)
    warm_up = sweep if warm_all else dataclasses.replace(sweep, scenarios=sweep.scenarios[:1])
    run_sweep(warm_up, root / "warm-serial-0", workers=0, checked=True)  # warms this process
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


def end_to_end(
    root: Path,
    n: int,
    workers: int,
    detail: bool,
    base: Path = DEMO,
    eight: str = EIGHT,
    exact: bool = True,
) -> float:
    """Time ``hubnet sweep`` one scenario after another, then twice on the cluster.

    The run one after another records into a fresh run history. The first
    cluster run has no history (``--history off``): the scenarios start in
    the file's order, as on a sweep's first night. The second uses the
    history of the serial run, so the scenarios that took longest start
    first, as on every later night of a nightly sweep.

    With ``exact`` every scenario must be solved to optimality with the same
    cost every way (the classic demo). Without it (freight scenarios, solved
    to the config's gap and time limit, with a time-bounded starting
    heuristic) a plan is enough, and the costs and statuses are shown.
    """
    sweep = sweep_file(root, n, base, eight)
    history = root / f"history-{n}.sqlite"
    serial_s, serial = timed_sweep(sweep, root / f"serial-{n}", 0, history)
    first_s, first = timed_sweep(sweep, root / f"parallel-first-{n}", workers)
    again_s, again = timed_sweep(sweep, root / f"parallel-again-{n}", workers, history)
    label = "the demo" if base.resolve() == DEMO.resolve() else base.name
    print(f"\nend to end, {n} scenarios of {label}:")
    wide = 18 if exact else 24
    if detail:
        print(
            f"{'scenario':{wide}s} {'cost serial':>14s} {'cost cluster':>14s} "
            f"{'s serial':>9s} {'s first':>8s} {'s again':>8s}"
            + ("" if exact else f" {'status serial/first/again':>32s}")
        )
    for a, b, c in zip(serial["outcomes"], first["outcomes"], again["outcomes"], strict=True):
        assert a["name"] == b["name"] == c["name"]
        if exact:
            assert a["status"] == b["status"] == c["status"] == "optimal"
            for other in (b, c):
                assert abs(a["total_cost"] - other["total_cost"]) < 1e-6 * abs(a["total_cost"])
        else:
            plans = ("optimal", "time_limit")
            assert all(o["status"] in plans for o in (a, b, c)), (a["name"], a, b, c)
        if detail:
            statuses = "/".join(o["status"] for o in (a, b, c))
            print(
                f"{a['name']:{wide}s} {a['total_cost']:14,.2f} {b['total_cost']:14,.2f} "
                f"{a['wall_seconds']:9.2f} {b['wall_seconds']:8.2f} {c['wall_seconds']:8.2f}"
                + ("" if exact else f" {statuses:>32s}")
            )
    for label_, secs, rep in (
        ("one after another (--workers 0):   ", serial_s, serial),
        (f"{workers} workers, first run (file order):", first_s, first),
        (f"{workers} workers, again (longest first): ", again_s, again),
    ):
        own = sum(o["wall_seconds"] for o in rep["outcomes"])
        print(
            f"{label_} {secs:6.1f} s wall, of which the sweep {rep['seconds']:.1f} s "
            f"(scenarios' own time {own:.1f} s)"
        )
    print(
        f"speed-up end to end: first run {serial_s / first_s:.2f}x, again with the history "
        f"{serial_s / again_s:.2f}x (target >= 1.6x)"
    )
    return serial_s / again_s


def check_only(root: Path, base: Path, eight: str, large: int) -> None:
    """Write the sweep files and check every scenario against its data; solve nothing."""
    from hubnet.errors import InputError
    from hubnet.scenarios import load_sweep

    for n in sorted({8, large} - {0}):
        path = sweep_file(root, n, base, eight)
        t0 = time.perf_counter()
        try:
            sweep = load_sweep(path, check=True)
        except InputError as err:
            sys.exit(f"the sweep of {n} scenarios on {base} does not check:\n{err}")
        names = [spec.name for spec in sweep.scenarios]
        print(
            f"{n} scenarios of {base.name} checked in {time.perf_counter() - t0:.1f} s: "
            + ", ".join(names)
        )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument(
        "--large",
        type=int,
        default=None,
        help="scenarios of the long sweep (0: skip); default 24 classic, 0 freight",
    )
    parser.add_argument("--reps", type=int, default=3, help="runs each with/without history")
    parser.add_argument("--records", type=int, default=40, help="records timed alone")
    parser.add_argument(
        "--scenarios",
        choices=sorted(SETS),
        default="classic",
        help="the eight what-ifs: classic (configs/demo.toml) or freight "
        "(configs/national_small.toml)",
    )
    parser.add_argument(
        "--base",
        type=Path,
        default=None,
        help="base config of the sweep; default configs/demo.toml for the classic set, "
        "configs/national_small.toml for the freight set",
    )
    parser.add_argument(
        "--skip-steady",
        action="store_true",
        help="skip the steady-state sweep (saves its two runs of the eight scenarios)",
    )
    parser.add_argument(
        "--check-only",
        action="store_true",
        help="write the sweep files, check every scenario, solve nothing",
    )
    args = parser.parse_args()
    eight, default_base = SETS[args.scenarios]
    base = (args.base or default_base).resolve()
    large = args.large if args.large is not None else (24 if args.scenarios == "classic" else 0)
    exact = args.scenarios == "classic"

    if args.check_only:
        root = Path(tempfile.mkdtemp(prefix="hubnet-bench-"))
        try:
            check_only(root, base, eight, large)
        finally:
            shutil.rmtree(root, ignore_errors=True)
        return

    print(
        f"machine: {platform.platform()}, {os.cpu_count()} CPUs, python {platform.python_version()}"
    )
    print(f"load average before: {', '.join(f'{x:.2f}' for x in os.getloadavg())}")
    autogroup = Path("/proc/sys/kernel/sched_autogroup_enabled")
    if autogroup.exists():
        print(f"autogroup scheduling (CPU shared per session): {autogroup.read_text().strip()}")
    if args.scenarios != "classic" or base != DEMO.resolve():
        print(f"scenarios: the {args.scenarios} set on {base}")
    root = Path(tempfile.mkdtemp(prefix="hubnet-bench-"))
    try:
        calibration()
        end_to_end(root, 8, args.workers, detail=True, base=base, eight=eight, exact=exact)
        if not args.skip_steady:
            steady_state(root, args.workers, base, eight, warm_all=exact)
        if large:
            end_to_end(root, large, args.workers, detail=False, base=base, eight=eight, exact=exact)
        calibration()
        print()
        history_overhead(root, args.reps, args.records)
        print(f"load average after: {', '.join(f'{x:.2f}' for x in os.getloadavg())}")
    finally:
        shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    main()
