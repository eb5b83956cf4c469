"""Tests of hubnet.inputs: reading CSV, Excel and GIS files and every validation rule.

Each malformed-input test writes a small real file into ``tmp_path`` and
checks that :class:`InputError` names the file, the spreadsheet row (header
= row 1) and the column of the problem.
"""

from __future__ import annotations

import re
import time
import warnings
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest

from hubnet.config import (
    DistanceMethod,
    DistanceParams,
    HubModelParams,
    InputFiles,
    ScenarioConfig,
)
from hubnet.errors import InputError
from hubnet.inputs import (
    MAX_PROBLEMS_PER_COLUMN,
    InputWarning,
    load_network,
    network_from_frames,
    read_table,
)

SITES = """\
id,name,lat,lon,can_be_hub,hub_fixed_cost,handling_cost,sort_capacity,hub_status
BER,Berlin,52.52,13.405,yes,1000,0.5,5000,candidate
HAM,Hamburg,53.55,9.99,no,,,,
MUC,Munich,48.14,11.58,1,800,0.4,,open
"""

DEMAND = """\
origin,destination,volume
BER,HAM,120
HAM,MUC,80.5
MUC,BER,0
"""


def write(path: Path, text: str) -> Path:
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture(autouse=True)
def _run_where_the_files_are(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # Problems name a data file relative to the working folder; these tests
    # write their files to tmp_path and run there, as a user runs from the
    # project folder, so the messages show the bare file names.
    monkeypatch.chdir(tmp_path)


def scenario(
    tmp_path: Path,
    sites: str | Path = SITES,
    demand: str | Path = DEMAND,
    distances: str | Path | None = None,
    *,
    hubs: int | None = None,
    method: DistanceMethod = "auto",
    allow_same_site: bool = False,
    sheet: str | None = None,
) -> ScenarioConfig:
    """A config over files in tmp_path; text arguments are written as CSV files."""

    def place(value: str | Path, name: str) -> Path:
        return value if isinstance(value, Path) else write(tmp_path / name, value)

    return ScenarioConfig(
        name="test",
        inputs=InputFiles(
            sites=place(sites, "sites.csv"),
            demand=place(demand, "demand.csv"),
            distances=None if distances is None else place(distances, "distances.csv"),
            allow_same_site_demand=allow_same_site,
            sheet=sheet,
        ),
        model=HubModelParams(hubs=hubs),
        distances=DistanceParams(method=method),
    )


def problems(excinfo: pytest.ExceptionInfo[InputError]) -> list[str]:
    return [str(p) for p in excinfo.value.problems]


def expect(text: str) -> str:
    """A match= pattern for a literal piece of the error message."""
    return re.escape(text)


# --------------------------------------------------------------------------
# Round trips
# --------------------------------------------------------------------------


def test_csv_round_trip_with_defaults(tmp_path: Path) -> None:
    net = load_network(scenario(tmp_path))
    assert net.ids == ("BER", "HAM", "MUC")
    assert net.coordinates == "geographic"
    ber, ham, muc = net.sites
    assert (ber.name, ber.lat, ber.lon) == ("Berlin", 52.52, 13.405)
    assert (ber.hub_fixed_cost, ber.handling_cost, ber.sort_capacity) == (1000.0, 0.5, 5000.0)
    assert ber.can_be_hub and ber.hub_status == "candidate"
    # Empty optional cells take their defaults.
    assert not ham.can_be_hub
    assert (ham.hub_fixed_cost, ham.handling_cost, ham.sort_capacity) == (0.0, 0.0, None)
    assert ham.hub_status == "candidate"
    assert muc.can_be_hub and muc.hub_status == "open"
    assert [(d.origin, d.destination, d.volume) for d in net.demand] == [
        ("BER", "HAM", 120.0),
        ("HAM", "MUC", 80.5),
        ("MUC", "BER", 0.0),
    ]
    assert net.distances is None
    assert net.flow_matrix()[0, 1] == 120.0
    assert net.candidates().tolist() == [True, False, True]
    assert net.forced_open().tolist() == [False, False, True]


def test_name_defaults_to_id_and_extra_columns_are_ignored(tmp_path: Path) -> None:
    sites = "ID , Lat,LON,notes\nA,1,2,my own remark\nB,3,4,\n"
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no warning for a column far from ours
        net = load_network(scenario(tmp_path, sites, "origin,destination,volume\nA,B,1\n"))
    assert [s.name for s in net.sites] == ["A", "B"]
    assert net.volume_unit == "units"


def test_close_misspelling_of_an_optional_column_warns(tmp_path: Path) -> None:
    sites = "id,lat,lon,handling_cst\nA,1,2,3\nB,3,4,5\n"
    with pytest.warns(
        InputWarning, match="'handling_cst' is not used; did you mean 'handling_cost'"
    ):
        net = load_network(scenario(tmp_path, sites, "origin,destination,volume\nA,B,1\n"))
    assert net.sites[0].handling_cost == 0.0


def test_semicolon_csv_with_bom_and_windows_encoding(tmp_path: Path) -> None:
    sites = tmp_path / "sites.csv"
    sites.write_bytes(
        "id;name;lat;lon\r\nK;Köln;50.94;6.96\r\nD;Düsseldorf;51.23;6.78\r\n".encode("cp1252")
    )
    demand = tmp_path / "demand.csv"
    demand.write_bytes("\ufefforigin,destination,volume\nK,D,7\n".encode())
    net = load_network(scenario(tmp_path, sites, demand))
    assert [s.name for s in net.sites] == ["Köln", "Düsseldorf"]
    assert net.demand[0].volume == 7.0


def test_semicolon_csv_with_decimal_commas(tmp_path: Path) -> None:
    # As a spreadsheet set to a decimal-comma locale saves CSV: semicolons
    # between cells, commas in numbers. Columns wholly in that form are read
    # as numbers; a name column with a comma in one cell stays text.
    sites = tmp_path / "sites.csv"
    sites.write_bytes(
        "id;name;lat;lon;handling_cost\r\n"
        "MAD;Madrid, centro;40,4168;-3,7038;1,25\r\n"
        "LIS;Lisboa;38,7223;-9,1393;2\r\n".encode("cp1252")
    )
    demand = tmp_path / "demand.csv"
    demand.write_bytes(b"origin;destination;volume\r\nMAD;LIS;12,5\r\nLIS;MAD;7\r\n")
    net = load_network(scenario(tmp_path, sites, demand))
    assert [s.name for s in net.sites] == ["Madrid, centro", "Lisboa"]
    assert [(s.lat, s.lon) for s in net.sites] == [(40.4168, -3.7038), (38.7223, -9.1393)]
    assert [s.handling_cost for s in net.sites] == [1.25, 2.0]
    assert [d.volume for d in net.demand] == [12.5, 7.0]


def test_mixed_decimal_marks_in_one_column_are_reported(tmp_path: Path) -> None:
    # One column with both marks is ambiguous: nothing is guessed, the comma
    # cell is reported with its file, row and column.
    sites = tmp_path / "sites.csv"
    sites.write_text("id;lat;lon\nA;40.5;-3,5\nB;41,5;-3.25\n")
    with pytest.raises(InputError) as err:
        load_network(scenario(tmp_path, sites, "origin,destination,volume\nA,B,1\n"))
    text = str(err.value)
    assert "sites.csv" in text and "row 3" in text and "'41,5'" in text
    assert "row 2" in text and "'-3,5'" in text


def test_distance_matrix_in_site_order_with_hours(tmp_path: Path) -> None:
    distances = """\
origin,destination,distance_km,hours
MUC,BER,585,5.9
BER,HAM,289,3.0
HAM,BER,290,3.1
BER,MUC,584,5.8
HAM,MUC,776,7.5
MUC,HAM,777,7.6
BER,BER,5,0
"""
    net = load_network(scenario(tmp_path, distances=distances, method="matrix"))
    assert net.distances is not None
    assert net.distances.source == "user"
    np.testing.assert_allclose(
        net.distances.km, [[0, 289, 584], [290, 0, 776], [585, 777, 0]]
    )  # the BER -> BER row is ignored: the diagonal is 0
    assert net.distances.hours is not None
    np.testing.assert_allclose(net.distances.hours, [[0, 3.0, 5.8], [3.1, 0, 7.5], [5.9, 7.6, 0]])


def test_distance_matrix_without_hours(tmp_path: Path) -> None:
    rows = [
        f"{a},{b},{10 * i}"
        for i, (a, b) in enumerate(
            [
                ("BER", "HAM"),
                ("BER", "MUC"),
                ("HAM", "BER"),
                ("HAM", "MUC"),
                ("MUC", "BER"),
                ("MUC", "HAM"),
            ]
        )
    ]
    net = load_network(
        scenario(tmp_path, distances="origin,destination,distance_km\n" + "\n".join(rows))
    )
    assert net.distances is not None and net.distances.hours is None
    assert net.distances.km[2, 1] == 50.0


def test_excel_workbook_with_one_sheet_per_table(tmp_path: Path) -> None:
    book = openpyxl.Workbook()
    ws = book.active
    assert ws is not None
    ws.title = "Sites"
    ws.append(["id", "lat", "lon", "can_be_hub", "hub_status"])
    ws.append([101, 52.5, 13.4, True, "Open"])
    ws.append([102, 53.5, 10.0, False, None])
    demand = book.create_sheet("demand")
    demand.append(["origin", "destination", "volume"])
    demand.append([101, 102, 3])
    demand.append([102, 101, 4.25])
    book.create_sheet("notes").append(["anything"])
    path = tmp_path / "network.xlsx"
    book.save(path)
    net = load_network(scenario(tmp_path, path, path))
    assert net.ids == ("101", "102")  # numeric ids match in both sheets
    assert [s.can_be_hub for s in net.sites] == [True, False]
    assert net.sites[0].hub_status == "open"
    assert [d.volume for d in net.demand] == [3.0, 4.25]


def test_excel_ids_match_csv_demand(tmp_path: Path) -> None:
    book = openpyxl.Workbook()
    ws = book.active
    assert ws is not None
    ws.append(["id", "x", "y"])
    ws.append([7, 0, 0])
    ws.append(["007", 1, 1])
    book.save(tmp_path / "sites.xlsx")
    net = load_network(
        scenario(tmp_path, tmp_path / "sites.xlsx", "origin,destination,volume\n7,007,1\n")
    )
    assert net.coordinates == "planar"
    assert net.ids == ("7", "007")


def test_geopackage_points_are_reprojected_to_wgs84(tmp_path: Path) -> None:
    geopandas = pytest.importorskip("geopandas")
    pyproj = pytest.importorskip("pyproj")
    from shapely.geometry import Point

    to_metres = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:3857", always_xy=True)
    places = {"BER": (13.405, 52.52), "HAM": (9.99, 53.55)}
    points = [Point(*to_metres.transform(*lonlat)) for lonlat in places.values()]
    sites = geopandas.GeoDataFrame(
        {"id": list(places), "sort_capacity": [100.0, 200.0]}, geometry=points, crs="EPSG:3857"
    )
    path = tmp_path / "network.gpkg"
    sites.to_file(path, layer="sites")
    demand = pd.DataFrame({"origin": ["BER"], "destination": ["HAM"], "volume": [5]})
    geopandas.GeoDataFrame(demand).to_file(path, layer="demand")
    net = load_network(scenario(tmp_path, path, path))
    for site in net.sites:
        lon, lat = places[site.id]
        assert site.lat == pytest.approx(lat, abs=1e-9)
        assert site.lon == pytest.approx(lon, abs=1e-9)
    assert [s.sort_capacity for s in net.sites] == [100.0, 200.0]
    assert net.demand[0].volume == 5.0


def test_geojson_with_lat_lon_columns_uses_the_columns(tmp_path: Path) -> None:
    geopandas = pytest.importorskip("geopandas")
    from shapely.geometry import Point

    frame = geopandas.GeoDataFrame(
        {"id": ["A", "B"], "lat": [10.0, 20.0], "lon": [30.0, 40.0]},
        geometry=[Point(0, 0), Point(1, 1)],
        crs="EPSG:4326",
    )
    frame.to_file(tmp_path / "sites.geojson", driver="GeoJSON")
    net = load_network(
        scenario(tmp_path, tmp_path / "sites.geojson", "origin,destination,volume\nA,B,1\n")
    )
    assert [(s.lat, s.lon) for s in net.sites] == [(10.0, 30.0), (20.0, 40.0)]


def test_read_table_reads_each_format(tmp_path: Path) -> None:
    write(tmp_path / "t.csv", "ID,Volume\n a ,1\n\nb,2\n")
    csv = read_table(tmp_path / "t.csv")
    assert list(csv.columns) == ["id", "volume"]
    assert len(csv) == 3  # the blank line is kept, so position i is row i + 2
    pd.DataFrame({"id": ["a"], "volume": [1]}).to_excel(tmp_path / "t.xlsx", index=False)
    assert read_table(tmp_path / "t.xlsx")["volume"].tolist() == [1]


def test_network_from_frames_planar_with_same_site_demand() -> None:
    n = 4
    sites = pd.DataFrame({"id": range(1, n + 1), "x": [0.0, 1.0, 2.0, 3.0], "y": 0.0})
    o, d = np.meshgrid(np.arange(1, n + 1), np.arange(1, n + 1), indexing="ij")
    demand = pd.DataFrame({"origin": o.ravel(), "destination": d.ravel(), "volume": 1.0})
    net = network_from_frames(sites, demand, allow_same_site_demand=True, hubs=2)
    assert net.coordinates == "planar"
    assert net.ids == ("1", "2", "3", "4")
    assert net.allow_same_site_demand
    assert net.flow_matrix().sum() == n * n
    assert net.sites[3].x == 3.0 and net.sites[3].lat is None


def test_network_from_frames_reports_rows_as_if_saved_to_csv() -> None:
    sites = pd.DataFrame({"id": ["A", "B"], "x": [0, 1], "y": [0, 1]})
    demand = pd.DataFrame({"origin": ["A", "B"], "destination": ["B", "A"], "volume": [1.0, -2.0]})
    with pytest.raises(
        InputError, match=expect("demand row 3, column volume: expected a number >= 0, got '-2'")
    ):
        network_from_frames(sites, demand)


def test_network_from_frames_takes_a_geodataframe() -> None:
    geopandas = pytest.importorskip("geopandas")
    from shapely.geometry import Point

    sites = geopandas.GeoDataFrame(
        {"id": ["A", "B"]}, geometry=[Point(5, 50), Point(6, 51)], crs=4326
    )
    demand = pd.DataFrame({"origin": ["A"], "destination": ["B"], "volume": [1]})
    net = network_from_frames(sites, demand)
    assert [(s.lat, s.lon) for s in net.sites] == [(50.0, 5.0), (51.0, 6.0)]


def test_a_large_network_loads_fast(tmp_path: Path) -> None:
    rng = np.random.default_rng(7)
    n = 200
    ids = np.array([f"T{i:03d}" for i in range(n)])
    pd.DataFrame({"id": ids, "lat": rng.uniform(45, 55, n), "lon": rng.uniform(5, 15, n)}).to_csv(
        tmp_path / "sites.csv", index=False
    )
    o, d = np.meshgrid(np.arange(n), np.arange(n), indexing="ij")
    pd.DataFrame(
        {
            "origin": ids[o.ravel()],
            "destination": ids[d.ravel()],
            "volume": rng.uniform(0, 9, n * n),
        }
    ).to_csv(tmp_path / "demand.csv", index=False)
    cfg = scenario(tmp_path, tmp_path / "sites.csv", tmp_path / "demand.csv", allow_same_site=True)
    load_network(cfg)  # warm up imports and caches
    start = time.perf_counter()
    net = load_network(cfg)
    elapsed = time.perf_counter() - start
    assert len(net.demand) == 40_000
    assert elapsed < 1.0, f"loading took {elapsed:.2f} s"


# --------------------------------------------------------------------------
# Unreadable files
# --------------------------------------------------------------------------


def test_missing_file(tmp_path: Path) -> None:
    cfg = scenario(tmp_path, sites=tmp_path / "nowhere.csv")
    with pytest.raises(InputError, match=expect("nowhere.csv: file not found")):
        load_network(cfg)


def test_empty_file(tmp_path: Path) -> None:
    with pytest.raises(InputError, match=expect("demand.csv: the file is empty")):
        load_network(scenario(tmp_path, demand=""))


def test_file_that_is_not_a_workbook(tmp_path: Path) -> None:
    (tmp_path / "sites.xlsx").write_bytes(b"this is not a zip archive")
    with pytest.raises(
        InputError, match=expect("sites.xlsx: cannot read the file as an Excel .xlsx workbook")
    ):
        load_network(scenario(tmp_path, tmp_path / "sites.xlsx"))


def test_file_in_an_unknown_format(tmp_path: Path) -> None:
    write(tmp_path / "sites.dat", "id lat lon\n")
    with pytest.raises(InputError, match=expect("sites.dat: cannot read the file")):
        load_network(scenario(tmp_path, tmp_path / "sites.dat"))


def test_csv_row_with_too_many_fields(tmp_path: Path) -> None:
    demand = "origin,destination,volume\nBER,HAM,1\nHAM,MUC,2,9\n"
    with pytest.raises(InputError, match=r"demand\.csv row 3: cannot parse the file"):
        load_network(scenario(tmp_path, demand=demand))


def test_excel_sheet_that_does_not_exist(tmp_path: Path) -> None:
    pd.DataFrame({"id": ["A"], "lat": [1], "lon": [2]}).to_excel(
        tmp_path / "sites.xlsx", sheet_name="Depots", index=False
    )
    cfg = scenario(tmp_path, tmp_path / "sites.xlsx", sheet="Depot")
    with pytest.raises(
        InputError, match=expect("sites.xlsx: no sheet named 'Depot'; the file has sheets 'Depots'")
    ):
        load_network(cfg)


def test_workbook_with_several_sheets_and_none_named_for_the_table(tmp_path: Path) -> None:
    with pd.ExcelWriter(tmp_path / "book.xlsx") as writer:
        pd.DataFrame({"id": ["A"]}).to_excel(writer, sheet_name="one", index=False)
        pd.DataFrame({"id": ["B"]}).to_excel(writer, sheet_name="two", index=False)
    with pytest.raises(
        InputError, match=expect("book.xlsx: the file has several sheets ('one', 'two')")
    ):
        load_network(scenario(tmp_path, tmp_path / "book.xlsx"))


def test_every_unreadable_file_is_reported_at_once(tmp_path: Path) -> None:
    cfg = scenario(tmp_path, tmp_path / "a.csv", tmp_path / "b.csv", tmp_path / "c.csv")
    with pytest.raises(InputError) as excinfo:
        load_network(cfg)
    assert [p.file for p in excinfo.value.problems] == ["a.csv", "b.csv", "c.csv"]


def test_a_file_under_the_working_folder_is_named_from_it(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Two scenarios may each have a demand.csv: the message says which one.
    folder = tmp_path / "regions" / "north"
    folder.mkdir(parents=True)
    cfg = scenario(folder, demand="origin,destination,volume\nBER,HAM,-1\n")
    monkeypatch.chdir(tmp_path)
    with pytest.raises(InputError) as excinfo:
        load_network(cfg)
    files = {p.file for p in excinfo.value.problems}
    assert files == {str(Path("regions") / "north" / "demand.csv")}, files
    # From a folder beside it, the file is named by its absolute path.
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    with pytest.raises(InputError) as excinfo:
        load_network(cfg)
    files = {p.file for p in excinfo.value.problems}
    assert files == {str((folder / "demand.csv").resolve())}, files


# --------------------------------------------------------------------------
# Columns
# --------------------------------------------------------------------------


def test_missing_required_column_lists_the_columns_found(tmp_path: Path) -> None:
    demand = "origin,destination,volumes\nBER,HAM,1\n"
    with pytest.raises(InputError) as excinfo:
        load_network(scenario(tmp_path, demand=demand))
    (problem,) = excinfo.value.problems
    assert (problem.file, problem.row, problem.column) == ("demand.csv", None, "volume")
    assert problem.message == (
        "missing column 'volume'; found columns: origin, destination, volumes; "
        "did you mean 'volumes'?"
    )


def test_missing_id_column_still_checks_the_other_columns(tmp_path: Path) -> None:
    sites = "site,lat,lon\nA,95,0\n"
    with pytest.raises(InputError) as excinfo:
        load_network(scenario(tmp_path, sites, "origin,destination,volume\nA,B,1\n"))
    found = problems(excinfo)
    assert "sites.csv, column id: missing column 'id'; found columns: site, lat, lon" in found
    assert any(p.startswith("sites.csv row 2, column lat:") for p in found)


def test_lat_without_lon(tmp_path: Path) -> None:
    with pytest.raises(
        InputError,
        match=expect("sites.csv, column lon: missing column 'lon': column 'lat' is there"),
    ):
        load_network(scenario(tmp_path, "id,lat\nA,1\n"))


def test_no_coordinate_columns(tmp_path: Path) -> None:
    with pytest.raises(
        InputError,
        match=expect(
            "sites.csv, column lat: missing coordinates: expected columns lat "
            "and lon (degrees, WGS84) or x and y (planar); found columns: id, name"
        ),
    ):
        load_network(scenario(tmp_path, "id,name\nA,a\n"))


# --------------------------------------------------------------------------
# Sites
# --------------------------------------------------------------------------


def test_sites_file_with_no_rows(tmp_path: Path) -> None:
    with pytest.raises(InputError, match=expect("sites.csv: the file has no sites")):
        load_network(scenario(tmp_path, "id,lat,lon\n\n"))


def test_duplicate_site_id_names_both_rows(tmp_path: Path) -> None:
    sites = SITES + "BER,Berlin again,52,13,yes,,,,\n"
    with pytest.raises(
        InputError,
        match=expect("sites.csv row 5, column id: duplicate site id 'BER'; it is also on row 2"),
    ):
        load_network(scenario(tmp_path, sites))


def test_empty_site_id(tmp_path: Path) -> None:
    sites = SITES + ",Nameless,50,10,,,,,\n"
    with pytest.raises(
        InputError, match=expect("sites.csv row 5, column id: empty cell; expected a site id")
    ):
        load_network(scenario(tmp_path, sites))


@pytest.mark.parametrize(
    ("column", "value", "expected"),
    [
        ("lat", "90.5", "expected a latitude in degrees within [-90, 90], got '90.5'"),
        ("lat", "-91", "expected a latitude in degrees within [-90, 90], got '-91'"),
        ("lon", "180.01", "expected a longitude in degrees within [-180, 180], got '180.01'"),
        ("lon", "-200", "expected a longitude in degrees within [-180, 180], got '-200'"),
        ("lat", "north", "expected a latitude in degrees within [-90, 90], got 'north'"),
    ],
)
def test_coordinates_out_of_range_or_not_numbers(
    tmp_path: Path, column: str, value: str, expected: str
) -> None:
    lat, lon = (value, "13") if column == "lat" else ("52", value)
    sites = f"id,lat,lon\nA,1,1\nB,{lat},{lon}\n"
    with pytest.raises(InputError, match=expect(f"sites.csv row 3, column {column}: {expected}")):
        load_network(scenario(tmp_path, sites, "origin,destination,volume\nA,B,1\n"))


def test_non_numeric_value_in_a_numeric_column(tmp_path: Path) -> None:
    sites = SITES.replace(",1000,", ',"1.000,00",')
    message = "sites.csv row 2, column hub_fixed_cost: expected a cost per day >= 0, got '1.000,00'"
    with pytest.raises(InputError, match=expect(message)) as excinfo:
        load_network(scenario(tmp_path, sites))
    assert len(excinfo.value.problems) == 1


def test_bad_boolean_in_can_be_hub(tmp_path: Path) -> None:
    sites = SITES.replace("HAM,Hamburg,53.55,9.99,no", "HAM,Hamburg,53.55,9.99,perhaps")
    with pytest.raises(
        InputError,
        match=expect(
            "sites.csv row 3, column can_be_hub: expected true or false (or "
            "yes/no, 1/0), got 'perhaps'"
        ),
    ):
        load_network(scenario(tmp_path, sites))


def test_bad_hub_status(tmp_path: Path) -> None:
    sites = SITES.replace("open", "opened")
    with pytest.raises(
        InputError,
        match=expect(
            "sites.csv row 4, column hub_status: expected candidate, open or closed, got 'opened'"
        ),
    ):
        load_network(scenario(tmp_path, sites))


@pytest.mark.parametrize(
    ("column", "old", "new", "expected"),
    [
        ("hub_fixed_cost", ",1000,", ",-1000,", "expected a cost per day >= 0, got '-1000'"),
        ("handling_cost", ",0.5,", ",-0.5,", "expected a cost per unit >= 0, got '-0.5'"),
        ("hub_fixed_cost", ",1000,", ",inf,", "expected a finite number, got 'inf'"),
    ],
)
def test_negative_or_infinite_costs(
    tmp_path: Path, column: str, old: str, new: str, expected: str
) -> None:
    with pytest.raises(InputError, match=expect(f"sites.csv row 2, column {column}: {expected}")):
        load_network(scenario(tmp_path, SITES.replace(old, new)))


@pytest.mark.parametrize("capacity", ["0", "-10"])
def test_non_positive_sort_capacity(tmp_path: Path, capacity: str) -> None:
    sites = SITES.replace(",5000,", f",{capacity},")
    message = (
        f"sites.csv row 2, column sort_capacity: expected units per day > 0, or an "
        f"empty cell for unlimited, got '{capacity}'"
    )
    with pytest.raises(InputError, match=expect(message)):
        load_network(scenario(tmp_path, sites))


def test_no_candidate_hub(tmp_path: Path) -> None:
    sites = "id,lat,lon,can_be_hub,hub_status\nA,1,1,no,\nB,2,2,yes,closed\n"
    with pytest.raises(
        InputError, match=expect("sites.csv, column can_be_hub: no site can be a hub")
    ):
        load_network(scenario(tmp_path, sites, "origin,destination,volume\nA,B,1\n"))


def test_more_hubs_asked_than_candidates(tmp_path: Path) -> None:
    with pytest.raises(
        InputError,
        match=expect(
            "sites.csv, column can_be_hub: the config asks for 3 hubs "
            "(model.hubs) but only 2 sites can be a hub"
        ),
    ):
        load_network(scenario(tmp_path, hubs=3))
    assert load_network(scenario(tmp_path, hubs=2)).n == 3


def test_more_forced_open_hubs_than_hubs_asked(tmp_path: Path) -> None:
    sites = SITES.replace("yes,1000,0.5,5000,candidate", "yes,1000,0.5,5000,open")
    with pytest.raises(
        InputError,
        match=expect(
            "sites.csv, column hub_status: 2 sites have hub_status open, but the "
            "config asks for exactly 1 hub (model.hubs)"
        ),
    ):
        load_network(scenario(tmp_path, sites, hubs=1))


def test_site_forced_open_that_cannot_be_a_hub(tmp_path: Path) -> None:
    sites = SITES.replace("HAM,Hamburg,53.55,9.99,no,,,,", "HAM,Hamburg,53.55,9.99,no,,,,OPEN")
    with pytest.raises(
        InputError,
        match=expect(
            "sites.csv row 3, column hub_status: hub_status is 'open' but can_be_hub is 'no'"
        ),
    ):
        load_network(scenario(tmp_path, sites))


def test_some_sites_with_lat_lon_and_others_with_x_y(tmp_path: Path) -> None:
    sites = "id,lat,lon,x,y\nA,50,10,,\nB,,,3,4\nC,51,,,\n"
    with pytest.raises(InputError) as excinfo:
        load_network(scenario(tmp_path, sites, "origin,destination,volume\nA,B,1\n"))
    assert problems(excinfo) == [
        "sites.csv row 3, column lat: no coordinates: lat and lon are empty; other sites "
        "give lat and lon but this one gives x and y: use one kind of coordinates for every site",
        "sites.csv row 4, column lon: empty cell; expected a longitude in "
        "degrees within [-180, 180]",
    ]


def test_gis_site_without_a_point_geometry(tmp_path: Path) -> None:
    geopandas = pytest.importorskip("geopandas")
    from shapely.geometry import Point, Polygon

    frame = geopandas.GeoDataFrame(
        {"id": ["A", "B", "C"]},
        geometry=[Point(10, 50), Polygon([(0, 0), (1, 0), (1, 1)]), None],
        crs="EPSG:4326",
    )
    frame.to_file(tmp_path / "sites.gpkg", layer="depots")
    with pytest.raises(InputError) as excinfo:
        load_network(
            scenario(tmp_path, tmp_path / "sites.gpkg", "origin,destination,volume\nA,B,1\n")
        )
    assert problems(excinfo) == [
        "sites.gpkg row 3, column lat: no coordinates: lat and lon are empty; "
        "the row's geometry is a Polygon, expected a point",
        "sites.gpkg row 4, column lat: no coordinates: lat and lon are empty; "
        "the row has no geometry either",
    ]


# --------------------------------------------------------------------------
# Demand
# --------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("value", "expected"),
    [
        ("-3", "expected a number >= 0, got '-3'"),
        ("ten", "expected a number >= 0, got 'ten'"),
        ("NaN", "expected a number >= 0, got 'NaN'"),
        ("inf", "expected a finite number, got 'inf'"),
        ("", "empty cell; expected a number >= 0"),
    ],
)
def test_bad_volume(tmp_path: Path, value: str, expected: str) -> None:
    demand = DEMAND.replace("80.5", value)
    with pytest.raises(InputError, match=expect(f"demand.csv row 3, column volume: {expected}")):
        load_network(scenario(tmp_path, demand=demand))


def test_unknown_site_in_demand_with_a_suggestion(tmp_path: Path) -> None:
    demand = DEMAND + "BER,HAMB,4\nber,XYZ,1\n"
    with pytest.raises(InputError) as excinfo:
        load_network(scenario(tmp_path, demand=demand))
    assert problems(excinfo) == [
        "demand.csv row 5, column destination: unknown site 'HAMB': not an id in sites.csv; "
        "did you mean 'HAM'?",
        "demand.csv row 6, column origin: unknown site 'ber': not an id in sites.csv; "
        "did you mean 'BER'?",
        "demand.csv row 6, column destination: unknown site 'XYZ': not an id in sites.csv",
    ]


def test_demand_from_a_site_to_itself(tmp_path: Path) -> None:
    demand = DEMAND + "HAM,HAM,9\n"
    with pytest.raises(
        InputError,
        match=expect("demand.csv row 5, column destination: origin and destination are both 'HAM'"),
    ):
        load_network(scenario(tmp_path, demand=demand))
    net = load_network(scenario(tmp_path, demand=demand, allow_same_site=True))
    assert net.flow_matrix()[1, 1] == 9.0


def test_duplicate_od_pair(tmp_path: Path) -> None:
    demand = DEMAND + "BER,HAM,5\n"
    with pytest.raises(
        InputError,
        match=expect(
            "demand.csv row 5, column destination: duplicate OD pair 'BER' -> "
            "'HAM'; it is also on row 2"
        ),
    ):
        load_network(scenario(tmp_path, demand=demand))


def test_demand_file_with_no_rows(tmp_path: Path) -> None:
    with pytest.raises(InputError, match=expect("demand.csv: the file has no demand")):
        load_network(scenario(tmp_path, demand="origin,destination,volume\n"))


def test_blank_lines_do_not_shift_row_numbers(tmp_path: Path) -> None:
    demand = "origin,destination,volume\nBER,HAM,1\n\n,,\nHAM,MUC,-1\n"
    with pytest.raises(InputError, match=expect("demand.csv row 5, column volume")) as excinfo:
        load_network(scenario(tmp_path, demand=demand))
    assert len(excinfo.value.problems) == 1


def test_excel_rows_are_the_rows_the_user_sees(tmp_path: Path) -> None:
    book = openpyxl.Workbook()
    ws = book.active
    assert ws is not None
    ws.title = "demand"
    ws.append(["origin", "destination", "volume"])
    ws.append(["BER", "HAM", 1])
    ws.append([])
    ws.append(["HAM", "MUC", -4])
    book.create_sheet("sites")
    book.save(tmp_path / "demand.xlsx")
    with pytest.raises(
        InputError,
        match=expect(
            "demand.xlsx (sheet demand) row 4, column volume: expected a number >= 0, got '-4'"
        ),
    ):
        load_network(scenario(tmp_path, demand=tmp_path / "demand.xlsx"))


# --------------------------------------------------------------------------
# Distances
# --------------------------------------------------------------------------


def full_matrix(skip: tuple[str, str] | None = None) -> str:
    ids = ["BER", "HAM", "MUC"]
    rows = ["origin,destination,distance_km"]
    rows += [f"{a},{b},100" for a in ids for b in ids if a != b and (a, b) != skip]
    return "\n".join(rows) + "\n"


def test_distance_matrix_missing_a_pair(tmp_path: Path) -> None:
    with pytest.raises(
        InputError,
        match=expect(
            "distances.csv: the matrix lacks 1 of the 6 ordered pairs of "
            "different sites: HAM -> MUC"
        ),
    ):
        load_network(scenario(tmp_path, distances=full_matrix(skip=("HAM", "MUC"))))


def test_distance_matrix_missing_many_pairs_lists_ten(tmp_path: Path) -> None:
    sites = "id,x,y\n" + "".join(f"S{i},{i},0\n" for i in range(5))
    demand = "origin,destination,volume\nS0,S1,1\n"
    with pytest.raises(InputError) as excinfo:
        load_network(scenario(tmp_path, sites, demand, "origin,destination,distance_km\nS0,S1,1\n"))
    (problem,) = excinfo.value.problems
    assert problem.message.startswith("the matrix lacks 19 of the 20 ordered pairs")
    assert problem.message.count(" -> ") == 10
    assert "and 9 more" in problem.message


def test_unknown_site_in_distance_matrix(tmp_path: Path) -> None:
    distances = full_matrix() + "BER,FRA,545\n"
    with pytest.raises(
        InputError,
        match=expect(
            "distances.csv row 8, column destination: unknown site 'FRA': not an id in sites.csv"
        ),
    ):
        load_network(scenario(tmp_path, distances=distances))


def test_negative_distance(tmp_path: Path) -> None:
    distances = full_matrix().replace("BER,MUC,100", "BER,MUC,-100")
    with pytest.raises(
        InputError,
        match=expect(
            "distances.csv row 3, column distance_km: expected a distance in km >= 0, got '-100'"
        ),
    ):
        load_network(scenario(tmp_path, distances=distances))


def test_zero_hours_between_different_sites(tmp_path: Path) -> None:
    distances = "origin,destination,distance_km,hours\n" + "\n".join(
        f"{line},{'0' if line.startswith('HAM,BER') else '1.5'}"
        for line in full_matrix().splitlines()[1:]
    )
    with pytest.raises(
        InputError,
        match=expect(
            "distances.csv row 4, column hours: expected a drive time in hours > "
            "0 between two different sites, got '0'"
        ),
    ):
        load_network(scenario(tmp_path, distances=distances))


def test_duplicate_pair_in_distance_matrix(tmp_path: Path) -> None:
    distances = full_matrix() + "BER,HAM,101\n"
    with pytest.raises(
        InputError,
        match=expect(
            "distances.csv row 8, column destination: duplicate pair 'BER' -> "
            "'HAM'; it is also on row 2"
        ),
    ):
        load_network(scenario(tmp_path, distances=distances))


# --------------------------------------------------------------------------
# Config against data
# --------------------------------------------------------------------------


def test_matrix_method_without_a_distances_file(tmp_path: Path) -> None:
    with pytest.raises(
        InputError,
        match=expect("config, column distances.method: method 'matrix' needs a distances file"),
    ):
        load_network(scenario(tmp_path, method="matrix"))


def test_geodesic_method_with_planar_sites(tmp_path: Path) -> None:
    sites = "id,x,y\nA,0,0\nB,1,1\n"
    with pytest.raises(InputError, match=expect("method 'geodesic' needs lat and lon")):
        load_network(
            scenario(tmp_path, sites, "origin,destination,volume\nA,B,1\n", method="geodesic")
        )


# --------------------------------------------------------------------------
# Many problems at once
# --------------------------------------------------------------------------


def test_all_problems_of_all_files_are_reported(tmp_path: Path) -> None:
    sites = """\
id,lat,lon,can_be_hub,hub_fixed_cost
A,52,13,yes,-1
B,95,13,sometimes,0
A,50,10,no,
"""
    demand = "origin,destination,volume\nA,B,x\nB,C,2\n"
    with pytest.raises(InputError) as excinfo:
        load_network(scenario(tmp_path, sites, demand))
    assert problems(excinfo) == [
        "sites.csv row 2, column hub_fixed_cost: expected a cost per day >= 0, got '-1'",
        "sites.csv row 3, column lat: expected a latitude in degrees within [-90, 90], got '95'",
        "sites.csv row 3, column can_be_hub: expected true or false (or yes/no, "
        "1/0), got 'sometimes'",
        "sites.csv row 4, column id: duplicate site id 'A'; it is also on row 2",
        "demand.csv row 2, column volume: expected a number >= 0, got 'x'",
        "demand.csv row 3, column destination: unknown site 'C': not an id in sites.csv",
    ]
    assert str(excinfo.value).startswith("6 problems in the input:\n")


def test_problems_are_capped_per_column(tmp_path: Path) -> None:
    demand = "origin,destination,volume\n" + "BER,HAM,-1\n" * 1000
    with pytest.raises(InputError) as excinfo:
        load_network(scenario(tmp_path, demand=demand))
    found = excinfo.value.problems
    volume = [p for p in found if p.column == "volume"]
    assert len(volume) == MAX_PROBLEMS_PER_COLUMN + 1
    assert [p.row for p in volume[:3]] == [2, 3, 4]
    assert str(volume[-1]) == "demand.csv, column volume: ... and 980 more problems in this column"
    # The repeated pair is a separate column's list, capped the same way.
    pairs = [p for p in found if p.column == "destination"]
    assert str(pairs[-1]).endswith("... and 979 more problems in this column")
