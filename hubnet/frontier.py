"""The cost–time frontier: the cheapest plan, the fastest, and the plans in between.

A faster network costs more (a second hub, a direct lane, fuller use of
fast vehicles). :func:`trace_frontier` shows what each hour of average
transit time costs: it solves

1. the cheapest plan (the freight model minimising cost, no cap on transit
   time);
2. the fastest plan (minimising the volume-weighted transit time, in
   unit-hours; among the fastest plans the solver returns the cheapest);
3. plans of least cost with a cap on the volume-weighted average transit
   time (``freight.max_transit_h``), the caps evenly spaced between the
   average transit times of the two ends,

each into a full run folder ``point-01`` (cheapest), ``point-02`` ...
(caps from the loosest to the tightest), ``point-NN`` (fastest), and writes

* ``frontier.csv``: one row per point (:data:`CSV_COLUMNS`); a point whose
  plan is another's (the same cost and transit time) or is dominated (some
  other plan is no dearer and no slower, and better in one) is kept, with
  ``efficient`` false;
* ``frontier.png``: cost per day against average transit time (matplotlib,
  the Agg renderer: no display needed).

The whole folder is built beside its final place and renamed into it when
complete, as run folders are (:mod:`hubnet.runfolder`): it is never seen
half-written, and an existing one is replaced only when asked. A point
without a plan (a time limit with no plan found) is recorded with its
status and the others go on; when no point has a plan, nothing is written
and the cheapest point's error is raised.

Units: hours, the scenario's currency per day, vehicle-km per day, kg CO2e
per day.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import math
import os
import shutil
import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal

from hubnet.errors import (
    HubnetError,
    InfeasibleError,
    InputError,
    NoSolutionError,
    Problem,
    SolverError,
)

if TYPE_CHECKING:
    from hubnet.api import LoadedScenario
    from hubnet.config import ScenarioConfig
    from hubnet.freight import PlanBook
    from hubnet.solution import Solution

Progress = Callable[[str], None]
PointKind = Literal["cheapest", "fastest", "between"]

FRONTIER_CSV = "frontier.csv"
FRONTIER_PNG = "frontier.png"
#: Fewest points a frontier has (the two ends and three between them).
MIN_POINTS = 5
DEFAULT_POINTS = 6
#: Columns of ``frontier.csv``.
CSV_COLUMNS: tuple[str, ...] = (
    "point",
    "kind",
    "avg_transit_cap_h",
    "total_cost",
    "avg_transit_h",
    "max_transit_h",
    "vehicles",
    "vehicle_km",
    "co2e_kg",
    "hubs",
    "status",
    "gap",
    "run_dir",
    "efficient",
    "note",
)
#: Two plans whose cost and average transit time agree within this relative
#: tolerance (or 1e-6 absolute, near zero) count as the same point.
SAME_POINT_RTOL = 1e-6


def _quiet(_: str) -> None:
    return None


@dataclass(frozen=True, slots=True)
class FrontierPoint:
    """One plan of the frontier, as a row of ``frontier.csv``.

    Attributes
    ----------
    point
        Point number, 1 = cheapest; the run folder is ``point-NN``.
    kind
        ``cheapest``, ``fastest`` or ``between``.
    cap_h
        Cap on the volume-weighted average transit time, hours; ``None`` for
        the two ends.
    status
        ``optimal`` or ``time_limit`` for a plan; ``infeasible``,
        ``no_solution``, ``error`` when the solve failed; ``not_solved``
        when the point could not be placed (an end failed, or the fastest
        plan found is no faster than the cheapest).
    total_cost
        Cost of the plan, currency per day.
    avg_transit_h, max_transit_h
        Volume-weighted average and longest transit time, hours.
    vehicles, vehicle_km, co2e_kg
        Vehicles (dispatches) per day, vehicle-km per day, kg CO2e per day
        on the scenario's emission basis.
    hubs
        Open hub ids.
    gap
        Relative gap of the plan's objective to the solver's bound.
    run_dir
        The run folder, relative to the frontier folder; ``None`` without a
        plan.
    efficient
        On the frontier: a plan, not the same as an earlier point, and no
        other plan is no dearer and no slower while better in one.
    note
        Why a point is not efficient, or why it has no plan; on an efficient
        plan, that it is not proven within :data:`UNPROVEN_GAP` of its least
        cost (empty otherwise).
    """

    point: int
    kind: PointKind
    cap_h: float | None
    status: str
    total_cost: float | None = None
    avg_transit_h: float | None = None
    max_transit_h: float | None = None
    vehicles: float | None = None
    vehicle_km: float | None = None
    co2e_kg: float | None = None
    hubs: tuple[str, ...] = ()
    gap: float | None = None
    run_dir: str | None = None
    efficient: bool = False
    note: str = ""

    @property
    def name(self) -> str:
        """The run folder's name, ``point-NN``."""
        return point_name(self.point)

    @property
    def has_plan(self) -> bool:
        """True when the point has a plan and a run folder."""
        return self.run_dir is not None and self.total_cost is not None

    def row(self) -> dict[str, str]:
        """The point as a ``frontier.csv`` row (text; blank when unknown)."""

        def num(x: float | None) -> str:
            return "" if x is None else repr(float(x))

        def count(x: float | None) -> str:
            """A count as a whole number when it is one (``272``, not ``272.0``)."""
            return "" if x is None else str(int(x)) if float(x).is_integer() else repr(float(x))

        return {
            "point": str(self.point),
            "kind": self.kind,
            "avg_transit_cap_h": num(self.cap_h),
            "total_cost": num(self.total_cost),
            "avg_transit_h": num(self.avg_transit_h),
            "max_transit_h": num(self.max_transit_h),
            "vehicles": count(self.vehicles),
            "vehicle_km": num(self.vehicle_km),
            "co2e_kg": num(self.co2e_kg),
            "hubs": " ".join(self.hubs),
            "status": self.status,
            "gap": num(self.gap),
            "run_dir": self.run_dir or "",
            "efficient": "true" if self.efficient else "false",
            "note": self.note,
        }


