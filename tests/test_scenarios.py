"""Sweep files and scenario edits: reading, grid expansion, data edits, checks.

Edits are checked on a hand-made three-site network whose volumes are worked
out by hand, and on the Iberia demo; every malformed sweep file must be
reported in full (file, line, key) before anything is solved.
"""

from __future__ import annotations

import hashlib
import textwrap
from pathlib import Path

import pytest
from typer.testing import CliRunner

from hubnet.cli import app
from hubnet.config import load_config
from hubnet.data import Demand, NetworkData, Site
from hubnet.errors import EXIT_BAD_INPUT, InputError
from hubnet.scenarios import (
    DataEdits,
    apply_config_edits,
    apply_data_edits,
    check_sweep,
    load_scenario_data,
    load_sweep,
)

REPO = Path(__file__).resolve().parent.parent
DEMO = REPO / "configs" / "demo.toml"
IBERIA = REPO / "demo_regions" / "iberia"


def write_sweep(tmp_path: Path, body: str, base: Path = DEMO) -> Path:
    path = tmp_path / "sweep.toml"
    head = f'[sweep]\nbase = "{base}"\n'
    path.write_text(head + textwrap.dedent(body), encoding="utf-8")
    return path


def small_net() -> NetworkData:
    """Three sites: A and B candidate hubs, C a terminal only."""
    return NetworkData(
        sites=(
            Site("A", "A", x=0, y=0, hub_fixed_cost=100.0, handling_cost=2.0, sort_capacity=50.0),
            Site("B", "B", x=1, y=0, hub_fixed_cost=80.0, handling_cost=1.0),
            Site("C", "C", x=0, y=1, can_be_hub=False, hub_status="closed"),
        ),
        demand=(
            Demand("A", "B", 10.0),
            Demand("B", "A", 4.0),
            Demand("A", "C", 2.0),
            Demand("C", "B", 6.0),
        ),
        coordinates="planar",
    )


# --------------------------------------------------------------------------
# Data edits on a hand-made network
# --------------------------------------------------------------------------


def test_demand_factors_multiply() -> None:
    # A>B: 1.1 (all) x 2 (A as a site) x 3 (pair) = 6.6 -> 66
    # B>A: 1.1 x 2 (A as a site)                  = 2.2 -> 8.8
    # A>C: 1.1 x 2 (A) x 0.5 (C as a destination) = 1.1 -> 2.2
    # C>B: 1.1 x 5 (C as an origin)               = 5.5 -> 33
    edits = DataEdits(
        demand_scale=1.1,
        demand_scale_by_site={"A": 2.0},
        demand_scale_by_destination={"C": 0.5},
        demand_scale_by_origin={"C": 5.0},
        demand_scale_by_pair={"A>B": 3.0},
    )
    out = apply_data_edits(small_net(), edits)
    assert [round(d.volume, 9) for d in out.demand] == [66.0, 8.8, 2.2, 33.0]
    # The original is untouched (frozen data, changed by replace only).
    assert [d.volume for d in small_net().demand] == [10.0, 4.0, 2.0, 6.0]


def test_demand_scaled_by_region() -> None:
    # Regions: A and B in "north", C in "south".
    # A>B (north>north): factor once, 1.5 -> 15; B>A: 1.5 -> 6
    # A>C (north>south): 1.5 x 0.8 = 1.2 -> 2.4; C>B (south>north): 1.2 -> 7.2
    import dataclasses

    net = small_net()
    regions = {"A": "north", "B": "north", "C": "south"}
    net = dataclasses.replace(
        net, sites=tuple(dataclasses.replace(s, region=regions[s.id]) for s in net.sites)
    )
    edits = DataEdits(demand_scale_by_region={"north": 1.5, "south": 0.8})
    out = apply_data_edits(net, edits)
    assert [round(d.volume, 9) for d in out.demand] == [15.0, 6.0, 2.4, 7.2]
    with pytest.raises(InputError, match=r"unknown region 'nort'; did you mean 'north'\?"):
        apply_data_edits(net, DataEdits(demand_scale_by_region={"nort": 1.1}))
    with pytest.raises(InputError, match="the sites file has no region column"):
        apply_data_edits(small_net(), DataEdits(demand_scale_by_region={"north": 1.1}))


