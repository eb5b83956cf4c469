"""The outputs of a freight run: tables, summary, workbook, map, report and history.

A seven-site network with two vehicle classes (tests/freightdata.py) is
solved for real by the freight model; every figure the run folder shows is
checked against the others and against sums done by hand from the inputs:
vehicle-km are dispatches x km, CO2e is litres x the fuel's factor, the
payloads cover the volume on every leg, hours follow the vehicles' speeds
and the EU drivers' hours rules, and the costs add up.
"""

from __future__ import annotations

import io
import json
import math
import re
import tomllib
from collections.abc import Iterator
from importlib import resources
from pathlib import Path

import pandas as pd
import pytest
from freightdata import (
    CARBON_PRICE_PER_T,
    KG_PER_UNIT,
    VEHICLES,
    FreightRun,
    freight_run,
)
from test_tables import line_plan

from hubnet.api import run_scenario
from hubnet.config import load_config
from hubnet.history import config_hash, input_hashes, settings_dict
from hubnet.report.html import report_html
from hubnet.report.rundata import read_run
from hubnet.report.summary import summary_dict
from hubnet.report.tables import (
    COLUMNS,
    FREIGHT_COLUMNS,
    TABLES,
    all_tables,
    column_doc,
    describe_columns,
    is_freight,
)
from hubnet.report.workbook import column_unit, workbook_from_run

#: Diesel, kg CO2e per litre: tank-to-wheel 2.67, well-to-wheel 3.24 (EN 16258:2012,
#: Annex A, from memory; ISO 14083:2023 keeps the split). Cross-check: US EPA GHG
#: inventory factors, 10.21 kg CO2 per US gallon = 2.70 kg/L (from memory).
DIESEL_TTW_KG_PER_L = 2.67
DIESEL_WTW_KG_PER_L = 3.24
#: Regulation (EC) No 561/2006 (from memory): a 45 min break after 4.5 h of
#: driving (Art. 7), at most 9 h of driving a day (Art. 6(1)).
EU_DRIVING_BEFORE_BREAK_H = 4.5
EU_BREAK_H = 0.75
EU_DAILY_DRIVING_H = 9.0

LEG_KEY = ["tier", "from_site", "to_site"]


@pytest.fixture(scope="module")
def run(tmp_path_factory: pytest.TempPathFactory) -> FreightRun:
    return freight_run(tmp_path_factory.mktemp("freight"))


@pytest.fixture(scope="module")
def tables(run: FreightRun) -> dict[str, pd.DataFrame]:
    """The run folder's CSV files, read back as a script would."""
    return {
        name: pd.read_csv(run.folder / f"{name}.csv", keep_default_na=True)
        for name in ("legs", "dispatches", "routes", "hierarchy", "hubs")
    }


@pytest.fixture(scope="module")
def summary(run: FreightRun) -> dict[str, object]:
    return json.loads((run.folder / "summary.json").read_text(encoding="utf-8"))


def vehicle(class_id: str) -> pd.Series:
    return VEHICLES.set_index("id").loc[class_id]


def payload(class_id: str) -> float:
    """Payload after the weight limit, by hand.

    van: min(12 pallets, 3,000 kg / 300 kg) = 10; artic: min(33, 25,000 / 300 = 83.3) = 33.
    """
    v = vehicle(class_id)
    return min(float(v["payload"]), float(v["max_kg"]) / KG_PER_UNIT)


def by_leg(frame: pd.DataFrame) -> Iterator[tuple[tuple[str, str, str], pd.DataFrame]]:
    keys = ["tier", "origin", "destination"]
    for key, group in frame.groupby(keys, sort=False):
        yield (str(key[0]), str(key[1]), str(key[2])), group


def test_bundled_diesel_factors_are_the_published_ones() -> None:
    # The model reads hubnet/factors/fuels.toml; the hand sums below use EN 16258 values.
    text = resources.files("hubnet").joinpath("factors/fuels.toml").read_text(encoding="utf-8")
    diesel = tomllib.loads(text)["diesel"]
    assert diesel["ttw_kg_per_l"] == DIESEL_TTW_KG_PER_L
    assert diesel["wtw_kg_per_l"] == DIESEL_WTW_KG_PER_L