@dataclass(frozen=True, eq=False)
class Frontier:
    """What :func:`trace_frontier` wrote.

    Attributes
    ----------
    folder
        The frontier folder.
    points
        Every point, by point number.
    seconds
        Wall time of the whole frontier, seconds.
    """

    folder: Path
    points: tuple[FrontierPoint, ...]
    seconds: float

    @property
    def efficient(self) -> list[FrontierPoint]:
        """The efficient points, from the slowest (cheapest) to the fastest."""
        return sorted(
            (p for p in self.points if p.efficient),
            key=lambda p: (-(p.avg_transit_h or 0.0), p.total_cost or 0.0),
        )

    @property
    def failed(self) -> list[FrontierPoint]:
        """Points without a plan."""
        return [p for p in self.points if not p.has_plan]


def point_name(point: int) -> str:
    """Run folder name of a point: ``point-01``."""
    return f"point-{point:02d}"


def between_caps(cheapest_h: float, fastest_h: float, points: int) -> list[float]:
    """Caps of the points between the two ends, from the loosest to the tightest.

    Parameters
    ----------
    cheapest_h, fastest_h
        Average transit times of the cheapest and of the fastest plan, hours.
    points
        Points in total, the two ends included.

    Returns
    -------
    list of float
        ``points - 2`` caps, evenly spaced strictly between the two ends.

    Examples
    --------
    >>> between_caps(30.0, 20.0, 6)
    [28.0, 26.0, 24.0, 22.0]
    """
    span = cheapest_h - fastest_h
    steps = points - 1
    return [fastest_h + span * (steps - k) / steps for k in range(1, steps)]


# --------------------------------------------------------------------------
# Tracing
# --------------------------------------------------------------------------


