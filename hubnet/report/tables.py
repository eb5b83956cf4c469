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
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping

import numpy as np
import pandas as pd

from hubnet.solution import Leg, Solution

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
            "or direct (terminal to terminal)."
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


def _frame(table: str, rows: Iterable[Mapping[str, object]]) -> pd.DataFrame:
    """Build a table with exactly the documented columns, in documented order."""
    return pd.DataFrame(list(rows), columns=list(COLUMNS[table]))


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
        within a tier the largest volume first.
    """
    legs = sorted(sol.legs, key=lambda g: (_tier_rank(g.tier), -g.volume, g.origin, g.destination))
    return _frame(
        "legs",
        (
            {
                "tier": g.tier,
                "from_site": g.origin,
                "to_site": g.destination,
                "distance_km": float(g.distance_km),
                "volume_per_day": float(g.volume),
                "unit_km_per_day": float(g.unit_km),
                "cost_per_day": float(g.cost),
                "cost_per_unit": _ratio(g.cost, g.volume),
            }
            for g in legs
        ),
    )


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
        destination.
    """
    routes = sorted(sol.routes, key=lambda r: (r.origin, r.destination))
    return _frame(
        "routes",
        (
            {
                "origin": r.origin,
                "destination": r.destination,
                "volume_per_day": float(r.volume),
                "path": " > ".join(r.path),
                "hub_count": len(r.hubs),
                "distance_km": float(r.distance_km),
                "cost_per_day": float(r.cost),
                "cost_per_unit": _ratio(r.cost, r.volume),
            }
            for r in routes
        ),
    )


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
        tier rows. Averages are NaN for a tier with no leg.
    """
    present = {g.tier for g in sol.legs}
    tiers = [t for t in TIER_ORDER if t in ALWAYS_LISTED_TIERS or t in present]

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
    return _frame("hierarchy", rows)


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


def all_tables(sol: Solution) -> dict[str, pd.DataFrame]:
    """Every table of the plan, keyed by name (``hubs``, ``legs``, ...)."""
    return {name: build(sol) for name, build in TABLES.items()}


def column_doc(table: str, column: str, volume_unit: str = "units") -> str:
    """The documentation of one column, with the volume unit filled in.

    Raises
    ------
    KeyError
        When the table or column is unknown.
    """
    return COLUMNS[table][column].replace("{unit}", volume_unit)


def describe_columns(volume_unit: str = "units") -> str:
    """Markdown documenting every column of every table, for the README.

    Parameters
    ----------
    volume_unit
        The volume unit to name in the text (``units`` gives the generic
        wording).

    Returns
    -------
    str
        One ``###`` section per table file (``hubs.csv`` ...) with a
        two-column markdown table: column name and meaning with unit.
    """
    parts: list[str] = []
    for table, columns in COLUMNS.items():
        parts.append(f"### {table}.csv\n\n{TABLE_PURPOSE[table]}\n")
        parts.append("| column | meaning |\n|---|---|")
        for column in columns:
            text = column_doc(table, column, volume_unit).replace("|", "\\|")
            parts.append(f"| `{column}` | {text} |")
        parts.append("")
    return "\n".join(parts)