def test_run_folder_has_the_freight_files_and_columns(
    run: FreightRun, tables: dict[str, pd.DataFrame]
) -> None:
    assert (run.folder / "dispatches.csv").is_file()
    for name in ("legs", "routes", "hierarchy"):
        extra = [c for c in tables[name].columns if c not in COLUMNS[name]]
        documented = [
            c
            for c in FREIGHT_COLUMNS[name]
            if not c.endswith("{class}")  # the per-class column, one per class
        ]
        assert [c for c in extra if not c.startswith("dispatches_")] == documented
        assert list(tables[name].columns[: len(COLUMNS[name])]) == list(COLUMNS[name])
    assert list(tables["dispatches"].columns) == list(FREIGHT_COLUMNS["dispatches"])
    assert [c for c in tables["hierarchy"].columns if c.startswith("dispatches_")] == [
        "dispatches_van",
        "dispatches_artic",
    ]
    # the plan has what the checks below need: every tier, a mixed leg, an empty return
    legs = tables["legs"]
    assert set(legs["tier"]) == {"trunk", "feeder", "direct"}
    assert legs["vehicle_class"].str.contains("+", regex=False).any()
    assert (legs["volume_per_day"] == 0).any()


def test_every_leg_row_by_hand(tables: dict[str, pd.DataFrame]) -> None:
    legs, dispatches = tables["legs"], tables["dispatches"]
    per_leg = dict(by_leg(dispatches))
    assert len(per_leg) == len(legs)
    for leg in legs.to_dict("records"):
        rows = per_leg[(leg["tier"], leg["from_site"], leg["to_site"])]
        km = leg["distance_km"]
        classes = list(rows["vehicle_class"])
        assert "+".join(sorted(classes)) == leg["vehicle_class"]
        assert rows["dispatches"].sum() == leg["dispatches"]
        # vehicle-km = dispatches x km
        assert leg["vehicle_km"] == pytest.approx(leg["dispatches"] * km, rel=1e-12)
        # capacity = sum of dispatches x payload, and it covers the volume
        capacity = sum(n * payload(c) for c, n in zip(classes, rows["dispatches"], strict=True))
        assert leg["capacity"] == pytest.approx(capacity, rel=1e-12)
        assert leg["volume_per_day"] <= leg["capacity"] + 1e-9
        assert leg["fill"] == pytest.approx(leg["volume_per_day"] / capacity, rel=1e-12)
        # CO2e = litres x factor, litres = vehicle-km x L/100 km / 100
        litres = sum(
            n * km * float(vehicle(c)["fuel_l_per_100km"]) / 100.0
            for c, n in zip(classes, rows["dispatches"], strict=True)
        )
        assert leg["co2e_ttw_kg"] == pytest.approx(litres * DIESEL_TTW_KG_PER_L, rel=1e-9)
        assert leg["co2e_wtw_kg"] == pytest.approx(litres * DIESEL_WTW_KG_PER_L, rel=1e-9)
        assert leg["drivers"] == 1 and leg["relays"] == 0  # no leg is over 9 h of driving


def test_hours_follow_speeds_and_the_eu_break_rule(tables: dict[str, pd.DataFrame]) -> None:
    legs, dispatches = tables["legs"], tables["dispatches"]
    per_leg = dict(by_leg(dispatches))
    speeds = VEHICLES.set_index("id")["speed_kmh"]
    tiers = VEHICLES.set_index("id")["tiers"].str.split()
    checked_break = False
    for leg in legs.to_dict("records"):
        km = leg["distance_km"]
        used = per_leg[(leg["tier"], leg["from_site"], leg["to_site"])]["vehicle_class"]
        # driving time: km / speed of the slowest class run on the leg
        assert leg["drive_h"] == pytest.approx(km / speeds[list(used)].min(), rel=1e-12)
        # transit: the slowest class run on the leg, plus a 45 min break for every
        # full 4.5 h of driving (Reg. 561/2006 Art. 7) on a run one driver may drive (Art. 6(1))
        assert all(leg["tier"] in tiers[c] for c in used)
        drive = km / speeds[list(used)].min()
        assert drive <= EU_DAILY_DRIVING_H
        breaks = math.ceil(drive / EU_DRIVING_BEFORE_BREAK_H) - 1
        assert leg["transit_h"] == pytest.approx(drive + breaks * EU_BREAK_H, rel=1e-9)
        checked_break = checked_break or breaks > 0
    assert checked_break  # the trunk (363 km at 75 km/h = 4.84 h) needs one break