def trace_frontier(
    config: str | Path | ScenarioConfig | LoadedScenario,
    out_dir: str | Path,
    points: int = DEFAULT_POINTS,
    force: bool = False,
    progress: Progress = _quiet,
    *,
    overrides: Mapping[str, Any] | None = None,
) -> Frontier:
    """Solve the cheapest, the fastest and the plans between; write the frontier folder.

    Parameters
    ----------
    config
        A freight scenario: a config file, a config, or a loaded scenario
        (then without ``overrides``). Its ``freight.minimise`` and
        ``freight.max_transit_h`` are set point by point.
    out_dir
        The frontier folder to create (``point-NN`` run folders,
        ``frontier.csv``, ``frontier.png``).
    points
        Points in total, at least :data:`MIN_POINTS`: the two ends and
        ``points - 2`` capped plans between them.
    force
        Replace an existing frontier folder (the new one is complete before
        the old one goes).
    progress
        Called with one-line messages: a line as each point starts and one
        with its result; the solver's own lines, prefixed ``point-NN:``.
    overrides
        Nested config overrides applied to every point (for example
        ``{"solver": {"time_limit_s": 60}}``: the limit is per point).

    Returns
    -------
    Frontier
        The points and the folder written.

    Raises
    ------
    InputError
        When ``points`` is below :data:`MIN_POINTS`, the config or inputs
        are invalid, or the scenario is not a freight scenario (no
        ``inputs.vehicles``). Nothing is solved.
    OutputExistsError
        When ``out_dir`` exists and ``force`` is false, or it is not a
        frontier folder (nothing is solved).
    InfeasibleError, NoSolutionError, SolverError
        When no point has a plan (the cheapest point's error); nothing is
        written.
    """
    t0 = time.perf_counter()
    out = Path(out_dir)
    if points < MIN_POINTS:
        raise InputError(
            Problem(
                "frontier",
                None,
                "points",
                f"a frontier needs at least {MIN_POINTS} points (the two ends and "
                f"{MIN_POINTS - 2} between them), got {points}",
            )
        )
    preflight_frontier(out, force)
    scenario = _load_freight(config, overrides)
    cfg = scenario.config
    if cfg.freight.max_transit_h is not None or cfg.freight.minimise != "cost":
        progress(
            "the config's freight.max_transit_h and freight.minimise are not used: "
            "the frontier sets them for each point"
        )
    out.absolute().parent.mkdir(parents=True, exist_ok=True)
    from hubnet.runfolder import _make_sibling_dir

    tmp = _make_sibling_dir(out, "tmp")
    try:
        found = _solve_points(scenario, tmp, points, progress)
        if not any(p.has_plan for p in found.values()):
            raise found_error(found)
        marked = mark_efficient([found[k] for k in sorted(found)])
        _write_file(tmp / FRONTIER_CSV, frontier_csv(marked).encode())
        _write_file(tmp / FRONTIER_PNG, frontier_png(marked, title=cfg.name))
        _finish(tmp, out, force)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    done = Frontier(out, tuple(marked), time.perf_counter() - t0)
    unsure = [p for p in done.efficient if _unproven(p)]
    progress(
        f"frontier of {cfg.name}: {len(done.efficient)} efficient points of {points}"
        + (f", {len(done.failed)} without a plan" if done.failed else "")
        + (
            f"; {len(unsure)} of them not proven within {100 * UNPROVEN_GAP:.0f} % of their "
            "least cost (a longer --time-limit may find cheaper plans)"
            if unsure
            else ""
        )
    )
    return done


