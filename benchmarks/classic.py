"""Time hubnet on the classic CAB and AP hub location instances, against textbook models.

For every instance this script solves the network with
:func:`hubnet.solve.solve_network` (model build, starting plan and solve all
timed together), then the same instance with the textbook path formulation
of ``baseline.py`` on the same solver, and prints one line: times, status,
objective, gap, the time ratio, and agreement with the published optimum
(AP) or with the baseline's proven optimum (CAB, which has no published
table). A summary per group and the targets of the project's benchmark
issue follow. Every figure printed is measured in this run.

Data: ``../shared/reference/hub_benchmarks`` beside the repository, read
through hubnet's own input layer by ``tests/benchdata.py``.

Run from the repository root, for example::

    python benchmarks/classic.py --only cab --csv cab.csv
    python benchmarks/classic.py --only ap --max-n 25
    python benchmarks/classic.py --only ap --no-baseline --time-limit 300
"""

from __future__ import annotations

import argparse
import csv
import hashlib
import os
import platform
import re
import signal
import statistics
import subprocess
import sys
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from functools import cache
from pathlib import Path
from typing import IO, cast

import numpy as np
import pulp

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO / "tests"))
sys.path.insert(0, str(Path(__file__).resolve().parent))

import benchdata  # noqa: E402
from baseline import Instance, baseline_name, solve_baseline_bounded  # noqa: E402

import hubnet  # noqa: E402
from hubnet.classic import read_ap_format  # noqa: E402
from hubnet.config import DistanceParams, HubModelParams, SolverName, SolverParams  # noqa: E402
from hubnet.data import NetworkData  # noqa: E402
from hubnet.distances import distance_matrix  # noqa: E402
from hubnet.solve import pick_solver, solve_network  # noqa: E402

CAB_N = (10, 15, 20, 25)
CAB_P = (1, 2, 3, 4)
CAB_ALPHA = (0.2, 0.4, 0.6, 0.8, 1.0)
AP_N = (10, 20, 25, 40, 50, 100)
AP_P = (2, 3, 4, 5)
CSAHLP_N = (10, 20, 25, 40, 50)
CSAHLP_SETTINGS = ("LL", "LT", "TL", "TT")
ALLOCATIONS = ("single", "multiple")
#: Relative tolerance for hubnet and baseline objectives to count as equal (CAB).
REL_TOL = 1e-6


@dataclass(frozen=True, slots=True)
class Case:
    """One benchmark instance.

    ``problem`` is USApHMP / UMApHMP (p-hub median, single / multiple
    allocation) or CSAHLP (capacitated single allocation with fixed costs);
    ``setting`` is the CSAHLP file pair (``LT`` = FcostL with CapT).
    """

    dataset: str
    problem: str
    n: int
    allocation: str
    p: int | None = None
    alpha: float | None = None
    setting: str = ""

    @property
    def id(self) -> str:
        """Short instance id."""
        if self.dataset == "CAB":
            return f"CAB-n{self.n}-p{self.p}-a{self.alpha:.1f}-{self.allocation[:3]}"
        if self.problem == "CSAHLP":
            return f"AP-CSAHLP-n{self.n}-{self.setting}"
        return f"AP-n{self.n}-p{self.p}-{self.allocation[:3]}"

    @property
    def group(self) -> str:
        """Summary group."""
        if self.dataset == "CAB":
            return "CAB"
        if self.n <= 25:
            return "AP n<=25"
        if self.n <= 50:
            return "AP n=40-50"
        return "AP n=100"


@dataclass
class Outcome:
    """Measured figures of one instance."""

    case: Case
    solver: str = ""
    seconds: float | None = None
    status: str = ""
    objective: float | None = None
    bound: float | None = None
    gap: float | None = None
    hubs: str = ""
    base_status: str = "off"
    base_seconds: float | None = None
    base_objective: float | None = None
    base_variables: int | None = None
    base_reused: bool = False
    base_solver: str = ""
    base_formulation: str = ""
    load: float | None = None
    published: float | None = None
    agreement: str = "n/a"
    notes: list[str] = field(default_factory=list)

    @property
    def ratio(self) -> float | None:
        """Baseline time over hubnet time (a lower bound if the baseline hit its limit)."""
        if self.base_status not in ("optimal", "time_limit") or not self.seconds:
            return None
        assert self.base_seconds is not None
        return self.base_seconds / self.seconds