def test_dispatch_rows_add_up_to_their_leg(tables: dict[str, pd.DataFrame]) -> None:
    legs = tables["legs"].set_index(LEG_KEY)
    mixed = 0
    for key, rows in by_leg(tables["dispatches"]):
        leg = legs.loc[key]
        for column, leg_column in (
            ("dispatches", "dispatches"),
            ("volume", "volume_per_day"),
            ("cost", "cost_per_day"),
            ("vehicle_km", "vehicle_km"),
            ("co2e_ttw_kg", "co2e_ttw_kg"),
            ("co2e_wtw_kg", "co2e_wtw_kg"),
        ):
            assert rows[column].sum() == pytest.approx(leg[leg_column], rel=1e-9, abs=1e-9)
        for row in rows.to_dict("records"):
            assert row["payload"] == pytest.approx(payload(row["vehicle_class"]), rel=1e-12)
            assert row["vehicle_km"] == pytest.approx(row["dispatches"] * row["distance_km"])
            assert row["distance_km"] == leg["distance_km"]
            # each class drives at its own speed; the leg shows its slowest
            assert row["drive_h"] <= leg["drive_h"] + 1e-12
            # each class's CO2e is its own litres x factor, even on a mixed leg
            litres = row["vehicle_km"] * vehicle(row["vehicle_class"])["fuel_l_per_100km"] / 100
            assert row["co2e_wtw_kg"] == pytest.approx(litres * DIESEL_WTW_KG_PER_L, rel=1e-9)
            assert row["co2e_ttw_kg"] == pytest.approx(litres * DIESEL_TTW_KG_PER_L, rel=1e-9)
            # volume split by capacity: every class has the leg's fill
            assert row["fill"] == pytest.approx(leg["fill"], rel=1e-9, abs=1e-12)
            assert row["volume"] <= row["dispatches"] * row["payload"] + 1e-9
        mixed += len(rows) > 1
    assert mixed > 0


def test_routes_carry_transit_allowance_and_slack(tables: dict[str, pd.DataFrame]) -> None:
    routes, legs = tables["routes"], tables["legs"].set_index(LEG_KEY)
    # cut-off 18:00, deliver by 08:00 next day: (8 - 18) mod 24 = 14 h
    assert (routes["allowance_h"] == 14.0).all()
    assert routes["slack_h"].to_numpy() == pytest.approx(
        (routes["allowance_h"] - routes["transit_h"]).to_numpy()
    )
    assert (routes["slack_h"] >= -1e-9).all()
    for route in routes.to_dict("records"):
        path = route["path"].split(" > ")
        if route["hub_count"] == 0:
            steps = [("direct", path[0], path[1])]
        else:
            steps = []
            for a, b in zip(path, path[1:], strict=False):
                tier = "trunk" if a in ("MAD", "VAL") and b in ("MAD", "VAL") else "feeder"
                steps.append((tier, a, b))
        hours = sum(legs.loc[step, "transit_h"] for step in steps)
        hours += 1.0 * route["hub_count"]  # sort_hours = 1.0 at every hub passed
        assert route["transit_h"] == pytest.approx(hours, rel=1e-9), route


