"""A small freight network: seven sites in Spain, two hubs, two vehicle classes.

Used by the freight output tests and the browser tests. Madrid and Valencia
are forced open as hubs; the other five sites are terminals. A 7.5 t rigid
(``van``) runs feeder and direct legs, a 40 t articulated (``artic``) every
tier. Segovia only sends, so the run back to it is an empty return; the
volumes are chosen so that several feeder legs are run by one vehicle of
each class (a mixed leg). Solving takes well under a second.

Vehicle figures are invented but within common practice: 33 pallets on a
13.6 m semi-trailer and 15 to 18 on a 7.5 t rigid body (common practice, no
source), here a 12-pallet body whose 3,000 kg limit at 300 kg a pallet
leaves 10; fuel 31 and 16 L/100 km (common practice, no source: 30 to 35 for
an artic, 15 to 22 for a rigid).
"""

from __future__ import annotations

import shutil
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

import pandas as pd

from hubnet.config import ScenarioConfig, load_config
from hubnet.data import NetworkData
from hubnet.distances import distance_matrix
from hubnet.freight import solve_freight
from hubnet.inputs import network_from_frames
from hubnet.report.runfiles import extra_run_files
from hubnet.report.summary import summary_dict
from hubnet.runfolder import write_run
from hubnet.solution import Solution

#: id, name, lat, lon, hub_status
SITES: tuple[tuple[str, str, float, float, str], ...] = (
    ("MAD", "Madrid", 40.42, -3.70, "open"),
    ("TOL", "Toledo", 39.86, -4.02, "closed"),
    ("GUA", "Guadalajara", 40.63, -3.16, "closed"),
    ("SEG", "Segovia", 40.95, -4.12, "closed"),
    ("VAL", "Valencia", 39.47, -0.38, "open"),
    ("CAS", "Castellon", 39.99, -0.05, "closed"),
    ("ALC", "Alicante", 38.35, -0.48, "closed"),
)

#: Weight of each site in the demand formula (see :func:`demand_frame`).
WEIGHTS: dict[str, int] = {
    "MAD": 40,
    "TOL": 14,
    "GUA": 14,
    "SEG": 0,
    "VAL": 36,
    "CAS": 12,
    "ALC": 16,
}

VEHICLES = pd.DataFrame(
    {
        "id": ["van", "artic"],
        "name": ["7.5 t rigid", "40 t articulated"],
        "payload": [12.0, 33.0],
        "max_kg": [3000.0, 25000.0],
        "cost_per_km": [0.55, 1.05],
        "cost_per_hour": [22.0, 28.0],
        "cost_per_dispatch": [25.0, 45.0],
        "speed_kmh": [60.0, 75.0],
        "tiers": ["feeder direct", "feeder trunk direct"],
        "fuel_l_per_100km": [16.0, 31.0],
        "fuel": ["diesel", "diesel"],
    }
)

KG_PER_UNIT = 300.0
CARBON_PRICE_PER_T = 100.0

CONFIG = """
[scenario]
name = "seven sites"
description = "two hubs, two vehicle classes"

[inputs]
sites = "sites.csv"
demand = "demand.csv"
vehicles = "vehicles.csv"
volume_unit = "pallets"
kg_per_unit = {kg}

[service]
cutoff = "18:00"
deliver_by = "08:00"
days = 1
sort_hours = 1.0

[hours]
rules = "my_rules.toml"
long_legs = "relay"

[freight]
direct_min_load = 1.5
carbon_price_per_t = {carbon}

[model]
allocation = "single"

[solver]
name = "highs"
time_limit_s = 60
"""


def sites_frame() -> pd.DataFrame:
    """The sites table: Madrid and Valencia open hubs, the rest terminals."""
    return pd.DataFrame(
        {
            "id": [s[0] for s in SITES],
            "name": [s[1] for s in SITES],
            "lat": [s[2] for s in SITES],
            "lon": [s[3] for s in SITES],
            "can_be_hub": ["true" if s[4] == "open" else "false" for s in SITES],
            "hub_fixed_cost": [800.0 if s[4] == "open" else 0.0 for s in SITES],
            "handling_cost": [1.5 if s[4] == "open" else 0.0 for s in SITES],
            "hub_status": [s[4] for s in SITES],
        }
    )


def demand_frame() -> pd.DataFrame:
    """Every ordered pair but those into Segovia: ``round((w_o + w_d) / 6)`` pallets.

    Segovia's own sends get 9 pallets more each, so its feeder carries a
    full load in and nothing back.
    """
    ids = [s[0] for s in SITES]
    rows = []
    for o in ids:
        for d in ids:
            if o == d or d == "SEG":
                continue
            volume = round((WEIGHTS[o] + WEIGHTS[d]) / 6 + (9 if o == "SEG" else 0))
            rows.append((o, d, float(volume)))
    return pd.DataFrame(rows, columns=["origin", "destination", "volume"])


def write_inputs(folder: Path, *, carbon_price: float = CARBON_PRICE_PER_T) -> Path:
    """Write the input files, a user rule file and the config; return the config path.

    The rule file is a copy of hubnet's EU rule set (Regulation (EC) No
    561/2006), named by path in ``[hours] rules`` as a user would.
    """
    folder.mkdir(parents=True, exist_ok=True)
    sites_frame().to_csv(folder / "sites.csv", index=False)
    demand_frame().to_csv(folder / "demand.csv", index=False)
    VEHICLES.to_csv(folder / "vehicles.csv", index=False)
    rules = resources.files("hubnet").joinpath("rules/eu_561_2006.toml")
    with resources.as_file(rules) as path:
        shutil.copyfile(path, folder / "my_rules.toml")
    config = folder / "freight.toml"
    config.write_text(CONFIG.format(kg=KG_PER_UNIT, carbon=carbon_price), encoding="utf-8")
    return config


def network() -> NetworkData:
    """The network built from the frames in Python."""
    return network_from_frames(
        sites_frame(), demand_frame(), vehicles=VEHICLES, volume_unit="pallets"
    )


@dataclass(frozen=True)
class FreightRun:
    """A solved freight plan, its config and its run folder."""

    config: ScenarioConfig
    solution: Solution
    folder: Path


def freight_run(folder: Path) -> FreightRun:
    """Solve the network with :func:`solve_freight` and write its run folder.

    The network is built from the frames (:func:`network`); the config
    file written beside it gives the freight parameters, and the run
    folder is written as ``hubnet solve`` writes it (tables, summary with
    the config, sites, map and workbook).
    """
    config = load_config(write_inputs(folder / "inputs"))
    data = network()
    distances = distance_matrix(data, config.distances)
    sol = solve_freight(
        data, distances, config.model, config.freight, config.solver, scenario=config.name
    )
    summary = summary_dict(sol, config)
    out = folder / "run"
    extra = extra_run_files(sol, data, summary, folder=out)
    write_run(out, sol, summary=summary, extra_files=extra)
    return FreightRun(config, sol, out)