def test_region_column_is_read(tmp_path: Path) -> None:
    import pandas as pd

    from hubnet.inputs import network_from_frames

    sites = pd.DataFrame(
        {"id": ["A", "B"], "x": [0.0, 1.0], "y": [0.0, 0.0], "region": ["north", "south"]}
    )
    demand = pd.DataFrame({"origin": ["A"], "destination": ["B"], "volume": [3.0]})
    net = network_from_frames(sites, demand)
    assert [s.region for s in net.sites] == ["north", "south"]


def test_site_edits() -> None:
    edits = DataEdits(
        hub_fixed_cost_scale=0.5,
        handling_cost={"B": 1.5},
        sort_capacity_scale=2.0,
        close_hubs=["A"],
        add_candidates={"C": {"hub_fixed_cost": 30.0, "handling_cost": 0.5}},
        open_hubs=["C"],
    )
    a, b, c = apply_data_edits(small_net(), edits).sites
    assert (a.hub_status, a.hub_fixed_cost, a.sort_capacity) == ("closed", 50.0, 100.0)
    assert (b.hub_status, b.hub_fixed_cost, b.handling_cost, b.sort_capacity) == (
        "candidate",
        40.0,
        1.5,
        None,
    )
    # An added candidate gets the figures given, then the factors.
    assert (c.can_be_hub, c.hub_status, c.hub_fixed_cost, c.handling_cost) == (
        True,
        "open",
        15.0,
        0.5,
    )


def test_no_edits_returns_the_same_network() -> None:
    net = small_net()
    assert apply_data_edits(net, DataEdits()) is net


@pytest.mark.parametrize(
    ("edits", "message"),
    [
        ({"close_hubs": ["AA"]}, "unknown site 'AA'; did you mean 'A'?"),
        ({"close_hubs": ["C"]}, "site 'C' is not a candidate hub: nothing to close"),
        ({"open_hubs": ["C"]}, "site 'C' is not a candidate hub (add it with add_candidates)"),
        ({"close_hubs": ["A"], "open_hubs": ["A"]}, "A both forced open and closed"),
        ({"demand_scale_by_pair": {"B>C": 2.0}}, "there is no demand from B to C"),
        ({"demand_scale_by_pair": {"AB": 2.0}}, "write an OD pair as 'ORIGIN>DESTINATION'"),
        ({"hub_fixed_cost": {"C": 5.0}}, "site 'C' is not a candidate hub"),
        ({"add_candidates": {"A": {"hub_fixed_cost": 1.0}}}, "'A' is already a candidate hub"),
    ],
)
def test_bad_edits_are_named(edits: dict[str, object], message: str) -> None:
    with pytest.raises(InputError, match=message.replace("(", r"\(").replace(")", r"\)")):
        apply_data_edits(small_net(), DataEdits.model_validate(edits))


def test_transport_cost_scale_changes_the_config_only() -> None:
    cfg = load_config(DEMO)
    assert apply_config_edits(cfg, DataEdits(transport_cost_scale=1.5)).model.cost_per_unit_km == (
        pytest.approx(cfg.model.cost_per_unit_km * 1.5)
    )
    assert apply_config_edits(cfg, DataEdits()) is cfg


def test_added_candidate_counts_for_the_number_of_hubs() -> None:
    # The demo has 10 candidate hubs: asking for 11 is fine once a site is added.
    edits = DataEdits(add_candidates={"VIG": {"hub_fixed_cost": 1.0}})
    cfg, data = load_scenario_data(DEMO, {"model": {"hubs": 11}}, edits)
    assert cfg.model.hubs == 11 and int(data.candidates().sum()) == 11
    with pytest.raises(InputError, match="11 hubs asked"):
        load_scenario_data(DEMO, {"model": {"hubs": 11}}, DataEdits())