def cases(
    only: str | None,
    max_n: int | None = None,
    min_n: int | None = None,
    allocation: str | None = None,
    hubs: list[int] | None = None,
) -> list[Case]:
    """Every instance the command-line filters (``--only``, ``--max-n`` ... ``--hubs``) select."""
    out: list[Case] = []
    if only in (None, "cab"):
        for n in CAB_N:
            for alloc in ALLOCATIONS:
                for p in CAB_P:
                    for alpha in CAB_ALPHA:
                        prob = "USApHMP" if alloc == "single" else "UMApHMP"
                        out.append(Case("CAB", prob, n, alloc, p, alpha))
    if only in (None, "ap"):
        for n in AP_N:
            for alloc in ALLOCATIONS:
                prob = "USApHMP" if alloc == "single" else "UMApHMP"
                out += [Case("AP", prob, n, alloc, p, 0.75) for p in AP_P]
    if only in (None, "csahlp"):
        for n in CSAHLP_N:
            out += [Case("AP", "CSAHLP", n, "single", None, 0.75, s) for s in CSAHLP_SETTINGS]
    return [
        c
        for c in out
        if (max_n is None or c.n <= max_n)
        and (min_n is None or c.n >= min_n)
        and (allocation is None or c.allocation == allocation)
        and (hubs is None or c.p in hubs)
    ]


@cache
def _cab(n: int) -> tuple[NetworkData, np.ndarray, float, float]:
    data = benchdata.cab_network(n)
    raw = read_ap_format(benchdata.BENCH / "CAB" / "25.3.4")
    return data, _distances(data), raw.collection, raw.distribution


@cache
def _ap(n: int, setting: str = "") -> tuple[NetworkData, np.ndarray]:
    fixed, cap = (setting[0], setting[1]) if setting else (None, None)
    data = benchdata.ap_network(n, fixed=fixed, cap=cap)
    return data, _distances(data)


def _distances(data: NetworkData) -> np.ndarray:
    return distance_matrix(data, DistanceParams(method="euclidean")).km


def instance(case: Case) -> tuple[NetworkData, np.ndarray, HubModelParams]:
    """Network, distances and model parameters of a case, loaded through hubnet."""
    if case.dataset == "CAB":
        data, d, chi, delta = _cab(case.n)
        assert case.alpha is not None
        params = HubModelParams(
            allocation="single" if case.allocation == "single" else "multiple",
            hubs=case.p,
            collection_factor=chi,
            transfer_factor=case.alpha,
            distribution_factor=delta,
            cost_per_unit_km=1.0,
        )
        return data, d, params
    if case.problem == "CSAHLP":
        data, d = _ap(case.n, case.setting)
        return data, d, benchdata.ap_params("single", None, capacitated=True)
    data, d = _ap(case.n)
    return data, d, benchdata.ap_params(case.allocation, case.p)


def baseline_instance(data: NetworkData, d: np.ndarray, params: HubModelParams) -> Instance:
    """The numbers the textbook models need (flows, distances, factors, hubs or costs)."""
    fixed = np.array([s.hub_fixed_cost for s in data.sites], dtype=float)
    cap = None
    if params.capacitated:
        cap = np.array([np.inf if s.sort_capacity is None else s.sort_capacity for s in data.sites])
    return Instance(
        w=data.flow_matrix(),
        d=d,
        chi=params.collection_factor,
        alpha=params.transfer_factor,
        delta=params.distribution_factor,
        rate=params.cost_per_unit_km,
        p=params.hubs,
        fixed=fixed if fixed.any() else None,
        capacity=cap,
    )


def published_table() -> dict[tuple[str, int, str], benchdata.PublishedRow]:
    """Published AP optima keyed by (problem, n, p or CSAHLP setting)."""
    table = {}
    for row in benchdata.published_rows():
        key = row.setting
        m = re.search(r"instance \d+([LT]{2})", row.setting)
        if m:
            key = m.group(1)
        table[row.problem, row.n, key] = row
    return table


def compare_published(out: Outcome, row: benchdata.PublishedRow | None) -> None:
    """Set ``agreement`` against a published value (half a unit of its last digit)."""
    if row is None or out.objective is None:
        return
    out.published = row.objective
    tol = 0.5 * 10 ** (-row.decimals)
    diff = out.objective - row.objective
    if abs(diff) <= tol:
        out.agreement = "match" if not row.best_known_only else "match (best known)"
    elif row.best_known_only and diff < 0:
        out.agreement = "below best known"
    else:
        out.agreement = "MISMATCH"


