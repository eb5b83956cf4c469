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
from pathlib import PurePath
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
#: Significant digits kept for ratios that may be tiny (the gap).
RATIO_SIGNIFICANT = 6

#: Relative difference between the re-priced cost and the solver's objective
#: above which the summary warns (solver tolerances stay well below it).
OBJECTIVE_CHECK_TOLERANCE = 1e-6

#: Order of the cost components in the summary (any other component follows).
COST_ORDER = ("hub_fixed", "handling", "collection", "transfer", "distribution", "total")

#: Cautions every summary carries, whatever the plan.
STANDING_CAUTIONS: tuple[str, ...] = (
    "This plan is a decision aid, not an operating instruction: it is only as good as "
    "the input data and parameters, and it must be reviewed by people who know the "
    "network before it is acted on.",
    "Drivers' hours, vehicle weights and vehicle dimensions follow the regulations "
    "where the vehicles run; the user must confirm that every leg and vehicle of the "
    "plan complies with the local regulations.",
)


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
    for h in sol.hubs:
        use = h.utilisation
        if use is not None and use > 1 + OBJECTIVE_CHECK_TOLERANCE:
            out.append(
                f"Hub {h.id} takes in {h.inbound:.6g} {sol.volume_unit} per day, above its "
                f"sort capacity of {h.capacity:.6g} ({use * 100:.1f} %)."
            )
    return out


def _config_info(config: ScenarioConfig) -> dict[str, Any]:
    """The parts of a config that explain the figures (model, distances, inputs)."""
    m, dist, inp = config.model, config.distances, config.inputs
    return {
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
            "sites": inp.sites,
            "demand": inp.demand,
            "distances": inp.distances,
            "sheet": inp.sheet,
        },
    }


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
        currency per day), ``volume_unit``, ``total_volume`` (OD volume,
        volume unit per day), ``od_pairs``, ``legs_by_tier`` (counts),
        ``unit_km`` (volume unit-km per day over all legs),
        ``rank_size_exponent``, ``objective_check`` (re-priced total minus
        the solver's objective, currency per day), ``hubnet_version`` and
        ``cautions`` (plain sentences). Money keeps 4 decimals, volumes 6,
        km and seconds 3, the gap 6 significant digits. A figure that is
        unknown, NaN or infinite is ``None``.

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
        "formulation": stats.formulation,
        "solver_options": jsonable(stats.options),
        "costs": {k: _round(sol.costs[k], MONEY_DECIMALS) for k in cost_keys},
        "volume_unit": sol.volume_unit,
        "total_volume": _round(sum(r.volume for r in sol.routes), VOLUME_DECIMALS),
        "od_pairs": len(sol.routes),
        "legs_by_tier": legs_by_tier,
        "unit_km": _round(sum(g.unit_km for g in sol.legs), KM_DECIMALS),
        "rank_size_exponent": _round(rank_size_exponent(sol), 6),
        "objective_check": _round(check, MONEY_DECIMALS),
        "hubnet_version": hubnet_version(),
        "cautions": [*STANDING_CAUTIONS, *_plan_cautions(sol, check)],
    }
    if config is not None:
        out.update(jsonable(_config_info(config)))
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