def test_hierarchy_agrees_with_the_legs(
    tables: dict[str, pd.DataFrame], summary: dict[str, object]
) -> None:
    legs, dispatches, routes = tables["legs"], tables["dispatches"], tables["routes"]
    h = tables["hierarchy"].set_index("tier")
    route_hours = (routes["volume_per_day"] * routes["transit_h"]).sum()
    for tier in ("trunk", "feeder", "direct"):
        mine = legs[legs["tier"] == tier]
        row = h.loc[tier]
        assert row["dispatches"] == mine["dispatches"].sum()
        for cls in ("van", "artic"):
            own = dispatches[(dispatches["tier"] == tier) & (dispatches["vehicle_class"] == cls)]
            assert row[f"dispatches_{cls}"] == own["dispatches"].sum()
        assert row["vehicle_km"] == pytest.approx(mine["vehicle_km"].sum())
        assert row["avg_load"] == pytest.approx(mine["volume_per_day"].sum() / row["dispatches"])
        assert row["fill_rate"] == pytest.approx(
            mine["volume_per_day"].sum() / mine["capacity"].sum()
        )
        # each class's runs at that class's own driving time (dispatches.csv)
        own_rows = dispatches[dispatches["tier"] == tier]
        driving = (own_rows["dispatches"] * own_rows["drive_h"]).sum()
        assert row["driving_h"] == pytest.approx(driving)
        assert row["avg_speed_kmh"] == pytest.approx(row["vehicle_km"] / driving)
        assert row["co2e_wtw_kg"] == pytest.approx(mine["co2e_wtw_kg"].sum())
        assert row["co2e_ttw_kg"] == pytest.approx(mine["co2e_ttw_kg"].sum())
        assert row["share_of_time"] == pytest.approx(
            (mine["volume_per_day"] * mine["transit_h"]).sum() / route_hours
        )
        assert row["cost_per_day"] == pytest.approx(summary["costs"][tier])  # type: ignore[index]
    tiers = h.drop(index="all")
    for column in ("dispatches", "dispatches_van", "dispatches_artic", "vehicle_km", "driving_h"):
        assert h.loc["all", column] == pytest.approx(tiers[column].sum())
    # the rest of the transit time is spent in the sorts
    on_road = h.loc["all", "share_of_time"]
    sort = summary["freight"]["sort_h_per_unit"] / summary["avg_transit_h"]  # type: ignore[index,operator]
    assert on_road + sort == pytest.approx(1.0, rel=1e-5)


def test_summary_agrees_with_the_tables(
    run: FreightRun, tables: dict[str, pd.DataFrame], summary: dict[str, object]
) -> None:
    legs, dispatches, routes = tables["legs"], tables["dispatches"], tables["routes"]
    s: dict = summary
    assert s["vehicle_km"] == pytest.approx(legs["vehicle_km"].sum(), abs=1e-3)
    assert s["co2e_ttw_kg"] == pytest.approx(legs["co2e_ttw_kg"].sum(), abs=1e-3)
    assert s["co2e_wtw_kg"] == pytest.approx(legs["co2e_wtw_kg"].sum(), abs=1e-3)
    assert s["co2e_kg"] == s["co2e_wtw_kg"]  # emissions_basis = wtw, the default
    assert s["co2e_t"] == pytest.approx(s["co2e_kg"] / 1000, abs=1e-6)
    by_class = s["freight"]["by_class"]
    assert list(by_class) == ["van", "artic"]
    for cls, rec in by_class.items():
        own = dispatches[dispatches["vehicle_class"] == cls]
        assert rec["runs"] == pytest.approx(own["dispatches"].sum())
        assert rec["dispatches"] * 2 == pytest.approx(rec["runs"])  # round trips
        assert rec["vehicle_km"] == pytest.approx(own["vehicle_km"].sum(), abs=1e-3)
        assert rec["co2e_wtw_kg"] == pytest.approx(own["co2e_wtw_kg"].sum(), abs=1e-3)
        assert rec["payload"] == pytest.approx(payload(cls), abs=1e-6)
    assert by_class["van"]["payload_limit"] == "kg"
    # every round trip here is shorter than 24 h: one vehicle per daily dispatch
    assert s["dispatches"] == sum(rec["dispatches"] for rec in by_class.values())
    assert s["vehicles"] == s["dispatches"] == legs["dispatches"].sum() / 2
    volume = routes["volume_per_day"]
    assert s["avg_transit_h"] == pytest.approx(
        (volume * routes["transit_h"]).sum() / volume.sum(), abs=1e-6
    )
    assert s["max_transit_h"] == pytest.approx(routes["transit_h"].max(), abs=1e-6)
    assert s["service_level"] == 1.0
    for tier in ("feeder", "trunk"):
        mine = legs[legs["tier"] == tier]
        hours = (mine["volume_per_day"] * mine["transit_h"]).sum() / volume.sum()
        assert s[f"{tier}_h_per_unit"] == pytest.approx(hours, abs=1e-6)
    # costs: freight keys, the total their sum, the carbon price inside the legs' costs
    costs = s["costs"]
    assert list(costs) == [
        "hub_fixed",
        "handling",
        "feeder",
        "trunk",
        "direct",
        "time",
        "total",
        "carbon_in_vehicles",
    ]
    parts = ("hub_fixed", "handling", "feeder", "trunk", "direct", "time")
    assert costs["total"] == pytest.approx(sum(costs[k] for k in parts), abs=1e-3)
    assert costs["total"] == pytest.approx(s["objective"], rel=1e-9)
    assert costs["feeder"] + costs["trunk"] + costs["direct"] == pytest.approx(
        legs["cost_per_day"].sum(), abs=1e-3
    )
    # 100 per t CO2e (well-to-wheel): price x t
    assert costs["carbon_in_vehicles"] == pytest.approx(
        CARBON_PRICE_PER_T * s["co2e_wtw_kg"] / 1000, abs=1e-3
    )
    # the config part names the vehicles file and the freight settings
    assert Path(s["inputs"]["vehicles"]) == run.config.inputs.vehicles
    assert s["inputs"]["kg_per_unit"] == KG_PER_UNIT
    assert s["service"] == {"cutoff": "18:00", "deliver_by": "08:00", "days": 1, "sort_hours": 1.0}
    assert Path(s["hours"]["rules"]).name == "my_rules.toml"
    assert s["freight_settings"]["carbon_price_per_t"] == CARBON_PRICE_PER_T
    assert s["freight_settings"]["direct_min_load"] == 1.5
    assert s["freight"]["driving_rules"] == "EU 561/2006"
    # the classic per-unit-km cost factors play no part in a freight plan
    assert set(s["model"]) == {"allocation", "hubs", "capacitated"}


