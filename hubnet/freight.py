"""The freight model: hubs, single allocation, direct lanes and whole vehicles on every leg.

The classic model prices a unit of volume per km; a carrier pays per
vehicle. This model chooses, in one MILP (PuLP, solved by HiGHS or CBC):

* the hubs (binary ``x[k, k]``) and the hub of every terminal (binary
  ``x[i, k]``, single allocation as carriers run their networks);
* which share of each OD pair's volume runs on a direct lane between the
  two terminals (``direct[i, j]`` in [0, 1], on lanes whose volume could
  justify a vehicle);
* the trunk flows between hubs, per origin (``trunk[i, k, l]``), as in the
  flow formulation of Ernst and Krishnamoorthy (1996), with at most one
  trunk leg per unit;
* the number of dispatches of every vehicle class on every feeder, trunk
  and direct leg (``vehicles[tier, a, b, c, direction]``, integer), whose payloads must
  cover the volume in each direction. A dispatch is a round trip: the two
  directions of a leg share the vehicles and an empty return is paid
  (``round_trips = false`` prices one-way runs instead).

Costs per day: hub fixed costs, handling per unit at every hub passed, and
per dispatch the class's fixed cost plus, for each run, km cost + hours on
the road x hourly cost + relays + a second driver where the drivers' hours
need one (+ carbon price x CO2e, + value of time x unit-hours, optional).

Time: a run takes its class's driving time (the class's average speed)
plus the breaks and relays the drivers'-hours rules impose, and a leg
takes the time of the slowest class the plan runs on it. Where a lane's
classes differ in hours they make speed levels (each: the classes within
some hours in each direction, from the quickest class alone to all), and
a binary per level says which one the lane uses; a class runs only at
levels that include it. A unit's transit time is the sum of its legs' times plus the sort
time at every hub it passes. An OD pair's volume may only use paths that
reach the destination within its allowance (cut-off to delivery
deadline): paths late even on their legs' fastest classes are ruled out
on the allocations, and a path late only at some levels gets a row that
forbids those levels together with the two allocations. Pairs that
cannot make it on any path are named before any solving.

With one class of payload 1, fractional vehicles, one-way runs, no fixed
or hourly costs and the classic km cost factors, the model is the single
allocation flow formulation of Ernst and Krishnamoorthy (1996) and returns
the classic optima (tests/test_freight.py).
"""

from __future__ import annotations

import dataclasses
import itertools
import math
import time
from collections import defaultdict
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import cast

import numpy as np
import pulp

from hubnet.config import HubModelParams, SolverParams
from hubnet.data import DistanceMatrix, NetworkData
from hubnet.emissions import load_fuels
from hubnet.errors import InfeasibleError, InputError, NoSolutionError, Problem, SolverError
from hubnet.fleet import TIERS, FreightParams, Tier, VehicleClass
from hubnet.hours import load_rules, time_legs
from hubnet.model import (
    HubModel,
    check_plan_possible,
    check_start_hubs,
    sort_capacities,
    start_misfit,
)
from hubnet.solution import Leg, Route, Solution, SolveStats, hub_records

#: Transit times within this many hours of the allowance count as on time.
TIME_TOLERANCE_H = 1e-6
#: Roles of a run for the classic km cost factors.
_COLLECT, _TRANSFER, _DISTRIBUTE, _DIRECT = 0, 1, 2, 3


# --------------------------------------------------------------------------
# Leg tables: one run of each class on each directed leg
# --------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class LegTables:
    """Figures of one one-way run of every vehicle class on every directed leg.

    Arrays are ``(C, n, n)`` (class, from site, to site) unless noted.

    Attributes
    ----------
    classes
        The vehicle classes, in index order.
    km
        ``(n, n)`` leg distances, km.
    drive_h
        Driving hours of one run.
    transit_h
        Hours from departure to arrival: driving, breaks and relays.
    relays, drivers
        Driver changes on the run, and drivers on board (1 or 2).
    allowed
        False where the drivers'-hours rules forbid the run.
    km_cost
        ``km x cost_per_km`` of one run, currency.
    other_cost
        Hours on the road x cost per hour, relays, second driver and carbon
        price of one run, currency.
    co2e_ttw_kg, co2e_wtw_kg
        CO2e of one run, kg (tank-to-wheel, well-to-wheel).
    payload
        ``(C,)`` units one vehicle carries (weight and cubic limits applied).
    binding
        Per class, the binding payload limit: ``units``, ``kg`` or ``m3``.
    rules
        Name of the drivers'-hours rule set.
    """

    classes: tuple[VehicleClass, ...]
    km: np.ndarray
    drive_h: np.ndarray
    transit_h: np.ndarray
    relays: np.ndarray
    drivers: np.ndarray
    allowed: np.ndarray
    km_cost: np.ndarray
    other_cost: np.ndarray
    co2e_ttw_kg: np.ndarray
    co2e_wtw_kg: np.ndarray
    payload: np.ndarray
    binding: tuple[str, ...]
    rules: str

    def on_tier(self, c: int, tier: Tier) -> bool:
        """True when class ``c`` may run legs of ``tier``."""
        return tier in self.classes[c].tiers

    def lane_classes(self, tier: Tier, a: int, b: int, both: bool) -> list[int]:
        """Classes that may run ``a -> b`` on ``tier`` (and back, when ``both``)."""
        return [
            c
            for c in range(len(self.classes))
            if self.on_tier(c, tier)
            and self.allowed[c, a, b]
            and (not both or self.allowed[c, b, a])
        ]

    def timetable(self, tier: Tier, both: bool, *, fastest: bool = False) -> np.ndarray:
        """``(n, n)`` timetable hours of each directed leg on ``tier``: its slowest class.

        With ``fastest``, its fastest class instead (what the leg would take
        if only that class ran it). ``inf`` where no class may run the leg.
        """
        n = self.km.shape[0]
        out = np.full((n, n), np.inf if fastest else -np.inf)
        pick = np.minimum if fastest else np.maximum
        for c in range(len(self.classes)):
            if not self.on_tier(c, tier):
                continue
            ok = self.allowed[c] & (self.allowed[c].T if both else True)
            out = np.where(ok, pick(out, self.transit_h[c]), out)
        out[out == -np.inf] = np.inf
        np.fill_diagonal(out, 0.0)
        return out


def leg_tables(data: NetworkData, distances: DistanceMatrix, fp: FreightParams) -> LegTables:
    """Time, cost and CO2e of one run of every class on every directed leg.

    Drive time is ``km / speed_kmh``; with a user matrix that has hours, the
    larger of that and the matrix hours (a vehicle is not faster than the
    routing engine's time, nor than its own average speed).

    Raises
    ------
    InputError
        When the drivers'-hours rule file or a fuel is unknown.
    """
    rules = load_rules(fp.hours.rules)
    fuels = dict(data.fuels) if data.fuels else load_fuels()
    km = np.asarray(distances.km, dtype=float)
    n = km.shape[0]
    classes = data.vehicles
    count = len(classes)
    shape = (count, n, n)
    drive = np.zeros(shape)
    transit = np.zeros(shape)
    relays = np.zeros(shape, dtype=int)
    drivers = np.ones(shape, dtype=int)
    allowed = np.ones(shape, dtype=bool)
    relay_h = fp.hours.relay_minutes / 60.0
    problems = []
    for c, v in enumerate(classes):
        if v.fuel not in fuels:
            problems.append(
                Problem("vehicles", None, "fuel", f"vehicle {v.id!r}: unknown fuel {v.fuel!r}")
            )
        hours = km / v.speed_kmh
        if distances.hours is not None:
            hours = np.maximum(hours, distances.hours)
        drive[c] = hours
        timed = time_legs(hours, rules, fp.hours.long_legs, relay_h)
        transit[c], relays[c], drivers[c], allowed[c] = (
            timed.transit_h,
            timed.relays,
            timed.drivers,
            timed.allowed,
        )
        np.fill_diagonal(allowed[c], True)
        np.fill_diagonal(transit[c], 0.0)
    if problems:
        raise InputError(problems)
    km_cost = np.stack([km * v.cost_per_km for v in classes])
    litres = np.stack([km * v.fuel_l_per_100km / 100.0 for v in classes])
    ttw = np.stack([litres[c] * fuels[v.fuel].ttw_kg_per_l for c, v in enumerate(classes)])
    wtw = np.stack([litres[c] * fuels[v.fuel].wtw_kg_per_l for c, v in enumerate(classes)])
    basis = wtw if fp.emissions_basis == "wtw" else ttw
    other = np.zeros(shape)
    transit = np.where(allowed, transit, np.inf)  # a forbidden run is never timed
    on_road = np.where(allowed, transit, 0.0)
    for c, v in enumerate(classes):
        other[c] = (
            on_road[c] * v.cost_per_hour
            + relays[c] * fp.hours.relay_cost
            + (drivers[c] - 1) * on_road[c] * fp.hours.second_driver_cost_per_hour
            + basis[c] / 1000.0 * fp.carbon_price_per_t
        )
    pay = [v.effective_payload(fp.kg_per_unit, fp.m3_per_unit) for v in classes]
    return LegTables(
        classes=classes,
        km=km,
        drive_h=drive,
        transit_h=transit,
        relays=relays,
        drivers=drivers,
        allowed=allowed,
        km_cost=km_cost,
        other_cost=other,
        co2e_ttw_kg=ttw,
        co2e_wtw_kg=wtw,
        payload=np.array([p for p, _ in pay]),
        binding=tuple(b for _, b in pay),
        rules=rules.name,
    )


# --------------------------------------------------------------------------
# Service: allowances and sort times
# --------------------------------------------------------------------------


def allowances(data: NetworkData, fp: FreightParams) -> np.ndarray:
    """``(n, n)`` hours allowed from the origin's cut-off to the destination's deadline.

    Demand rows with ``max_hours`` override the pair's allowance.
    """
    svc = fp.service
    cut = np.array([svc.cutoff_h if s.cutoff_h is None else s.cutoff_h for s in data.sites])
    due = np.array(
        [svc.deliver_by_h if s.deliver_by_h is None else s.deliver_by_h for s in data.sites]
    )
    gap = (due[None, :] - cut[:, None]) % 24.0
    gap[gap == 0.0] = 24.0
    out = gap + 24.0 * (svc.days - 1)
    for d in data.demand:
        if d.max_hours is not None:
            out[data.index(d.origin), data.index(d.destination)] = d.max_hours
    return out


def sort_hours(data: NetworkData, fp: FreightParams) -> np.ndarray:
    """``(n,)`` hours a unit spends in each site's sort when it is a hub."""
    default = fp.service.sort_hours
    return np.array([default if s.sort_hours is None else s.sort_hours for s in data.sites])


# --------------------------------------------------------------------------
# The MILP
# --------------------------------------------------------------------------

#: ``(tier, a, b, class, direction)``: a feeder leg has ``a`` = terminal and ``b`` =
#: hub; direction 0 is the run ``a -> b`` (with its return, for round trips),
#: direction 1 the one-way run ``b -> a``.
LaneKey = tuple[str, int, int, int, int]


@dataclass(eq=False)
class FreightModel(HubModel):
    """The freight MILP and handles to read the plan back.

    Attributes
    ----------
    direct
        ``direct[(i, j)]``: share of OD (i, j) on the direct lane.
    vehicles
        ``vehicles[(tier, a, b, c)]``: dispatches of class c on the leg
        (a round trip between a and b, or the one-way run a -> b).
    lanes
        Number of legs offered to the model, by tier.
    deadline_rows
        Number of deadline constraints.
    """

    direct: dict[tuple[int, int], pulp.LpVariable] = field(default_factory=dict)
    vehicles: dict[LaneKey, pulp.LpVariable] = field(default_factory=dict)
    lanes: dict[str, int] = field(default_factory=dict)
    deadline_rows: int = 0
    unit_hours: pulp.LpAffineExpression | None = None
    all_direct: dict[tuple[int, int], pulp.LpVariable] = field(default_factory=dict)


@dataclass(frozen=True, eq=False)
class _Setup:
    """Everything the model and the plan evaluation share.

    ``feeder_t``, ``trunk_t`` and ``direct_t`` are ``(n, n)`` hours of each
    directed leg on its fastest allowed class: no plan is faster, so a
    path late on them is ruled out. ``feeder_slow`` and ``trunk_slow`` are
    the slowest allowed class's hours: a path on time on them is on time
    whichever classes run it, so only the paths between need speed levels.
    """

    w: np.ndarray
    cand: list[int]
    tables: LegTables
    allow: np.ndarray
    sort: np.ndarray
    feeder_t: np.ndarray
    trunk_t: np.ndarray
    direct_t: np.ndarray
    feeder_slow: np.ndarray
    trunk_slow: np.ndarray
    direct_pairs: frozenset[tuple[int, int]]
    feeder_ok: np.ndarray  # (n, n) bool: terminal i may be allocated to hub k
    trunk_ok: np.ndarray  # (n, n) bool
    late: dict[tuple[int, int], np.ndarray] = field(default_factory=dict)

    def fastest(self, tier: str) -> np.ndarray:
        """``(n, n)`` hours of the tier's directed legs on their fastest allowed class."""
        return {"feeder": self.feeder_t, "trunk": self.trunk_t, "direct": self.direct_t}[tier]

    def sorts(self, k: int, m: int) -> float:
        """Sort hours of a route through hubs ``k`` then ``m`` (``k == m``: one hub)."""
        return float(self.sort[k] + (self.sort[m] if m != k else 0.0))