def same(a: float | None, b: float | None) -> bool:
    """Equal within the relative tolerance ``REL_TOL``."""
    return a is not None and b is not None and abs(a - b) <= REL_TOL * max(abs(a), abs(b), 1.0)


def pin_highs_to_one_thread() -> None:
    """Restart HiGHS's thread pool with one thread (outside any timing).

    HiGHS keeps one thread pool per process, sized by the first run; a later
    run asking for a different thread count fails at once (HiGHS 1.16). A
    run with default threads (two on a 2-core machine) followed by one with
    ``threads=1`` therefore does not solve at all. Starting every timed call
    from a one-thread pool keeps all HiGHS work of this script on one thread.
    """
    try:
        import highspy
    except ImportError:
        return
    from hubnet import _highs

    _highs.silence_highs_banner()
    highspy.Highs.resetGlobalScheduler(True)
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    h.setOptionValue("threads", 1)
    h.addVar(0.0, 1.0)
    h.run()
    # Tell hubnet the pool's size, or a run with ``--threads 2`` would ask a
    # one-thread pool for two threads and its LPs would fail.
    _highs._POOL_THREADS = 1


def run_case(case: Case, args: argparse.Namespace, published: dict) -> Outcome:
    """Solve one case with hubnet and (optionally) the baseline."""
    out = Outcome(case, load=os.getloadavg()[0] if hasattr(os, "getloadavg") else None)
    data, d, params = instance(case)
    opts = SolverParams(
        name=cast(SolverName, args.solver),
        time_limit_s=args.time_limit,
        threads=args.threads,
    )
    pin_highs_to_one_thread()
    start = time.perf_counter()
    try:
        sol = solve_network(data, d, params, opts)
    except Exception as exc:  # recorded and counted; the run goes on
        out.seconds = time.perf_counter() - start
        out.status = "error"
        out.notes.append(f"hubnet {type(exc).__name__}: {exc}")
    else:
        out.seconds = time.perf_counter() - start
        out.solver = sol.stats.solver
        out.status = sol.stats.status
        out.objective = sol.costs["total"]
        out.bound = sol.stats.best_bound
        out.gap = sol.stats.gap
        out.hubs = " ".join(sorted(sol.hub_ids, key=int))
        if sol.objective_check is not None and not same(sol.costs["total"], sol.stats.objective):
            out.notes.append(f"re-priced total differs from solver objective {sol.stats.objective}")
    earlier = args.earlier_baselines.get(case.id) if args.baseline else None
    if earlier is not None and earlier.get("baseline_formulation", "") not in (
        "",
        baseline_name(case.allocation, args.ma_baseline),
    ):
        earlier = None  # measured with the other multiple-allocation model
    if earlier is not None:
        out.base_status = earlier["baseline_status"]
        out.base_seconds = _float(earlier["baseline_s"])
        out.base_objective = _float(earlier["baseline_objective"])
        out.base_variables = int(earlier["baseline_variables"] or 0) or None
        out.base_reused = True
        out.base_solver = earlier.get("baseline_solver", "")
        out.base_formulation = earlier.get("baseline_formulation", "")
    elif args.baseline:
        out.base_solver = pick_solver(cast(SolverName, args.solver), case.allocation)
        res = solve_baseline_bounded(
            baseline_instance(data, d, params),
            case.allocation,
            solver=out.base_solver,
            time_limit=args.time_limit,
            variant=args.ma_baseline,
        )
        out.base_status = res.status
        out.base_seconds = res.seconds if res.status != "skipped" else None
        out.base_objective = res.objective
        out.base_variables = res.variables
        out.base_formulation = res.formulation
        if res.message:
            out.notes.append(f"baseline: {res.message}")
    if case.dataset == "AP":
        key = case.setting if case.problem == "CSAHLP" else str(case.p)
        compare_published(out, published.get((case.problem, case.n, key)))
        if (
            out.status == "optimal"
            and out.base_status == "optimal"
            and not same(out.objective, out.base_objective)
        ):
            out.notes.append(f"baseline optimum {out.base_objective:.2f} differs")
    elif out.status == "optimal" and out.base_status == "optimal":
        out.agreement = "agree" if same(out.objective, out.base_objective) else "DISAGREE"
    return out


