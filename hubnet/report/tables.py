"""Output tables of a plan: hubs, legs, OD routes, the flow hierarchy and leg rank-size.

Every function here is pure: a :class:`~hubnet.solution.Solution` in, a
:class:`pandas.DataFrame` out, with the figures taken from the re-priced
plan and nothing else. Column names carry their unit (``_km``,
``_per_day``); volumes are in the scenario's one volume unit
(:attr:`Solution.volume_unit`), named in the column documentation rather
than in the column names, so a script reads the same columns whatever the
unit. :data:`COLUMNS` documents every column of every table;
:func:`describe_columns` renders it as markdown for the README.

Money is in the scenario's currency per day: the same currency as the
cost inputs (hub fixed costs, handling costs, cost per unit-km).

Freight runs (plans of the freight model, with vehicle classes on every
leg: :func:`is_freight`) add the columns of :data:`FREIGHT_COLUMNS` to
``legs``, ``routes`` and ``hierarchy``, and one more table, ``dispatches``
(:func:`dispatches_table`). Classic runs keep exactly the columns of
:data:`COLUMNS`.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from hubnet.solution import Leg, Route, Solution

#: Order in which tiers are listed: the few large legs first.
TIER_ORDER: tuple[str, ...] = ("trunk", "feeder", "direct")

#: Tiers listed in the hierarchy table even when the plan has no leg of that
#: tier (a one-hub plan has no trunk leg, and that is worth seeing). The
#: ``direct`` tier is listed only when the plan has direct legs.
ALWAYS_LISTED_TIERS: tuple[str, ...] = ("trunk", "feeder")

#: Every column of every table, with its meaning and unit. ``{unit}`` stands
#: for the scenario's volume unit (parcels, pallets, tonnes, m3 or units).
COLUMNS: dict[str, dict[str, str]] = {
    "hubs": {
        "hub_id": "Site id of the open hub.",
        "name": "Site name.",
        "throughput_per_day": (
            "Volume sorted at the hub, {unit} per day; a unit passing through counts once."
        ),
        "inbound_per_day": (
            "Originating volume of the terminals allocated to the hub, {unit} per day "
            "(what the sort capacity limits)."
        ),
        "sort_capacity_per_day": "Sort capacity, {unit} per day; empty when unlimited.",
        "utilisation": (
            "inbound_per_day / sort_capacity_per_day, a fraction (1 = full); "
            "empty when the capacity is unlimited."
        ),
        "terminal_count": (
            "Number of terminals allocated to the hub (single allocation), or sending "
            "some volume through it first (multiple allocation); the hub itself included "
            "when it is allocated to itself."
        ),
        "terminal_ids": "Ids of those terminals, joined by ';'.",
        "fixed_cost_per_day": "Fixed cost of operating the hub, currency per day.",
        "handling_cost_per_day": "Sorting cost of the throughput, currency per day.",
    },
    "legs": {
        "tier": (
            "trunk (hub to hub), feeder (terminal to hub or hub to terminal) "
            "or direct (site to site, unsorted: a pair's own freight; it may join two hub "
            "sites, beside the trunk that carries the sorted freight between them)."
        ),
        "from_site": "Site id where the leg starts.",
        "to_site": "Site id where the leg ends.",
        "distance_km": "Length of the leg, km.",
        "volume_per_day": "Volume on the leg, {unit} per day.",
        "unit_km_per_day": "volume_per_day x distance_km: unit-km per day ({unit} x km).",
        "cost_per_day": "Transport cost of the leg's volume, currency per day.",
        "cost_per_unit": "cost_per_day / volume_per_day, currency per unit of volume ({unit}).",
    },
    "routes": {
        "origin": "Site id where the volume is collected.",
        "destination": "Site id where the volume is delivered.",
        "volume_per_day": "Volume of the OD pair, {unit} per day.",
        "path": "Site ids the volume passes, from origin to destination, joined by ' > '.",
        "hub_count": "Number of hubs where the volume is sorted (0 = direct).",
        "distance_km": "Length of the path, km.",
        "cost_per_day": (
            "Transport and handling cost of the pair's volume, currency per day "
            "(hub fixed costs are not spread over routes)."
        ),
        "cost_per_unit": "cost_per_day / volume_per_day, currency per unit of volume ({unit}).",
    },
    "hierarchy": {
        "tier": (
            "trunk, feeder, direct, or all (every leg). trunk and feeder are always "
            "listed; direct only when the plan has direct legs."
        ),
        "legs": "Number of legs in the tier.",
        "volume_per_day": (
            "Sum of the legs' volumes, {unit} per day; a unit counts once on each leg it "
            "travels, so the all row exceeds the OD volume."
        ),
        "unit_km_per_day": "Sum of the legs' unit-km, unit-km per day ({unit} x km).",
        "share_of_volume": "volume_per_day over the all row's, a fraction.",
        "share_of_unit_km": "unit_km_per_day over the all row's, a fraction.",
        "cost_per_day": "Transport cost of the tier's legs, currency per day.",
        "share_of_cost": "cost_per_day over the all row's (the transport cost), a fraction.",
        "avg_distance_km": "Mean leg length, km; empty for a tier with no leg.",
        "avg_volume_per_leg": (
            "Mean leg volume, {unit} per day per leg; empty for a tier with no leg."
        ),
    },
    "rank_size": {
        "rank": "Rank of the leg by volume, 1 = largest.",
        "tier": "trunk, feeder or direct.",
        "from_site": "Site id where the leg starts.",
        "to_site": "Site id where the leg ends.",
        "volume_per_day": "Volume on the leg, {unit} per day.",
        "share_of_volume": "The leg's volume over the sum over all legs, a fraction.",
        "cumulative_share": "Sum of share_of_volume over this leg and all larger ones.",
    },
}

#: One sentence per table, used as the heading text of :func:`describe_columns`.
TABLE_PURPOSE: dict[str, str] = {
    "hubs": "One row per open hub.",
    "legs": "One row per leg the plan uses, trunk legs first, largest volume first.",
    "routes": "One row per OD pair with volume.",
    "hierarchy": (
        "One row per tier plus an all row: how volume, unit-km and cost split between "
        "a few large trunk legs and many small feeder legs."
    ),
    "rank_size": "Leg volumes from largest to smallest.",
}

#: Column name pattern of the per-class dispatch counts of the hierarchy table
#: (``dispatches_artic`` for class ``artic``).
CLASS_DISPATCH_PREFIX = "dispatches_"

#: Columns freight runs add to the tables of :data:`COLUMNS` (after their
#: columns), and the freight-only ``dispatches`` table. ``{unit}`` as in
#: :data:`COLUMNS`; ``{class}`` stands for a vehicle class id.
FREIGHT_COLUMNS: dict[str, dict[str, str]] = {
    "legs": {
        "vehicle_class": (
            "Ids of the vehicle classes run on the leg, joined by '+' "
            "(dispatches.csv has the count of each)."
        ),
        "dispatches": (
            "Vehicles run on this direction of the leg per day, all classes together. "
            "A round trip counts once on each direction of its lane; a row with "
            "volume_per_day 0 is an empty return."
        ),
        "capacity": (
            "Volume the runs can carry, {unit} per day: the sum over classes of dispatches x "
            "payload (payload after the weight and cubic limits)."
        ),
        "fill": "volume_per_day / capacity, a fraction (0 for an empty return).",
        "drive_h": "Driving hours of one run, at the slowest class run on the leg, h.",
        "transit_h": (
            "Hours from departure to arrival of one run (driving, breaks and relays) at the "
            "slowest class run on the leg, h."
        ),
        "relays": "Driver changes on one run, a count (drivers' hours rules).",
        "drivers": "Drivers on board one run, a count (2 = double-manned).",
        "vehicle_km": "dispatches x distance_km: vehicle-km per day.",
        "co2e_ttw_kg": (
            "Tank-to-wheel CO2e of the runs, kg per day: litres of fuel burnt x the fuel's "
            "tank-to-wheel factor."
        ),
        "co2e_wtw_kg": (
            "Well-to-wheel CO2e of the runs, kg per day: tank-to-wheel plus producing and "
            "delivering the fuel."
        ),
    },
    "dispatches": {
        "tier": "trunk, feeder or direct.",
        "origin": "Site id where the run starts.",
        "destination": "Site id where the run ends.",
        "vehicle_class": "Id of the vehicle class.",
        "dispatches": (
            "Vehicles of the class run on this direction per day; a round trip counts once "
            "on each direction of its lane."
        ),
        "payload": (
            "Volume one vehicle of the class carries, {unit} (after the weight and cubic limits)."
        ),
        "volume": (
            "Volume the class carries on the run, {unit} per day. When several classes share "
            "a run, the run's volume is split between them in proportion to their capacity "
            "(dispatches x payload), so each has the run's fill."
        ),
        "fill": "volume / (dispatches x payload), a fraction.",
        "distance_km": "Length of the leg, km.",
        "vehicle_km": "dispatches x distance_km: vehicle-km per day.",
        "drive_h": "Driving hours of one run of this class on the leg, h.",
        "cost": (
            "The class's own dispatches' cost on the run (fixed cost share, km, hours, relays "
            "and carbon price), currency per day; the rows of a run add up to its legs.csv "
            "cost_per_day."
        ),
        "co2e_ttw_kg": (
            "Tank-to-wheel CO2e of the class's runs, kg per day (vehicle-km x the class's "
            "fuel use x the fuel's tank-to-wheel factor)."
        ),
        "co2e_wtw_kg": (
            "Well-to-wheel CO2e of the class's runs, kg per day (vehicle-km x the class's "
            "fuel use x the fuel's well-to-wheel factor)."
        ),
    },
    "routes": {
        "transit_h": (
            "Hours from the origin's cut-off to arrival at the destination: the legs' hours "
            "(each at the slowest class run on it) plus the sort hours at every hub passed, h."
        ),
        "allowance_h": "Hours allowed from the origin's cut-off to the delivery deadline, h.",
        "slack_h": "allowance_h - transit_h: hours to spare (negative = late), h.",
    },
    "hierarchy": {
        "dispatches": (
            "Sum of the legs' dispatches, vehicle runs per day (a round trip counts once on "
            "each direction)."
        ),
        CLASS_DISPATCH_PREFIX + "{class}": (
            "Runs of vehicle class {class} per day on the tier's legs (one column per class)."
        ),
        "vehicle_km": "Sum of the legs' vehicle-km, vehicle-km per day.",
        "avg_load": (
            "volume_per_day / dispatches: {unit} per run, empty returns included; empty when "
            "the tier has no run."
        ),
        "fill_rate": (
            "volume_per_day over the runs' capacity (sum of dispatches x payload), a "
            "fraction; empty when the tier has no run."
        ),
        "avg_speed_kmh": (
            "vehicle_km / driving_h: average driving speed, km/h; empty when the tier has no run."
        ),
        "driving_h": (
            "Sum over the legs and classes of dispatches x the class's driving hours per run: "
            "vehicle driving hours per day (h)."
        ),
        "share_of_time": (
            "Share of the unit-hours in transit spent on the tier's legs (volume x transit_h "
            "of each leg over volume x transit_h of each OD route), a fraction; the all row "
            "is the share on the road, the rest is sorting at hubs."
        ),
        "co2e_ttw_kg": "Sum of the legs' tank-to-wheel CO2e, kg per day.",
        "co2e_wtw_kg": "Sum of the legs' well-to-wheel CO2e, kg per day.",
    },
}

#: Heading text of the freight-only tables in :func:`describe_columns`.
FREIGHT_TABLE_PURPOSE: dict[str, str] = {
    "dispatches": (
        "Freight runs only. One row per directed run and vehicle class: how many vehicles of "
        "each class run each leg, what they carry, their vehicle-km, cost and CO2e."
    ),
}


def _frame(
    table: str, rows: Iterable[Mapping[str, object]], columns: Sequence[str] | None = None
) -> pd.DataFrame:
    """Build a table with exactly the documented columns, in documented order."""
    return pd.DataFrame(list(rows), columns=list(COLUMNS[table] if columns is None else columns))


def is_freight(sol: Solution) -> bool:
    """True for a plan of the freight model (vehicle classes on its legs).

    Parameters
    ----------
    sol
        The plan.

    Returns
    -------
    bool
        ``True`` when the plan carries freight figures (``sol.freight``) or
        any leg has dispatches; ``False`` for a classic plan.
    """
    return bool(sol.freight) or any(g.dispatches for g in sol.legs)


def table_columns(sol: Solution, table: str) -> list[str]:
    """The columns of one table of a plan, in order.

    Parameters
    ----------
    sol
        The plan.
    table
        A table name of :data:`TABLES` or :data:`FREIGHT_TABLES`.

    Returns
    -------
    list of str
        ``COLUMNS[table]`` for a classic plan; for a freight plan followed
        by the table's :data:`FREIGHT_COLUMNS`, the per-class column of the
        hierarchy repeated for every vehicle class
        (:func:`vehicle_class_ids`). A freight-only table (``dispatches``)
        has its :data:`FREIGHT_COLUMNS`, whatever the plan.

    Raises
    ------
    KeyError
        When the table is unknown.
    """
    if table not in COLUMNS:
        return list(FREIGHT_COLUMNS[table])  # a freight-only table (KeyError if unknown)
    base = list(COLUMNS[table])
    if not is_freight(sol):
        return base
    extra: list[str] = []
    for column in FREIGHT_COLUMNS.get(table, {}):
        if column == CLASS_DISPATCH_PREFIX + "{class}":
            extra += [CLASS_DISPATCH_PREFIX + c for c in vehicle_class_ids(sol)]
        else:
            extra.append(column)
    return [*base, *extra]


def vehicle_class_ids(sol: Solution) -> list[str]:
    """Vehicle class ids of a freight plan: the order of ``sol.freight["by_class"]``.

    Classes found on legs but not in ``by_class`` follow, sorted. Empty for
    a classic plan.
    """
    by_class = sol.freight.get("by_class") if sol.freight else None
    ids = [str(k) for k in by_class] if isinstance(by_class, Mapping) else []
    seen = {c for g in sol.legs for c, n in g.dispatches.items() if n > 0}
    return [*ids, *sorted(seen - set(ids))]


def _class_figure(sol: Solution, class_id: str, key: str) -> float | None:
    """A figure of ``sol.freight["by_class"][class_id]``, or ``None`` when absent."""
    by_class = sol.freight.get("by_class") if sol.freight else None
    record = by_class.get(class_id) if isinstance(by_class, Mapping) else None
    value = record.get(key) if isinstance(record, Mapping) else None
    if isinstance(value, bool) or not isinstance(value, int | float):
        return None
    return float(value) if math.isfinite(value) else None


@dataclass(frozen=True, slots=True)
class ClassRun:
    """The runs of one vehicle class on one directed leg (a row of ``dispatches``).

    Attributes
    ----------
    leg
        The leg.
    vehicle_class
        Class id.
    dispatches
        Runs of the class on the leg per day.
    payload
        Units one vehicle of the class carries (NaN when unknown).
    share
        The class's share of the leg's capacity (of its dispatches when a
        payload is unknown), 0..1: its share of the leg's volume and cost.
    co2e_wtw_kg, co2e_ttw_kg
        Well-to-wheel and tank-to-wheel CO2e of the class's runs, kg per day
        (NaN when the leg has none).
    """

    leg: Leg
    vehicle_class: str
    dispatches: float
    payload: float
    share: float
    co2e_wtw_kg: float
    co2e_ttw_kg: float = math.nan

    @property
    def volume(self) -> float:
        """The class's share of the leg's volume, units per day."""
        return self.leg.volume * self.share

    @property
    def cost(self) -> float:
        """The class's own dispatches' cost on the leg, currency per day."""
        own = self.leg.class_cost.get(self.vehicle_class)
        return float(own) if own is not None else self.leg.cost * self.share

    @property
    def vehicle_km(self) -> float:
        """``dispatches x distance``, vehicle-km per day."""
        return self.dispatches * self.leg.distance_km


def class_runs(sol: Solution, leg: Leg, classes: Sequence[str] | None = None) -> list[ClassRun]:
    """Split a freight leg's runs by vehicle class.

    Dispatches and vehicle-km are the leg's own, per class. When several
    classes share the leg, its volume and cost are split in proportion to
    the classes' capacity (dispatches x payload), and its CO2e in proportion
    to dispatches x the class's CO2e per vehicle-km (from
    ``sol.freight["by_class"]``: exact, as fuel use is per km). With one
    class, every figure is the leg's own.

    Parameters
    ----------
    sol
        The plan (for the classes' payloads and CO2e per vehicle-km).
    leg
        One of its legs.
    classes
        Class ids in output order (default :func:`vehicle_class_ids`).

    Returns
    -------
    list of ClassRun
        One per class with dispatches on the leg, in class order; empty
        for a classic leg.
    """
    order = {c: i for i, c in enumerate(vehicle_class_ids(sol) if classes is None else classes)}
    counts = sorted(
        ((str(c), float(n)) for c, n in leg.dispatches.items() if n > 0),
        key=lambda cn: (order.get(cn[0], len(order)), cn[0]),
    )
    if not counts:
        return []
    payloads: list[float] = []
    for c, n in counts:
        p = _class_figure(sol, c, "payload")
        if p is None and len(counts) == 1 and leg.capacity is not None:
            p = leg.capacity / n
        payloads.append(math.nan if p is None else p)
    caps = [n * p for (_, n), p in zip(counts, payloads, strict=True)]
    total_n = sum(n for _, n in counts)
    if all(math.isfinite(c) for c in caps) and sum(caps) > 0:
        shares = [c / sum(caps) for c in caps]
    else:
        shares = [n / total_n for _, n in counts]
    split = {
        key: _co2e_split(sol, counts, key, getattr(leg, key))
        for key in ("co2e_wtw_kg", "co2e_ttw_kg")
    }
    return [
        ClassRun(
            leg=leg,
            vehicle_class=c,
            dispatches=n,
            payload=p,
            share=share,
            co2e_wtw_kg=wtw,
            co2e_ttw_kg=ttw,
        )
        for (c, n), p, share, wtw, ttw in zip(
            counts, payloads, shares, split["co2e_wtw_kg"], split["co2e_ttw_kg"], strict=True
        )
    ]


def _co2e_split(
    sol: Solution, counts: Sequence[tuple[str, float]], key: str, leg_kg: float | None
) -> list[float]:
    """A leg's CO2e (``key``, kg per day) split over its classes' runs.

    In proportion to dispatches x the class's CO2e per vehicle-km on that
    basis (exact, as fuel use is per km); by dispatches when a rate is unknown.
    """
    rates: list[float] = []
    for c, _ in counts:
        co2e, vkm = _class_figure(sol, c, key), _class_figure(sol, c, "vehicle_km")
        rates.append(co2e / vkm if co2e is not None and vkm else math.nan)
    weights = [n * r for (_, n), r in zip(counts, rates, strict=True)]
    if not all(math.isfinite(w) for w in weights) or sum(weights) <= 0:
        weights = [n for _, n in counts]
    total = math.nan if leg_kg is None else float(leg_kg)
    return [total * w / sum(weights) for w in weights]


def _none_nan(value: float | None) -> float:
    """A float, NaN for ``None`` (an empty CSV cell)."""
    return math.nan if value is None else float(value)


def _ratio(numerator: float, denominator: float) -> float:
    """``numerator / denominator``, NaN when the denominator is zero."""
    return numerator / denominator if denominator else math.nan


def _tier_rank(tier: str) -> int:
    return TIER_ORDER.index(tier) if tier in TIER_ORDER else len(TIER_ORDER)


def _sorted_legs(sol: Solution) -> list[Leg]:
    """Legs largest volume first; ties by tier order, then site ids."""
    return sorted(
        sol.legs,
        key=lambda g: (-g.volume, _tier_rank(g.tier), g.origin, g.destination),
    )


def hubs_table(sol: Solution) -> pd.DataFrame:
    """One row per open hub, with throughput, capacity use and costs.

    Parameters
    ----------
    sol
        The plan.

    Returns
    -------
    pandas.DataFrame
        Columns as in ``COLUMNS["hubs"]``: volumes in ``sol.volume_unit``
        per day, costs in currency per day, ``utilisation`` a fraction
        (NaN when the hub's capacity is unlimited). Rows in the plan's
        hub order.
    """
    return _frame(
        "hubs",
        (
            {
                "hub_id": h.id,
                "name": sol.site_names.get(h.id, ""),
                "throughput_per_day": float(h.throughput),
                "inbound_per_day": float(h.inbound),
                "sort_capacity_per_day": math.nan if h.capacity is None else float(h.capacity),
                "utilisation": math.nan if h.utilisation is None else h.utilisation,
                "terminal_count": len(h.terminals),
                "terminal_ids": ";".join(h.terminals),
                "fixed_cost_per_day": float(h.fixed_cost),
                "handling_cost_per_day": float(h.handling_cost),
            }
            for h in sol.hubs
        ),
    )


def legs_table(sol: Solution) -> pd.DataFrame:
    """One row per leg: tier, ends, distance, volume, unit-km and cost.

    Parameters
    ----------
    sol
        The plan.

    Returns
    -------
    pandas.DataFrame
        Columns as in ``COLUMNS["legs"]``: ``distance_km`` in km,
        ``volume_per_day`` in ``sol.volume_unit`` per day,
        ``unit_km_per_day`` in unit-km per day, ``cost_per_day`` in
        currency per day, ``cost_per_unit`` in currency per unit (NaN for
        a leg without volume). Trunk legs first, then feeder, then direct;
        within a tier the largest volume first. A freight plan adds the
        columns of ``FREIGHT_COLUMNS["legs"]`` (one row per directed run,
        empty returns included): dispatches per day, capacity in
        ``sol.volume_unit`` per day, ``fill`` a fraction, hours, vehicle-km
        per day and CO2e in kg per day.
    """
    legs = _legs_in_table_order(sol)
    freight = is_freight(sol)

    def row(g: Leg) -> dict[str, object]:
        out: dict[str, object] = {
            "tier": g.tier,
            "from_site": g.origin,
            "to_site": g.destination,
            "distance_km": float(g.distance_km),
            "volume_per_day": float(g.volume),
            "unit_km_per_day": float(g.unit_km),
            "cost_per_day": float(g.cost),
            "cost_per_unit": _ratio(g.cost, g.volume),
        }
        if freight:
            out.update(
                {
                    "vehicle_class": g.vehicle_classes,
                    "dispatches": float(sum(g.dispatches.values())),
                    "capacity": _none_nan(g.capacity),
                    "fill": _none_nan(g.fill),
                    "drive_h": _none_nan(g.drive_h),
                    "transit_h": _none_nan(g.transit_h),
                    "relays": int(g.relays),
                    "drivers": int(g.drivers),
                    "vehicle_km": _none_nan(g.vehicle_km),
                    "co2e_ttw_kg": _none_nan(g.co2e_ttw_kg),
                    "co2e_wtw_kg": _none_nan(g.co2e_wtw_kg),
                }
            )
        return out

    return _frame("legs", (row(g) for g in legs), table_columns(sol, "legs"))


def _legs_in_table_order(sol: Solution) -> list[Leg]:
    """Legs as ``legs.csv`` lists them: tier order, then largest volume, then site ids."""
    return sorted(sol.legs, key=lambda g: (_tier_rank(g.tier), -g.volume, g.origin, g.destination))


def dispatches_table(sol: Solution) -> pd.DataFrame:
    """Freight plans: one row per directed run and vehicle class.

    Parameters
    ----------
    sol
        The plan.

    Returns
    -------
    pandas.DataFrame
        Columns as in ``FREIGHT_COLUMNS["dispatches"]``: ``dispatches``
        (runs per day), ``payload`` in ``sol.volume_unit`` per vehicle,
        ``volume`` in ``sol.volume_unit`` per day, ``fill`` a fraction,
        ``distance_km`` in km, ``vehicle_km`` per day, ``drive_h`` in
        hours, ``cost`` in currency per day, ``co2e_wtw_kg`` in kg per day.
        Rows in the order of ``legs.csv``, the classes of a leg in class
        order; a leg shared by classes is split as :func:`class_runs` says,
        so the rows of a leg add up to its ``legs.csv`` row. Empty (with
        the columns) for a classic plan.
    """
    classes = vehicle_class_ids(sol)
    rows = []
    for g in _legs_in_table_order(sol):
        for run in class_runs(sol, g, classes):
            capacity = run.dispatches * run.payload
            rows.append(
                {
                    "tier": g.tier,
                    "origin": g.origin,
                    "destination": g.destination,
                    "vehicle_class": run.vehicle_class,
                    "dispatches": run.dispatches,
                    "payload": run.payload,
                    "volume": run.volume,
                    "fill": _ratio(run.volume, capacity) if math.isfinite(capacity) else math.nan,
                    "distance_km": float(g.distance_km),
                    "vehicle_km": run.vehicle_km,
                    "drive_h": _none_nan(g.class_drive_h.get(run.vehicle_class, g.drive_h)),
                    "cost": run.cost,
                    "co2e_ttw_kg": run.co2e_ttw_kg,
                    "co2e_wtw_kg": run.co2e_wtw_kg,
                }
            )
    return _frame("dispatches", rows, table_columns(sol, "dispatches"))


def routes_table(sol: Solution) -> pd.DataFrame:
    """One row per OD pair: the path its volume takes, its length and cost.

    Parameters
    ----------
    sol
        The plan.

    Returns
    -------
    pandas.DataFrame
        Columns as in ``COLUMNS["routes"]``: ``volume_per_day`` in
        ``sol.volume_unit`` per day, ``distance_km`` in km,
        ``cost_per_day`` (transport and handling) in currency per day,
        ``cost_per_unit`` in currency per unit. Sorted by origin, then
        destination. A freight plan adds ``transit_h``, ``allowance_h`` and
        ``slack_h`` (hours).
    """
    routes = sorted(sol.routes, key=lambda r: (r.origin, r.destination))
    freight = is_freight(sol)

    def row(r: Route) -> dict[str, object]:
        out: dict[str, object] = {
            "origin": r.origin,
            "destination": r.destination,
            "volume_per_day": float(r.volume),
            "path": " > ".join(r.path),
            "hub_count": len(r.hubs),
            "distance_km": float(r.distance_km),
            "cost_per_day": float(r.cost),
            "cost_per_unit": _ratio(r.cost, r.volume),
        }
        if freight:
            out.update(
                {
                    "transit_h": _none_nan(r.transit_h),
                    "allowance_h": _none_nan(r.allowance_h),
                    "slack_h": _none_nan(r.slack_h),
                }
            )
        return out

    return _frame("routes", (row(r) for r in routes), table_columns(sol, "routes"))


def hierarchy_table(sol: Solution) -> pd.DataFrame:
    """Legs, volume, unit-km and cost per tier, with each tier's share.

    This is the flow hierarchy of the plan in numbers: typically a few
    trunk legs carrying large volumes far, and many feeder legs carrying
    small volumes a short way.

    Parameters
    ----------
    sol
        The plan.

    Returns
    -------
    pandas.DataFrame
        Columns as in ``COLUMNS["hierarchy"]``. Rows ``trunk`` and
        ``feeder`` always, ``direct`` when the plan has direct legs, then
        ``all``. Volumes in ``sol.volume_unit`` per day (summed over legs,
        so a unit counts once per leg it travels), unit-km per day,
        currency per day, distances in km; shares are fractions of the
        ``all`` row (NaN when that total is zero) and sum to 1 over the
        tier rows. Averages are NaN for a tier with no leg. A freight plan
        adds the columns of ``FREIGHT_COLUMNS["hierarchy"]``: runs per day
        (all classes, then one ``dispatches_<class>`` column per class),
        vehicle-km per day, ``avg_load`` in ``sol.volume_unit`` per run,
        ``fill_rate`` and ``share_of_time`` fractions, ``avg_speed_kmh`` in
        km/h, ``driving_h`` in vehicle-hours per day and ``co2e_wtw_kg`` in
        kg per day.
    """
    present = {g.tier for g in sol.legs}
    tiers = [t for t in TIER_ORDER if t in ALWAYS_LISTED_TIERS or t in present]
    freight = is_freight(sol)
    classes = vehicle_class_ids(sol) if freight else []
    route_hours = float(sum(r.volume * (r.transit_h or 0.0) for r in sol.routes))

    def freight_totals(legs: list[Leg]) -> dict[str, float]:
        runs = float(sum(sum(g.dispatches.values()) for g in legs))
        volume = float(sum(g.volume for g in legs))
        vkm = float(sum(g.vehicle_km or 0.0 for g in legs))
        driving = float(
            sum(
                n * g.class_drive_h.get(c, g.drive_h or 0.0)
                for g in legs
                for c, n in g.dispatches.items()
            )
        )
        out = {
            "dispatches": runs,
            **{
                CLASS_DISPATCH_PREFIX + c: float(sum(g.dispatches.get(c, 0.0) for g in legs))
                for c in classes
            },
            "vehicle_km": vkm,
            "avg_load": _ratio(volume, runs),
            "fill_rate": _ratio(volume, float(sum(g.capacity or 0.0 for g in legs))),
            "avg_speed_kmh": _ratio(vkm, driving),
            "driving_h": driving,
            "share_of_time": _ratio(
                float(sum(g.volume * (g.transit_h or 0.0) for g in legs)), route_hours
            ),
            "co2e_ttw_kg": float(sum(g.co2e_ttw_kg or 0.0 for g in legs)),
            "co2e_wtw_kg": float(sum(g.co2e_wtw_kg or 0.0 for g in legs)),
        }
        return out

    def totals(legs: list[Leg]) -> dict[str, float]:
        return {
            "legs": len(legs),
            "volume_per_day": float(sum(g.volume for g in legs)),
            "unit_km_per_day": float(sum(g.unit_km for g in legs)),
            "cost_per_day": float(sum(g.cost for g in legs)),
            "distance_km": float(sum(g.distance_km for g in legs)),
        }

    everything = totals(list(sol.legs))
    rows = []
    for tier in [*tiers, "all"]:
        t = everything if tier == "all" else totals([g for g in sol.legs if g.tier == tier])
        rows.append(
            {
                "tier": tier,
                "legs": int(t["legs"]),
                "volume_per_day": t["volume_per_day"],
                "unit_km_per_day": t["unit_km_per_day"],
                "share_of_volume": _ratio(t["volume_per_day"], everything["volume_per_day"]),
                "share_of_unit_km": _ratio(t["unit_km_per_day"], everything["unit_km_per_day"]),
                "cost_per_day": t["cost_per_day"],
                "share_of_cost": _ratio(t["cost_per_day"], everything["cost_per_day"]),
                "avg_distance_km": _ratio(t["distance_km"], t["legs"]),
                "avg_volume_per_leg": _ratio(t["volume_per_day"], t["legs"]),
            }
        )
        if freight:
            tier_legs = list(sol.legs) if tier == "all" else [g for g in sol.legs if g.tier == tier]
            rows[-1].update(freight_totals(tier_legs))
    return _frame("hierarchy", rows, table_columns(sol, "hierarchy"))


def rank_size_table(sol: Solution) -> pd.DataFrame:
    """Leg volumes from largest to smallest, with shares and cumulative shares.

    Parameters
    ----------
    sol
        The plan.

    Returns
    -------
    pandas.DataFrame
        Columns as in ``COLUMNS["rank_size"]``: ``rank`` 1 for the largest
        leg (ties broken by tier order, then site ids), ``volume_per_day``
        in ``sol.volume_unit`` per day, shares as fractions of the total
        leg volume (NaN when it is zero).
    """
    legs = _sorted_legs(sol)
    total = float(sum(g.volume for g in legs))
    running = 0.0
    rows = []
    for rank, g in enumerate(legs, start=1):
        running += g.volume
        rows.append(
            {
                "rank": rank,
                "tier": g.tier,
                "from_site": g.origin,
                "to_site": g.destination,
                "volume_per_day": float(g.volume),
                "share_of_volume": _ratio(g.volume, total),
                "cumulative_share": _ratio(running, total),
            }
        )
    return _frame("rank_size", rows)


def rank_size_exponent(sol: Solution) -> float | None:
    """Rank-size (Zipf-type) exponent of the leg volumes.

    Fits ``log(volume) = a - b * log(rank)`` by ordinary least squares over
    the legs with positive volume, ranked as in :func:`rank_size_table`,
    and returns ``b``: the volume of the leg of rank ``r`` is then roughly
    proportional to ``r ** -b``. A larger ``b`` means volume is more
    concentrated on the largest legs; ``b = 0`` means all legs carry the
    same volume.

    Parameters
    ----------
    sol
        The plan.

    Returns
    -------
    float or None
        The exponent (dimensionless), or ``None`` when fewer than three
        legs carry volume.

    Examples
    --------
    Volumes ``100 / r**1.5`` for ranks 1 to 5 give back 1.5 (see the tests).
    """
    volumes = [g.volume for g in _sorted_legs(sol) if g.volume > 0]
    return _power_law_exponent(volumes)


def _power_law_exponent(volumes_descending: list[float]) -> float | None:
    """Least-squares ``b`` of ``log(v) = a - b log(rank)`` for volumes sorted descending."""
    if len(volumes_descending) < 3:
        return None
    x = np.log(np.arange(1, len(volumes_descending) + 1, dtype=float))
    y = np.log(np.asarray(volumes_descending, dtype=float))
    dx = x - x.mean()
    slope = float(np.dot(dx, y - y.mean()) / np.dot(dx, dx))
    return -slope


#: Every table by the file stem it is written under (``hubs`` -> ``hubs.csv``).
TABLES: dict[str, Callable[[Solution], pd.DataFrame]] = {
    "hubs": hubs_table,
    "legs": legs_table,
    "routes": routes_table,
    "hierarchy": hierarchy_table,
    "rank_size": rank_size_table,
}

#: Tables only freight plans have (``dispatches`` -> ``dispatches.csv``).
FREIGHT_TABLES: dict[str, Callable[[Solution], pd.DataFrame]] = {
    "dispatches": dispatches_table,
}


def all_tables(sol: Solution) -> dict[str, pd.DataFrame]:
    """Every table of the plan, keyed by name (``hubs``, ``legs``, ...).

    A freight plan (:func:`is_freight`) also gets the tables of
    :data:`FREIGHT_TABLES`, after ``legs``.
    """
    builders = dict(TABLES)
    if is_freight(sol):
        builders = {}
        for name, build in TABLES.items():
            builders[name] = build
            if name == "legs":
                builders.update(FREIGHT_TABLES)
    return {name: build(sol) for name, build in builders.items()}


def column_doc(table: str, column: str, volume_unit: str = "units") -> str:
    """The documentation of one column, with the volume unit filled in.

    Columns of freight runs (:data:`FREIGHT_COLUMNS`) are documented too,
    ``dispatches_<class>`` of the hierarchy with the class id filled in.

    Raises
    ------
    KeyError
        When the table or column is unknown.
    """
    if column in COLUMNS.get(table, {}):
        return COLUMNS[table][column].replace("{unit}", volume_unit)
    freight = FREIGHT_COLUMNS.get(table)
    if freight is None and table not in COLUMNS:
        raise KeyError(table)
    freight = freight or {}
    if column in freight:
        return freight[column].replace("{unit}", volume_unit)
    pattern = CLASS_DISPATCH_PREFIX + "{class}"
    if column.startswith(CLASS_DISPATCH_PREFIX) and pattern in freight:
        class_id = column[len(CLASS_DISPATCH_PREFIX) :]
        return freight[pattern].replace("{class}", class_id).replace("{unit}", volume_unit)
    raise KeyError(column)


def _markdown_rows(table: str, columns: Iterable[str], volume_unit: str) -> list[str]:
    """Markdown table rows documenting columns (``{class}`` shown as ``<class>``)."""
    rows = ["| column | meaning |\n|---|---|"]
    for column in columns:
        text = column_doc(table, column, volume_unit).replace("|", "\\|")
        text = text.replace("{class}", "`<class>`")
        rows.append(f"| `{column.replace('{class}', '<class>')}` | {text} |")
    return rows


def describe_columns(volume_unit: str = "units", *, freight: bool = False) -> str:
    """Markdown documenting every column of every table, for the README.

    Parameters
    ----------
    volume_unit
        The volume unit to name in the text (``units`` gives the generic
        wording).
    freight
        Also document what freight runs add: the extra columns of
        ``legs.csv``, ``routes.csv`` and ``hierarchy.csv`` and the
        ``dispatches.csv`` table.

    Returns
    -------
    str
        One ``###`` section per table file (``hubs.csv`` ...) with a
        two-column markdown table: column name and meaning with unit. With
        ``freight``, each table freight runs extend gets a second table of
        its added columns, and ``dispatches.csv`` a section of its own.
    """
    parts: list[str] = []
    for table, columns in COLUMNS.items():
        parts.append(f"### {table}.csv\n\n{TABLE_PURPOSE[table]}\n")
        parts += _markdown_rows(table, columns, volume_unit)
        parts.append("")
        if freight and table in FREIGHT_COLUMNS:
            parts.append("Freight runs add:\n")
            parts += _markdown_rows(table, FREIGHT_COLUMNS[table], volume_unit)
            parts.append("")
        if freight and table == "legs":
            for extra, purpose in FREIGHT_TABLE_PURPOSE.items():
                parts.append(f"### {extra}.csv\n\n{purpose}\n")
                parts += _markdown_rows(extra, FREIGHT_COLUMNS[extra], volume_unit)
                parts.append("")
    return "\n".join(parts)