def _load_freight(
    config: str | Path | ScenarioConfig | LoadedScenario, overrides: Mapping[str, Any] | None
) -> LoadedScenario:
    """Load and check the scenario once; every point solves the same inputs."""
    from hubnet.api import LoadedScenario, load_scenario
    from hubnet.config import ScenarioConfig, load_config

    if isinstance(config, LoadedScenario | ScenarioConfig):
        if overrides:
            raise ValueError("overrides need a config file; edit a loaded config instead")
        cfg = config.config if isinstance(config, LoadedScenario) else config
    else:
        cfg = load_config(config, overrides)
    # a scenario loaded in Python may carry vehicle classes without the config key
    freight = (
        bool(config.data.vehicles)
        if isinstance(config, LoadedScenario)
        else cfg.inputs.vehicles is not None
    )
    if not freight:
        file = str(cfg.source) if cfg.source is not None else "config"
        raise InputError(
            Problem(
                file,
                None,
                "inputs.vehicles",
                "the cost-time frontier trades cost against transit time, which needs "
                "the freight model: name a vehicle classes table (inputs.vehicles)",
            )
        )
    if isinstance(config, LoadedScenario):
        return config
    return load_scenario(cfg)


def _point_scenario(
    scenario: LoadedScenario, minimise: Literal["cost", "transit"], cap: float | None
) -> LoadedScenario:
    from hubnet.api import LoadedScenario

    cfg = scenario.config
    freight = dataclasses.replace(cfg.freight, minimise=minimise, max_transit_h=cap)
    point_cfg = dataclasses.replace(cfg, freight=freight)
    return LoadedScenario(point_cfg, scenario.data, scenario.distances)


def _solve_points(
    scenario: LoadedScenario, tmp: Path, points: int, progress: Progress
) -> dict[int, FrontierPoint | _Failed]:
    """Solve the ends, then the capped points, into run folders under ``tmp``.

    The points share one :class:`~hubnet.freight.PlanBook`: each capped
    point keeps the cheapest earlier plan that meets its cap (the fastest
    plan meets them all) in case its own solve finds nothing better.
    """
    from hubnet.freight import PlanBook

    total = points
    book = PlanBook()

    def one(number: int, kind: PointKind, cap: float | None) -> FrontierPoint | _Failed:
        what = kind if cap is None else f"average transit at most {cap:.3f} h"
        progress(f"point {number}/{total} ({what}): solving")
        minimise: Literal["cost", "transit"] = "transit" if kind == "fastest" else "cost"
        result = _solve_point(
            _point_scenario(scenario, minimise, cap), tmp, number, kind, cap, progress, book
        )
        if isinstance(result, _Failed):
            progress(f"point {number}/{total} ({kind}): no plan: {result.status}: {result.line}")
        else:
            progress(
                f"point {number}/{total} ({kind}): {result.status}, cost "
                f"{result.total_cost:,.2f} per day, average transit {result.avg_transit_h:.3f} h, "
                f"{len(result.hubs)} hubs ({' '.join(result.hubs)})"
            )
        return result

    found: dict[int, FrontierPoint | _Failed] = {}
    found[1] = one(1, "cheapest", None)
    found[total] = one(total, "fastest", None)
    cheap, fast = found[1], found[total]
    numbers = range(2, total)
    if isinstance(cheap, _Failed) or isinstance(fast, _Failed):
        end = "cheapest" if isinstance(cheap, _Failed) else "fastest"
        for k in numbers:
            found[k] = _Failed(k, "between", None, "not_solved", f"the {end} plan was not found")
        return found
    assert cheap.avg_transit_h is not None and fast.avg_transit_h is not None
    if cheap.avg_transit_h - fast.avg_transit_h <= _tolerance(cheap.avg_transit_h):
        why = "the fastest plan found is no faster than the cheapest: no time to buy"
        progress(why)
        for k in numbers:
            found[k] = _Failed(k, "between", None, "not_solved", why)
        return found
    caps = between_caps(cheap.avg_transit_h, fast.avg_transit_h, total)
    for k, cap in zip(numbers, caps, strict=True):
        found[k] = one(k, "between", cap)
    return found


@dataclass(frozen=True, slots=True)
class _Failed:
    """A point without a plan, and the error that stopped it."""

    point: int
    kind: PointKind
    cap_h: float | None
    status: str
    message: str
    error: HubnetError | None = None

    @property
    def line(self) -> str:
        return self.message.splitlines()[0] if self.message else ""

    @property
    def has_plan(self) -> bool:
        return False

    def as_point(self) -> FrontierPoint:
        return FrontierPoint(
            point=self.point, kind=self.kind, cap_h=self.cap_h, status=self.status, note=self.line
        )