def _direction_ok(tables: LegTables, tier: Tier, round_trips: bool) -> np.ndarray:
    n = tables.km.shape[0]
    ok = np.zeros((n, n), dtype=bool)
    for c in range(len(tables.classes)):
        if tables.on_tier(c, tier):
            ok |= tables.allowed[c] & (tables.allowed[c].T if round_trips else True)
    return ok


def _setup(
    data: NetworkData, distances: DistanceMatrix, params: HubModelParams, fp: FreightParams
) -> _Setup:
    check_plan_possible(data, params)
    if params.allocation != "single":
        raise InputError(
            Problem(
                "config",
                None,
                "model.allocation",
                "the freight model plans single allocation (each terminal works with one hub)",
            )
        )
    tables = leg_tables(data, distances, fp)
    w = data.flow_matrix()
    n = data.n
    cand = [k for k, s in enumerate(data.sites) if s.is_candidate]
    both = fp.round_trips
    feeder_ok = _direction_ok(tables, "feeder", both)
    if not both:
        feeder_ok &= feeder_ok.T
    feeder_ok = feeder_ok.copy()
    for k in range(n):
        feeder_ok[k, k] = True
    trunk_ok = _direction_ok(tables, "trunk", both)
    direct_ok = _direction_ok(tables, "direct", both)
    direct_payloads = [
        tables.payload[c] for c in range(len(tables.classes)) if tables.on_tier(c, "direct")
    ]
    pairs: set[tuple[int, int]] = set()
    if direct_payloads:
        threshold = fp.direct_min_load * min(direct_payloads)
        big = np.maximum(w, w.T) >= max(threshold, 1e-12)
        np.fill_diagonal(big, False)
        rows, cols = np.nonzero(big & direct_ok & (w > 0))
        pairs = {(int(i), int(j)) for i, j in zip(rows, cols, strict=True)}
    return _Setup(
        w=w,
        cand=cand,
        tables=tables,
        allow=allowances(data, fp),
        sort=sort_hours(data, fp),
        feeder_t=tables.timetable("feeder", both, fastest=True),
        trunk_t=tables.timetable("trunk", both, fastest=True),
        direct_t=tables.timetable("direct", both, fastest=True),
        feeder_slow=tables.timetable("feeder", both),
        trunk_slow=tables.timetable("trunk", both),
        direct_pairs=frozenset(pairs),
        feeder_ok=feeder_ok,
        trunk_ok=trunk_ok,
    )


def path_hours(st: _Setup, i: int, k: int, m: int, j: int) -> float:
    """Transit hours of ``i -> hub k -> hub m -> j`` (``k == m``: one hub), fastest classes."""
    t = st.feeder_t[i, k] + st.sort[k] + st.feeder_t[m, j]
    if k != m:
        t += st.trunk_t[k, m] + st.sort[m]
    return float(t)


def _path_matrix(st: _Setup, i: int, j: int, *, slow: bool = False) -> np.ndarray:
    """``(|cand|, |cand|)`` transit hours of OD (i, j) over every hub pair (inf if impossible).

    On every leg's fastest allowed class, or with ``slow`` its slowest.
    """
    c = np.asarray(st.cand)
    feeder, trunk_h = (st.feeder_slow, st.trunk_slow) if slow else (st.feeder_t, st.trunk_t)
    t = (
        feeder[i, c][:, None]
        + st.sort[c][:, None]
        + trunk_h[np.ix_(c, c)]
        + st.sort[c][None, :]
        + feeder[c, j][None, :]
    )
    same = feeder[i, c] + st.sort[c] + feeder[c, j]
    t[np.diag_indices_from(t)] = same
    t = np.where(st.feeder_ok[i, c][:, None] & st.feeder_ok[j, c][None, :], t, np.inf)
    trunk = st.trunk_ok[np.ix_(c, c)].copy()
    np.fill_diagonal(trunk, True)
    return np.where(trunk, t, np.inf)


def late_paths(st: _Setup, i: int, j: int) -> np.ndarray:
    """``(|cand|, |cand|)`` True where OD (i, j) via hubs (k, m) misses its deadline (cached)."""
    got = st.late.get((i, j))
    if got is None:
        got = _path_matrix(st, i, j) > st.allow[i, j] + TIME_TOLERANCE_H
        st.late[i, j] = got
    return got


def _direct_on_time(st: _Setup, i: int, j: int) -> bool:
    return (i, j) in st.direct_pairs and st.direct_t[i, j] <= st.allow[i, j] + TIME_TOLERANCE_H


def restrict_allocations(data: NetworkData, st: _Setup) -> int:
    """Rule out allocations that make some OD pair late whatever the other end does.

    Terminal i may not work with hub k when an OD pair from or to i (that
    cannot go direct on time) is late through k with every hub the other
    end may use. Repeated until nothing changes. Returns how many
    allocations were ruled out.

    Raises
    ------
    InfeasibleError
        When a terminal is left without any hub it could work with.
    """
    cand = np.asarray(st.cand)
    removed = 0
    changed = True
    rows, cols = np.nonzero(st.w)
    pairs = [
        (i, j)
        for i, j in zip(rows.tolist(), cols.tolist(), strict=True)
        if not _direct_on_time(st, i, j)
    ]
    while changed:
        changed = False
        for i, j in pairs:
            late = late_paths(st, i, j)
            if not late.any():
                continue
            ok_k = st.feeder_ok[i, cand]
            ok_m = st.feeder_ok[j, cand]
            good = ~late & ok_k[:, None] & ok_m[None, :]
            if i == j:
                keep_k = keep_m = np.diag(good).copy()
            else:
                keep_k, keep_m = good.any(axis=1), good.any(axis=0)
            for site, ok, keep in ((i, ok_k, keep_k), (j, ok_m, keep_m)):
                drop = ok & ~keep
                if drop.any():
                    st.feeder_ok[site, cand[drop]] = False
                    removed += int(drop.sum())
                    changed = True
        for k in st.cand:  # a hub that cannot serve its own pairs cannot open
            if not st.feeder_ok[k, k] and st.feeder_ok[:, k].any():
                removed += int(st.feeder_ok[:, k].sum())
                st.feeder_ok[:, k] = False
                changed = True
    ids = data.ids
    closed = [k for k in st.cand if data.sites[k].hub_status == "open" and not st.feeder_ok[k, k]]
    if closed:
        raise InfeasibleError(
            "hubs forced open cannot meet the deadlines of their own OD pairs: "
            + ", ".join(ids[k] for k in closed)
        )
    stuck = [i for i in range(data.n) if not st.feeder_ok[i, cand].any()]
    if stuck:
        raise InfeasibleError(
            "no hub can serve "
            + ", ".join(ids[i] for i in stuck[:10])
            + (" and others" if len(stuck) > 10 else "")
            + " on time: each hub such a terminal could work with makes one of its OD pairs "
            "late whatever hub the other end uses; loosen those pairs' deadlines or allow "
            "faster vehicle classes"
        )
    return removed


def _quickest(st: _Setup, i: int, j: int) -> tuple[np.ndarray, float, float]:
    """OD (i, j)'s hours over every hub pair, the best of them, and direct.

    The first is :func:`_path_matrix`; the direct lane's hours are ``inf``
    where the pair may not go direct.
    """
    paths = _path_matrix(st, i, j)
    best = float(paths.min()) if paths.size else math.inf
    direct = float(st.direct_t[i, j]) if (i, j) in st.direct_pairs else math.inf
    return paths, best, direct


def unreachable_pairs(data: NetworkData, st: _Setup, limit: int = 20) -> list[str]:
    """Sentences naming OD pairs that miss their deadline even on their fastest path."""
    ids = data.ids
    out: list[str] = []
    rows, cols = np.nonzero(st.w)
    late = 0
    for i, j in zip(rows.tolist(), cols.tolist(), strict=True):
        paths, best, direct = _quickest(st, i, j)
        st.late.setdefault((i, j), paths > st.allow[i, j] + TIME_TOLERANCE_H)  # see late_paths
        fastest = min(best, direct)
        if fastest <= st.allow[i, j] + TIME_TOLERANCE_H:
            continue
        late += 1
        if len(out) >= limit:
            continue
        if not math.isfinite(fastest):
            why = "no path: the drivers'-hours rules or the vehicle tiers forbid its legs"
        elif direct <= best:
            why = f"the direct lane takes {direct:.1f} h"
        else:
            pos = np.unravel_index(int(np.argmin(paths)), paths.shape)
            k, m = st.cand[pos[0]], st.cand[pos[1]]
            via = ids[k] if k == m else f"{ids[k]} and {ids[m]}"
            why = (
                f"the fastest path, via {via}, takes {best:.1f} h on each leg's fastest class "
                f"(feeder {st.feeder_t[i, k]:.1f} h, sort {st.sort[k]:.1f} h"
                + (f", trunk {st.trunk_t[k, m]:.1f} h, sort {st.sort[m]:.1f} h" if k != m else "")
                + f", feeder {st.feeder_t[m, j]:.1f} h)"
            )
        out.append(f"{ids[i]} -> {ids[j]}: {why}, but {st.allow[i, j]:.1f} h are allowed")
    if late > len(out):
        out.append(f"... and {late - len(out)} more OD pairs")
    return out


def _run_cost(
    tables: LegTables, c: int, a: int, b: int, role: int, factors: tuple[float, float, float]
) -> float:
    f = 1.0 if role == _DIRECT else factors[role]
    return float(f * tables.km_cost[c, a, b] + tables.other_cost[c, a, b])


def _role(tier: Tier, from_hub: bool) -> int:
    if tier == "feeder":
        return _DISTRIBUTE if from_hub else _COLLECT
    return _TRANSFER if tier == "trunk" else _DIRECT


def dispatch_cost(
    tables: LegTables, fp: FreightParams, tier: Tier, a: int, b: int, c: int
) -> tuple[float, float]:
    """Cost of one dispatch of class ``c`` on leg ``a``-``b``, split by direction.

    For a feeder leg ``a`` is the terminal and ``b`` the hub (with one-way
    runs, ``a`` may be the hub: the run out of it). Returns the cost of the
    run ``a -> b`` and of the run ``b -> a`` (0 for one-way runs), each
    with half the dispatch fixed cost on a round trip.
    """
    v = tables.classes[c]
    factors = fp.km_cost_factors
    if fp.round_trips:
        fixed = v.cost_per_dispatch / 2.0
        return (
            fixed + _run_cost(tables, c, a, b, _role(tier, False), factors),
            fixed + _run_cost(tables, c, b, a, _role(tier, True), factors),
        )
    return v.cost_per_dispatch + _run_cost(tables, c, a, b, _role(tier, False), factors), 0.0


def one_way_cost(
    tables: LegTables, fp: FreightParams, tier: Tier, s: int, t: int, c: int, from_hub: bool
) -> float:
    """Cost of one one-way dispatch of class ``c`` from ``s`` to ``t`` (``round_trips`` off)."""
    v = tables.classes[c]
    return v.cost_per_dispatch + _run_cost(
        tables, c, s, t, _role(tier, from_hub), fp.km_cost_factors
    )


def _var(
    prob: pulp.LpProblem, name: str, low: float | None, up: float | None, cat: str
) -> pulp.LpVariable:
    return prob.add_variable(name, low, up, cat=cat)


#: A lane as its vehicles are keyed, without the class: (tier, a, b, way).
_LaneId = tuple[str, int, int, int]


def _leg_lane(round_trips: bool, tier: str, s: int, t: int, into: bool = True) -> _LaneId:
    """The lane whose vehicles run the directed leg ``s -> t``.

    Feeder lanes are keyed (terminal, hub): ``into`` says the leg runs into
    the hub (``s`` the terminal), else out of it (``t`` the terminal; way 1
    with one-way runs). Round-trip trunk and direct lanes are keyed by the
    lower index first.
    """
    if tier == "feeder":
        if into:
            return ("feeder", s, t, 0)
        return ("feeder", t, s, 0 if round_trips else 1)
    if round_trips:
        return (tier, min(s, t), max(s, t), 0)
    return (tier, s, t, 0)


def lane_runs(round_trips: bool, lane: _LaneId) -> tuple[tuple[int, int], ...]:
    """The directed runs ``(from, to)`` a lane's vehicles make: both ways on a round trip."""
    tier, a, b, way = lane
    if round_trips:
        return ((a, b), (b, a))
    return ((b, a),) if way == 1 else ((a, b),)