def _float(text: str) -> float | None:
    return float(text) if text else None


def _num(value: float | None, fmt: str) -> str:
    return "-" if value is None else format(value, fmt)


HEADER = (
    f"{'instance':<26} {'hubnet_s':>9} {'status':<10} {'objective':>17} {'gap':>9} "
    f"{'baseline_s':>12} {'ratio':>8}  agreement"
)


def line(out: Outcome) -> str:
    """The printed line of one instance."""
    if out.base_status == "skipped":
        base = "skipped: too large"
    elif out.base_status == "time_limit":
        base = f"time limit {_num(out.base_seconds, '.1f')}"
    elif out.base_status == "off":
        base = "-"
    elif out.base_status == "optimal":
        base = _num(out.base_seconds, ".2f")
    else:
        base = f"{out.base_status} {_num(out.base_seconds, '.1f')}"
    if out.base_reused:
        base += "*"
    ratio = out.ratio
    ratio_text = "-" if ratio is None else f"{ratio:.1f}"
    if ratio is not None and out.base_status == "time_limit":
        ratio_text = ">=" + ratio_text
    text = (
        f"{out.case.id:<26} {_num(out.seconds, '.2f'):>9} {out.status:<10} "
        f"{_num(out.objective, '.2f'):>17} {_num(out.gap, '.1e'):>9} {base:>12} "
        f"{ratio_text:>8}  {out.agreement}"
    )
    if out.notes:
        text += "  [" + "; ".join(out.notes) + "]"
    return text


CSV_FIELDS = [
    "instance",
    "group",
    "problem",
    "n",
    "p",
    "alpha",
    "allocation",
    "setting",
    "solver",
    "hubnet_s",
    "hubnet_status",
    "objective",
    "best_bound",
    "gap",
    "hubs",
    "baseline_s",
    "baseline_status",
    "baseline_objective",
    "baseline_variables",
    "baseline_reused",
    "baseline_solver",
    "baseline_formulation",
    "ratio",
    "published",
    "agreement",
    "load1",
    "notes",
]


def csv_row(out: Outcome) -> dict[str, object]:
    """The CSV record of one instance."""
    c = out.case
    return {
        "instance": c.id,
        "group": c.group,
        "problem": c.problem,
        "n": c.n,
        "p": c.p if c.p is not None else "",
        "alpha": c.alpha if c.alpha is not None else "",
        "allocation": c.allocation,
        "setting": c.setting,
        "solver": out.solver,
        "hubnet_s": out.seconds,
        "hubnet_status": out.status,
        "objective": out.objective,
        "best_bound": out.bound,
        "gap": out.gap,
        "hubs": out.hubs,
        "baseline_s": out.base_seconds,
        "baseline_status": out.base_status,
        "baseline_objective": out.base_objective,
        "baseline_variables": out.base_variables,
        "baseline_reused": out.base_reused,
        "baseline_solver": out.base_solver,
        "baseline_formulation": out.base_formulation,
        "ratio": out.ratio,
        "published": out.published,
        "agreement": out.agreement,
        "load1": out.load,
        "notes": "; ".join(out.notes),
    }


def _times(outs: list[Outcome]) -> list[float]:
    return [o.seconds for o in outs if o.seconds is not None]