_FAILURES: tuple[tuple[type[HubnetError], str], ...] = (
    (InfeasibleError, "infeasible"),
    (NoSolutionError, "no_solution"),
    (SolverError, "error"),
)


def _solve_point(
    scenario: LoadedScenario,
    tmp: Path,
    number: int,
    kind: PointKind,
    cap: float | None,
    progress: Progress,
    book: PlanBook,
) -> FrontierPoint | _Failed:
    from hubnet.api import run_scenario

    name = point_name(number)

    def say(message: str) -> None:
        progress(f"{name}: {message}")

    try:
        sol, _ = run_scenario(
            scenario,
            tmp / name,
            progress=say,
            extra_files={"run.json": _run_json(scenario, kind, cap)},
            book=book,
        )
    except (InfeasibleError, NoSolutionError, SolverError) as err:
        status = next(s for cls, s in _FAILURES if isinstance(err, cls))
        return _Failed(number, kind, cap, status, str(err), err)
    return _point_of(sol, number, kind, cap, name)


def _run_json(scenario: LoadedScenario, kind: PointKind, cap: float | None) -> str:
    """The point's ``run.json``: what went into it, with the frontier's settings."""
    import json
    import uuid

    from hubnet.history import run_info

    fp = scenario.config.freight
    point_overrides = {"freight": {"minimise": fp.minimise, "max_transit_h": cap}}
    info = run_info(run_id=uuid.uuid4().hex, config=scenario.config, overrides=point_overrides)
    info["frontier_point"] = {"kind": kind, "avg_transit_cap_h": cap, "minimise": fp.minimise}
    return json.dumps(info, indent=2, ensure_ascii=False, default=str) + "\n"


def _figure(sol: Solution, key: str) -> float | None:
    value = sol.freight.get(key)
    return float(value) if isinstance(value, int | float) else None


def _point_of(
    sol: Solution, number: int, kind: PointKind, cap: float | None, name: str
) -> FrontierPoint:
    return FrontierPoint(
        point=number,
        kind=kind,
        cap_h=cap,
        status=sol.stats.status,
        total_cost=float(sol.costs["total"]),
        avg_transit_h=_figure(sol, "avg_transit_h"),
        max_transit_h=_figure(sol, "max_transit_h"),
        vehicles=_figure(sol, "vehicles"),
        vehicle_km=_figure(sol, "vehicle_km"),
        co2e_kg=_figure(sol, "co2e_kg"),
        hubs=tuple(sol.hub_ids),
        gap=sol.stats.gap,
        run_dir=name,
    )


def found_error(found: Mapping[int, FrontierPoint | _Failed]) -> HubnetError:
    """The error to raise when no point has a plan: the cheapest point's."""
    first = found[min(found)]
    if isinstance(first, _Failed) and first.error is not None:
        return first.error
    return SolverError("no point of the frontier has a plan")


# --------------------------------------------------------------------------
# Efficient points
# --------------------------------------------------------------------------


def _tolerance(x: float) -> float:
    return SAME_POINT_RTOL * max(1.0, abs(x))


#: A plan whose proven gap is above this share is flagged as unproven in its
#: note, in the chart and at the end of the run: at a short time limit a
#: capped point can stop many times dearer than its least cost (a trial at
#: 20 s a point: gaps of 92-93 %), and a frontier drawn through it misleads.
UNPROVEN_GAP = 0.05


def _unproven(p: FrontierPoint) -> bool:
    """Whether a plan is far from proven: gap above :data:`UNPROVEN_GAP`, or none known."""
    if not p.has_plan or p.status == "optimal":
        return False
    return p.gap is None or p.gap > UNPROVEN_GAP