def speed_levels(
    tables: LegTables, classes: Sequence[int], runs: Sequence[tuple[int, int]]
) -> list[frozenset[int]]:
    """A lane's speed levels: the class sets it may be limited to, quickest first.

    A level is every class whose run takes at most a threshold of hours in
    each direction (thresholds: the classes' own hours); its hours are its
    slowest class's. Whatever classes a plan runs on the lane, the level of
    their slowest hours holds them all and takes exactly those hours, so
    choosing one level per lane times every leg exactly. Hours, not speeds:
    the drivers'-hours rules can make a slower class arrive sooner (a second
    driver, a relay in place of a break). Levels with the same hours both
    ways are one (the larger set), compared exactly: the deadline tolerance
    applies once per route, not once per leg.
    """
    hours = {c: tuple(float(tables.transit_h[c, s, t]) for s, t in runs) for c in classes}
    thresholds = [sorted({h[d] for h in hours.values()}) for d in range(len(runs))]
    found: dict[tuple[float, ...], frozenset[int]] = {}
    for limits in itertools.product(*thresholds):
        level = frozenset(
            c for c, h in hours.items() if all(x <= y for x, y in zip(h, limits, strict=True))
        )
        if not level:
            continue
        key = tuple(max(hours[c][d] for c in level) for d in range(len(runs)))
        if len(found.get(key, ())) < len(level):
            found[key] = level
    return [found[key] for key in sorted(found, key=lambda k: (sum(k), k))]


def level_hours(tables: LegTables, level: frozenset[int], s: int, t: int) -> float:
    """Hours of the run ``s -> t`` at a speed level: its slowest class's."""
    return max(float(tables.transit_h[c, s, t]) for c in level)


class _LaneLevels:
    """Speed levels of the lanes whose classes differ in hours (see :func:`speed_levels`).

    Made on demand. For a lane with two or more levels, a binary per level;
    on a terminal's feeder lane they sum to its allocation, elsewhere to at
    most 1; the dispatches of class c are at most ``most_c x`` the sum of
    the levels that include c (``most_c``: whole vehicles of c for the
    lane's largest volume one way).
    """

    def __init__(
        self,
        prob: pulp.LpProblem,
        st: _Setup,
        fp: FreightParams,
        runs: Mapping[_LaneId, list[tuple[int, pulp.LpVariable]]],
        x: Mapping[tuple[int, int], pulp.LpVariable],
    ) -> None:
        self.prob, self.st, self.fp, self.runs, self.x = prob, st, fp, runs, x
        w = st.w
        self.out_vol, self.in_vol, self.total = w.sum(axis=1), w.sum(axis=0), float(w.sum())
        self.made: dict[_LaneId, list[tuple[frozenset[int], pulp.LpVariable]] | None] = {}
        self.shapes: dict[_LaneId, list[frozenset[int]]] = {}

    def most(self, lane: _LaneId) -> float:
        """Largest volume the lane's runs may carry one way, units per day."""
        tier, a, b, way = lane
        if tier == "direct":
            w = self.st.w
            return float(max(w[a, b], w[b, a]) if self.fp.round_trips else w[a, b])
        if tier == "trunk":
            return self.total
        if self.fp.round_trips:
            return float(max(self.out_vol[a], self.in_vol[a]))
        return float(self.in_vol[a] if way == 1 else self.out_vol[a])

    def levels(self, lane: _LaneId) -> list[tuple[frozenset[int], pulp.LpVariable]] | None:
        """The lane's levels with their binaries, or ``None`` when it has one speed."""
        if lane in self.made:
            return self.made[lane]
        tier, a, b, way = lane
        levels = self.shape(lane)
        if len(levels) < 2:
            self.made[lane] = None
            return None
        name = f"level_{tier}_{a}_{b}_{way}"
        got = [
            (level, _var(self.prob, f"{name}_{s}", 0, 1, pulp.LpBinary))
            for s, level in enumerate(levels)
        ]
        total = pulp.lpSum(v for _, v in got)
        if tier == "feeder":
            self.prob += total - self.x[a, b] == 0, f"{name}_one"
        else:
            self.prob += total <= 1, f"{name}_one"
        most = self.most(lane)
        for c, vehicles in self.runs[lane]:
            cap = float(max(1, math.ceil(most / float(self.st.tables.payload[c]) - 1e-9)))
            self.prob += (
                vehicles - cap * pulp.lpSum(v for lv, v in got if c in lv) <= 0,
                f"{name}_class_{c}",
            )
        self.made[lane] = got
        return got

    def shape(self, lane: _LaneId) -> list[frozenset[int]]:
        """The lane's speed levels (:func:`speed_levels`; none when no class runs it)."""
        got = self.shapes.get(lane)
        if got is None:
            cls = [c for c, _ in self.runs.get(lane, [])]
            runs = lane_runs(self.fp.round_trips, lane)
            got = speed_levels(self.st.tables, cls, runs) if cls else []
            self.shapes[lane] = got
        return got

    def hours(self, lane: _LaneId, s: int, t: int) -> list[float]:
        """Distinct hours of the run ``s -> t`` over the lane's levels, ascending."""
        return sorted({level_hours(self.st.tables, lv, s, t) for lv in self.shape(lane)})

    def at_least(self, lane: _LaneId, s: int, t: int, hours: float) -> list[pulp.LpVariable]:
        """Binaries of the lane's levels whose run ``s -> t`` takes ``hours`` or more."""
        got = self.levels(lane)
        assert got is not None
        return [v for lv, v in got if level_hours(self.st.tables, lv, s, t) >= hours]