def test_workbook_holds_the_freight_tables(run: FreightRun) -> None:
    from openpyxl import load_workbook

    book = load_workbook(run.folder / "tables.xlsx")
    assert book.sheetnames[:4] == ["summary", "hubs", "legs", "dispatches"]
    for name in ("legs", "dispatches", "routes", "hierarchy"):
        csv = pd.read_csv(run.folder / f"{name}.csv")
        sheet = book[name]
        header = [c.value for c in sheet[1]]
        assert [re.sub(r" \[.*\]$", "", h) for h in header] == list(csv.columns)
        cells = list(sheet.iter_rows(min_row=2, values_only=True))
        assert len(cells) == len(csv)
        for row, expected in zip(cells, csv.itertuples(index=False), strict=True):
            for got, want in zip(row, expected, strict=True):
                if isinstance(want, float) and math.isnan(want):
                    assert got is None
                elif isinstance(want, float):
                    assert got == pytest.approx(want, rel=1e-14)
                else:
                    assert got == want
    legs_header = [c.value for c in book["legs"][1]]
    assert "vehicle_km [vehicle-km/day]" in legs_header
    assert "co2e_wtw_kg [kg CO2e/day]" in legs_header
    assert "dispatches [runs/day]" in legs_header
    assert "capacity [pallets/day]" in legs_header
    assert "payload [pallets/vehicle]" in [c.value for c in book["dispatches"][1]]
    # every column of every sheet has its meaning on the columns sheet
    meanings = {(r[0], r[1]): r[3] for r in book["columns"].iter_rows(min_row=2, values_only=True)}
    for name in ("legs", "dispatches", "hierarchy", "routes"):
        for column in pd.read_csv(run.folder / f"{name}.csv", nrows=0).columns:
            assert meanings[(name, column)], (name, column)
    # the summary sheet has the freight figures of summary.json
    summary = json.loads((run.folder / "summary.json").read_text(encoding="utf-8"))
    figures = {r[0]: r[1] for r in book["summary"].iter_rows(min_row=2, values_only=True)}
    assert figures["vehicle_km"] == summary["vehicle_km"]
    assert figures["freight.by_class.artic.runs"] == summary["freight"]["by_class"]["artic"]["runs"]
    # rebuilt from the files alone, the workbook has the same dispatches sheet
    again = load_workbook(io.BytesIO(workbook_from_run(run.folder)))
    assert [list(r) for r in again["dispatches"].iter_rows(values_only=True)] == [
        list(r) for r in book["dispatches"].iter_rows(values_only=True)
    ]