def summary(outs: list[Outcome]) -> Iterator[str]:
    """Lines of the summary: per-group figures, agreement counts, targets."""
    yield ""
    yield "summary"
    yield (
        f"{'group':<12} {'cases':>5} {'optimal':>7} {'max_s':>8} {'median_s':>9} "
        f"{'base_run':>8} {'base_skip':>9} {'median_ratio':>12}"
    )
    for group in ("CAB", "AP n<=25", "AP n=40-50", "AP n=100"):
        sel = [o for o in outs if o.case.group == group]
        if not sel:
            continue
        times = _times(sel)
        ratios = [r for o in sel if (r := o.ratio) is not None]
        yield (
            f"{group:<12} {len(sel):>5} {sum(o.status == 'optimal' for o in sel):>7} "
            f"{_num(max(times, default=None), '.2f'):>8} "
            f"{_num(statistics.median(times) if times else None, '.2f'):>9} "
            f"{sum(o.base_status in ('optimal', 'time_limit') for o in sel):>8} "
            f"{sum(o.base_status == 'skipped' for o in sel):>9} "
            f"{_num(statistics.median(ratios) if ratios else None, '.1f'):>12}"
        )
    counts: dict[str, int] = {}
    for o in outs:
        counts[o.agreement] = counts.get(o.agreement, 0) + 1
    yield "agreement: " + ", ".join(f"{k} {v}" for k, v in sorted(counts.items()))
    loads = [o.load for o in outs if o.load is not None]
    if loads:
        yield (
            f"machine load (1-min average at each start): median {statistics.median(loads):.1f}, "
            f"max {max(loads):.1f} on {os.cpu_count()} CPUs"
        )
    errors = [o for o in outs if o.status == "error" or o.notes]
    if errors:
        yield f"instances with errors or notes: {len(errors)} (see their lines)"
    yield ""
    yield "targets (2-core machine, model build included)"
    for text, verdict in targets(outs):
        yield f"  {verdict:<8} {text}"


def _time_target(sel: list[Outcome], limit: float) -> tuple[str, str]:
    if not sel:
        return "not run", ""
    slow = [o for o in sel if o.status != "optimal" or (o.seconds or 0.0) > limit]
    times = _times(sel)
    detail = f"{len(sel)} cases, max {max(times):.2f} s, {len(slow)} over or unproven"
    return ("MET" if not slow else "MISSED"), detail


def targets(outs: list[Outcome]) -> list[tuple[str, str]]:
    """Each target of the issue with MET, MISSED or not run."""
    rows: list[tuple[str, str]] = []
    checks: list[tuple[str, Callable[[Case], bool], float]] = [
        ("every CAB case proven optimal in <= 1 s", lambda c: c.dataset == "CAB", 1.0),
        ("every AP case n <= 25 proven optimal in <= 1 s", lambda c: c.group == "AP n<=25", 1.0),
        (
            "every AP case n = 50 proven optimal in <= 30 s",
            lambda c: c.dataset == "AP" and c.n == 50,
            30.0,
        ),
        (
            "every AP case n = 100 proven optimal in <= 120 s",
            lambda c: c.dataset == "AP" and c.n == 100,
            120.0,
        ),
    ]
    for text, pick, limit in checks:
        verdict, detail = _time_target([o for o in outs if pick(o.case)], limit)
        rows.append((f"{text}: {detail}" if detail else text, verdict))
    with_base = [o for o in outs if o.case.n == 25 and o.ratio is not None]
    text = ">= 20x faster than the textbook baseline on every 25-node case"
    if not with_base:
        rows.append((text, "not run"))
    else:
        ratios = [cast(float, o.ratio) for o in with_base]
        low = [o for o in with_base if cast(float, o.ratio) < 20.0]
        detail = (
            f"{len(with_base)} cases, min {min(ratios):.1f}x, "
            f"median {statistics.median(ratios):.1f}x, {len(low)} below 20x"
        )
        rows.append((f"{text}: {detail}", "MET" if not low else "MISSED"))
    return rows


def machine() -> str:
    """CPU count and model, Python and PuLP versions."""
    model = platform.processor() or platform.machine()
    cpuinfo = Path("/proc/cpuinfo")
    if cpuinfo.is_file():
        for text in cpuinfo.read_text().splitlines():
            if text.startswith("model name"):
                model = text.split(":", 1)[1].strip()
                break
    return (
        f"{os.cpu_count()} CPUs ({model}), Python {platform.python_version()}, "
        f"PuLP {pulp.__version__}"
    )


def code_version() -> str:
    """Commit of the imported hubnet's checkout and a digest of its (maybe uncommitted) sources."""
    # The hubnet actually imported (PYTHONPATH may point at another
    # checkout than this script's, e.g. to time an older commit).
    package = Path(hubnet.__file__).resolve().parent
    digest = hashlib.sha256()
    for path in sorted(package.rglob("*.py")):
        digest.update(path.read_bytes())
    try:
        commit = subprocess.run(
            ["git", "-C", str(package), "rev-parse", "--short", "HEAD"],
            capture_output=True,
            text=True,
            check=True,
        ).stdout.strip()
    except (OSError, subprocess.CalledProcessError):
        commit = "unknown"
    return f"commit {commit}, hubnet sources sha256 {digest.hexdigest()[:12]}"