def build_freight_model(
    data: NetworkData,
    st: _Setup,
    params: HubModelParams,
    fp: FreightParams,
) -> FreightModel:
    """Build the freight MILP (see the module docstring)."""
    n = data.n
    w = st.w
    cand = st.cand
    tables = st.tables
    out_vol = w.sum(axis=1)
    in_vol = w.sum(axis=0)
    handling = np.array([s.handling_cost for s in data.sites])
    prob = pulp.LpProblem("freight", pulp.LpMinimize)
    vcat = pulp.LpInteger if fp.integer_vehicles else pulp.LpContinuous
    cset = set(cand)
    obj: dict[pulp.LpVariable, float] = defaultdict(float)
    # unit-hours in transit, for the value of time and the average-time cap
    hours_terms: dict[pulp.LpVariable, float] = defaultdict(float)

    x: dict[tuple[int, int], pulp.LpVariable] = {}
    for i in range(n):
        for k in cand:
            if st.feeder_ok[i, k]:
                x[i, k] = _var(prob, f"x_{i}_{k}", 0, 1, pulp.LpBinary)
    hub: list[pulp.LpVariable | None] = [x.get((k, k)) if k in cset else None for k in range(n)]
    for i in range(n):
        if not any((i, k) in x for k in cand):
            raise InfeasibleError(
                f"terminal {data.ids[i]} cannot be linked to any candidate hub: "
                "no vehicle class may run a feeder leg to one within the drivers'-hours rules"
            )
    openable = [k for k in cand if (k, k) in x]  # deadlines may rule some hubs out
    for k in openable:
        site = data.sites[k]
        if site.hub_fixed_cost:
            obj[x[k, k]] += site.hub_fixed_cost

    # direct shares
    direct: dict[tuple[int, int], pulp.LpVariable] = {}
    for i, j in sorted(st.direct_pairs):
        # FIX (found by tests/test_freight.py): a direct lane that misses the
        # pair's deadline may carry none of its volume.
        late = st.direct_t[i, j] > st.allow[i, j] + TIME_TOLERANCE_H
        direct[i, j] = _var(prob, f"direct_{i}_{j}", 0, 0 if late else 1, pulp.LpContinuous)
    has_out_direct = {i for i, _ in direct}
    has_in_direct = {j for _, j in direct}

    def expr(
        pairs: Mapping[pulp.LpVariable, float] | list[tuple[pulp.LpVariable, float]],
    ) -> pulp.LpAffineExpression:
        items = pairs.items() if isinstance(pairs, Mapping) else pairs
        return pulp.LpAffineExpression([(v, a) for v, a in items if a != 0])

    # collected volume g_out[i, k] and delivered volume g_in[j, l], as {var: coef} maps
    def x_map(i: int, k: int, coef: float) -> dict[pulp.LpVariable, float]:
        return {x[i, k]: coef} if (i, k) in x else {}

    g_out: dict[tuple[int, int], dict[pulp.LpVariable, float]] = {}
    g_in: dict[tuple[int, int], dict[pulp.LpVariable, float]] = {}
    for i in range(n):
        ks = [k for k in cand if (i, k) in x]
        for vol, has, store, name in (
            (out_vol[i], i in has_out_direct, g_out, "collect"),
            (in_vol[i], i in has_in_direct, g_in, "deliver"),
        ):
            if vol <= 0:
                continue
            if not has:
                for k in ks:
                    store[i, k] = x_map(i, k, float(vol))
                continue
            gv = {k: _var(prob, f"{name}_{i}_{k}", 0, None, pulp.LpContinuous) for k in ks}
            for k in ks:
                prob += gv[k] - float(vol) * x[i, k] <= 0, f"{name}_open_{i}_{k}"
                store[i, k] = {gv[k]: 1.0}
            if name == "collect":
                rhs_terms = [(direct[i, j], -float(w[i, j])) for j in range(n) if (i, j) in direct]
            else:
                rhs_terms = [(direct[o, i], -float(w[o, i])) for o in range(n) if (o, i) in direct]
            # sum_k g = volume - direct volume
            prob += (
                expr([(gv[k], 1.0) for k in ks] + [(v, -a) for v, a in rhs_terms]) == float(vol),
                f"{name}_all_{i}",
            )

    # delivered at hub k of volume from origin i: e[i, j, k]
    def delivered(i: int, k: int) -> dict[pulp.LpVariable, float]:
        terms: dict[pulp.LpVariable, float] = defaultdict(float)
        for j in np.nonzero(w[i])[0].tolist():
            if (j, k) not in x:
                continue
            if (i, j) in direct:
                terms[e_var[i, j, k]] += 1.0
            else:
                terms[x[j, k]] += float(w[i, j])
        return terms

    e_var: dict[tuple[int, int, int], pulp.LpVariable] = {}
    for (i, j), dv in direct.items():
        ks = [k for k in cand if (j, k) in x]
        for k in ks:
            e_var[i, j, k] = _var(prob, f"via_{i}_{j}_{k}", 0, None, pulp.LpContinuous)
            prob += e_var[i, j, k] - float(w[i, j]) * x[j, k] <= 0, f"via_open_{i}_{j}_{k}"
        prob += (
            expr([(e_var[i, j, k], 1.0) for k in ks] + [(dv, float(w[i, j]))]) == float(w[i, j]),
            f"via_all_{i}_{j}",
        )

    # hub count, allocation, forced hubs, capacity
    if params.hubs is not None:
        prob += expr([(x[k, k], 1.0) for k in openable]) == params.hubs, "hub_count"
    for i in range(n):
        prob += expr([(x[i, k], 1.0) for k in cand if (i, k) in x]) == 1, f"assign_{i}"
        for k in cand:
            if i != k and (i, k) in x:
                prob += x[i, k] - x[k, k] <= 0, f"open_{i}_{k}"
    for k in openable:
        if data.sites[k].hub_status == "open":
            prob += x[k, k] == 1, f"forced_open_{k}"
        cap = data.sites[k].sort_capacity
        if params.capacitated and cap is not None:
            terms: dict[pulp.LpVariable, float] = defaultdict(float)
            for i in range(n):
                for v, a in g_out.get((i, k), {}).items():
                    terms[v] += a
            terms[x[k, k]] -= float(cap)
            prob += expr(terms) <= 0, f"capacity_{k}"

    # handling at the first hub, and time to it
    for (i, k), g in g_out.items():
        for v, a in g.items():
            obj[v] += a * handling[k]
            hours_terms[v] += a * float(st.feeder_t[i, k] + st.sort[k])
    for (j, l_), g in g_in.items():
        for v, a in g.items():
            hours_terms[v] += a * float(st.feeder_t[l_, j])
    for (i, j), dv in direct.items():
        hours_terms[dv] += float(w[i, j] * st.direct_t[i, j])

    # trunk flows per origin, with at most one trunk leg per unit
    trunk_pairs = [(k, m) for k in cand for m in cand if k != m and st.trunk_ok[k, m]]
    y: dict[tuple[int, int, int], pulp.LpVariable] = {}
    trunk_flow: dict[tuple[int, int], list[pulp.LpVariable]] = defaultdict(list)
    for i in range(n):
        if out_vol[i] <= 0:
            continue
        for k, m in trunk_pairs:
            if (i, k) not in g_out:
                continue
            v = _var(prob, f"trunk_{i}_{k}_{m}", 0, None, pulp.LpContinuous)
            y[i, k, m] = v
            trunk_flow[k, m].append(v)
            obj[v] += float(handling[m])
            hours_terms[v] += float(st.trunk_t[k, m] + st.sort[m])
        for k in openable:
            # Balance at every hub that may open: volume from i may be delivered
            # at a hub that i itself cannot be allocated to.
            out_y = [y[i, k, m] for m in cand if (i, k, m) in y]
            in_y = [y[i, m, k] for m in cand if (i, m, k) in y]
            terms = defaultdict(float)
            for v in out_y:
                terms[v] += 1.0
            for v in in_y:
                terms[v] -= 1.0
            for v, a in g_out.get((i, k), {}).items():
                terms[v] -= a
            for v, a in delivered(i, k).items():
                terms[v] += a
            if terms:
                prob += expr(terms) == 0, f"flow_{i}_{k}"
            if out_y:
                one: dict[pulp.LpVariable, float] = defaultdict(float)
                for v in out_y:
                    one[v] += 1.0
                for v, a in g_out.get((i, k), {}).items():
                    one[v] -= a
                prob += expr(one) <= 0, f"one_trunk_{i}_{k}"

    # vehicles covering the volume on every leg, in each direction
    vehicles: dict[LaneKey, pulp.LpVariable] = {}
    lanes: dict[str, int] = defaultdict(int)

    def cover(
        tier: Tier,
        a: int,
        b: int,
        there: dict[pulp.LpVariable, float],
        back: dict[pulp.LpVariable, float],
    ) -> None:
        lanes[tier] += 1
        if fp.round_trips:
            cls = tables.lane_classes(tier, a, b, both=True)
            if not cls:
                raise SolverError(f"no class for {tier} leg {a}-{b}")  # excluded upstream
            for c in cls:
                v = _var(prob, f"veh_{tier}_{a}_{b}_{c}", 0, None, vcat)
                vehicles[tier, a, b, c, 0] = v
                ab, ba = dispatch_cost(tables, fp, tier, a, b, c)
                obj[v] += ab + ba
            for label, flow in (("there", there), ("back", back)):
                if not flow:
                    continue
                cov: dict[pulp.LpVariable, float] = defaultdict(float)
                terms = cov
                for c in cls:
                    terms[vehicles[tier, a, b, c, 0]] += float(tables.payload[c])
                for v, coef in flow.items():
                    terms[v] -= coef
                prob.addConstraint(expr(terms) >= 0, f"payload_{tier}_{a}_{b}_{label}")
            return
        for s, t, flow, way in ((a, b, there, 0), (b, a, back, 1)):
            if not flow:
                continue
            cls = tables.lane_classes(tier, s, t, both=False)
            terms = defaultdict(float)
            for c in cls:
                v = _var(prob, f"veh_{tier}_{a}_{b}_{c}_{way}", 0, None, vcat)
                vehicles[tier, a, b, c, way] = v
                obj[v] += one_way_cost(tables, fp, tier, s, t, c, from_hub=way == 1)
                terms[v] += float(tables.payload[c])
            for v, coef in flow.items():
                terms[v] -= coef
            prob.addConstraint(expr(terms) >= 0, f"payload_{tier}_{a}_{b}_{way}")

    for i in range(n):
        for k in cand:
            if i == k or (i, k) not in x:
                continue
            there = g_out.get((i, k), {})
            back = g_in.get((i, k), {})
            if there or back:
                cover("feeder", i, k, there, back)
    done: set[tuple[int, int]] = set()
    for k, m in trunk_pairs:
        key = (min(k, m), max(k, m)) if fp.round_trips else (k, m)
        if key in done:
            continue
        done.add(key)
        a, b = key
        there = {v: 1.0 for v in trunk_flow.get((a, b), [])}
        back = {v: 1.0 for v in trunk_flow.get((b, a), [])} if fp.round_trips else {}
        if there or back:
            cover("trunk", a, b, there, back)
    done = set()
    for i, j in sorted(direct):
        key = (min(i, j), max(i, j)) if fp.round_trips else (i, j)
        if key in done:
            continue
        done.add(key)
        a, b = key
        there = {direct[a, b]: float(w[a, b])} if (a, b) in direct else {}
        back = {direct[b, a]: float(w[b, a])} if fp.round_trips and (b, a) in direct else {}
        cover("direct", a, b, there, back)

    # Vehicle variables of each run (tier, a, b, direction), with their class.
    by_run: dict[tuple[str, int, int, int], list[tuple[int, pulp.LpVariable]]] = defaultdict(list)
    for (tier, a, b, c, way), v in vehicles.items():
        by_run[tier, a, b, way].append((c, v))
    # Speed levels where a lane's classes differ in hours (see _LaneLevels).
    levels = _LaneLevels(prob, st, fp, by_run, x)

    # A terminal's feeder lane runs only if it works with that hub, a trunk
    # lane only between open hubs. Without this a free (zero-cost) class
    # could run on a lane nobody uses, and the plan would time the same
    # road's runs by it (a hub's own feeder lane to another hub and a
    # terminal's lane into it are one road).
    for (tier, a, b, way), runs in by_run.items():
        smallest = min(float(tables.payload[c]) for c, _ in runs)
        if tier == "feeder":
            cap = max(1.0, math.ceil(levels.most((tier, a, b, way)) / smallest - 1e-9))
            prob += (
                expr([(v, 1.0) for _, v in runs] + [(x[a, b], -float(cap))]) <= 0,
                f"feeder_used_{a}_{b}_{way}",
            )
        elif tier == "trunk":
            cap = max(1.0, math.ceil(float(w.sum()) / smallest))
            for end in (a, b):
                opens = [(x[end, end], -float(cap))] if (end, end) in x else []
                prob += (
                    expr([(v, 1.0) for _, v in runs] + opens) <= 0,
                    f"trunk_used_{a}_{b}_{way}_{end}",
                )
    if fp.integer_vehicles:
        # Valid for whole vehicles: a leg that carries anything needs at least
        # one vehicle. Much tighter than the payload rows alone when a leg's
        # volume is a fraction of a payload (most feeder legs).
        # FIX (found by tests/test_freight.py): only volume that cannot go direct
        # forces a feeder vehicle; a terminal whose volume may all go direct needs none.
        hub_out, hub_in = out_vol.copy(), in_vol.copy()
        for i, j in direct:
            hub_out[i] -= w[i, j]
            hub_in[j] -= w[i, j]
        for (i, k), xv in x.items():
            if i == k:
                continue
            both_ways = ((0, hub_out[i] + hub_in[i]),)
            for way, vol in both_ways if fp.round_trips else ((0, hub_out[i]), (1, hub_in[i])):
                runs = by_run.get(("feeder", i, k, way), [])
                if vol > 1e-9 and runs:
                    prob += (
                        expr([(v, 1.0) for _, v in runs] + [(xv, -1.0)]) >= 0,
                        (f"one_vehicle_feeder_{i}_{k}_{way}"),
                    )
        # Valid for whole vehicles: the vehicles on terminal i's feeder leg
        # cost at least the cheapest whole-vehicle cover of the volume that
        # cannot go direct (in its larger direction, for round trips).
        for (i, k), xv in x.items():
            if i == k:
                continue
            if fp.round_trips:
                needs = [(0, max(hub_out[i], hub_in[i]), False)]
            else:
                needs = [(0, hub_out[i], False), (1, hub_in[i], True)]
            for way, vol, from_hub in needs:
                if vol <= 1e-9:
                    continue
                keyed = by_run.get(("feeder", i, k, way), [])
                if not keyed:
                    continue
                if fp.round_trips:
                    costs = [sum(dispatch_cost(tables, fp, "feeder", i, k, c)) for c, _ in keyed]
                else:
                    s_, t_ = (k, i) if from_hub else (i, k)
                    costs = [
                        one_way_cost(tables, fp, "feeder", s_, t_, c, from_hub) for c, _ in keyed
                    ]
                counts = cheapest_cover(vol, [float(tables.payload[c]) for c, _ in keyed], costs)
                least = float(sum(n * cc for n, cc in zip(counts, costs, strict=True)))
                if least > 0:
                    prob += (
                        expr(
                            [(v, cc) for (_, v), cc in zip(keyed, costs, strict=True)]
                            + [(xv, -least)]
                        )
                        >= 0,
                        f"cover_cost_feeder_{i}_{k}_{way}",
                    )
        for (i, j), dv in direct.items():
            if fp.round_trips:
                runs = by_run.get(("direct", min(i, j), max(i, j), 0), [])
            else:
                runs = by_run.get(("direct", i, j, 0), [])
            if runs:
                prob += (
                    expr([(v, 1.0) for _, v in runs] + [(dv, -1.0)]) >= 0,
                    (f"one_vehicle_direct_{i}_{j}"),
                )

    rt = fp.round_trips
    tol = TIME_TOLERANCE_H

    # A direct lane carries its own pairs only: a pair's share runs on levels
    # on time for it (a round trip's other pair may still use slower levels).
    for (a, b), dv in direct.items():
        if dv.upBound == 0:
            continue
        got = levels.levels(_leg_lane(rt, "direct", a, b))
        if got is None:
            continue
        ok = [v for lv, v in got if level_hours(tables, lv, a, b) <= st.allow[a, b] + tol]
        if len(ok) < len(got):
            prob += dv - pulp.lpSum(ok) <= 0, f"direct_levels_{a}_{b}"

    hours_matter = (
        fp.minimise == "transit" or bool(fp.value_of_time) or fp.max_transit_h is not None
    )
    if hours_matter:
        # Unit-hours above each leg's fastest class at the slower levels: exact,
        # as a lane runs at one level. A terminal's own feeder volume is a
        # constant times its allocation; other volumes get z >= volume - most
        # x (1 - level), z >= 0.
        for lane in by_run:
            got = levels.levels(lane)
            if got is None:
                continue
            tier, a, b, way = lane
            directed: list[tuple[int, int, Mapping[pulp.LpVariable, float]]] = []
            if tier == "feeder":
                if rt or way == 0:
                    directed.append((a, b, g_out.get((a, b), {})))
                if rt or way == 1:
                    directed.append((b, a, g_in.get((a, b), {})))
            elif tier == "trunk":
                directed.append((a, b, {v: 1.0 for v in trunk_flow.get((a, b), [])}))
                if rt:
                    directed.append((b, a, {v: 1.0 for v in trunk_flow.get((b, a), [])}))
            else:
                for s_, t_ in ((a, b), (b, a)) if rt else ((a, b),):
                    if (s_, t_) in direct:
                        directed.append((s_, t_, {direct[s_, t_]: float(w[s_, t_])}))
            base_table = st.fastest(tier)
            most = levels.most(lane)
            for s_, t_, volume in directed:
                if not volume:
                    continue
                base = float(base_table[s_, t_])
                for pos, (lv, v) in enumerate(got):
                    extra = level_hours(tables, lv, s_, t_) - base
                    if extra <= tol:
                        continue
                    own = tier == "feeder" and len(volume) == 1 and next(iter(volume)) is x[a, b]
                    if own:
                        hours_terms[v] += extra * volume[x[a, b]]
                        continue
                    name = f"level_h_{tier}_{a}_{b}_{way}_{s_}_{pos}"
                    z = _var(prob, name, 0, None, pulp.LpContinuous)
                    over: dict[pulp.LpVariable, float] = defaultdict(float, {z: 1.0, v: -most})
                    for var, coef in volume.items():
                        over[var] -= coef
                    prob += expr(over) >= -most, name
                    hours_terms[z] += extra

    def leg_hours(tier: str, s: int, t: int, into: bool) -> tuple[_LaneId | None, list[float]]:
        """The leg's lane if it has speed levels (else None), and its distinct hours, ascending."""
        if s == t:
            return None, [0.0]
        lane = _leg_lane(rt, tier, s, t, into)
        if not levels.shape(lane):  # no class runs it
            return None, [float(st.fastest(tier)[s, t])]
        return (lane if levels.levels(lane) is not None else None), levels.hours(lane, s, t)

    def first_late(hours: list[float], budget: float) -> float | None:
        """The least of ``hours`` over ``budget``, if any."""
        return next((h for h in hours if h > budget), None)

    def at_level(
        lane: _LaneId | None,
        run: tuple[int, int],
        hours: float,
        least: float,
        alloc: pulp.LpVariable | None,
    ) -> list[pulp.LpVariable]:
        """Binaries for "the run takes ``hours`` or more" on a lane.

        At its quickest (``least``) that is the lane being used: the
        allocation on a feeder lane, nothing to add on a trunk.
        """
        if lane is None or hours <= least:
            return [alloc] if alloc is not None else []
        return levels.at_least(lane, *run, hours)

    def add_row(
        terms: list[pulp.LpVariable], rhs: float, escape: pulp.LpVariable | None, name: str
    ) -> None:
        """``sum(terms) <= rhs`` (+ 1 when the pair goes all direct)."""
        coefs: dict[pulp.LpVariable, float] = defaultdict(float)
        for v in terms:
            coefs[v] += 1.0
        if escape is not None:
            coefs[escape] -= 1.0
        prob.addConstraint(expr(coefs) <= rhs, name)

    # service deadlines: for each path late at some levels, a row that rules
    # out those levels together with the path's two allocations
    rows = 0
    all_direct: dict[tuple[int, int], pulp.LpVariable] = {}
    odr, odc = np.nonzero(w)
    for i, j in zip(odr.tolist(), odc.tolist(), strict=True):
        late_at_some = _path_matrix(st, i, j, slow=True) > st.allow[i, j] + tol
        if not late_at_some.any():
            continue
        escape = None
        if (i, j) in direct and _direct_on_time(st, i, j):
            escape = _var(prob, f"all_direct_{i}_{j}", 0, 1, pulp.LpBinary)
            all_direct[i, j] = escape
            prob += direct[i, j] - escape >= 0, f"all_direct_{i}_{j}"
        limit = float(st.allow[i, j]) + tol
        for pk, k in enumerate(cand):
            if (i, k) not in x:
                continue
            ms = [
                cand[pm]
                for pm in np.nonzero(late_at_some[pk])[0].tolist()
                if (j, cand[pm]) in x and (i != j or cand[pm] == k)
            ]
            if not ms:
                continue
            c_lane, c_hours = leg_hours("feeder", i, k, True)
            before: list[tuple[int, float]] | None = None
            for s1, h1 in enumerate(c_hours):
                first = at_level(c_lane, (i, k), h1, c_hours[0], x[i, k])
                ends: list[pulp.LpVariable] = []
                sig: list[tuple[int, float]] = []
                for m in ms:
                    t_lane, t_hours = leg_hours("trunk", k, m, True)
                    d_lane, d_hours = leg_hours("feeder", m, j, False)
                    budget = limit - h1 - st.sorts(k, m)
                    h3 = first_late(d_hours, budget - t_hours[0])
                    if h3 is not None:
                        ends += at_level(d_lane, (m, j), h3, d_hours[0], x[j, m])
                        sig.append((m, h3))
                    # slower trunk levels: rows with the trunk's level as a third term
                    best = math.inf if h3 is None else h3
                    for s2, h2 in enumerate(t_hours[1:], start=1):
                        h3b = first_late(d_hours, budget - h2)
                        if h3b is None or h3b >= best or t_lane is None:
                            continue
                        best = h3b
                        three = (
                            first
                            + at_level(t_lane, (k, m), h2, t_hours[0], None)
                            + at_level(d_lane, (m, j), h3b, d_hours[0], x[j, m])
                        )
                        add_row(three, 2.0, escape, f"deadline_{i}_{j}_{k}_{m}_{s1}_{s2}")
                        rows += 1
                if ends and sig != before:
                    add_row(first + ends, 1.0, escape, f"deadline_{i}_{j}_{k}_{s1}")
                    rows += 1
                    before = sig

    if fp.value_of_time:
        for v, a in hours_terms.items():
            obj[v] += fp.value_of_time * a
    if fp.max_transit_h is not None:
        total = float(w.sum())
        prob += expr(hours_terms) <= fp.max_transit_h * total, "average_transit"
    if fp.minimise == "transit":
        prob += expr(hours_terms)
    else:
        prob += expr(obj)
    model = FreightModel(
        problem=prob,
        formulation="freight (single allocation, vehicles per leg)",
        hub=hub,
        assign=x,
        candidates=cand,
        direct=direct,
        vehicles=vehicles,
        lanes=dict(lanes),
        deadline_rows=rows,
        all_direct=all_direct,
    )
    model.unit_hours = expr(hours_terms)
    return model