def test_column_units_of_freight_columns() -> None:
    # units the workbook headers show
    assert column_unit("vehicle_km") == "vehicle-km/day"
    assert column_unit("co2e_ttw_kg") == "kg CO2e/day"
    assert column_unit("dispatches_artic") == "runs/day"
    assert column_unit("fill") == "fraction"
    assert column_unit("transit_h") == "h"
    assert column_unit("avg_speed_kmh") == "km/h"
    assert column_unit("cost") == "currency/day"
    assert column_unit("volume", "pallets") == "pallets/day"


def test_map_colours_legs_by_class_and_dashes_empty_returns(
    run: FreightRun, tables: dict[str, pd.DataFrame]
) -> None:
    page = (run.folder / "map.html").read_text(encoding="utf-8")
    legs = tables["legs"]
    assert page.count('"className": "hubnet-leg ') == len(legs)
    empty = int((legs["volume_per_day"] == 0).sum())
    assert empty > 0 and page.count(" hubnet-empty") == empty
    assert page.count('"dashArray": "2 6"') == empty
    # popups are JSON strings with < and > escaped: count the labels
    assert page.count("Vehicle class") == len(legs)
    assert page.count("Dispatches by class") == len(legs)
    assert "Empty return: the vehicles run back without load" in page
    # legend: one entry per class with its name, and the mixed-leg note
    assert "van: 7.5 t rigid</div>" in page and "artic: 40 t articulated</div>" in page
    assert "most capacity on the leg" in page
    # a mixed leg takes the colour of the class with most capacity (artic 33 > van 10)
    mixed = legs.index[legs["vehicle_class"] == "artic+van"]
    for i in mixed:
        assert f"hubnet-row-{i} hubnet-class-artic" in page
    # the van-only direct legs are drawn in the van's colour, the first of the palette
    assert "hubnet-class-van" in page and '"color": "#0072B2"' in page


def test_report_shows_the_freight_figures(run: FreightRun) -> None:
    page = report_html([run.folder], tiles="none")
    for label in (
        "Vehicles",
        "Vehicle-km",
        "Average transit time",
        "Longest transit time",
        "Service level (on time)",
        "Feeder legs",
        "Trunk legs",
        "Direct legs",
        "of which carbon price (inside the legs&#x27; costs)",
        "Vehicle runs per day",
        "Share of transit time",
    ):
        assert label in page, label
    s = json.loads((run.folder / "summary.json").read_text(encoding="utf-8"))
    assert f"{s['vehicles']:,.0f}" in page


def test_report_compares_a_freight_run_with_a_classic_one(run: FreightRun, tmp_path: Path) -> None:
    from reportdata import tiny_run

    classic = tiny_run(tmp_path)
    page = report_html([run.folder, classic], tiles="none")
    costs = json.loads((classic / "summary.json").read_text(encoding="utf-8"))["costs"]
    # the classic run's trunk cost shows on the freight run's trunk row
    row = re.search(r"<th>Trunk legs <span class='unit'>per day</span></th>(.*?)</tr>", page)
    assert row is not None
    assert f"{costs['transfer']:,.0f}" in row.group(1)
    assert page.count("<th>Trunk legs ") == 1


