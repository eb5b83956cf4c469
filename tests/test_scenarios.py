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
from hubnet.fleet import VehicleClass
from hubnet.scenarios import (
    DataEdits,
    apply_config_edits,
    apply_data_edits,
    check_sweep,
    load_scenario_data,
    load_sweep,
    parse_edits,
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
        f"{f} line 5, key scenarios.a.demand_scale: Input should be greater than 0, got -1",
        f"{f} line 9, key scenarios.b.demand_scal: unknown key 'demand_scal'; "
        "did you mean 'demand_scale'?",
        f"{f} line 8, key scenarios.b.model.hubz: scenario b: unknown key 'hubz'; "
        "did you mean 'hubs'?",
        f"{f} line 12, key scenarios.c.model.hubs: scenario c: 40 hubs asked (model.hubs) "
        "but only 10 sites can be a hub",
        f"{f} line 16, key scenarios.d.close_hubs: scenario d: unknown site 'SEVV'; "
        "did you mean 'SEV'?",
        f"{f} line 15, key scenarios.d.open_hubs: scenario d: site 'VIG' is not a candidate "
        "hub (add it with add_candidates)",
        f"{f} line 19, key grid.solver.gap: scenario gap-2.0: Input should be less than 1, got 2.0",
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
    assert "line 3, key sweep.format: format 9 is not known" in text
    assert "line 4, key sweep.bse: unknown key 'bse'; did you mean 'base'?" in text
    assert "line 2, key sweep.base: config file not found" in text
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
    assert f"{path} line 5, key scenarios.bad.close_hubs: scenario bad: unknown site 'XXX'" in (
        result.output
    )
    assert not out.exists()
    assert not (tmp_path / "h.sqlite").exists()


# --------------------------------------------------------------------------
# Freight what-ifs: vehicle classes, costs, deadlines, [service] [hours] [freight]
# --------------------------------------------------------------------------

NATIONAL_SMALL = REPO / "configs" / "national_small.toml"


def freight_net() -> NetworkData:
    """small_net() with deadlines and two vehicle classes (a freight network).

    The figures are invented; a 13.6 m semi-trailer's 33 EUR pallets and a
    7.5 t rigid's 15 are common practice, no source.
    """
    import dataclasses

    base = small_net()
    times = {"A": (1.5, 19.0, 7.5), "B": (None, 18.0, 8.0), "C": (None, None, None)}
    sites = tuple(
        dataclasses.replace(s, sort_hours=t[0], cutoff_h=t[1], deliver_by_h=t[2])
        for s, t in ((s, times[s.id]) for s in base.sites)
    )
    demand = tuple(
        dataclasses.replace(d, max_hours=36.0) if (d.origin, d.destination) == ("A", "C") else d
        for d in base.demand
    )
    vehicles = (
        VehicleClass(
            "artic", "semi", 33.0, 1.0, 75.0, frozenset({"feeder", "trunk"}), cost_per_hour=40.0
        ),
        VehicleClass(
            "rigid", "7.5 t", 15.0, 0.5, 60.0, frozenset({"feeder", "direct"}), cost_per_hour=30.0
        ),
    )
    return dataclasses.replace(base, sites=sites, demand=demand, vehicles=vehicles)


def test_vehicle_classes_removed_added_and_costs_scaled() -> None:
    edits = parse_edits(
        {
            "remove_vehicle_classes": ["rigid"],
            "add_vehicle_classes": {
                "van": {
                    "payload": 12,
                    "cost_per_km": 0.4,
                    "cost_per_hour": 25,
                    "speed_kmh": 90,  # the EU limiter of trucks (92/6/EEC, from memory)
                    "tiers": "feeder; direct",  # text as in the tiers column
                    "max_kg": 3000,
                    "fuel_l_per_100km": 16,
                    "fuel": "Diesel",
                }
            },
            "vehicle_km_cost_scale": 1.1,
            "vehicle_km_cost_scale_by_class": {"artic": 2.0},
            "vehicle_hour_cost_scale_by_class": {"van": 1.2},
        }
    )
    out = apply_data_edits(freight_net(), edits)
    artic, van = out.vehicles
    # artic: km 1.0 x 1.1 (all) x 2 (its own) = 2.2; hour cost unchanged, 40.
    assert (artic.id, artic.cost_per_km, artic.cost_per_hour) == ("artic", pytest.approx(2.2), 40.0)
    # An added class gets the factors too: km 0.4 x 1.1 = 0.44; hour 25 x 1.2 = 30.
    assert van == VehicleClass(
        id="van",
        name="van",
        payload=12.0,
        cost_per_km=pytest.approx(0.44),  # type: ignore[arg-type]
        speed_kmh=90.0,
        tiers=frozenset({"feeder", "direct"}),
        cost_per_hour=pytest.approx(30.0),  # type: ignore[arg-type]
        max_kg=3000.0,
        fuel_l_per_100km=16.0,
        fuel="diesel",  # spelt as the emission factor table spells it
    )
    # Sites, demand and the original network are untouched.
    assert out.sites == freight_net().sites and out.demand == freight_net().demand
    assert [v.cost_per_km for v in freight_net().vehicles] == [1.0, 0.5]


def test_a_class_removed_and_added_again_is_replaced() -> None:
    new = {"payload": 18, "cost_per_km": 0.45, "speed_kmh": 65, "tiers": ["feeder"]}
    edits = parse_edits(
        {"remove_vehicle_classes": ["rigid"], "add_vehicle_classes": {"rigid": new}}
    )
    artic, rigid = apply_data_edits(freight_net(), edits).vehicles
    assert artic == freight_net().vehicles[0]
    assert (rigid.payload, rigid.cost_per_km, rigid.tiers) == (18.0, 0.45, frozenset({"feeder"}))
    assert (rigid.cost_per_hour, rigid.cost_per_dispatch, rigid.fuel) == (0.0, 0.0, "diesel")


def test_deadline_edits() -> None:
    import datetime

    edits = parse_edits(
        {
            "cutoff": {"B": "19:45", "C": datetime.time(17, 30)},  # text, or a TOML local time
            "deliver_by": {"A": "06:00"},
            "sort_hours": {"B": 0.75},
            "max_hours": {"A>C": 30, "C>B": 14.5},
        }
    )
    out = apply_data_edits(freight_net(), edits)
    a, b, c = out.sites
    # 19:45 = 19 + 45/60 = 19.75 h; 17:30 = 17.5 h; 06:00 = 6 h.
    assert (a.sort_hours, a.cutoff_h, a.deliver_by_h) == (1.5, 19.0, 6.0)
    assert (b.sort_hours, b.cutoff_h, b.deliver_by_h) == (0.75, 19.75, 8.0)
    assert (c.sort_hours, c.cutoff_h, c.deliver_by_h) == (None, 17.5, None)
    assert [(d.origin, d.destination, d.volume, d.max_hours) for d in out.demand] == [
        ("A", "B", 10.0, None),
        ("B", "A", 4.0, None),
        ("A", "C", 2.0, 30.0),
        ("C", "B", 6.0, 14.5),
    ]
    assert out.vehicles == freight_net().vehicles


def test_freight_edits_are_plain_data_for_run_records() -> None:
    import datetime
    import json

    raw = {
        "add_vehicle_classes": {
            "van": {"payload": 12, "cost_per_km": 0.4, "speed_kmh": 80, "tiers": "direct feeder"}
        },
        "cutoff": {"A": "20:15", "B": datetime.time(5, 0, 30)},
        "deliver_by": {"C": "7:05"},
        "vehicle_hour_cost_scale": 1.05,
    }
    recorded = json.loads(json.dumps(parse_edits(raw).as_dict()))
    # Tiers in the order feeder, trunk, direct; times as HH:MM (HH:MM:SS with seconds).
    assert recorded["add_vehicle_classes"]["van"]["tiers"] == ["feeder", "direct"]
    assert (recorded["cutoff"], recorded["deliver_by"]) == (
        {"A": "20:15", "B": "05:00:30"},
        {"C": "07:05"},
    )
    # The recorded form reads back as the same edits.
    assert parse_edits(recorded) == parse_edits(raw)


@pytest.mark.parametrize(
    ("edits", "key", "message"),
    [
        (
            {"remove_vehicle_classes": ["rigd"]},
            "remove_vehicle_classes",
            "unknown vehicle class 'rigd'; did you mean 'rigid'?",
        ),
        (
            {"vehicle_km_cost_scale_by_class": {"bus": 2}},
            "vehicle_km_cost_scale_by_class",
            "unknown vehicle class 'bus'; the classes are artic, rigid",
        ),
        (
            {"remove_vehicle_classes": ["rigid"], "vehicle_hour_cost_scale_by_class": {"rigid": 2}},
            "vehicle_hour_cost_scale_by_class",
            "vehicle class 'rigid' is removed by remove_vehicle_classes",
        ),
        (
            {
                "add_vehicle_classes": {
                    "artic": {"payload": 30, "cost_per_km": 1, "speed_kmh": 70, "tiers": ["trunk"]}
                }
            },
            "add_vehicle_classes",
            "vehicle class 'artic' exists; to replace it, also list it in remove_vehicle_classes",
        ),
        (
            {"remove_vehicle_classes": ["artic"]},
            "remove_vehicle_classes",
            "no vehicle class left may run on trunk legs (between two hubs)",
        ),
        ({"max_hours": {"B>C": 20}}, "max_hours", "'B>C': there is no demand from B to C"),
        ({"max_hours": {"A-C": 20}}, "max_hours", "write an OD pair as 'ORIGIN>DESTINATION'"),
        ({"cutoff": {"D": "19:00"}}, "cutoff", "unknown site 'D'"),
        ({"sort_hours": {"C": 1.0}}, "sort_hours", "site 'C' is not a candidate hub"),
        (
            {"transport_cost_scale": 1.1},
            "transport_cost_scale",
            "the freight model prices vehicles, not unit-km",
        ),
    ],
)
def test_bad_freight_edits_are_named(edits: dict[str, object], key: str, message: str) -> None:
    with pytest.raises(InputError) as info:
        apply_data_edits(freight_net(), parse_edits(edits))
    (problem,) = info.value.problems
    assert problem.column == key
    assert message in problem.message


def test_removing_every_feeder_class_is_reported() -> None:
    # Feeder legs are run by artic and rigid (see freight_net): removing both
    # leaves none for feeder nor trunk legs, the check inputs.py makes on
    # vehicles.csv (every network has feeder and trunk legs).
    with pytest.raises(InputError) as info:
        apply_data_edits(freight_net(), parse_edits({"remove_vehicle_classes": ["artic", "rigid"]}))
    assert [p.message.split(":")[0] for p in info.value.problems] == [
        "no vehicle class left may run on feeder legs (between a terminal and its hub)",
        "no vehicle class left may run on trunk legs (between two hubs)",
    ]


@pytest.mark.parametrize(
    ("edits", "message"),
    [
        (
            {
                "add_vehicle_classes": {
                    "x": {"payload": 0, "cost_per_km": 1, "speed_kmh": 60, "tiers": "feeder"}
                }
            },
            "x.payload: Input should be greater than 0, got 0",
        ),
        # Speeds above 0 and at most 150 km/h, as in vehicles.csv (hubnet.inputs.MAX_SPEED_KMH).
        (
            {
                "add_vehicle_classes": {
                    "x": {"payload": 5, "cost_per_km": 1, "speed_kmh": 151, "tiers": "feeder"}
                }
            },
            "x.speed_kmh: expected a speed in km/h above 0 and at most 150, got 151",
        ),
        (
            {
                "add_vehicle_classes": {
                    "x": {"payload": 5, "cost_per_km": 1, "speed_kmh": 0, "tiers": "feeder"}
                }
            },
            "x.speed_kmh: expected a speed in km/h above 0 and at most 150, got 0",
        ),
        (
            {
                "add_vehicle_classes": {
                    "x": {"payload": 5, "cost_per_km": -1, "speed_kmh": 60, "tiers": "feeder"}
                }
            },
            "x.cost_per_km: Input should be greater than or equal to 0, got -1",
        ),
        (
            {
                "add_vehicle_classes": {
                    "x": {
                        "payload": 5,
                        "cost_per_km": 1,
                        "speed_kmh": 60,
                        "tiers": ["feeder", "trunc"],
                    }
                }
            },
            "x.tiers: unknown tier 'trunc'; expected one or more of feeder, trunk, direct, "
            "separated by spaces, commas, semicolons or '|'; did you mean 'trunk'?",
        ),
        (
            {
                "add_vehicle_classes": {
                    "x": {
                        "payload": 5,
                        "cost_per_km": 1,
                        "speed_kmh": 60,
                        "tiers": "feeder",
                        "fuel": "disel",
                    }
                }
            },
            "x.fuel: unknown fuel 'disel'; the emission factor table has diesel; "
            "did you mean 'diesel'?",
        ),
        (
            {
                "add_vehicle_classes": {
                    "x": {
                        "payload": 5,
                        "cost_per_km": 1,
                        "speed_kmh": 60,
                        "tiers": "feeder",
                        "paylod": 3,
                    }
                }
            },
            "x: unknown key 'paylod'; did you mean 'payload'?",
        ),
        (
            {"add_vehicle_classes": {"x": {"payload": 5, "speed_kmh": 60, "tiers": "feeder"}}},
            "x.cost_per_km: required key is missing",
        ),
        ({"cutoff": "20:00"}, 'expected a table of site ids and times, such as { PAR = "20:00" }'),
        (
            {"deliver_by": {"A": "24:30"}},
            'A: expected a time of day as "HH:MM" from 00:00 to 24:00',
        ),
        ({"max_hours": {"A>C": 0}}, "A>C: expected a number > 0, got 0"),
        ({"sort_hours": {"A": -1}}, "A: expected a number >= 0, got -1"),
        ({"vehicle_hour_cost_scale_by_class": {"artic": -0.5}}, "artic: expected a number >= 0"),
        ({"vehicle_km_cost_scale": -1}, "Input should be greater than or equal to 0, got -1"),
        (
            {"remove_vehicle_class": ["artic"]},
            "unknown key 'remove_vehicle_class'; did you mean 'remove_vehicle_classes'?",
        ),
    ],
)
def test_malformed_freight_edits(edits: dict[str, object], message: str) -> None:
    with pytest.raises(InputError) as info:
        parse_edits(edits, file="sweep.toml", prefix="scenarios.s.")
    (problem,) = info.value.problems
    assert problem.file == "sweep.toml" and problem.column.startswith("scenarios.s.")
    assert message in problem.message, problem.message


def test_freight_edits_on_a_classic_base_say_so() -> None:
    edits = parse_edits({"vehicle_km_cost_scale": 1.1, "cutoff": {"A": "19:00"}, "demand_scale": 2})
    with pytest.raises(InputError) as info:
        apply_data_edits(small_net(), edits)
    assert [(p.column, p.message) for p in info.value.problems] == [
        (
            key,
            "the base has no vehicle classes (its config names no inputs.vehicles file): "
            "this edit changes the freight model only",
        )
        for key in ("vehicle_km_cost_scale", "cutoff")
    ]


def test_freight_sweep_is_checked_before_solving(tmp_path: Path) -> None:
    """Every problem of every freight scenario at once, each with its file, line and key."""
    path = write_sweep(
        tmp_path,
        """
        [scenarios.ok]

        [scenarios.a]
        remove_vehicle_classes = ["A4"]
        service = { cutof = "19:00" }

        [scenarios.b]
        hours = { long_legs = "relais" }
        "freight.carbon_price_per_t" = -80

        [scenarios.c]
        remove_vehicle_classes = ["A40"]
        max_hours = { "PAR>XYZ" = 30 }

        [scenarios.d.add_vehicle_classes.T60]
        payload = 52
        cost_per_km = 1.05
        speed_kmh = 170
        tiers = ["trunk"]
        """,
        base=NATIONAL_SMALL,
    )
    with pytest.raises(InputError) as info:
        load_sweep(path, check=True)
    f = str(path)
    # Lines: 1-2 [sweep], 3 blank, then the body above from line 4.
    assert [str(p) for p in info.value.problems] == [
        f"{f} line 18, key scenarios.d.add_vehicle_classes: T60.speed_kmh: expected a speed "
        "in km/h above 0 and at most 150, got 170",
        f"{f} line 8, key scenarios.a.service.cutof: scenario a: unknown key 'cutof'; "
        "did you mean 'cutoff'?",
        f"{f} line 11, key scenarios.b.hours.long_legs: scenario b: Input should be 'relay', "
        "'two_drivers' or 'forbid', got 'relais'",
        f"{f} line 12, key scenarios.b.freight.carbon_price_per_t: scenario b: Input should "
        "be greater than or equal to 0, got -80",
        f"{f} line 16, key scenarios.c.max_hours: scenario c: unknown site 'XYZ'",
        f"{f} line 15, key scenarios.c.remove_vehicle_classes: scenario c: no vehicle class "
        "left may run on trunk legs (between two hubs): keep a class with 'trunk' in its tiers, "
        "or add one with add_vehicle_classes",
    ]


def test_freight_sweep_changes_config_and_data(tmp_path: Path) -> None:
    rules = tmp_path / "rules" / "tight.toml"
    rules.parent.mkdir()
    rules.write_text(
        (REPO / "hubnet" / "rules" / "eu_561_2006.toml").read_text(encoding="utf-8"),
        encoding="utf-8",
    )
    path = write_sweep(
        tmp_path,
        """
        [scenarios.as-planned]

        [scenarios.what-ifs]
        service = { days = 2, cutoff = "18:30" }
        hours = { long_legs = "two_drivers", rules = "rules/tight.toml" }
        freight = { carbon_price_per_t = 80 }
        remove_vehicle_classes = ["R75"]
        vehicle_hour_cost_scale = 1.1
        cutoff = { PAR = "20:00" }
        max_hours = { "PAR>MAR" = 30 }

        [grid]
        "freight.emissions_basis" = ["ttw", "wtw"]
        vehicle_km_cost_scale = [1.0, 1.2]
        """,
        base=NATIONAL_SMALL,
    )
    checked = {c.spec.name: c for c in check_sweep(load_sweep(path))}
    assert list(checked) == [
        "as-planned",
        "what-ifs",
        "emissions_basis-ttw_vehicle_km_cost_scale-1.0",
        "emissions_basis-ttw_vehicle_km_cost_scale-1.2",
        "emissions_basis-wtw_vehicle_km_cost_scale-1.0",
        "emissions_basis-wtw_vehicle_km_cost_scale-1.2",
    ]
    base, what = checked["as-planned"], checked["what-ifs"]
    fp = what.config.freight
    assert (fp.service.days, fp.service.cutoff_h, fp.carbon_price_per_t) == (2, 18.5, 80.0)
    # A rule file named in a sweep is relative to the sweep file.
    assert (fp.hours.long_legs, fp.hours.rules) == ("two_drivers", str(rules))
    assert base.config.freight.hours.rules == "eu"
    # vehicles.csv: R75, R12, A40; cost per hour 35 and 40 EUR x 1.1 = 38.5 and 44.
    assert [(v.id, v.cost_per_hour) for v in what.data.vehicles] == [
        ("R12", pytest.approx(38.5)),
        ("A40", pytest.approx(44.0)),
    ]
    par = what.data.sites[what.data.index("PAR")]
    assert (par.cutoff_h, base.data.sites[base.data.index("PAR")].cutoff_h) == (20.0, 19.5)
    (pair,) = [d for d in what.data.demand if (d.origin, d.destination) == ("PAR", "MAR")]
    assert pair.max_hours == 30.0
    # Grid: A40's 0.75 EUR/km x 1.2 = 0.90.
    grid = checked["emissions_basis-wtw_vehicle_km_cost_scale-1.2"]
    assert grid.config.freight.emissions_basis == "wtw"
    assert grid.data.vehicles[2].cost_per_km == pytest.approx(0.9)


def test_vehicles_file_in_a_sweep_is_relative_to_it(tmp_path: Path) -> None:
    vehicles = (REPO / "demo_regions" / "france_small" / "vehicles.csv").read_text(encoding="utf-8")
    (tmp_path / "fleet.csv").write_text(
        vehicles.replace("R75,7.5 t rigid,15", "R75,7.5 t rigid,14"), encoding="utf-8"
    )
    path = write_sweep(
        tmp_path, '[scenarios.fleet]\n"inputs.vehicles" = "fleet.csv"\n', base=NATIONAL_SMALL
    )
    (checked,) = check_sweep(load_sweep(path))
    assert checked.config.inputs.vehicles == tmp_path / "fleet.csv"
    assert checked.data.vehicles[0].payload == 14.0


def test_benchmark_freight_scenarios_check() -> None:
    """The eight freight what-ifs of benchmarks/sweep_speedup.py pass every check."""
    import importlib.util
    import tempfile

    spec = importlib.util.spec_from_file_location(
        "sweep_speedup", REPO / "benchmarks" / "sweep_speedup.py"
    )
    assert spec is not None and spec.loader is not None
    bench = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(bench)
    eight, base = bench.SETS["freight"]
    assert base == NATIONAL_SMALL
    with tempfile.TemporaryDirectory() as folder:
        checked = check_sweep(load_sweep(bench.sweep_file(Path(folder), 8, base, eight)))
    by_name = {c.spec.name: c for c in checked}
    assert len(by_name) == 8
    # Paris region (sites.csv region column): PAR, PCE, SDN, NAN; their
    # volume x 1.25, pairs within the region once.
    paris = {s.id for s in by_name["as-planned"].data.sites if s.region == "Île-de-France"}
    assert paris == {"PAR", "PCE", "SDN", "NAN"}
    plan, grown = by_name["as-planned"].data.demand, by_name["paris-growth"].data.demand
    for d0, d1 in zip(plan, grown, strict=True):
        touches = d0.origin in paris or d0.destination in paris
        assert d1.volume == pytest.approx(d0.volume * (1.25 if touches else 1.0))
    assert by_name["carbon-80"].config.freight.carbon_price_per_t == 80.0
    assert by_name["hubs-6-two-day"].config.model.hubs == 6


# A tiny freight network for real solves: Brussels the one hub (forced open),
# Antwerp, Ghent and Liege terminals, one vehicle class on feeder and trunk
# legs (no class on direct legs, so no direct lane): the plan cannot change
# with the costs. Coordinates of the town centres, from memory.
TINY_SITES = """\
id,name,lat,lon,can_be_hub,hub_fixed_cost,handling_cost,hub_status
BRU,Brussels,50.85,4.35,true,500,1.0,open
ANT,Antwerp,51.22,4.40,false,0,0,closed
GHE,Ghent,51.05,3.72,false,0,0,closed
LIE,Liege,50.63,5.57,false,0,0,closed
"""
TINY_DEMAND = """\
origin,destination,volume
ANT,GHE,20
GHE,LIE,10
LIE,ANT,5
BRU,ANT,8
"""
# 33 pallets on a 13.6 m semi-trailer (common practice, no source); 32 L/100 km
# within the 30 to 35 of a loaded 40 t articulated truck (common practice, no source).
TINY_VEHICLES = """\
id,name,payload,cost_per_km,cost_per_hour,cost_per_dispatch,speed_kmh,tiers,fuel_l_per_100km,fuel
artic,40 t articulated,33,1.0,30,40,70,feeder trunk,32,diesel
"""
TINY_CONFIG = """\
[scenario]
name = "tiny freight"

[inputs]
sites = "sites.csv"
demand = "demand.csv"
vehicles = "vehicles.csv"
volume_unit = "pallets"

[service]
cutoff = "18:00"
deliver_by = "08:00"

[solver]
name = "highs"
time_limit_s = 60
"""


def test_freight_what_ifs_solved(tmp_path: Path) -> None:
    """Two tiny freight scenarios solved for real: the edits reach the plan's cost."""
    from hubnet.sweep import run_sweep

    for name, text in (
        ("sites.csv", TINY_SITES),
        ("demand.csv", TINY_DEMAND),
        ("vehicles.csv", TINY_VEHICLES),
        ("tiny.toml", TINY_CONFIG),
    ):
        (tmp_path / name).write_text(text, encoding="utf-8")
    path = write_sweep(
        tmp_path,
        """
        [scenarios.as-planned]

        [scenarios.dearer]
        vehicle_km_cost_scale = 1.5
        freight = { carbon_price_per_t = 100 }
        """,
        base=tmp_path / "tiny.toml",
    )
    report = run_sweep(load_sweep(path, check=True), tmp_path / "out", workers=0, checked=True)
    assert [o.status for o in report.outcomes] == ["optimal", "optimal"]
    import json

    base, dearer = (
        json.loads((tmp_path / "out" / name / "summary.json").read_text(encoding="utf-8"))
        for name in ("as-planned", "dearer")
    )
    assert base["hubs"] == dearer["hubs"] == ["BRU"]
    assert (base["vehicle_km"], base["dispatches"]) == (dearer["vehicle_km"], dearer["dispatches"])
    km = base["vehicle_km"]
    # CO2e well-to-wheel: km x 32 L/100 km x 3.24 kg/L (EN 16258:2012 Annex A,
    # diesel, from memory).
    assert base["co2e_wtw_kg"] == pytest.approx(km * 32 / 100 * 3.24, rel=1e-6)
    # Same plan, so the cost rises by the km cost x (1.5 - 1) at 1.0 EUR/km,
    # plus 100 EUR/t x the CO2e in tonnes.
    rise = dearer["costs"]["total"] - base["costs"]["total"]
    assert rise == pytest.approx(0.5 * 1.0 * km + 100 * base["co2e_wtw_kg"] / 1000, rel=1e-6)


def test_a_defaults_problem_is_said_once_for_the_scenarios_it_reaches(tmp_path: Path) -> None:
    path = write_sweep(
        tmp_path,
        """
        [defaults]
        "solver.nmae" = "cbc"

        [scenarios.a]
        [scenarios.b]
        [scenarios.c]
        """,
    )
    with pytest.raises(InputError) as info:
        load_sweep(path, check=True)
    found = [p for p in info.value.problems if "nmae" in p.message]
    assert len(found) == 1
    assert found[0].column == "defaults.solver.nmae" and found[0].row == 5
    assert found[0].message.startswith("every scenario: unknown key 'nmae'")
    # Two scenarios are named rather than summed up.
    path.write_text(path.read_text(encoding="utf-8").replace("[scenarios.c]", ""), encoding="utf-8")
    with pytest.raises(InputError) as info:
        load_sweep(path, check=True)
    found = [p for p in info.value.problems if "nmae" in p.message]
    assert len(found) == 1 and found[0].message.startswith("scenarios a, b: unknown key")
