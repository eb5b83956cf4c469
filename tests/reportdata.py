"""A tiny scenario whose site and scenario names try to inject markup and script.

Used by the map, report, workbook and browser tests. Six sites in central
Spain; A and C are forced open as hubs, F is a candidate, so the plan has
trunk and feeder legs. Every name is hostile in its own way: an HTML tag,
an ``<img onerror>`` (the classic), ``&`` and quotes, a JavaScript template
placeholder ``${...}``, and a ``</script>`` that would end a script element.
Solving takes well under a second.
"""

from __future__ import annotations

import csv
import io
import itertools
from pathlib import Path

from hubnet.api import run_scenario

XSS_NAME = "<img src=x onerror=alert(1)>"
SCENARIO_NAME = "tiny <script>alert('name')</script>"

SITES: tuple[tuple[str, str, float, float, str, float, str], ...] = (
    # id, name, lat, lon, can_be_hub, hub_fixed_cost, hub_status
    ("A", "Alpha <b>bold</b>", 40.0, -3.0, "true", 500.0, "open"),
    ("B", XSS_NAME, 41.0, -1.0, "false", 0.0, "candidate"),
    ("C", "Gamma & Sons", 39.0, -1.5, "true", 500.0, "open"),
    ("D", "Delta \"quoted\" 'single'", 38.5, -4.0, "false", 0.0, "candidate"),
    ("E", "${alert(2)}", 42.0, -3.5, "false", 0.0, "candidate"),
    ("F", "</script><script>alert(3)</script>", 40.5, 0.0, "true", 900.0, "candidate"),
)

CONFIG = """
[scenario]
name = "{name}"
description = "six sites & a <i>test</i>"

[inputs]
sites = "sites.csv"
demand = "demand.csv"
volume_unit = "pallets"

[model]
allocation = "{allocation}"
cost_per_unit_km = 0.06
transfer_factor = {transfer}

[solver]
name = "highs"
time_limit_s = 30
"""


def write_inputs(folder: Path, *, allocation: str = "single", transfer: float = 0.6) -> Path:
    """Write sites.csv, demand.csv and a config into ``folder``; return the config path."""
    folder.mkdir(parents=True, exist_ok=True)
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(
        [
            "id",
            "name",
            "lat",
            "lon",
            "can_be_hub",
            "hub_fixed_cost",
            "handling_cost",
            "sort_capacity",
            "hub_status",
        ]
    )
    for sid, name, lat, lon, can, fixed, status in SITES:
        writer.writerow([sid, name, lat, lon, can, fixed, 1.0 if can == "true" else 0, "", status])
    (folder / "sites.csv").write_text(buf.getvalue(), encoding="utf-8")
    ids = [s[0] for s in SITES]
    lines = ["origin,destination,volume"]
    for k, (o, d) in enumerate(itertools.permutations(ids, 2)):
        lines.append(f"{o},{d},{(k * 7) % 23 + 1}")
    (folder / "demand.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    config = folder / "tiny.toml"
    name = SCENARIO_NAME.replace('"', '\\"')
    config.write_text(
        CONFIG.format(name=name, allocation=allocation, transfer=transfer), encoding="utf-8"
    )
    return config


def tiny_run(folder: Path, *, allocation: str = "single", transfer: float = 0.6) -> Path:
    """Solve the tiny scenario into ``folder / "run"`` and return the run folder."""
    config = write_inputs(folder / "inputs", allocation=allocation, transfer=transfer)
    _, path = run_scenario(config, folder / "run")
    return path