def test_history_hashes_the_vehicles_and_rule_files(run: FreightRun, tmp_path: Path) -> None:
    config = run.config
    hashes = input_hashes(config)
    assert set(hashes) == {"sites", "demand", "vehicles", "hours_rules"}
    assert hashes["vehicles"]["path"] == str(config.inputs.vehicles.resolve())
    settings = settings_dict(config)
    assert settings["freight"]["carbon_price_per_t"] == CARBON_PRICE_PER_T
    assert settings["freight"]["hours"]["rules"] == "file"  # the path is not a setting
    # a change in the rule file's content changes its hash, not the settings' hash
    rules = Path(hashes["hours_rules"]["path"])
    copy_dir = tmp_path / "copy"
    copy_dir.mkdir()
    for f in rules.parent.iterdir():
        (copy_dir / f.name).write_bytes(f.read_bytes())
    (copy_dir / "my_rules.toml").write_text(
        rules.read_text(encoding="utf-8").replace("break_h = 0.75", "break_h = 1.0"),
        encoding="utf-8",
    )
    other = load_config(copy_dir / "freight.toml")
    assert config_hash(other) == config_hash(config)
    assert input_hashes(other)["hours_rules"]["sha256"] != hashes["hours_rules"]["sha256"]
    assert input_hashes(other)["vehicles"]["sha256"] == hashes["vehicles"]["sha256"]
    # a built-in rule set is no file
    builtin = copy_dir / "builtin.toml"
    builtin.write_text(
        (copy_dir / "freight.toml")
        .read_text(encoding="utf-8")
        .replace('rules = "my_rules.toml"', 'rules = "eu"'),
        encoding="utf-8",
    )
    assert "hours_rules" not in input_hashes(load_config(builtin))


def test_history_row_of_a_freight_job(run: FreightRun, tmp_path: Path) -> None:
    from hubnet.history import History, sha256_file
    from hubnet.jobs import run_job

    assert run.config.source is not None
    db = str(tmp_path / "h.sqlite")
    result = run_job(run.config.source, tmp_path / "job", history=db)
    assert result.status == "optimal"
    with History(db) as h:
        (row,) = h.runs()
    summary = json.loads((tmp_path / "job" / "summary.json").read_text(encoding="utf-8"))
    for key in ("vehicles", "vehicle_km", "avg_transit_h", "co2e_kg"):
        assert row.kpis[key] == summary[key]
    assert row.inputs["vehicles"]["sha256"] == sha256_file(run.config.inputs.vehicles)
    assert row.config_hash == config_hash(run.config)


def test_api_run_writes_the_same_plan(run: FreightRun, tmp_path: Path) -> None:
    assert run.config.source is not None
    sol, folder = run_scenario(run.config.source, tmp_path / "api")
    assert sol.costs["total"] == pytest.approx(run.solution.costs["total"], rel=1e-9)
    written = {p.name for p in folder.iterdir()}
    assert {"dispatches.csv", "legs.csv", "map.html", "tables.xlsx"} <= written
    again = read_run(folder)
    assert list(again.table("dispatches").columns) == list(FREIGHT_COLUMNS["dispatches"])
    assert (
        again.summary["vehicles"]
        == json.loads((run.folder / "summary.json").read_text(encoding="utf-8"))["vehicles"]
    )


def test_classic_plan_has_no_freight_output() -> None:
    sol = line_plan()
    assert not is_freight(sol)
    tables = all_tables(sol)
    assert list(tables) == list(TABLES)
    for name, table in tables.items():
        assert list(table.columns) == list(COLUMNS[name])
    summary = summary_dict(sol)
    assert not {"vehicles", "freight", "co2e_kg", "vehicle_km"} & set(summary)
    assert list(summary["costs"]) == [
        "hub_fixed",
        "handling",
        "collection",
        "transfer",
        "distribution",
        "total",
    ]


def test_freight_columns_are_documented_with_units() -> None:
    text = describe_columns("pallets", freight=True)
    classic = describe_columns("pallets")
    # the classic text is kept whole, line by line in order, with the freight parts added
    lines = iter(text.splitlines())
    assert all(any(line == other for other in lines) for line in classic.splitlines())
    assert "### dispatches.csv" in text and "### dispatches.csv" not in classic
    for table, columns in FREIGHT_COLUMNS.items():
        for column in columns:
            shown = column.replace("{class}", "<class>")
            assert f"| `{shown}` |" in text, (table, column)
            doc = column_doc(table, column.replace("{class}", "artic"), "pallets")
            assert "{unit}" not in doc and "{class}" not in doc
            if column.endswith("_kg"):
                assert "kg per day" in doc, (table, column)
            if column.endswith("_h"):
                assert doc.endswith((", h.", "(h).")), (table, column)
            if column in ("volume", "capacity", "cost"):
                assert "per day" in doc, (table, column)
    assert "artic" in column_doc("hierarchy", "dispatches_artic")
    with pytest.raises(KeyError):
        column_doc("legs", "no_such_column")