# --------------------------------------------------------------------------
# Reading the plan back and pricing it
# --------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class FreightPlan:
    """A plan as decisions only: what :func:`evaluate_freight` prices.

    Attributes
    ----------
    hubs
        Matrix indices of the open hubs.
    assign
        ``assign[i]``: hub index of site i.
    direct
        ``direct[(i, j)]``: share of OD (i, j) on its direct lane.
    dispatches
        ``dispatches[(tier, a, b, c)]``: dispatches of class c on the leg
        (round trip a-b, or one-way run a -> b).
    """

    hubs: tuple[int, ...]
    assign: np.ndarray
    direct: Mapping[tuple[int, int], float]
    dispatches: Mapping[LaneKey, float]


@dataclass
class PlanBook:
    """Plans handed from one solve of a network to the next (the frontier's points).

    Every solve of :func:`solve_freight` given a book prices the plans in
    it under its own constraints and keeps the cheapest that meets them
    (the transit cap included) in case its solver finds nothing better;
    then it adds the plan it returns. The frontier's fastest plan meets
    every cap, so no capped point is left without a plan (a trial at 20 s a
    point: one point found none of its own). Only for solves of the same
    network data: plans hold matrix indices.
    """

    plans: list[FreightPlan] = field(default_factory=list)


def read_plan(model: FreightModel, fp: FreightParams) -> FreightPlan:
    """The plan in the solver's current values (vehicle counts rounded when integer)."""
    hubs = tuple(model.open_hubs())
    assign = model.allocation()
    assert assign is not None
    shares: dict[tuple[int, int], float] = {}
    for pair, dv in model.direct.items():
        val = min(1.0, max(0.0, dv.varValue or 0.0))
        if val > 1e-9:
            shares[pair] = val
    disp: dict[LaneKey, float] = {}
    for key, v in model.vehicles.items():
        val = v.varValue or 0.0
        if fp.integer_vehicles:
            val = float(round(val))
        if val > 1e-9:
            disp[key] = val
    return FreightPlan(hubs, assign, shares, disp)


def _runs(
    plan: FreightPlan, fp: FreightParams, tables: LegTables
) -> dict[tuple[str, int, int], dict[int, tuple[float, float]]]:
    """Per directed run ``(tier, from, to)`` and class: dispatches and their cost.

    A round trip's cost is split between its two directions (see
    :func:`dispatch_cost`).
    """
    runs: dict[tuple[str, int, int], dict[int, tuple[float, float]]] = defaultdict(dict)

    def add(key: tuple[str, int, int], c: int, count: float, cost: float) -> None:
        n0, c0 = runs[key].get(c, (0.0, 0.0))
        runs[key][c] = (n0 + count, c0 + count * cost)

    for (tier, a, b, c, way), count in plan.dispatches.items():
        t = cast(Tier, tier)
        if fp.round_trips:
            ab, ba = dispatch_cost(tables, fp, t, a, b, c)
            add((tier, a, b), c, count, ab)
            add((tier, b, a), c, count, ba)
        elif way == 0:
            add((tier, a, b), c, count, one_way_cost(tables, fp, t, a, b, c, False))
        else:
            add((tier, b, a), c, count, one_way_cost(tables, fp, t, b, a, c, True))
    return runs


def evaluate_freight(
    data: NetworkData,
    st: _Setup,
    params: HubModelParams,
    fp: FreightParams,
    plan: FreightPlan,
    stats: SolveStats,
    scenario: str = "",
) -> Solution:
    """Price a freight plan from its decisions and build the :class:`Solution`.

    Every figure is recomputed from the hubs, allocation, direct shares and
    dispatches, independently of the solver; the payloads are checked to
    cover the volume on every run and every route to meet its deadline.

    Raises
    ------
    SolverError
        When the plan does not cover a leg's volume or misses a deadline
        (a solver tolerance problem; it should not happen).
    """
    ids = data.ids
    w = st.w
    tables = st.tables
    handling = np.array([s.handling_cost for s in data.sites])
    assign = plan.assign
    hubs = sorted(plan.hubs)
    flows: dict[tuple[str, int, int], float] = defaultdict(float)
    routes: list[Route] = []
    through = np.zeros(data.n)
    inbound = np.zeros(data.n)
    users: dict[int, set[int]] = {h: set() for h in hubs}
    for i in range(data.n):
        users.setdefault(int(assign[i]), set()).add(i)
    handling_cost = 0.0
    time_by_tier: dict[str, float] = defaultdict(float)
    route_parts: list[
        tuple[int, int, float, list[tuple[str, int, int]], float, tuple[int, ...]]
    ] = []
    # FIX (found by tests/test_freight.py): within the solver's integrality
    # tolerance (an x of 1e-6 times a terminal's volume) a direct share can
    # fall short of 1 by a speck that no vehicle covers; such specks go direct.
    speck = 1e-5 * max(1.0, float(w.sum()))
    runs = _runs(plan, fp, tables)

    def run_hours(tier: str, s: int, t: int) -> float:
        """Hours of the run s -> t: its slowest class run (a millionth of a vehicle is none)."""
        used = [c for c, (n, _) in runs.get((tier, s, t), {}).items() if n > 1e-6]
        if not used:
            return float(st.fastest(tier)[s, t])
        return max(float(tables.transit_h[c, s, t]) for c in used)

    rows, cols = np.nonzero(w)
    for i, j in zip(rows.tolist(), cols.tolist(), strict=True):
        vol = float(w[i, j])
        dv = vol * plan.direct.get((i, j), 0.0)
        dv = vol if 0.0 < vol - dv <= speck and dv > 0.0 else dv
        if dv > 1e-9:
            flows["direct", i, j] += dv
            t = run_hours("direct", i, j)
            time_by_tier["direct"] += dv * t
            route_parts.append((i, j, dv, [("direct", i, j)], t, ()))
        hv = vol - dv
        if hv <= 1e-9:
            continue
        k, m = int(assign[i]), int(assign[j])
        legs_used: list[tuple[str, int, int]] = []
        if i != k:
            legs_used.append(("feeder", i, k))
        if k != m:
            legs_used.append(("trunk", k, m))
        if m != j:
            legs_used.append(("feeder", m, j))
        sorts = st.sorts(k, m)
        t = sorts
        for key in legs_used:
            flows[key] += hv
            hours = run_hours(*key)
            time_by_tier[key[0]] += hv * hours
            t += hours
        time_by_tier["sort"] += hv * sorts
        handling_cost += hv * (handling[k] + (handling[m] if m != k else 0.0))
        through[k] += hv
        inbound[k] += hv
        if m != k:
            through[m] += hv
        route_parts.append((i, j, hv, legs_used, t, (k,) if k == m else (k, m)))

    tier_cost: dict[str, float] = defaultdict(float)
    carbon_cost = 0.0
    basis = tables.co2e_wtw_kg if fp.emissions_basis == "wtw" else tables.co2e_ttw_kg
    by_class: dict[int, dict[str, float]] = {
        c: {"runs": 0.0, "vehicle_km": 0.0, "co2e_ttw_kg": 0.0, "co2e_wtw_kg": 0.0}
        for c in range(len(tables.classes))
    }
    legs: list[Leg] = []
    problems: list[str] = []
    order = sorted(runs.items(), key=lambda kv: (TIERS.index(kv[0][0]), kv[0][1:]))
    # cost and volume of each leg (both directions share a round trip's cost)
    lane_cost: dict[tuple[str, int, int], float] = defaultdict(float)
    lane_volume: dict[tuple[str, int, int], float] = defaultdict(float)
    for (tier, s, t), got in order:
        counts = {c: n for c, (n, _) in got.items() if n > 1e-9}
        if not counts:
            continue
        volume = flows.get((tier, s, t), 0.0)
        capacity = float(sum(tables.payload[c] * n for c, n in counts.items()))
        if volume > capacity + max(1e-6 * volume, speck):  # FIX: see speck above
            problems.append(
                f"{tier} leg {ids[s]} -> {ids[t]}: {volume:.3f} units, capacity {capacity:.3f}"
            )
        cost = float(sum(got[c][1] for c in counts))
        for c, n in counts.items():
            carbon_cost += n * float(basis[c, s, t]) / 1000.0 * fp.carbon_price_per_t
            rec = by_class[c]
            rec["runs"] += n
            rec["vehicle_km"] += n * float(tables.km[s, t])
            rec["co2e_ttw_kg"] += n * float(tables.co2e_ttw_kg[c, s, t])
            rec["co2e_wtw_kg"] += n * float(tables.co2e_wtw_kg[c, s, t])
        tier_cost[tier] += cost
        lane = (tier, min(s, t), max(s, t)) if fp.round_trips else (tier, s, t)
        lane_cost[lane] += cost
        lane_volume[lane] += volume
        used = list(counts)
        legs.append(
            Leg(
                tier=tier,  # type: ignore[arg-type]
                origin=ids[s],
                destination=ids[t],
                distance_km=float(tables.km[s, t]),
                volume=volume,
                cost=cost,
                dispatches={tables.classes[c].id: n for c, n in counts.items()},
                capacity=capacity,
                drive_h=float(max(tables.drive_h[c, s, t] for c in used)),
                transit_h=run_hours(tier, s, t),
                relays=int(max(tables.relays[c, s, t] for c in used)),
                drivers=int(max(tables.drivers[c, s, t] for c in used)),
                vehicle_km=float(sum(n * tables.km[s, t] for n in counts.values())),
                co2e_ttw_kg=float(sum(n * tables.co2e_ttw_kg[c, s, t] for c, n in counts.items())),
                co2e_wtw_kg=float(sum(n * tables.co2e_wtw_kg[c, s, t] for c, n in counts.items())),
                class_cost={tables.classes[c].id: float(got[c][1]) for c in counts},
                class_drive_h={
                    tables.classes[c].id: float(tables.drive_h[c, s, t]) for c in counts
                },
            )
        )
    for key, volume in flows.items():
        if volume > 1e-6 and key not in runs:
            problems.append(
                f"{key[0]} leg {ids[key[1]]} -> {ids[key[2]]}: {volume:.3f} units, no vehicle"
            )
    time_cost = 0.0
    for i, j, vol, legs_used, t, hub_idx in route_parts:
        if t > st.allow[i, j] + 1e-6:
            problems.append(
                f"route {ids[i]} -> {ids[j]} takes {t:.2f} h, {st.allow[i, j]:.2f} h allowed"
            )
        cost = 0.0
        for tier, s, u in legs_used:
            key = (tier, min(s, u), max(s, u)) if fp.round_trips else (tier, s, u)
            if lane_volume.get(key):
                cost += vol * lane_cost[key] / lane_volume[key]
        cost += vol * sum(handling[h] for h in hub_idx)
        time_cost += fp.value_of_time * vol * t
        path = [ids[i]]
        for node in (*hub_idx, j):
            if ids[node] != path[-1]:
                path.append(ids[node])
        routes.append(
            Route(
                origin=ids[i],
                destination=ids[j],
                volume=vol,
                path=tuple(path),
                distance_km=float(sum(tables.km[s, u] for _, s, u in legs_used)),
                cost=float(cost),
                hubs=tuple(ids[h] for h in hub_idx),
                transit_h=t,
                allowance_h=float(st.allow[i, j]),
            )
        )
    if problems:
        raise SolverError(
            "the plan read back from the solver is not valid:\n  " + "\n  ".join(problems[:20])
        )

    records = hub_records(data, hubs, through, inbound, users, handling)
    costs = {
        "hub_fixed": float(sum(data.sites[h].hub_fixed_cost for h in hubs)),
        "handling": float(handling_cost),
        "feeder": float(tier_cost.get("feeder", 0.0)),
        "trunk": float(tier_cost.get("trunk", 0.0)),
        "direct": float(tier_cost.get("direct", 0.0)),
    }
    # The carbon price is inside the vehicles' run costs; shown apart from them.
    costs["time"] = float(time_cost)
    costs["total"] = float(sum(costs.values()))
    costs["carbon_in_vehicles"] = float(carbon_cost)
    total_volume = float(w.sum())
    freight = _plan_figures(plan, fp, tables, legs, routes, time_by_tier, total_volume, by_class)
    return Solution(
        scenario=scenario,
        stats=stats,
        hubs=tuple(records),
        routes=tuple(routes),
        legs=tuple(legs),
        costs=costs,
        volume_unit=data.volume_unit,
        allocation="single",
        site_names={s.id: s.name for s in data.sites},
        freight=freight,
    )