def load_baselines(path: Path) -> dict[str, dict[str, str]]:
    """Baseline figures measured by an earlier run, from its CSV, keyed by instance id."""
    with path.open(newline="") as fh:
        return {
            r["instance"]: r
            for r in csv.DictReader(fh)
            if r["baseline_status"] in ("optimal", "time_limit", "skipped", "infeasible")
        }


def parse_args(argv: list[str] | None = None) -> argparse.Namespace:
    """Command-line options."""
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--only", choices=("cab", "ap", "csahlp"), help="run one family only")
    ap.add_argument("--max-n", type=int, default=None, help="skip instances with more nodes")
    ap.add_argument("--min-n", type=int, default=None, help="skip instances with fewer nodes")
    ap.add_argument("--allocation", choices=ALLOCATIONS, help="run one allocation rule only")
    ap.add_argument(
        "--hubs",
        type=int,
        nargs="+",
        default=None,
        help="run these hub counts only (the capacitated instances, with a free count, drop out)",
    )
    ap.add_argument(
        "--ma-baseline",
        choices=("campbell", "tight"),
        default="campbell",
        help="multiple-allocation baseline: Campbell's path model (default) or the "
        "tightened one (see baseline.py)",
    )
    ap.add_argument(
        "--solver",
        choices=("highs", "cbc", "auto"),
        default="auto",
        help="hubnet's solver; auto lets hubnet pick per allocation rule (default)",
    )
    ap.add_argument(
        "--time-limit", type=float, default=600.0, help="seconds per instance and per run"
    )
    ap.add_argument(
        "--threads",
        type=int,
        default=1,
        help="hubnet's threads: HiGHS's and the processes its hub-set walks are split over "
        "(default 1; the baseline always runs on one)",
    )
    ap.add_argument(
        "--baseline",
        action=argparse.BooleanOptionalAction,
        default=True,
        help="also solve the textbook formulation",
    )
    ap.add_argument("--csv", type=Path, default=None, help="write every figure to this CSV file")
    ap.add_argument(
        "--baseline-csv",
        type=Path,
        action="append",
        default=[],
        help="reuse the baseline figures of an earlier run's CSV instead of re-solving them "
        "(same machine and solver; may be repeated); instances missing there are solved",
    )
    args = ap.parse_args(argv)
    args.earlier_baselines = {}
    for path in args.baseline_csv:
        args.earlier_baselines.update(load_baselines(path))
    return args


def main(argv: list[str] | None = None) -> int:
    """Run the selected instances and print the table and the summary."""
    args = parse_args(argv)
    # Let SIGTERM unwind like Ctrl-C, so a running baseline process is killed with us.
    signal.signal(signal.SIGTERM, lambda *_: sys.exit(143))
    if not (benchdata.BENCH / "published_optima.csv").is_file():
        print(f"benchmark data not found at {benchdata.BENCH}", file=sys.stderr)
        return 2
    selected = cases(args.only, args.max_n, args.min_n, args.allocation, args.hubs)
    published = published_table()
    print(
        f"# {len(selected)} instances; solver {args.solver} (baseline "
        f"{'on the same solver' if args.baseline else 'off'}; multiple-allocation baseline "
        f"{args.ma_baseline}), {args.threads} thread{'s' if args.threads > 1 else ''} for "
        "hubnet, time limit "
        f"{args.time_limit:g} s; {machine()}",
        flush=True,
    )
    print(f"# {code_version()}", flush=True)
    if args.baseline_csv:
        print(
            f"# baseline figures reused from {', '.join(map(str, args.baseline_csv))} "
            f"({len(args.earlier_baselines)} instances; marked *)",
            flush=True,
        )
    print(HEADER, flush=True)
    fh: IO[str] | None = None
    writer = None
    if args.csv is not None:
        fh = args.csv.open("w", newline="")
        writer = csv.DictWriter(fh, fieldnames=CSV_FIELDS)
        writer.writeheader()
    outs: list[Outcome] = []
    try:
        for case in selected:
            out = run_case(case, args, published)
            outs.append(out)
            print(line(out), flush=True)
            if writer is not None and fh is not None:
                writer.writerow(csv_row(out))
                fh.flush()
    finally:
        if fh is not None:
            fh.close()
    for text in summary(outs):
        print(text, flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