def test_a_mixed_leg_is_split_by_capacity_by_hand() -> None:
    from hubnet.solution import Leg, Route, Solution, SolveStats

    # One feeder leg A -> H, 100 km, 40 units on 1 artic (payload 33) + 1 van (payload 10),
    # cost 200, well-to-wheel CO2e of the runs: artic 100 km x 31 L/100 km x 3.24 = 100.44 kg,
    # van 100 x 16 / 100 x 3.24 = 51.84 kg, together 152.28 kg.
    leg = Leg(
        tier="feeder",
        origin="A",
        destination="H",
        distance_km=100.0,
        volume=40.0,
        cost=200.0,
        dispatches={"artic": 1.0, "van": 1.0},
        capacity=43.0,
        drive_h=1.0,
        transit_h=1.0,
        vehicle_km=200.0,
        co2e_ttw_kg=0.0,
        co2e_wtw_kg=152.28,
    )
    classes = {
        "van": {"payload": 10.0, "vehicle_km": 100.0, "co2e_wtw_kg": 51.84},
        "artic": {"payload": 33.0, "vehicle_km": 100.0, "co2e_wtw_kg": 100.44},
    }
    stats = SolveStats("highs", "optimal", 200.0, 200.0, 0.0, 0.0, 0.0, "hand")
    sol = Solution(
        scenario="hand",
        stats=stats,
        hubs=(),
        routes=(Route("A", "H", 40.0, ("A", "H"), 100.0, 200.0, ("H",), 2.0, 14.0),),
        legs=(leg,),
        costs={"total": 200.0},
        volume_unit="pallets",
        allocation="single",
        freight={"by_class": classes},
    )
    rows = all_tables(sol)["dispatches"].set_index("vehicle_class")
    assert list(rows.index) == ["van", "artic"]  # the by_class order
    # capacity shares: van 10 / 43, artic 33 / 43
    assert rows.loc["van", "volume"] == pytest.approx(40 * 10 / 43)
    assert rows.loc["artic", "volume"] == pytest.approx(40 * 33 / 43)
    assert rows.loc["van", "cost"] == pytest.approx(200 * 10 / 43)
    assert rows.loc["artic", "fill"] == pytest.approx(40 / 43)
    # CO2e by each class's own kg per vehicle-km: 51.84 and 100.44
    assert rows.loc["van", "co2e_wtw_kg"] == pytest.approx(51.84)
    assert rows.loc["artic", "co2e_wtw_kg"] == pytest.approx(100.44)
    h = all_tables(sol)["hierarchy"].set_index("tier")
    assert h.loc["feeder", "fill_rate"] == pytest.approx(40 / 43)
    assert h.loc["feeder", "avg_load"] == pytest.approx(20.0)  # 40 units on 2 runs
    assert h.loc["feeder", "avg_speed_kmh"] == pytest.approx(100.0)  # 200 vehicle-km in 2 h
    assert h.loc["feeder", "share_of_time"] == pytest.approx(0.5)  # 40 x 1 h of 40 x 2 h


def test_a_freight_warm_start_that_does_not_fit_is_searched_past(tmp_path: Path) -> None:
    # Madrid and Valencia are forced open in this network (freightdata.py):
    # a start of Madrid alone is not a plan of it. The run says so, searches
    # instead, and ends where the run without a start ends.
    from freightdata import network, write_inputs

    from hubnet.distances import distance_matrix
    from hubnet.freight import solve_freight

    config = load_config(write_inputs(tmp_path / "inputs"))
    data = network()
    dm = distance_matrix(data, config.distances)
    said: list[str] = []
    args = (data, dm, config.model, config.freight, config.solver)
    with_start = solve_freight(*args, progress=said.append, start_hubs=["MAD"])
    plain = solve_freight(*args)
    assert any("do not fit this scenario (forced-open hub VAL missing)" in m for m in said), said
    assert set(with_start.hub_ids) == {"MAD", "VAL"}
    assert with_start.costs["total"] == pytest.approx(plain.costs["total"], rel=1e-9)
