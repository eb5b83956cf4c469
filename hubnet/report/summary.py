"""The machine-readable summary of a run (``summary.json``).

:func:`summary_dict` gathers what a script or a nightly job needs to judge a
run without opening the tables: the solver's status, objective, best bound
and gap (so a proven optimum is told from a time-limited plan), the cost by
component, volumes, leg counts per tier, the check of the re-priced cost
against the solver's objective, and plain-sentence cautions. The result is
JSON-serialisable as is: only dicts, lists, strings, finite numbers,
booleans and ``None`` (never NaN or infinity).
"""

from __future__ import annotations

import importlib.metadata
import json
import math
import sys
from collections.abc import Mapping
from pathlib import Path, PurePath
from typing import Any

import numpy as np

from hubnet.config import ScenarioConfig
from hubnet.report.tables import TIER_ORDER, rank_size_exponent
from hubnet.solution import Solution

#: Decimal places kept in the summary: money keeps sub-cent precision.
MONEY_DECIMALS = 4
VOLUME_DECIMALS = 6
KM_DECIMALS = 3
SECONDS_DECIMALS = 3
HOURS_DECIMALS = 6
KG_DECIMALS = 3
RATIO_DECIMALS = 6
#: Significant digits kept for ratios that may be tiny (the gap).
RATIO_SIGNIFICANT = 6

#: Relative difference between the re-priced cost and the solver's objective
#: above which the summary warns (solver tolerances stay well below it).
OBJECTIVE_CHECK_TOLERANCE = 1e-6

#: Order of the cost components in the summary (any other component follows).
#: Classic runs have hub_fixed, handling, collection, transfer, distribution and
#: total; freight runs hub_fixed, handling, feeder, trunk, direct, time, total
#: and carbon_in_vehicles (the carbon price already inside the legs' costs,
#: not to be added to the total).
COST_ORDER = (
    "hub_fixed",
    "handling",
    "collection",
    "transfer",
    "distribution",
    "feeder",
    "trunk",
    "direct",
    "time",
    "total",
    "carbon_in_vehicles",
)

#: Freight figures (``Solution.freight``) copied to the top level of the
#: summary, with the decimals kept. The other freight figures go in the
#: ``freight`` key.
FREIGHT_TOP_LEVEL: dict[str, int] = {
    "vehicles": VOLUME_DECIMALS,
    "dispatches": VOLUME_DECIMALS,
    "vehicle_km": KM_DECIMALS,
    "avg_transit_h": HOURS_DECIMALS,
    "max_transit_h": HOURS_DECIMALS,
    "service_level": RATIO_DECIMALS,
    "co2e_kg": KG_DECIMALS,
    "co2e_ttw_kg": KG_DECIMALS,
    "co2e_wtw_kg": KG_DECIMALS,
    "co2e_t": RATIO_DECIMALS,
    "feeder_h_per_unit": HOURS_DECIMALS,
    "trunk_h_per_unit": HOURS_DECIMALS,
}

#: Cautions every summary carries, whatever the plan.
STANDING_CAUTIONS: tuple[str, ...] = (
    "This plan is a decision aid, not an operating instruction: it is only as good as "
    "the input data and parameters, and it must be reviewed by people who know the "
    "network before it is acted on.",
    "Drivers' hours, vehicle weights and vehicle dimensions are governed by the "
    "regulations where the vehicles run, and hubnet does not guarantee compliance. With "
    "vehicle classes it applies only the daily driving and break limits of the rule set "
    "chosen and each class's payload limits (in units, and in kg or m3 where given); it "
    "does not check gross or axle weights or vehicle dimensions. Confirm that every leg "
    "and vehicle of the plan complies with your local regulations before acting on it.",
)


def _shown(path: PurePath | None) -> str | None:
    """An input file as the checks name it (:func:`hubnet.inputs.shown_path`).

    Under the working folder relative and without ``..`` steps
    (``demo_regions/iberia/sites.csv``), else absolute.
    """
    from hubnet.inputs import shown_path

    return None if path is None else shown_path(Path(path))


def hubnet_version() -> str:
    """The installed hubnet version, or ``"unknown"`` when running from a bare checkout."""
    version = getattr(sys.modules.get("hubnet"), "__version__", None)
    if isinstance(version, str):
        return version
    try:
        return importlib.metadata.version("hubnet")
    except importlib.metadata.PackageNotFoundError:
        return "unknown"


def _finite(x: float | None) -> float | None:
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def _round(x: float | None, decimals: int) -> float | None:
    """Round to a number of decimals; ``None`` for None, NaN and infinity."""
    x = _finite(x)
    return None if x is None else round(x, decimals) + 0.0  # + 0.0 turns -0.0 into 0.0