def _plan_figures(
    plan: FreightPlan,
    fp: FreightParams,
    tables: LegTables,
    legs: Sequence[Leg],
    routes: Sequence[Route],
    time_by_tier: Mapping[str, float],
    total_volume: float,
    by_class: Mapping[int, Mapping[str, float]],
) -> dict[str, object]:
    """Plan-wide freight figures for :attr:`Solution.freight` and summary.json.

    ``vehicles`` counts, for each daily dispatch, the vehicles needed to run
    it every day: one per started 24 hours of its round trip (one-way run,
    when round trips are off), so a 30-hour round trip needs two.
    """
    dispatches = float(sum(plan.dispatches.values()))
    vehicles = 0.0
    for (_, a, b, c, way), n in plan.dispatches.items():
        s_, t_ = (b, a) if way == 1 else (a, b)
        hours = float(tables.transit_h[c, s_, t_])
        if fp.round_trips:
            hours += float(tables.transit_h[c, t_, s_])
        vehicles += n * max(1, math.ceil(hours / 24.0 - 1e-9))
    vkm = float(sum(g.vehicle_km or 0.0 for g in legs))
    ttw = float(sum(g.co2e_ttw_kg or 0.0 for g in legs))
    wtw = float(sum(g.co2e_wtw_kg or 0.0 for g in legs))
    unit_hours = float(sum(r.volume * (r.transit_h or 0.0) for r in routes))
    on_time = float(sum(r.volume for r in routes if (r.slack_h or 0.0) >= -1e-6))
    classes: dict[str, dict[str, object]] = {}
    for c, v in enumerate(tables.classes):
        classes[v.id] = {
            "name": v.name,
            "payload": float(tables.payload[c]),
            "payload_limit": tables.binding[c],
            "dispatches": float(
                sum(n for (_, _, _, cc, _), n in plan.dispatches.items() if cc == c)
            ),
            **{k: float(val) for k, val in by_class[c].items()},
        }
    co2e = wtw if fp.emissions_basis == "wtw" else ttw

    def per_unit(hours: float) -> float:
        return hours / total_volume if total_volume else 0.0

    return {
        "vehicles": vehicles,
        "dispatches": dispatches,
        "vehicle_km": vkm,
        "unit_km": float(sum(g.volume * g.distance_km for g in legs)),
        "avg_transit_h": per_unit(unit_hours),
        "max_transit_h": float(max((r.transit_h or 0.0) for r in routes)) if routes else 0.0,
        "service_level": on_time / total_volume if total_volume else 1.0,
        "co2e_kg": co2e,
        "co2e_ttw_kg": ttw,
        "co2e_wtw_kg": wtw,
        "co2e_t": co2e / 1000.0,
        "emissions_basis": fp.emissions_basis,
        "feeder_h_per_unit": per_unit(time_by_tier.get("feeder", 0.0)),
        "trunk_h_per_unit": per_unit(time_by_tier.get("trunk", 0.0)),
        "direct_h_per_unit": per_unit(time_by_tier.get("direct", 0.0)),
        "sort_h_per_unit": per_unit(time_by_tier.get("sort", 0.0)),
        "round_trips": fp.round_trips,
        "driving_rules": tables.rules,
        "by_class": classes,
    }


# --------------------------------------------------------------------------
# Solving
# --------------------------------------------------------------------------


def _explain_infeasible(data: NetworkData, st: _Setup, params: HubModelParams) -> str:
    """Why no plan exists although every OD pair has an on-time path of its own."""
    ids = data.ids
    tight: list[tuple[int, str]] = []
    rows, cols = np.nonzero(st.w)
    for i, j in zip(rows.tolist(), cols.tolist(), strict=True):
        ok = int((_path_matrix(st, i, j) <= st.allow[i, j] + TIME_TOLERANCE_H).sum())
        tight.append((ok, f"{ids[i]} -> {ids[j]} ({ok} on-time hub pairs)"))
    tight.sort()
    lines = [
        "every OD pair has an on-time path of its own, but no single-allocation plan "
        "serves them all at once"
        + (f" with {params.hubs} hubs" if params.hubs is not None else "")
        + " within the sort capacities; the pairs with the fewest on-time hub pairs:"
    ]
    lines += [f"  {text}" for _, text in tight[:10]]
    lines.append(
        "loosen their deadlines (demand max_hours, site cut-off / deliver_by), allow more "
        "hubs or faster vehicle classes on the tiers they use"
    )
    return "\n".join(lines)


def solve_freight(
    data: NetworkData,
    distances: DistanceMatrix,
    params: HubModelParams,
    fp: FreightParams,
    opts: SolverParams,
    *,
    scenario: str = "",
    progress: Callable[[str], None] | None = None,
    start_hubs: Sequence[str] | None = None,
    book: PlanBook | None = None,
) -> Solution:
    """Choose hubs, routes and vehicles for a network with vehicle classes.

    Stages: a starting plan from a local search over hub sets; the whole
    MILP; and, when the run has a time limit, the starting plan meets every
    constraint and the MILP stops short of its gap, the best plan so far
    re-planned by the solver with its hubs fixed (:func:`polish_plan`, in
    the last :data:`POLISH_SHARE` of the time). The cheapest plan is
    returned, with its gap to the whole MILP's bound (status ``optimal``
    when that gap is within ``opts.gap``).

    Parameters
    ----------
    data
        Validated network with ``data.vehicles``.
    distances
        Leg distances (km) and optional hours.
    params
        Hub count, fixed costs, capacity (``allocation`` must be single).
    fp
        Freight parameters.
    opts
        Solver choice and limits; ``auto`` means HiGHS here.
    start_hubs
        Site ids of an earlier plan's hubs (for example last night's): the
        solver starts from them instead of the local search.
    book
        Plans of earlier solves of the same network (:class:`PlanBook`):
        the cheapest that meets this scenario's constraints is kept as a
        fallback; the plan returned is added to it.

    Raises
    ------
    InfeasibleError
        When OD pairs cannot meet their deadlines (named, with their fastest
        path), or no plan serves them all at once.
    NoSolutionError
        When the time limit ran out before a plan was found.
    """
    say = progress or (lambda _: None)
    if not data.vehicles:
        raise InputError(Problem("config", None, "inputs.vehicles", "no vehicle classes given"))
    opts = dataclasses.replace(opts, name="highs" if opts.name == "auto" else opts.name)
    t0 = time.perf_counter()
    st = _setup(data, distances, params, fp)
    late = unreachable_pairs(data, st)
    if late:
        raise InfeasibleError(
            "some OD pairs cannot meet their delivery deadline even on their fastest path:\n  "
            + "\n  ".join(late)
            + "\nloosen their deadlines (demand max_hours, site cut-off / deliver_by, service "
            "days), allow faster classes on the tiers they use, or change hours.long_legs"
        )
    t1 = time.perf_counter()
    removed = restrict_allocations(data, st)
    say(
        f"deadlines rule out {removed} of {int(st.feeder_ok[:, st.cand].sum()) + removed} "
        f"terminal-hub allocations ({time.perf_counter() - t1:.1f} s)"
    )
    t1 = time.perf_counter()
    given = None
    if start_hubs is not None:
        check_start_hubs(data, start_hubs)
        misfit = start_misfit(data, params, start_hubs)
        if misfit is not None:
            say(f"the starting hubs given do not fit this scenario ({misfit}): searching instead")
        else:
            given = [data.index(h) for h in start_hubs]
    start = starting_freight_plan(data, st, params, fp, max_seconds=20.0, hubs_given=given)
    if start is not None and given is None:
        budget = min(120.0, 0.2 * opts.time_limit_s) if opts.time_limit_s else 120.0
        start = improve_hubs(data, st, params, fp, start, budget, say)
    start_seconds = time.perf_counter() - t1
    if start is not None:
        say(
            f"starting plan: {len(start.hubs)} hubs, "
            f"{sum(start.dispatches.values()):,.0f} dispatches ({start_seconds:.1f} s)"
        )
    else:
        say("no starting plan found quickly; the solver starts from scratch")
    kept = "starting plan"
    if fp.minimise == "transit":
        # The fastest plan: least unit-hours first, then the cheapest plan that
        # keeps that average transit time (a lexicographic optimum).
        model, stats = _solve_model(
            data, st, params, fp, _left(opts, t0, 0.5), say, "least transit time"
        )
        fastest = (stats.objective or 0.0) / max(float(st.w.sum()), 1e-12)
        say(f"least average transit time {fastest:.3f} h; now the cheapest plan that keeps it")
        # FIX (found by tests/test_freight.py): 1e-5, not 1e-7: with a cap that tight
        # HiGHS's presolve can call the second stage infeasible though the first
        # stage's plan meets it.
        cap = fastest * (1.0 + 1e-5) + 1e-5
        if fp.max_transit_h is not None:
            cap = min(cap, fp.max_transit_h)
        first = read_plan(model, fp)
        fp = dataclasses.replace(fp, minimise="cost", max_transit_h=cap)
        # The least-transit plan keeps the cap by construction: it is the plan to
        # fall back on when the cheapest-at-that-time stage finds nothing within
        # its share of the limit (16 terminals, 30 s a point: the fastest end of
        # a frontier was lost that way, and with it every point between).
        first_cost = _priced_start(data, st, params, fp, first)
        fallback = _priced_start(data, st, params, fp, start)
        if first_cost is not None and (fallback is None or first_cost < fallback):
            start, kept, fallback = first, "least-transit plan", first_cost
    else:
        fallback = _priced_start(data, st, params, fp, start)
    for known in book.plans if book is not None else ():
        cost = _priced_start(data, st, params, fp, known)
        if cost is not None and (fallback is None or _cheaper(cost, fallback)):
            start, kept, fallback = known, "plan of an earlier point", cost
    # The starting plan is not handed to the solver as a MIP start: HiGHS 1.16
    # and CBC 2.10 were both seen to stop at a given start and call it optimal
    # with a wrong objective (tests/test_freight.py). It is kept instead, and
    # returned when the solver ends with nothing better.
    if fallback is not None:
        say(f"{kept} costs {fallback:,.2f}; kept in case the solver finds nothing better")
    # With a time limit and a starting plan that meets every constraint, the
    # whole model leaves a share of the time for re-planning the best plan's
    # hubs (polish_plan) in case it stops short of its gap.
    polishing = fallback is not None and opts.time_limit_s is not None
    whole = _left(opts, t0, 1.0 - POLISH_SHARE) if polishing else _left(opts, t0)
    sol: Solution | None = None
    plan: FreightPlan | None = None
    t1 = time.perf_counter()
    try:
        model, stats = _solve_model(data, st, params, fp, whole, say, "least cost")
    except NoSolutionError:
        if fallback is None or start is None:
            raise
        say("no plan from the solver in its share of the time limit")
        stats = SolveStats(
            opts.name, "time_limit", fallback, None, None, time.perf_counter() - t1, 0.0, "freight"
        )
    else:
        plan = read_plan(model, fp)
        sol = evaluate_freight(data, st, params, fp, plan, stats, scenario=scenario)
    if polishing and stats.status != "optimal":
        assert start is not None and fallback is not None and opts.time_limit_s is not None
        base, base_cost = start, fallback
        if sol is not None and plan is not None and sol.costs["total"] <= fallback:
            base, base_cost = plan, sol.costs["total"]
        polished, pstats = polish_plan(
            data, st, params, fp, base, opts, say, deadline=t0 + opts.time_limit_s
        )
        cost = _priced_start(data, st, params, fp, polished)
        if pstats is not None:
            stats = dataclasses.replace(
                stats,
                solve_seconds=stats.solve_seconds + pstats.solve_seconds,
                log=stats.log
                + "\n# the best plan's hubs fixed, routes and vehicles re-planned\n"
                + pstats.log,
            )
        if polished is not None and cost is not None and _cheaper(cost, base_cost):
            say(f"re-planned with its hubs fixed, the best plan costs {cost:,.2f}")
            start, fallback, kept = polished, cost, "re-planned plan"
        elif polished is not None and cost is not None:
            say(f"the re-planning's best, {cost:,.2f}, is not cheaper; the best plan stands")
        elif polished is not None:
            say("the re-planned plan breaks a deadline or the transit cap; the best plan stands")
    # The summary reports the time limit the user set (the whole model got a
    # share of it: a trial saw 14.9 s recorded for the 20 s asked).
    stats = dataclasses.replace(
        stats,
        start_seconds=start_seconds,
        build_seconds=time.perf_counter() - t0 - stats.solve_seconds - start_seconds,
        options={**stats.options, "time_limit_s": opts.time_limit_s},
    )
    if sol is None or (
        fallback is not None and start is not None and _cheaper(fallback, sol.costs["total"])
    ):
        assert start is not None and fallback is not None
        if sol is None:
            say(f"keeping the {kept} ({fallback:,.2f})")
        else:
            say(f"the {kept} ({fallback:,.2f}) is cheaper than the whole model's; keeping it")
        bound = stats.best_bound
        gap = None if bound is None else max(0.0, (fallback - bound) / max(abs(fallback), 1e-9))
        # Within the gap asked for, against the whole model's bound: proven.
        status = "optimal" if gap is not None and gap <= opts.gap else stats.status
        stats = dataclasses.replace(stats, status=status, objective=fallback, gap=gap)
        sol = evaluate_freight(data, st, params, fp, start, stats, scenario=scenario)
        returned: FreightPlan | None = start
    else:  # the whole model's plan stands; its stats gain the re-planning's time and log
        sol = dataclasses.replace(sol, stats=stats)
        returned = plan
    if book is not None and returned is not None:
        book.plans.append(returned)
    return sol