# --------------------------------------------------------------------------
# Sweep files
# --------------------------------------------------------------------------


def test_shipped_sweep_file_checks() -> None:
    sweep = load_sweep(REPO / "configs" / "sweeps" / "iberia.toml", check=True)
    assert sweep.name == "iberia-what-ifs"
    assert [s.name for s in sweep.scenarios][:2] == ["as-planned", "growth-10"]
    assert {"hubs-3", "hubs-4"} <= {s.name for s in sweep.scenarios}


def test_sweep_file_layout(tmp_path: Path) -> None:
    path = write_sweep(
        tmp_path,
        """
        name = "study"

        [defaults]
        "solver.name" = "cbc"
        demand_scale = 1.2

        [scenarios.base]

        [scenarios.closed]
        description = "no Sevilla"
        close_hubs = ["SEV"]
        solver = { name = "highs", time_limit_s = 30 }

        [scenarios.bigger.model]
        hubs = 4

        [scenarios.other-demand]
        "inputs.demand" = "data/demand.csv"
        demand_scale = 1.0

        [grid]
        "model.hubs" = [2, 3]
        "model.allocation" = ["single", "multiple"]
        """,
    )
    sweep = load_sweep(path)
    names = [s.name for s in sweep.scenarios]
    assert names == [
        "base",
        "closed",
        "bigger",
        "other-demand",
        "hubs-2_allocation-single",
        "hubs-2_allocation-multiple",
        "hubs-3_allocation-single",
        "hubs-3_allocation-multiple",
    ]
    base, closed, bigger, other, grid0, *_ = sweep.scenarios
    # Defaults apply to every scenario; a scenario's own keys win.
    assert base.overrides["solver"] == {"name": "cbc"}
    assert base.edits == {"demand_scale": 1.2}
    assert closed.overrides["solver"] == {"name": "highs", "time_limit_s": 30}
    assert closed.edits == {"demand_scale": 1.2, "close_hubs": ["SEV"]}
    assert closed.overrides["scenario"] == {"name": "closed", "description": "no Sevilla"}
    assert bigger.overrides["model"] == {"hubs": 4}
    # Input paths in a sweep file are relative to the sweep file.
    assert other.overrides["inputs"]["demand"] == str(tmp_path / "data" / "demand.csv")
    assert other.edits == {"demand_scale": 1.0}
    assert grid0.overrides["model"] == {"hubs": 2, "allocation": "single"}
    assert grid0.description.startswith("grid: ")


def test_every_problem_of_every_scenario_at_once(tmp_path: Path) -> None:
    path = write_sweep(
        tmp_path,
        """
        [scenarios.a]
        demand_scale = -1

        [scenarios.b]
        "model.hubz" = 3
        demand_scal = 2

        [scenarios.c.model]
        hubs = 40

        [scenarios.d]
        open_hubs = ["VIG"]
        close_hubs = ["SEVV"]

        [grid]
        "solver.gap" = [0.01, 2.0]
        """,
    )
    with pytest.raises(InputError) as info:
        load_sweep(path, check=True)
    lines = [str(p) for p in info.value.problems]
    f = str(path)
    assert lines == [
        f"{f} line 5, column scenarios.a.demand_scale: Input should be greater than 0, got -1",
        f"{f} line 9, column scenarios.b.demand_scal: unknown key 'demand_scal'; "
        "did you mean 'demand_scale'?",
        f"{f} line 8, column scenarios.b.model.hubz: scenario b: unknown key 'hubz'; "
        "did you mean 'hubs'?",
        f"{f} line 12, column scenarios.c.model.hubs: scenario c: 40 hubs asked (model.hubs) "
        "but only 10 sites can be a hub",
        f"{f} line 16, column scenarios.d.close_hubs: scenario d: unknown site 'SEVV'; "
        "did you mean 'SEV'?",
        f"{f} line 15, column scenarios.d.open_hubs: scenario d: site 'VIG' is not a candidate "
        "hub (add it with add_candidates)",
        f"{f} line 19, column grid.solver.gap: scenario gap-2.0: Input should be less than 1, "
        "got 2.0",
    ]