def _significant(x: float | None, digits: int = RATIO_SIGNIFICANT) -> float | None:
    """Round to significant digits (for ratios that may be tiny, like a gap)."""
    x = _finite(x)
    if x is None or x == 0:
        return x
    return round(x, digits - 1 - math.floor(math.log10(abs(x)))) + 0.0


def jsonable(value: Any) -> Any:
    """Turn a value into plain JSON types, non-finite floats into ``None``.

    Mappings become dicts with string keys, sequences and sets become lists,
    numpy scalars and arrays become Python numbers and lists, paths become
    strings; anything else is written as its ``str``.
    """
    if value is None or isinstance(value, bool | str | int):
        return value
    if isinstance(value, float):
        return _finite(value)
    if isinstance(value, np.generic):
        return jsonable(value.item())
    if isinstance(value, np.ndarray):
        return jsonable(value.tolist())
    if isinstance(value, PurePath):
        return str(value)
    if isinstance(value, Mapping):
        return {str(k): jsonable(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [jsonable(v) for v in value]
    if isinstance(value, set | frozenset):
        return [jsonable(v) for v in sorted(value, key=str)]
    return str(value)


def _plan_cautions(sol: Solution, check: float | None) -> list[str]:
    """Cautions that depend on this plan: solver status, cost check, hub capacity."""
    stats = sol.stats
    out: list[str] = []
    if stats.status == "time_limit":
        gap = _finite(stats.gap)
        gap_text = "unknown" if gap is None else f"{gap * 100:.3g} %"
        out.append(
            "The solver stopped at its time limit: this plan is not proven optimal "
            f"(gap {gap_text}); a cheaper plan may exist."
        )
    elif stats.status == "infeasible":
        out.append("The model has no feasible plan with these inputs and parameters.")
    elif stats.status == "error":
        out.append("The solver reported an error; do not rely on the figures of this run.")
    if check is not None and stats.objective is not None:
        scale = max(1.0, abs(stats.objective))
        if abs(check) > OBJECTIVE_CHECK_TOLERANCE * scale:
            out.append(
                f"The plan re-priced from its hubs and routes costs {sol.costs['total']:.2f} "
                f"per day, which differs from the solver's objective {stats.objective:.2f} "
                f"by {check:.4g}; please report this as a possible defect."
            )
    if sol.freight:
        out.append(
            "Drivers' hours are checked run by run (daily driving and breaks, with relays or "
            "a second driver where a run is longer than one driver's day); weekly limits, "
            "daily and weekly rest, duty rosters and whether one driver can also drive the "
            "return run are not modelled."
        )
        out.append(
            "Vehicle counts assume a vehicle repeats its round trip as soon as it is back; "
            "they are not a vehicle schedule."
        )
    for h in sol.hubs:
        use = h.utilisation
        if use is not None and use > 1 + OBJECTIVE_CHECK_TOLERANCE:
            out.append(
                f"Hub {h.id} takes in {h.inbound:.6g} {sol.volume_unit} per day, above its "
                f"sort capacity of {h.capacity:.6g} ({use * 100:.1f} %)."
            )
    return out


def clock_text(hours: float) -> str:
    """Hours after midnight as a time of day ``HH:MM`` (``24:00`` stays ``24:00``).

    Examples
    --------
    >>> clock_text(18.0), clock_text(8.5), clock_text(24.0)
    ('18:00', '08:30', '24:00')
    """
    minutes = round(hours * 60.0)
    return f"{minutes // 60:02d}:{minutes % 60:02d}"


def _freight_config_info(config: ScenarioConfig) -> dict[str, Any]:
    """The freight model's settings: ``[service]``, ``[hours]`` and ``[freight]``.

    The ``[freight]`` section is written as ``freight_settings``: the
    summary's ``freight`` key holds the plan's freight figures.
    """
    fp = config.freight
    service, hours = fp.service, fp.hours
    return {
        "service": {
            "cutoff": clock_text(service.cutoff_h),
            "deliver_by": clock_text(service.deliver_by_h),
            "days": service.days,
            "sort_hours": service.sort_hours,
        },
        "hours": {
            "rules": hours.rules,
            "long_legs": hours.long_legs,
            "relay_minutes": hours.relay_minutes,
            "relay_cost": hours.relay_cost,
            "second_driver_cost_per_hour": hours.second_driver_cost_per_hour,
        },
        "freight_settings": {
            "round_trips": fp.round_trips,
            "integer_vehicles": fp.integer_vehicles,
            "direct_min_load": fp.direct_min_load,
            "value_of_time": fp.value_of_time,
            "carbon_price_per_t": fp.carbon_price_per_t,
            "emissions_basis": fp.emissions_basis,
            "max_transit_h": fp.max_transit_h,
            "minimise": fp.minimise,
        },
    }


def _config_info(config: ScenarioConfig) -> dict[str, Any]:
    """The parts of a config that explain the figures (model, distances, inputs).

    A freight config (one naming a vehicles file) leaves the classic cost
    factors out of ``model``, adds the vehicles file and
    the unit weight and cubic volume to ``inputs``, and the ``service``,
    ``hours`` and ``freight_settings`` (the ``[freight]`` section) keys.
    """
    m, dist, inp = config.model, config.distances, config.inputs
    info: dict[str, Any] = {
        "description": config.description,
        "model": {
            "allocation": m.allocation,
            "hubs": m.hubs,
            "capacitated": m.capacitated,
            "collection_factor": m.collection_factor,
            "transfer_factor": m.transfer_factor,
            "distribution_factor": m.distribution_factor,
            "cost_per_unit_km": m.cost_per_unit_km,
        },
        "distances": {"method": dist.method, "circuity": dist.circuity},
        "inputs": {
            "sites": _shown(inp.sites),
            "demand": _shown(inp.demand),
            "distances": _shown(inp.distances),
            "sheet": inp.sheet,
        },
    }
    if inp.vehicles is not None:
        # The freight model prices vehicles, not unit-km: the classic cost
        # factors play no part in its figures.
        for key in ("collection_factor", "transfer_factor", "distribution_factor"):
            del info["model"][key]
        del info["model"]["cost_per_unit_km"]
        info["inputs"].update(
            {
                "vehicles": _shown(inp.vehicles),
                "fuels": _shown(inp.fuels),
                "kg_per_unit": config.freight.kg_per_unit,
                "m3_per_unit": config.freight.m3_per_unit,
            }
        )
        info.update(_freight_config_info(config))
    return info


def _freight_value(key: str, value: Any) -> Any:
    """A freight figure rounded by its kind (read from its key), recursively."""
    if isinstance(value, Mapping):
        return {str(k): _freight_value(str(k), v) for k, v in value.items()}
    if isinstance(value, bool) or not isinstance(value, int | float | np.generic):
        return jsonable(value)
    x = float(value)
    if key in FREIGHT_TOP_LEVEL:
        return _round(x, FREIGHT_TOP_LEVEL[key])
    if key.endswith("_km") or key == "unit_km":
        return _round(x, KM_DECIMALS)
    if key.endswith("_kg"):
        return _round(x, KG_DECIMALS)
    if key.endswith(("_h", "_h_per_unit")):
        return _round(x, HOURS_DECIMALS)
    return _round(x, VOLUME_DECIMALS)


def freight_summary(sol: Solution) -> dict[str, Any]:
    """The freight figures of a plan for ``summary.json`` (empty for a classic plan).

    Parameters
    ----------
    sol
        The plan.

    Returns
    -------
    dict
        The keys of :data:`FREIGHT_TOP_LEVEL` found in ``sol.freight``
        (vehicles and dispatches per day, vehicle-km per day, hours, the
        on-time share, CO2e in kg and t per day, hours per unit on feeder
        and trunk legs), then ``freight``: every other figure of
        ``sol.freight`` (``by_class`` with each class's payload, round
        trips, runs, vehicle-km and CO2e; the emissions basis; hours per
        unit on direct legs and in sorts; round trips on or off; the
        drivers' hours rules). ``unit_km`` is left out: the summary has it.
    """
    if not sol.freight:
        return {}
    out: dict[str, Any] = {
        key: _freight_value(key, sol.freight[key])
        for key in FREIGHT_TOP_LEVEL
        if key in sol.freight
    }
    out["freight"] = {
        str(key): _freight_value(str(key), value)
        for key, value in sol.freight.items()
        if key not in FREIGHT_TOP_LEVEL and key != "unit_km"
    }
    return out


def summary_dict(
    sol: Solution,
    config: ScenarioConfig | None = None,
    *,
    extra: Mapping[str, Any] | None = None,
) -> dict[str, Any]:
    """Key figures of a run as a JSON-serialisable dict.

    Parameters
    ----------
    sol
        The plan.
    config
        The scenario config, when known: adds ``description``, ``model``
        (allocation, number of hubs, cost factors), ``distances`` (method,
        circuity) and ``inputs`` (file paths), and names the scenario when
        ``sol.scenario`` is empty.
    extra
        More top-level keys (for example a run timestamp or a scheduler's
        job id), added after conversion to JSON types; they may not
        replace a key the summary already has.

    Returns
    -------
    dict
        Keys: ``scenario``, ``status`` (optimal, time_limit, infeasible or
        error), ``proven_optimal``, ``objective`` and ``best_bound``
        (currency per day), ``gap`` (fraction), ``hubs`` (ids),
        ``hub_count``, ``allocation``, ``solver``, ``solve_seconds``,
        ``build_seconds``, ``formulation``, ``solver_options``, ``costs``
        (hub_fixed, handling, collection, transfer, distribution, total;
        currency per day; a freight plan has hub_fixed, handling, feeder,
        trunk, direct, time, total and carbon_in_vehicles, the carbon
        price already inside the legs' costs), ``volume_unit``, ``total_volume`` (OD volume,
        volume unit per day), ``od_pairs``, ``legs_by_tier`` (counts),
        ``unit_km`` (volume unit-km per day over all legs),
        ``rank_size_exponent``, ``objective_check`` (re-priced total minus
        the solver's objective, currency per day), ``hubnet_version`` and
        ``cautions`` (plain sentences). Money keeps 4 decimals, volumes 6,
        km and seconds 3, the gap 6 significant digits. A figure that is
        unknown, NaN or infinite is ``None``. A freight plan adds the keys
        of :func:`freight_summary` (vehicles, dispatches, vehicle_km,
        avg_transit_h, max_transit_h, service_level, co2e_kg, co2e_ttw_kg,
        co2e_wtw_kg, co2e_t, feeder_h_per_unit, trunk_h_per_unit and
        ``freight``); with a freight config, the config part adds
        ``inputs.vehicles``, ``inputs.kg_per_unit``, ``inputs.m3_per_unit``,
        ``service``, ``hours`` and ``freight_settings`` (the config's
        ``[freight]`` section).

    Raises
    ------
    ValueError
        When ``extra`` repeats one of the summary's own keys.
    """
    stats = sol.stats
    check = sol.objective_check
    legs_by_tier = {tier: 0 for tier in TIER_ORDER}
    for leg in sol.legs:
        legs_by_tier[leg.tier] = legs_by_tier.get(leg.tier, 0) + 1
    cost_keys = [k for k in COST_ORDER if k in sol.costs]
    cost_keys += sorted(set(sol.costs) - set(cost_keys))
    scenario = sol.scenario or (config.name if config is not None else "")
    out: dict[str, Any] = {
        "scenario": scenario,
        "status": stats.status,
        "proven_optimal": stats.status == "optimal",
        "objective": _round(stats.objective, MONEY_DECIMALS),
        "best_bound": _round(stats.best_bound, MONEY_DECIMALS),
        "gap": _significant(stats.gap),
        "hubs": list(sol.hub_ids),
        "hub_count": len(sol.hubs),
        "allocation": sol.allocation,
        "solver": stats.solver,
        "solve_seconds": _round(stats.solve_seconds, SECONDS_DECIMALS),
        "build_seconds": _round(stats.build_seconds, SECONDS_DECIMALS),
        "start_seconds": _round(stats.start_seconds, SECONDS_DECIMALS),
        "formulation": stats.formulation,
        "solver_options": jsonable(stats.options),
        "costs": {k: _round(sol.costs[k], MONEY_DECIMALS) for k in cost_keys},
        "volume_unit": sol.volume_unit,
        "total_volume": _round(sum(r.volume for r in sol.routes), VOLUME_DECIMALS),
        "od_pairs": len({(r.origin, r.destination) for r in sol.routes}),
        "legs_by_tier": legs_by_tier,
        "unit_km": _round(sum(g.unit_km for g in sol.legs), KM_DECIMALS),
        "rank_size_exponent": _round(rank_size_exponent(sol), 6),
        "objective_check": _round(check, MONEY_DECIMALS),
        "hubnet_version": hubnet_version(),
        "cautions": [*STANDING_CAUTIONS, *_plan_cautions(sol, check)],
    }
    out.update(freight_summary(sol))
    if config is not None:
        info = jsonable(_config_info(config))
        clash = sorted(set(out) & set(info))
        if clash:  # a programming error: the config part may not hide a figure
            raise ValueError(f"config summary keys clash with the plan's: {clash}")
        out.update(info)
    if extra:
        clash = sorted(set(out) & set(map(str, extra)))
        if clash:
            raise ValueError(f"extra summary keys clash with the summary's own: {clash}")
        out.update(jsonable(dict(extra)))
    return out


def summary_json(summary: Mapping[str, Any]) -> str:
    """Serialise a summary as indented JSON text (ending in a newline).

    Raises
    ------
    ValueError
        When a value is NaN or infinite (``allow_nan=False``), which
        :func:`summary_dict` never produces.
    """
    return json.dumps(summary, indent=2, ensure_ascii=False, allow_nan=False) + "\n"