def _cheaper(cost: float, than: float) -> bool:
    """Whether ``cost`` is below ``than`` by more than the solvers' 1e-6 relative tolerance."""
    return cost < than - 1e-6 * abs(than)


#: Share of the time left after the starting plan that the whole model
#: leaves for :func:`polish_plan` when the run has a time limit.
POLISH_SHARE = 0.25
#: Seconds :func:`polish_plan` needs at least, after building its model.
POLISH_MIN_S = 2.0
#: HiGHS's ``mip_heuristic_effort`` in :func:`polish_plan` (HiGHS's default is
#: 0.05). The re-planning is there to find a cheaper plan, not a bound (the gap
#: is taken to the whole model's): France national demo, its 11 hubs fixed, 2
#: threads, 139 s: 1,154,140 at the default (first plan at 37 s, none after),
#: 1,144,738 at 0.3 (a second plan at 55 s).
POLISH_HEURISTIC_EFFORT = 0.3


#: Said after a re-planning progress line that shows a bound: it is not one
#: on the whole problem, whose bound the run reports.
_FIXED_BOUND = " (a bound for these hubs only)"


def polish_plan(
    data: NetworkData,
    st: _Setup,
    params: HubModelParams,
    fp: FreightParams,
    start: FreightPlan,
    opts: SolverParams,
    say: Callable[[str], None],
    *,
    deadline: float | None = None,
) -> tuple[FreightPlan | None, SolveStats | None]:
    """Re-plan routes, direct lanes and vehicles for a plan's hubs with the solver.

    The local search prices a hub set with a greedy allocation and
    whole-vehicle covers, and the whole MILP on a large network may spend
    its time on the hub choice; the freight MILP with ``start``'s hubs fixed
    open (every other candidate closed) is much easier and its bound tight
    (France national demo: the local search's 1,196,850 per day re-planned
    to 1,158,502 in 140 s). Stops at ``opts.gap`` or ``opts.time_limit_s``,
    or, when ``deadline`` is given, at that :func:`time.perf_counter` value
    (the limit is worked out after the model is built).

    Returns
    -------
    tuple
        The re-planned plan (None when the solver found none: the hubs'
        deadlines or capacities leave no plan, time ran out, or the solver
        failed) and the solver's stats (None when less than
        :data:`POLISH_MIN_S` was left to solve).
    """
    from hubnet.solve import run_solver

    hubs = set(start.hubs)
    model = build_freight_model(data, st, params, fp)
    for k in model.candidates:
        v = model.assign.get((k, k))
        if v is not None:
            v.lowBound = v.upBound = 1 if k in hubs else 0
    if deadline is not None:
        left = deadline - time.perf_counter()
        if left < POLISH_MIN_S:
            say(f"{max(left, 0.0):.1f} s left: too little to re-plan the best plan's hubs")
            return None, None
        opts = dataclasses.replace(opts, time_limit_s=left)
    limit = f" (limit {opts.time_limit_s:.0f} s)" if opts.time_limit_s else ""
    say(f"re-planning routes and vehicles for the best plan's {len(hubs)} hubs{limit}")
    try:
        stats = run_solver(
            model,
            opts,
            lambda line: say(f"hubs fixed: {line}{_FIXED_BOUND if 'bound' in line else ''}"),
            cbc_options=("preprocess on",),
            highs_options={"mip_heuristic_effort": POLISH_HEURISTIC_EFFORT},
        )
    except SolverError as err:  # a plan is in hand: the run goes on without this one
        say(f"the re-planning failed ({err}); the best plan stands")
        return None, None
    if stats.objective is None:
        # HiGHS stopped by its time limit with no plan reports no status of
        # its own here ("error"): say what happened (a new user read "error").
        out_of_time = stats.status == "time_limit" or _stopped_on_time(stats.log)
        why = "none found in its time" if out_of_time else stats.status
        say(f"no re-planned plan ({why}); the best plan stands")
        return None, stats
    return read_plan(model, fp), stats


def _stopped_on_time(log: str) -> bool:
    """Whether a solver log says the run stopped at its time limit (HiGHS or CBC)."""
    text = log.lower()
    return "time limit reached" in text or "stopped on time" in text


def _priced_start(
    data: NetworkData,
    st: _Setup,
    params: HubModelParams,
    fp: FreightParams,
    start: FreightPlan | None,
) -> float | None:
    """Cost of the starting plan, or None when it is missing or breaks the transit cap."""
    if start is None:
        return None
    stats = SolveStats("none", "time_limit", None, None, None, 0.0, 0.0, "starting plan")
    try:
        sol = evaluate_freight(data, st, params, fp, start, stats)
    except SolverError:
        return None
    avg = float(sol.freight.get("avg_transit_h", 0.0))  # type: ignore[arg-type]
    if fp.max_transit_h is not None and avg > fp.max_transit_h + 1e-9:
        return None
    return float(sol.costs["total"])


def _left(opts: SolverParams, t0: float, share: float = 1.0) -> SolverParams:
    """``opts`` with the time limit cut to what is left of the run's (times ``share``).

    The time limit is the run's wall-clock budget: the checks, the local
    search and the model building come out of it. The solver keeps at least
    a tenth of it.
    """
    if opts.time_limit_s is None:
        return opts
    left = opts.time_limit_s - (time.perf_counter() - t0)
    return dataclasses.replace(opts, time_limit_s=max(left * share, 0.1 * opts.time_limit_s))


def _solve_model(
    data: NetworkData,
    st: _Setup,
    params: HubModelParams,
    fp: FreightParams,
    opts: SolverParams,
    say: Callable[[str], None],
    goal: str,
) -> tuple[FreightModel, SolveStats]:
    """Build and solve one freight MILP; raise when there is no plan."""
    from hubnet.solve import run_solver

    t0 = time.perf_counter()
    say(f"building the freight model for {data.n} sites and {len(data.vehicles)} vehicle classes")
    model = build_freight_model(data, st, params, fp)
    build_seconds = time.perf_counter() - t0
    say(
        f"model built in {build_seconds:.1f} s: {len(model.problem.variables())} variables, "
        f"{model.problem.numConstraints()} constraints ({model.deadline_rows} deadline rows; "
        + ", ".join(f"{v} {k} legs" for k, v in sorted(model.lanes.items()))
        + f"; {len(model.direct)} OD pairs may go direct)"
    )
    limit = f" (limit {opts.time_limit_s:.0f} s)" if opts.time_limit_s else ""
    say(f"solving for {goal} with {opts.name}{limit}")
    # CBC 2.10's default preprocessing (it finds SOS rows in the allocation)
    # was seen to stop this model at a non-optimal plan called optimal.
    stats = run_solver(model, opts, say, cbc_options=("preprocess on",))
    stats = dataclasses.replace(stats, build_seconds=build_seconds)
    if stats.status == "infeasible":
        if fp.max_transit_h is not None:
            raise InfeasibleError(
                f"no plan keeps the average transit time within {fp.max_transit_h:.3f} h "
                "while meeting every deadline"
                + (f" with {params.hubs} hubs" if params.hubs is not None else "")
            )
        raise InfeasibleError(_explain_infeasible(data, st, params))
    if stats.objective is None:
        if opts.time_limit_s is not None:
            raise NoSolutionError(f"no plan found within the time limit of {opts.time_limit_s:g} s")
        raise SolverError(f"{opts.name} returned no plan")
    status: str = stats.status
    if status == "optimal" and (stats.gap or 0.0) > 1e-6:
        status = f"proven within the {100 * opts.gap:g} % gap asked for"
    say(
        f"{status}: {goal} {stats.objective:,.2f}, {stats.bound_text()} "
        f"in {stats.solve_seconds:.1f} s"
    )
    return model, stats


# --------------------------------------------------------------------------
# A starting plan for the solver
# --------------------------------------------------------------------------


def cheapest_cover(volume: float, payloads: Sequence[float], costs: Sequence[float]) -> list[int]:
    """Whole vehicles of each class whose payloads cover ``volume`` at least cost.

    Exact, by enumerating the counts of all classes but the last (the last
    is filled up); meant for the few classes of a fleet.

    Examples
    --------
    >>> cheapest_cover(40.0, [15.0, 33.0], [300.0, 500.0])  # 800 beats 3 x 300 and 2 x 500
    [1, 1]
    >>> cheapest_cover(12.0, [15.0, 33.0], [300.0, 500.0])
    [1, 0]
    """
    count = len(payloads)
    if volume <= 1e-9 or count == 0:
        return [0] * count
    limits = [math.ceil(volume / p - 1e-9) for p in payloads]
    best: tuple[float, list[int]] = (math.inf, [0] * count)

    def walk(c: int, left: float, chosen: list[int], spent: float) -> None:
        nonlocal best
        if spent >= best[0]:
            return
        if c == count - 1:
            n = max(0, math.ceil(left / payloads[c] - 1e-9))
            total = spent + n * costs[c]
            if total < best[0]:
                best = (total, [*chosen, n])
            return
        for n in range(limits[c] + 1):
            walk(c + 1, max(0.0, left - n * payloads[c]), [*chosen, n], spent + n * costs[c])
            if left - n * payloads[c] <= 0:
                break

    walk(0, volume, [], 0.0)
    return best[1]