@pytest.mark.parametrize(
    ("body", "message"),
    [
        ("", "no scenarios: add [scenarios.NAME] tables or a [grid]"),
        ('[scenarios."two words"]\n', "scenario names become folder names"),
        ("[scenarios.a]\n[scenario]\nname = 'x'\n", "unknown table 'scenario'"),
        ("[scenarios.a]\nscenario = { name = 'x' }\n", "a scenario's name is its table name"),
        ("[scenarios.a]\nmodel = 3\n", "expected a table of model keys"),
        ("[grid]\n'model.hubs' = 3\n", "expected a non-empty list of values"),
        ("[grid]\n'modle.hubs' = [3]\n", "unknown key 'modle.hubs'; did you mean 'model'?"),
        ("[scenarios.a]\nclose_hubs = 'SEV'\n", "Input should be a valid list"),
    ],
)
def test_malformed_sweep_files(tmp_path: Path, body: str, message: str) -> None:
    path = write_sweep(tmp_path, body)
    with pytest.raises(InputError, match=message.replace("[", r"\[").replace("]", r"\]")):
        load_sweep(path, check=True)


def test_sweep_table_and_format_checked(tmp_path: Path) -> None:
    path = tmp_path / "s.toml"
    path.write_text('[sweep]\nbase = "nowhere.toml"\nformat = 9\nbse = 1\n[scenarios.a]\n')
    with pytest.raises(InputError) as info:
        load_sweep(path)
    text = str(info.value)
    assert "line 3, column sweep.format: format 9 is not known" in text
    assert "line 4, column sweep.bse: unknown key 'bse'; did you mean 'base'?" in text
    assert "line 2, column sweep.base: config file not found" in text
    path.write_text("[sweep\n")
    with pytest.raises(InputError, match="line 1: not valid TOML"):
        load_sweep(path)
    with pytest.raises(InputError, match="sweep file not found"):
        load_sweep(tmp_path / "missing.toml")


def test_edits_never_touch_the_input_files(tmp_path: Path) -> None:
    files = [IBERIA / "sites.csv", IBERIA / "demand.csv"]
    before = {f: (hashlib.sha256(f.read_bytes()).hexdigest(), f.stat().st_mtime_ns) for f in files}
    path = write_sweep(
        tmp_path,
        """
        [scenarios.all]
        demand_scale = 2
        close_hubs = ["SEV"]
        hub_fixed_cost_scale = 0.5
        add_candidates = { VIG = { hub_fixed_cost = 1000 } }
        """,
    )
    (checked,) = check_sweep(load_sweep(path))
    assert sum(d.volume for d in checked.data.demand) == pytest.approx(2 * 9324.0)
    after = {f: (hashlib.sha256(f.read_bytes()).hexdigest(), f.stat().st_mtime_ns) for f in files}
    assert after == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["sweep.toml"]


def test_cli_sweep_rejects_a_bad_sweep_before_solving(tmp_path: Path) -> None:
    path = write_sweep(tmp_path, '[scenarios.ok]\n[scenarios.bad]\nclose_hubs = ["XXX"]\n')
    out = tmp_path / "out"
    result = CliRunner().invoke(
        app, ["sweep", str(path), "--out", str(out), "--history", str(tmp_path / "h.sqlite")]
    )
    assert result.exit_code == EXIT_BAD_INPUT, result.output
    assert f"{path} line 5, column scenarios.bad.close_hubs: scenario bad: unknown site 'XXX'" in (
        result.output
    )
    assert not out.exists()
    assert not (tmp_path / "h.sqlite").exists()