def _unproven_note(p: FrontierPoint) -> str:
    """The note of an efficient plan: empty, or why its place on the frontier is unsure."""
    if not _unproven(p):
        return ""
    gap = "unknown" if p.gap is None else f"{100 * p.gap:.3g} %"
    return (
        f"not proven: gap to the least cost for this point {gap}; a cheaper plan may "
        "exist (give a longer --time-limit)"
    )


def mark_efficient(found: Sequence[FrontierPoint | _Failed]) -> list[FrontierPoint]:
    """Mark each point efficient or not, with a note saying why not.

    A point is not efficient when it has no plan, when an earlier point
    (the ends first) has the same cost and average transit time within
    :data:`SAME_POINT_RTOL`, or when another plan is no dearer and no
    slower and better in one of the two.

    Parameters
    ----------
    found
        The points, in point order.

    Returns
    -------
    list of FrontierPoint
        The points, in point order, with ``efficient`` and ``note`` set.
    """
    rows = [p.as_point() if isinstance(p, _Failed) else p for p in found]
    plans = [p for p in rows if p.has_plan]
    rank = {"cheapest": 0, "fastest": 1, "between": 2}
    plans.sort(key=lambda p: (rank[p.kind], p.point))
    out: dict[int, FrontierPoint] = {p.point: p for p in rows}
    kept: list[FrontierPoint] = []
    for p in plans:
        assert p.total_cost is not None and p.avg_transit_h is not None
        note = ""
        for q in plans:
            if q is p:
                continue
            assert q.total_cost is not None and q.avg_transit_h is not None
            tc, tt = _tolerance(p.total_cost), _tolerance(p.avg_transit_h)
            same_cost = abs(q.total_cost - p.total_cost) <= tc
            same_time = abs(q.avg_transit_h - p.avg_transit_h) <= tt
            if same_cost and same_time:
                if q in kept:
                    note = f"the same cost and transit time as {q.name}"
                    break
                continue
            if q.total_cost <= p.total_cost + tc and q.avg_transit_h <= p.avg_transit_h + tt:
                note = f"dominated by {q.name}: no dearer and no slower"
                if p.gap:  # a plan proven only within a gap may lose to a capped one
                    within = f"{100 * p.gap:.3g} %"
                    note += f" (this plan is proven only within {within} of its least cost)"
                break
        if note:
            out[p.point] = dataclasses.replace(p, efficient=False, note=note)
        else:
            kept.append(p)
            out[p.point] = dataclasses.replace(p, efficient=True, note=_unproven_note(p))
    return [out[k] for k in sorted(out)]


# --------------------------------------------------------------------------
# Files
# --------------------------------------------------------------------------


def frontier_csv(points: Sequence[FrontierPoint]) -> str:
    """The text of ``frontier.csv`` (UTF-8, LF line ends, :data:`CSV_COLUMNS`)."""
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=list(CSV_COLUMNS), lineterminator="\n")
    writer.writeheader()
    for p in points:
        writer.writerow(p.row())
    return buf.getvalue()