def _late_count(st: _Setup, assign: np.ndarray, direct_ok: np.ndarray) -> np.ndarray:
    """``(n,)`` late OD pairs touching each terminal under an allocation."""
    n = len(assign)
    late = np.zeros(n, dtype=int)
    rows, cols = np.nonzero(st.w)
    for i, j in zip(rows.tolist(), cols.tolist(), strict=True):
        if direct_ok[i, j]:
            continue
        t = path_hours(st, i, int(assign[i]), int(assign[j]), j)
        k, m = int(assign[i]), int(assign[j])
        if k != m and not st.trunk_ok[k, m]:
            t = math.inf
        if t > st.allow[i, j] + TIME_TOLERANCE_H:
            late[i] += 1
            late[j] += 1
    return late


def starting_freight_plan(
    data: NetworkData,
    st: _Setup,
    params: HubModelParams,
    fp: FreightParams,
    max_seconds: float,
    hubs_given: Sequence[int] | None = None,
) -> FreightPlan | None:
    """A feasible plan to start the solver from, or ``None`` when none is found quickly.

    Hubs and allocation come from ``hubs_given`` (an earlier run's hubs,
    each terminal with its nearest allowed one) or from the classic model's
    local search with per-unit costs of full vehicles (the cheapest class
    per tier, round trip); terminals are then moved between the open hubs until every
    deadline is met (pairs that can go direct on time go direct); each leg
    gets the cheapest whole-vehicle cover of its volume.
    """
    from hubnet.heuristics import starting_plan

    tables = st.tables

    def rate(tier: Tier) -> float:
        best = math.inf
        for c, v in enumerate(tables.classes):
            if tables.on_tier(c, tier):
                per_km = 2.0 * (v.cost_per_km + v.cost_per_hour / v.speed_kmh)
                best = min(best, per_km / tables.payload[c])
        return best if math.isfinite(best) else 0.0

    proxy = dataclasses.replace(
        params,
        collection_factor=rate("feeder"),
        transfer_factor=rate("trunk"),
        distribution_factor=rate("feeder"),
        cost_per_unit_km=1.0,
    )

    def nearest(hubs: list[int]) -> np.ndarray | None:
        """Each terminal to its nearest allowed hub with sort capacity left."""
        near = np.where(st.feeder_ok[:, hubs], tables.km[:, hubs], np.inf)
        if not np.isfinite(near.min(axis=1)).all():
            return None
        if not params.capacitated:
            return np.asarray(hubs)[np.argmin(near, axis=1)]
        out_vol = st.w.sum(axis=1)
        left = sort_capacities(data)[hubs].astype(float)
        got = np.full(data.n, -1)
        for pos, k in enumerate(hubs):  # a hub sorts its own volume
            got[k] = k
            left[pos] -= out_vol[k]
        for i in np.argsort(-out_vol).tolist():
            if got[i] >= 0:
                continue
            for pos in np.argsort(near[i]).tolist():
                if np.isfinite(near[i, pos]) and left[pos] >= out_vol[i] - 1e-9:
                    got[i] = hubs[pos]
                    left[pos] -= out_vol[i]
                    break
            else:
                return None
        return got if (left >= -1e-9).all() else None

    ok = False
    if hubs_given is not None:
        hubs = [k for k in hubs_given if st.feeder_ok[k, k]]
        got = nearest(hubs) if hubs else None
        if got is None:
            return None
        assign, ok = got, True
    if not ok:
        # Allocations the deadlines rule out get a prohibitive length.
        km = np.where(st.feeder_ok, tables.km, tables.km.max() * 1e6 + 1e6)
        found = starting_plan(data, km, proxy, max_seconds=max_seconds / 4)
        ok = found is not None and found[1] is not None
        if ok:
            assert found is not None and found[1] is not None
            hubs, assign = list(found[0]), np.asarray(found[1], dtype=int)
            ok = bool(st.feeder_ok[np.arange(data.n), assign].all())
    if not ok and params.hubs is None:
        # Every hub that may open, each terminal with its nearest allowed hub.
        hubs = [k for k in st.cand if st.feeder_ok[k, k]]
        near = np.where(st.feeder_ok[:, hubs], tables.km[:, hubs], np.inf)
        assign = np.asarray(hubs)[np.argmin(near, axis=1)]
        ok = bool(np.isfinite(near.min(axis=1)).all())
    if not ok:
        return None
    assign = np.asarray(assign, dtype=int).copy()
    direct_ok = np.zeros_like(st.w, dtype=bool)
    for i, j in st.direct_pairs:
        direct_ok[i, j] = _direct_on_time(st, i, j)
    deadline = time.perf_counter() + max_seconds
    late = _late_count(st, assign, direct_ok)
    while late.sum() and time.perf_counter() < deadline:
        moved = False
        for worst in np.argsort(-late).tolist():
            if late[worst] == 0:
                break
            if worst in hubs:
                continue
            best_hub, best_late = int(assign[worst]), int(late.sum())
            for k in hubs:
                if k == assign[worst] or not st.feeder_ok[worst, k]:
                    continue
                trial = assign.copy()
                trial[worst] = k
                total = int(_late_count(st, trial, direct_ok).sum())
                if total < best_late:
                    best_hub, best_late = k, total
            if best_hub != assign[worst]:
                assign[worst] = best_hub
                moved = True
                break
        if not moved:
            return None
        late = _late_count(st, assign, direct_ok)
    if late.sum():
        return None
    # direct where the hub path is late
    shares: dict[tuple[int, int], float] = {}
    for i, j in st.direct_pairs:
        k, m = int(assign[i]), int(assign[j])
        if path_hours(st, i, k, m, j) > st.allow[i, j] + TIME_TOLERANCE_H:
            shares[i, j] = 1.0
    # Flows on lanes, keyed as the model's vehicles (tier, a, b, way); per
    # lane [volume a -> b, volume b -> a].
    rt = fp.round_trips
    lanes: dict[_LaneId, list[float]] = defaultdict(lambda: [0.0, 0.0])
    legs_of: list[tuple[int, int, list[tuple[_LaneId, int, int]]]] = []

    def add(lane: _LaneId, s: int, t: int, vol: float) -> tuple[_LaneId, int, int]:
        lanes[lane][0 if (s, t) == (lane[1], lane[2]) else 1] += vol
        return (lane, s, t)

    rows, cols = np.nonzero(st.w)
    for i, j in zip(rows.tolist(), cols.tolist(), strict=True):
        vol = float(st.w[i, j])
        if shares.get((i, j)):
            legs_of.append((i, j, [add(_leg_lane(rt, "direct", i, j), i, j, vol)]))
            continue
        k, m = int(assign[i]), int(assign[j])
        used: list[tuple[_LaneId, int, int]] = []
        if i != k:
            used.append(add(_leg_lane(rt, "feeder", i, k, True), i, k, vol))
        if k != m:
            used.append(add(_leg_lane(rt, "trunk", k, m), k, m, vol))
        if m != j:
            used.append(add(_leg_lane(rt, "feeder", m, j, False), m, j, vol))
        legs_of.append((i, j, used))

    # Each lane's speed level: all its classes (the slowest), made quicker leg
    # by leg where a route would be late, never slower in the lane's other
    # direction. On the quickest levels every route is on time (allocations
    # were checked on each leg's quickest class), unless a round trip's two
    # directions are quickest with different classes; then there may be no start.
    def lane_classes(lane: _LaneId) -> list[int]:
        s, t = lane_runs(rt, lane)[0]
        return tables.lane_classes(cast(Tier, lane[0]), s, t, both=rt)

    levels = {lane: speed_levels(tables, lane_classes(lane), lane_runs(rt, lane)) for lane in lanes}
    if not all(levels.values()):
        return None  # a lane no class may run: ruled out upstream
    lane_hours = {
        lane: [tuple(level_hours(tables, lv, s, t) for s, t in lane_runs(rt, lane)) for lv in got]
        for lane, got in levels.items()
    }
    # every class: the largest level
    at = {lane: int(np.argmax([len(lv) for lv in got])) for lane, got in levels.items()}
    hours_at = {
        leg: [level_hours(tables, level, leg[1], leg[2]) for level in levels[leg[0]]]
        for _, _, used in legs_of
        for leg in used
    }
    limit: list[tuple[float, list[tuple[_LaneId, int, int]]]] = []
    for i, j, used in legs_of:
        if used and used[0][0][0] != "direct":
            k, m = int(assign[i]), int(assign[j])
            budget = float(st.allow[i, j]) + TIME_TOLERANCE_H - st.sorts(k, m)
        else:
            budget = float(st.allow[i, j]) + TIME_TOLERANCE_H
        if sum(hours_at[leg][at[leg[0]]] for leg in used) > budget:
            limit.append((budget, used))

    for _ in range(sum(len(got) for got in levels.values()) + 1):
        changed = False
        for budget, used in limit:
            if sum(hours_at[leg][at[leg[0]]] for leg in used) <= budget:
                continue
            # the quicker level of one leg's lane that saves the most hours
            gain, pick = 0.0, None
            for leg in used:
                lane = leg[0]
                now = lane_hours[lane][at[lane]]
                for q, then in enumerate(lane_hours[lane]):
                    saved = hours_at[leg][at[lane]] - hours_at[leg][q]
                    if saved > gain and all(x <= y for x, y in zip(then, now, strict=True)):
                        gain, pick = saved, (lane, q)
            if pick is None:
                return None  # no quicker level left on this route's legs
            at[pick[0]] = pick[1]
            changed = True
        if not changed:
            break

    dispatches: dict[LaneKey, float] = {}
    for lane, (there, back) in lanes.items():
        tier, a, b, way = lane
        t = cast(Tier, tier)
        cls = sorted(levels[lane][at[lane]])
        if rt:
            cost = [sum(dispatch_cost(tables, fp, t, a, b, c)) for c in cls]
            volume = max(there, back)
        else:
            s_, u_ = lane_runs(rt, lane)[0]
            cost = [one_way_cost(tables, fp, t, s_, u_, c, from_hub=way == 1) for c in cls]
            volume = there + back
        counts = cheapest_cover(volume, [tables.payload[c] for c in cls], cost)
        for c, n in zip(cls, counts, strict=True):
            if n:
                dispatches[tier, a, b, c, way] = float(n)
    return FreightPlan(tuple(sorted(hubs)), assign, shares, dispatches)


def improve_hubs(
    data: NetworkData,
    st: _Setup,
    params: HubModelParams,
    fp: FreightParams,
    start: FreightPlan,
    max_seconds: float,
    progress: Callable[[str], None] | None = None,
) -> FreightPlan:
    """Local search over hub sets (drop, swap, add), each priced as a whole freight plan.

    A hub set is priced by :func:`starting_freight_plan` (allocation,
    deadlines, direct lanes, whole-vehicle covers) and
    :func:`evaluate_freight`. First improvement; stops after
    ``max_seconds``. Returns the best plan found (``start`` if none is
    better).
    """
    stats = SolveStats("none", "time_limit", None, None, None, 0.0, 0.0, "local search")
    t_end = time.perf_counter() + max_seconds

    def price(hubs: Sequence[int]) -> tuple[float, FreightPlan | None]:
        plan = starting_freight_plan(data, st, params, fp, max_seconds=2.0, hubs_given=hubs)
        if plan is None or (params.hubs is not None and len(plan.hubs) != params.hubs):
            return math.inf, None
        if any(data.sites[k].hub_status == "open" and k not in plan.hubs for k in st.cand):
            return math.inf, None
        try:
            sol = evaluate_freight(data, st, params, fp, plan, stats)
        except SolverError:
            return math.inf, None
        return sol.costs["total"], plan

    best_cost, best = price(start.hubs)
    if best is None:
        return start
    openable = [k for k in st.cand if st.feeder_ok[k, k]]
    forced = {k for k in st.cand if data.sites[k].hub_status == "open"}
    improved = True
    rounds = 0
    while improved and time.perf_counter() < t_end:
        improved = False
        rounds += 1
        current = list(best.hubs)
        moves: list[list[int]] = []
        if params.hubs is None:
            moves += [[h for h in current if h != out] for out in current if out not in forced]
        moves += [
            [h for h in current if h != out] + [inn]
            for out in current
            if out not in forced
            for inn in openable
            if inn not in current
        ]
        if params.hubs is None:
            moves += [current + [inn] for inn in openable if inn not in current]
        for move in moves:
            if time.perf_counter() > t_end:
                break
            if not move:
                continue
            cost, plan = price(sorted(move))
            if plan is not None and cost < best_cost - 1e-6 * abs(best_cost):
                best_cost, best, improved = cost, plan, True
                if progress is not None:
                    progress(f"local search: {len(plan.hubs)} hubs, cost {cost:,.2f}")
                break
    return best
