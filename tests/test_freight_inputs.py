"""Inputs of the freight model: the config's freight keys and the vehicle, site and demand columns.

Each malformed case writes small real files into ``tmp_path`` and checks the
exact file, row (config line) and column of every problem, all reported by
one call. Values in the well-formed cases come from the trade facts they
are named after (regulations and common practice, cited beside each).
"""

from __future__ import annotations

import datetime
import shutil
import warnings
from pathlib import Path

import openpyxl
import pandas as pd
import pytest

from hubnet.config import clock_hours, load_config
from hubnet.emissions import load_fuels
from hubnet.errors import InputError
from hubnet.fleet import FreightParams, HoursParams, ServiceParams, VehicleClass
from hubnet.inputs import InputWarning, load_network, network_from_frames
from hubnet.scenarios import DataEdits, apply_data_edits


@pytest.fixture(autouse=True)
def _run_where_the_files_are(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # Problems name a data file relative to the working folder; these tests
    # write their files to tmp_path and run there, as a user runs from the
    # project folder, so the messages show the bare file names.
    monkeypatch.chdir(tmp_path)


SITES = """\
id,name,lat,lon,hub_fixed_cost,sort_hours,cutoff,deliver_by
BER,Berlin,52.52,13.405,1000,0.5,18:30,07:00
HAM,Hamburg,53.55,9.99,900,,,
MUC,Munich,48.14,11.58,800,1.25,20:00,24:00
"""

DEMAND = """\
origin,destination,volume,max_hours
BER,HAM,12,10
HAM,MUC,8,
MUC,BER,3,36.5
"""

# A 13.6 m semi-trailer takes 33 EUR pallets (common practice, no source);
# 80 km/h stays below the 90 km/h speed limiter of Council Directive
# 92/6/EEC as amended by 2002/85/EC (from memory); 32 L/100 km is within the
# 30 to 35 L/100 km of a loaded 40 t articulated truck (common practice, no
# source). A 7.5 t rigid body takes about 15 to 18 pallets (common practice,
# no source).
VEHICLES = """\
id,name,payload,max_kg,cost_per_km,cost_per_hour,cost_per_dispatch,speed_kmh,tiers,fuel_l_per_100km,fuel
semi,Semi-trailer,33,24000,1.10,35,40,80,trunk|direct,32,diesel
rigid,,16,,0.80,,,65,"feeder, direct",18,
"""

CONFIG = """\
[scenario]
name = "freight"

[inputs]
sites = "sites.csv"
demand = "demand.csv"
vehicles = "vehicles.csv"
volume_unit = "pallets"
kg_per_unit = 250.0
m3_per_unit = 1.5
"""


def write(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


def folder(
    tmp_path: Path,
    config: str = CONFIG,
    *,
    sites: str = SITES,
    demand: str = DEMAND,
    vehicles: str | None = VEHICLES,
) -> Path:
    """Write a scenario into tmp_path; return its config file."""
    write(tmp_path / "sites.csv", sites)
    write(tmp_path / "demand.csv", demand)
    if vehicles is not None:
        write(tmp_path / "vehicles.csv", vehicles)
    return write(tmp_path / "scenario.toml", config)


def line_of(text: str, start: str, after: str | None = None) -> int:
    """1-based line of the first line starting with ``start`` (after the line ``after``)."""
    lines = text.splitlines()
    begin = lines.index(after) + 1 if after is not None else 0
    for number, line in enumerate(lines[begin:], start=begin + 1):
        if line.startswith(start):
            return number
    raise AssertionError(f"{start!r} not in the text")


def messages(excinfo: pytest.ExceptionInfo[InputError]) -> list[str]:
    return [str(p) for p in excinfo.value.problems]


# --------------------------------------------------------------------------
# Times of day
# --------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("text", "hours"),
    [
        ("18:30", 18.5),  # 18 + 30/60
        ("7:05", 7.0 + 5 / 60),  # one-digit hour
        ("00:00", 0.0),
        # ISO 8601 allows 24:00 for the end of a day (from memory).
        ("24:00", 24.0),
        ("06:00:36", 6.01),  # spreadsheets add seconds: 6 + 0 + 36/3600 = 6.01
    ],
)
def test_clock_hours(text: str, hours: float) -> None:
    assert clock_hours(text) == pytest.approx(hours)


@pytest.mark.parametrize("text", ["24:01", "25:00", "18:60", "18", "6pm", "18.30", "-1:00", ""])
def test_clock_hours_rejects(text: str) -> None:
    with pytest.raises(ValueError, match="HH:MM"):
        clock_hours(text)


# --------------------------------------------------------------------------
# Config
# --------------------------------------------------------------------------


def test_freight_config_round_trip(tmp_path: Path) -> None:
    rules = tmp_path / "rules" / "mine.toml"
    rules.parent.mkdir()
    shutil.copy(Path(__file__).parent.parent / "hubnet" / "rules" / "eu_561_2006.toml", rules)
    text = (
        CONFIG
        + """
[service]
cutoff = "18:30"
deliver_by = "24:00"
days = 2
sort_hours = 1.5

[hours]
rules = "rules/mine.toml"
long_legs = "two_drivers"
relay_minutes = 20
relay_cost = 30.0
second_driver_cost_per_hour = 25.0

[freight]
round_trips = false
integer_vehicles = false
direct_min_load = 0.8
value_of_time = 0.4
carbon_price_per_t = 80.0
emissions_basis = "ttw"
max_transit_h = 20.0
"""
    )
    cfg = load_config(folder(tmp_path, text))
    assert cfg.inputs.vehicles == tmp_path / "vehicles.csv"
    # The rule file is resolved against the config's folder, like input paths.
    assert cfg.freight == FreightParams(
        service=ServiceParams(cutoff_h=18.5, deliver_by_h=24.0, days=2, sort_hours=1.5),
        hours=HoursParams(
            rules=str(rules),
            long_legs="two_drivers",
            relay_minutes=20.0,
            relay_cost=30.0,
            second_driver_cost_per_hour=25.0,
        ),
        round_trips=False,
        integer_vehicles=False,
        direct_min_load=0.8,
        value_of_time=0.4,
        carbon_price_per_t=80.0,
        emissions_basis="ttw",
        kg_per_unit=250.0,
        m3_per_unit=1.5,
        max_transit_h=20.0,
    )
    # 18:30 to 24:00 the next day but one: 5.5 h + 24 h = 29.5 h.
    assert cfg.freight.service.allowance_h(18.5, 24.0) == pytest.approx(29.5)


def test_built_in_rules_and_toml_local_times(tmp_path: Path) -> None:
    # A TOML local time (TOML 1.0 needs the seconds) is a time of day too.
    text = CONFIG + '\n[service]\ncutoff = 17:45:00\n\n[hours]\nrules = "US"\n'
    cfg = load_config(folder(tmp_path, text))
    assert cfg.freight.service.cutoff_h == pytest.approx(17.75)  # 17 + 45/60
    assert cfg.freight.hours.rules == "us"


def test_classic_config_keeps_its_defaults(tmp_path: Path) -> None:
    text = '[scenario]\nname = "x"\n[inputs]\nsites = "sites.csv"\ndemand = "demand.csv"\n'
    cfg = load_config(folder(tmp_path, text, vehicles=None))
    assert cfg.inputs.vehicles is None
    assert cfg.freight == FreightParams()
    net = load_network(cfg)
    assert net.vehicles == ()


def test_freight_sections_without_vehicles_are_accepted(tmp_path: Path) -> None:
    # Ignored by the classic model, even with multiple allocation.
    text = (
        '[scenario]\nname = "x"\n[inputs]\nsites = "sites.csv"\ndemand = "demand.csv"\n'
        '[model]\nallocation = "multiple"\n[service]\ncutoff = "17:00"\n'
        "[freight]\nvalue_of_time = 1.0\n"
    )
    cfg = load_config(folder(tmp_path, text, vehicles=None))
    assert cfg.model.allocation == "multiple"
    assert cfg.freight.service.cutoff_h == 17.0
    assert cfg.freight.value_of_time == 1.0


def test_every_config_problem_is_reported_at_once(tmp_path: Path) -> None:
    text = (
        CONFIG.replace("kg_per_unit = 250.0", "kg_per_unit = 0")
        + """
[model]
allocation = "multiple"

[service]
cutoff = "25:00"
deliver_by = 8
days = 0
sort_hour = 1

[hours]
rules = "ue"
long_legs = "relays"
relay_minutes = -5

[freight]
emissions_basis = "wtt"
max_transit_h = 0
value_of_time = -1

[freigth]
"""
    )
    path = folder(tmp_path, text)
    name = str(path)
    with pytest.raises(InputError) as excinfo:
        load_config(path)

    def at(start: str, after: str | None = None) -> str:
        return f"{name} line {line_of(text, start, after)}"

    expected = [
        f"{at('kg_per_unit')}, key inputs.kg_per_unit: Input should be greater than 0, got 0",
        f'{at("cutoff")}, key service.cutoff: expected a time of day as "HH:MM" from '
        "00:00 to 24:00, got '25:00'",
        f'{at("deliver_by")}, key service.deliver_by: expected a time of day as "HH:MM" '
        'from 00:00 to 24:00, written as text such as "18:00", got 8',
        f"{at('days')}, key service.days: Input should be greater than or equal to 1, got 0",
        f"{at('sort_hour')}, key service.sort_hour: unknown key 'sort_hour'; "
        "did you mean 'sort_hours'?",
        f"{at('long_legs')}, key hours.long_legs: Input should be 'relay', 'two_drivers' "
        "or 'forbid', got 'relays'",
        f"{at('relay_minutes')}, key hours.relay_minutes: Input should be greater than "
        "or equal to 0, got -5",
        f"{at('value_of_time')}, key freight.value_of_time: Input should be greater than "
        "or equal to 0, got -1",
        f"{at('emissions_basis')}, key freight.emissions_basis: Input should be 'ttw' or "
        "'wtw', got 'wtt'",
        f"{at('max_transit_h')}, key freight.max_transit_h: Input should be greater than 0, got 0",
        f"{at('[freigth]')}, key freigth: unknown key 'freigth'; did you mean 'freight'?",
        f"{at('allocation')}, key model.allocation: the freight model plans single "
        "allocation (each terminal works with one hub); set allocation = 'single', or "
        "remove inputs.vehicles to plan multiple allocation with the classic model",
        f"{at('rules')}, key hours.rules: rule file not found: {tmp_path / 'ue'}; "
        "expected 'eu', 'us' or the path of a TOML file with the drivers' hours limits; "
        "did you mean 'eu'?",
    ]
    assert sorted(messages(excinfo)) == sorted(expected)


def test_multiple_allocation_with_vehicles_alone(tmp_path: Path) -> None:
    text = CONFIG + '\n[model]\nallocation = "multiple"\n'
    path = folder(tmp_path, text)
    with pytest.raises(InputError) as excinfo:
        load_config(path)
    line = line_of(text, "allocation")
    assert messages(excinfo) == [
        f"{path} line {line}, key model.allocation: the freight model plans single "
        "allocation (each terminal works with one hub); set allocation = 'single', or "
        "remove inputs.vehicles to plan multiple allocation with the classic model"
    ]


def test_rule_file_problems_name_the_rule_file(tmp_path: Path) -> None:
    # Regulation (EC) No 561/2006, Art. 7 (from memory): a 45 min break after
    # 4.5 h of driving. A negative break is an error of the rule file itself.
    rules = write(
        tmp_path / "mine.toml",
        "max_driving_before_break_h = 4.5\nbreak_h = -0.75\nmax_daily_driving_h = 9.0\n",
    )
    text = CONFIG + '\n[hours]\nrules = "mine.toml"\nrelay_cost = -1\n'
    path = folder(tmp_path, text)
    with pytest.raises(InputError) as excinfo:
        load_config(path)
    found = messages(excinfo)
    # The config's own problem and the rule file's, in one report.
    assert (
        f"{path} line {line_of(text, 'relay_cost')}, key hours.relay_cost: Input should be "
        "greater than or equal to 0, got -1"
    ) in found
    assert any(m.startswith(f"{rules} line 2, key break_h:") for m in found), found
    assert len(found) == 2


def test_rule_path_that_is_a_folder(tmp_path: Path) -> None:
    (tmp_path / "rules").mkdir()
    text = CONFIG + '\n[hours]\nrules = "rules"\n'
    path = folder(tmp_path, text)
    with pytest.raises(InputError) as excinfo:
        load_config(path)
    assert messages(excinfo) == [
        f"{path} line {line_of(text, 'rules')}, key hours.rules: expected a rule file, "
        f"got a folder: {tmp_path / 'rules'}"
    ]


# --------------------------------------------------------------------------
# Input files: well-formed
# --------------------------------------------------------------------------


def test_freight_inputs_round_trip(tmp_path: Path) -> None:
    net = load_network(load_config(folder(tmp_path)))
    ber, ham, muc = net.sites
    assert (ber.sort_hours, ber.cutoff_h, ber.deliver_by_h) == (0.5, 18.5, 7.0)
    # Empty cells take the scenario's defaults later: None here.
    assert (ham.sort_hours, ham.cutoff_h, ham.deliver_by_h) == (None, None, None)
    assert (muc.sort_hours, muc.cutoff_h, muc.deliver_by_h) == (1.25, 20.0, 24.0)
    assert [d.max_hours for d in net.demand] == [10.0, None, 36.5]
    assert net.vehicles == (
        VehicleClass(
            id="semi",
            name="Semi-trailer",
            payload=33.0,
            cost_per_km=1.1,
            speed_kmh=80.0,
            tiers=frozenset({"trunk", "direct"}),
            cost_per_hour=35.0,
            cost_per_dispatch=40.0,
            max_kg=24000.0,
            max_m3=None,
            fuel_l_per_100km=32.0,
            fuel="diesel",
        ),
        VehicleClass(
            id="rigid",
            name="rigid",
            payload=16.0,
            cost_per_km=0.8,
            speed_kmh=65.0,
            tiers=frozenset({"feeder", "direct"}),
            fuel_l_per_100km=18.0,
        ),
    )
    # 24 000 kg at 250 kg per pallet: 96 pallets, so the 33 pallets bind.
    assert net.vehicles[0].effective_payload(250.0, 1.5) == (33.0, "units")


def test_vehicles_sheet_of_a_workbook_with_excel_times(tmp_path: Path) -> None:
    book = openpyxl.Workbook()
    sheet = book.active
    assert sheet is not None
    sheet.title = "sites"
    sheet.append(["id", "lat", "lon", "cutoff"])
    sheet.append(["BER", 52.52, 13.405, datetime.time(18, 45)])  # a time cell
    sheet.append(["HAM", 53.55, 9.99, "19:00"])
    demand = book.create_sheet("demand")
    demand.append(["origin", "destination", "volume"])
    demand.append(["BER", "HAM", 5])
    vehicles = book.create_sheet("vehicles")
    vehicles.append(["id", "payload", "cost_per_km", "speed_kmh", "tiers"])
    vehicles.append(["van", 6, 0.5, 70, "Feeder Trunk"])
    book.save(tmp_path / "network.xlsx")
    text = (
        '[scenario]\nname = "x"\n[inputs]\nsites = "network.xlsx"\n'
        'demand = "network.xlsx"\nvehicles = "network.xlsx"\n'
    )
    net = load_network(load_config(write(tmp_path / "scenario.toml", text)))
    assert [s.cutoff_h for s in net.sites] == [18.75, 19.0]  # 18 + 45/60
    assert net.vehicles[0].tiers == frozenset({"feeder", "trunk"})


def test_weight_limits_without_a_unit_weight_warn(tmp_path: Path) -> None:
    text = CONFIG.replace("kg_per_unit = 250.0\n", "")
    with pytest.warns(InputWarning, match="column max_kg is not used: set inputs.kg_per_unit"):
        load_network(load_config(folder(tmp_path, text)))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        load_network(load_config(folder(tmp_path)))


def test_network_from_frames_with_vehicles() -> None:
    sites = pd.DataFrame({"id": ["A", "B"], "x": [0.0, 3.0], "y": [0.0, 4.0], "cutoff": "17:00"})
    demand = pd.DataFrame({"origin": ["A"], "destination": ["B"], "volume": [12.0]})
    vehicles = pd.DataFrame(
        {
            "id": ["v1", "v2"],
            "payload": [10.0, 0.0],
            "cost_per_km": [1.0, 1.0],
            "speed_kmh": [60, 60],
            "tiers": ["feeder trunk", "trunk"],
        }
    )
    with pytest.raises(InputError) as excinfo:
        network_from_frames(sites, demand, vehicles=vehicles, names={"vehicles": "fleet"})
    # The second frame row is row 3, as if the frame were saved to CSV.
    assert messages(excinfo) == [
        "fleet row 3, column payload: expected a payload > 0 (volume units per vehicle), got '0'"
    ]
    net = network_from_frames(sites, demand, vehicles=vehicles.iloc[:1])
    assert net.sites[0].cutoff_h == 17.0
    assert net.vehicles[0].tiers == frozenset({"feeder", "trunk"})
    assert network_from_frames(sites, demand).vehicles == ()


def test_scenario_edits_keep_the_freight_fields(tmp_path: Path) -> None:
    net = load_network(load_config(folder(tmp_path)))
    edited = apply_data_edits(net, DataEdits(demand_scale=2.0, handling_cost_scale=1.5))
    assert edited.vehicles == net.vehicles
    assert [(s.sort_hours, s.cutoff_h, s.deliver_by_h) for s in edited.sites] == [
        (s.sort_hours, s.cutoff_h, s.deliver_by_h) for s in net.sites
    ]
    assert [(d.volume, d.max_hours) for d in edited.demand] == [
        (24.0, 10.0),  # 12 x 2
        (16.0, None),  # 8 x 2
        (6.0, 36.5),  # 3 x 2
    ]


# --------------------------------------------------------------------------
# Input files: malformed
# --------------------------------------------------------------------------


def test_bad_site_and_demand_cells_are_all_reported(tmp_path: Path) -> None:
    sites = """\
id,lat,lon,sort_hours,cutoff,deliver_by
BER,52.52,13.405,-1,25:00,8
HAM,53.55,9.99,x,18:60,07:00
MUC,48.14,11.58,,6pm,24:30
"""
    demand = """\
origin,destination,volume,max_hours
BER,HAM,12,0
HAM,MUC,8,-2
MUC,BER,3,soon
"""
    with pytest.raises(InputError) as excinfo:
        load_network(load_config(folder(tmp_path, sites=sites, demand=demand)))
    clock = 'expected a time of day as "HH:MM" from 00:00 to 24:00'
    sort = "expected hours >= 0, or an empty cell for the scenario's default"
    allowance = "expected a transit allowance in hours > 0, or an empty cell for none"
    assert messages(excinfo) == [
        f"sites.csv row 2, column sort_hours: {sort}, got '-1'",
        f"sites.csv row 2, column cutoff: {clock}, got '25:00'",
        f"sites.csv row 2, column deliver_by: {clock}, got '8'",
        f"sites.csv row 3, column sort_hours: {sort}, got 'x'",
        f"sites.csv row 3, column cutoff: {clock}, got '18:60'",
        f"sites.csv row 4, column cutoff: {clock}, got '6pm'",
        f"sites.csv row 4, column deliver_by: {clock}, got '24:30'",
        f"demand.csv row 2, column max_hours: {allowance}, got '0'",
        f"demand.csv row 3, column max_hours: {allowance}, got '-2'",
        f"demand.csv row 4, column max_hours: {allowance}, got 'soon'",
    ]


def test_bad_vehicle_cells_are_all_reported(tmp_path: Path) -> None:
    fuels = list(load_fuels())
    assert "diesel" in fuels  # EN 16258:2012 Annex A gives diesel factors (from memory)
    vehicles = """\
id,payload,cost_per_km,speed_kmh,tiers,fuel,max_m3
semi,33,1.1,80,trunk,diesel,90
semi,0,1.0,151,fedder,petrol,0
van,,-1,fast,"trunk, lorry, bus",Diesel,
,6,0.5,0,;,,
"""
    with pytest.raises(InputError) as excinfo:
        load_network(load_config(folder(tmp_path, vehicles=vehicles)))
    tiers = "expected one or more of feeder, trunk, direct, separated by spaces, commas, "
    tiers += "semicolons or '|'"
    speed = "expected a speed in km/h above 0 and at most 150"
    assert messages(excinfo) == [
        "vehicles.csv row 3, column id: duplicate vehicle class id 'semi'; it is also on row 2",
        "vehicles.csv row 3, column payload: expected a payload > 0 (volume units per "
        "vehicle), got '0'",
        f"vehicles.csv row 3, column speed_kmh: {speed}, got '151'",
        f"vehicles.csv row 3, column tiers: unknown tier 'fedder'; {tiers}; did you mean 'feeder'?",
        "vehicles.csv row 3, column fuel: unknown fuel 'petrol'; the emission factor table "
        f"has {', '.join(fuels)}",
        "vehicles.csv row 3, column max_m3: expected a cubic limit in m3 > 0, or an empty "
        "cell for none, got '0'",
        "vehicles.csv row 4, column payload: empty cell; expected a payload > 0 (volume "
        "units per vehicle)",
        "vehicles.csv row 4, column cost_per_km: expected a cost per vehicle-km >= 0, got '-1'",
        f"vehicles.csv row 4, column speed_kmh: {speed}, got 'fast'",
        f"vehicles.csv row 4, column tiers: unknown tier 'lorry' (and 'bus'); {tiers}",
        "vehicles.csv row 5, column id: empty cell; expected a vehicle class id",
        f"vehicles.csv row 5, column speed_kmh: {speed}, got '0'",
        f"vehicles.csv row 5, column tiers: {tiers}, got ';'",
    ]


def test_missing_vehicle_columns(tmp_path: Path) -> None:
    vehicles = "id,payload,cost_per_km,speed,tiers\nsemi,33,1.1,80,feeder trunk\n"
    with pytest.raises(InputError) as excinfo:
        load_network(load_config(folder(tmp_path, vehicles=vehicles)))
    assert messages(excinfo) == [
        "vehicles.csv, column speed_kmh: missing column 'speed_kmh'; found columns: id, "
        "payload, cost_per_km, speed, tiers",
    ]


@pytest.mark.parametrize(
    ("tiers", "missing"),
    [
        (("trunk", "trunk direct"), "feeder legs (between a terminal and its hub)"),
        (("feeder", "feeder;direct"), "trunk legs (between two hubs)"),
    ],
)
def test_a_tier_without_any_vehicle_class(
    tmp_path: Path, tiers: tuple[str, str], missing: str
) -> None:
    vehicles = (
        "id,payload,cost_per_km,speed_kmh,tiers\n"
        f'semi,33,1.1,80,"{tiers[0]}"\nrigid,16,0.8,65,"{tiers[1]}"\n'
    )
    tier = missing.split()[0]
    with pytest.raises(InputError) as excinfo:
        load_network(load_config(folder(tmp_path, vehicles=vehicles)))
    assert messages(excinfo) == [
        f"vehicles.csv, column tiers: no vehicle class may run on {missing}: add {tier!r} to "
        "the tiers of at least one class"
    ]


def test_no_vehicle_class_and_other_files_reported_together(tmp_path: Path) -> None:
    sites = SITES.replace("18:30", "18h30")
    with pytest.raises(InputError) as excinfo:
        load_network(load_config(folder(tmp_path, sites=sites, vehicles="id,payload\n")))
    found = messages(excinfo)
    assert found[0] == (
        'sites.csv row 2, column cutoff: expected a time of day as "HH:MM" from 00:00 to '
        "24:00, got '18h30'"
    )
    assert "vehicles.csv: the file has no vehicle classes: expected one row per class" in found
    assert "vehicles.csv, column tiers: missing column 'tiers'; found columns: id, payload" in found


def test_vehicles_file_not_found_names_the_config_line(tmp_path: Path) -> None:
    path = folder(tmp_path, CONFIG.replace('"vehicles.csv"', '"fleet.csv"'))
    with pytest.raises(InputError) as excinfo:
        load_network(load_config(path))
    assert messages(excinfo) == [
        f"{path} line {line_of(CONFIG, 'vehicles')}, key inputs.vehicles: file not "
        f"found: {tmp_path / 'fleet.csv'}"
    ]