def frontier_png(points: Sequence[FrontierPoint], *, title: str = "") -> bytes:
    """The frontier chart as PNG bytes: cost per day against average transit time.

    Drawn with matplotlib's Agg renderer on a figure of its own (pyplot's
    global state and the notebook's backend are left alone). Efficient
    points are joined by a line and labelled with their number, the two
    ends also by name; the others are hollow grey circles.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.5, 4.8), dpi=120)
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    plans = [p for p in points if p.has_plan]
    good = sorted(
        (p for p in plans if p.efficient),
        key=lambda p: (-(p.avg_transit_h or 0.0), p.total_cost or 0.0),
    )
    others = [p for p in plans if not p.efficient]
    if good:
        ax.plot(
            [p.avg_transit_h or 0.0 for p in good],
            [p.total_cost or 0.0 for p in good],
            "-o",
            color="#0072B2",
            markersize=6,
            label="efficient plans",
        )
    if others:
        ax.plot(
            [p.avg_transit_h or 0.0 for p in others],
            [p.total_cost or 0.0 for p in others],
            "o",
            markerfacecolor="white",
            markeredgecolor="#9aa0a6",
            linestyle="none",
            label="same or dominated",
        )
    for p in plans:
        text = str(p.point)
        if p.kind != "between":
            text += f" {p.kind}"
        if p.efficient and _unproven(p):
            text += " (not proven)"
        ax.annotate(
            text,
            (p.avg_transit_h or 0.0, p.total_cost or 0.0),
            textcoords="offset points",
            xytext=(6, 6),
            fontsize=9,
            color="#1a1a1a" if p.efficient else "#9aa0a6",
        )
    ax.margins(x=0.1, y=0.1)
    ax.set_xlabel("average transit time, hours (volume-weighted; faster to the right)")
    ax.set_ylabel("cost per day")
    ax.invert_xaxis()  # faster to the right: cost rises as time is bought
    ax.grid(True, color="#e3e6ea")
    ax.ticklabel_format(axis="y", style="plain", useOffset=False)
    ax.yaxis.set_major_formatter("{x:,.0f}")
    ax.set_title(f"Cost–time frontier{f': {title}' if title else ''}", fontsize=11)
    if plans:
        ax.legend(loc="best", fontsize=8, frameon=False)
    else:
        ax.text(0.5, 0.5, "no plan", transform=ax.transAxes, ha="center")
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png")
    return buf.getvalue()


def preflight_frontier(out_dir: Path, force: bool) -> None:
    """Check that a frontier folder can be written, before anything is solved.

    The run-folder check (:func:`hubnet.runfolder.preflight`), with
    ``frontier.csv`` as the file that marks a folder hubnet may replace.
    """
    from hubnet.runfolder import preflight

    preflight(out_dir, force, kind="frontier folder", marker=FRONTIER_CSV)


def _write_file(path: Path, data: bytes) -> None:
    with open(path, "xb") as fh:
        fh.write(data)
        fh.flush()
        os.fsync(fh.fileno())


def _finish(tmp: Path, out: Path, force: bool) -> None:
    """Rename the complete folder ``tmp`` to ``out``; an old ``out`` goes only afterwards."""
    from hubnet.runfolder import _fsync_dir, _sibling_name

    _fsync_dir(tmp)
    preflight_frontier(out, force)  # again: the folder may have appeared meanwhile
    if not os.path.lexists(out):
        os.rename(tmp, out)
        _fsync_dir(tmp.parent)
        return
    aside = _sibling_name(out, "old")
    os.rename(out, aside)
    try:
        os.rename(tmp, out)
    except BaseException:
        os.rename(aside, out)
        raise
    _fsync_dir(tmp.parent)
    shutil.rmtree(aside, ignore_errors=True)


# --------------------------------------------------------------------------
# Reading a frontier folder back (for the report)
# --------------------------------------------------------------------------


def is_frontier_folder(folder: str | Path) -> bool:
    """True when ``folder`` holds a ``frontier.csv``."""
    return (Path(folder) / FRONTIER_CSV).is_file()


def read_frontier(folder: str | Path) -> list[dict[str, str]]:
    """The rows of a frontier folder's ``frontier.csv``, as text.

    Raises
    ------
    InputError
        When the file is missing, unreadable or lacks the columns the report
        needs.
    """
    path = Path(folder) / FRONTIER_CSV
    try:
        with open(path, encoding="utf-8", newline="") as fh:
            rows = list(csv.DictReader(fh))
            columns = set(rows[0]) if rows else set()
    except (OSError, UnicodeDecodeError, csv.Error) as err:
        raise InputError(Problem(str(path), None, None, f"cannot read: {err}")) from err
    missing = {"point", "kind", "total_cost", "avg_transit_h", "efficient", "run_dir"} - columns
    if rows and missing:
        raise InputError(
            Problem(str(path), 1, None, f"missing columns: {', '.join(sorted(missing))}")
        )
    return rows


def report_run_dirs(run_dirs: Sequence[str | Path]) -> list[Path]:
    """Run folders for the report, a frontier folder replaced by its efficient points.

    A frontier folder (one with ``frontier.csv`` and no ``summary.json``)
    stands for its efficient points' run folders, the cheapest first; other
    folders are kept as given.
    """
    out: list[Path] = []
    for d in run_dirs:
        folder = Path(d)
        if not is_frontier_folder(folder) or (folder / "summary.json").is_file():
            out.append(folder)
            continue
        rows = [
            r for r in read_frontier(folder) if r.get("efficient") == "true" and r.get("run_dir")
        ]
        rows.sort(key=lambda r: (-(_num(r.get("avg_transit_h")) or 0.0), r.get("point", "")))
        points = [folder / r["run_dir"] for r in rows]
        if not points:
            raise InputError(
                Problem(str(folder / FRONTIER_CSV), None, None, "no efficient point with a plan")
            )
        out += [p for p in points if p not in out]
    return out


def _num(text: str | None) -> float | None:
    try:
        x = float(text) if text not in (None, "") else None
    except ValueError:
        return None
    return x if x is not None and math.isfinite(x) else None


def frontier_section(run_folders: Sequence[Path]) -> str:
    """The report's frontier section for runs that sit in frontier folders; ``""`` if none.

    One chart (:func:`hubnet.report.charts.frontier_plot`) per frontier
    folder that holds one of the runs, the report's runs drawn in their
    colours.
    """
    from hubnet.report.charts import frontier_plot
    from hubnet.report.fmt import esc, fmt_num

    where: dict[Path, list[tuple[int, str]]] = {}
    for i, run in enumerate(run_folders):
        parent = Path(run).absolute().parent
        if is_frontier_folder(parent):
            where.setdefault(parent, []).append((i, Path(run).name))
    if not where:
        return ""
    parts = [
        "<h2 id='frontier'>Cost–time frontier</h2><p class='note'>Plans of least cost for "
        "caps on the volume-weighted average transit time, from the cheapest plan to the "
        "fastest (hubnet frontier). A point joined by the line is efficient: no other plan "
        "is both cheaper and faster. Runs of this report are drawn in their colours.</p>"
    ]
    for folder, runs in where.items():
        try:
            every = read_frontier(folder)
            rows = [r for r in every if _num(r.get("total_cost")) is not None]
        except InputError as err:
            parts.append(f"<p class='note'>No frontier chart for {esc(folder)}: {esc(err)}</p>")
            continue
        index = {name: i for i, name in runs}
        chart = frontier_plot(
            [_num(r.get("avg_transit_h")) or math.nan for r in rows],
            [_num(r.get("total_cost")) or math.nan for r in rows],
            [r.get("point", "") for r in rows],
            [r.get("efficient") == "true" for r in rows],
            title=f"Cost–time frontier of {folder.name}",
            names=[r.get("kind", "") if r.get("kind") != "between" else "" for r in rows],
            series=[index.get(r.get("run_dir", "")) for r in rows],
        )

        def item(r: Mapping[str, str]) -> str:
            head = f"point {esc(r.get('point'))} ({esc(r.get('kind'))})"
            if _num(r.get("total_cost")) is None:  # no plan: say so, and why
                return f"<li>{head}: no plan — {esc(r.get('note') or r.get('status'))}</li>"
            note = r.get("note") or ("" if r.get("efficient") == "true" else "not on it")
            return (
                f"<li>{head}: cost {esc(fmt_num(_num(r.get('total_cost'))))} per day, average "
                f"transit {esc(fmt_num(_num(r.get('avg_transit_h'))))} h"
                + (f" — {esc(note)}" if note else "")
                + "</li>"
            )

        listed = "".join(item(r) for r in every)
        parts.append(
            f"<figure><h3>{esc(folder.name)}</h3>{chart}<figcaption><ul>{listed}</ul>"
            f"<div class='folder'>{esc(folder)}</div></figcaption></figure>"
        )
    return "".join(parts)
