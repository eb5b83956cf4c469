"""The route map page: drawn from a run folder's files, self-contained, escaped.

These tests read the HTML text; tests/test_browser.py opens the same pages in
a real browser.
"""

from __future__ import annotations

import html
import json
import re
import shutil
from pathlib import Path

import pandas as pd
import pytest
from reportdata import SCENARIO_NAME, SITES, XSS_NAME, tiny_run
from typer.testing import CliRunner

from hubnet.cli import app
from hubnet.errors import HubnetError, InputError, OutputExistsError
from hubnet.report.assets import leaflet_css, leaflet_js, leaflet_version
from hubnet.report.maps import (
    DEFAULT_TILES,
    LEG_FIELDS,
    MAP_CAUTION,
    TILES,
    leg_popup,
    map_from_run,
    map_html,
    site_popup,
    write_map,
)
from hubnet.report.outlines import outlines_near
from hubnet.report.rundata import RunData, read_run, read_table


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return tiny_run(tmp_path_factory.mktemp("maps"))


def scripts_and_links(page: str) -> list[str]:
    """Every address a page would load by itself: script src, link href, img src, @import."""
    found = re.findall(r"<script[^>]*\bsrc\s*=\s*['\"]?([^'\" >]+)", page, flags=re.I)
    found += re.findall(r"<link[^>]*\bhref\s*=\s*['\"]?([^'\" >]+)", page, flags=re.I)
    found += re.findall(r"<img[^>]*\bsrc\s*=\s*['\"]?([^'\" >]+)", page, flags=re.I)
    found += re.findall(r"@import", page)
    return found


def test_run_folder_holds_map_sites_and_workbook(run_dir: Path) -> None:
    for name in ("map.html", "sites.csv", "tables.xlsx"):
        assert (run_dir / name).is_file(), name
    sites = read_table(run_dir / "sites.csv")
    assert list(sites.columns) == ["id", "name", "lat", "lon", "candidate_hub"]
    assert list(sites["name"]) == [s[1] for s in SITES]  # names kept exactly, markup and all
    assert list(sites["candidate_hub"]) == ["true", "false", "true", "false", "false", "true"]


def test_map_from_folder_files_equals_map_written_at_solve_time(run_dir: Path) -> None:
    # The map written by run_scenario (from memory) and the one drawn from the
    # CSV files draw the same things; only folium's random element ids differ.
    def normalised(page: str) -> str:
        return re.sub(r"_[0-9a-f]{32}", "_ID", page)

    assert normalised(map_from_run(run_dir)) == normalised((run_dir / "map.html").read_text())


def test_map_carries_the_regulations_caution(run_dir: Path) -> None:
    # A map is forwarded on its own, without the run folder's summary.json:
    # the drivers'-hours and weights caution must travel with it.
    page = html.unescape((run_dir / "map.html").read_text())
    assert MAP_CAUTION in page
    assert "local regulations" in MAP_CAUTION and "Drivers' hours" in MAP_CAUTION


def test_caution_comes_before_the_figures(run_dir: Path) -> None:
    # On a low window the headline box scrolls: the caution sits right under the
    # title, so it is never the part scrolled out of sight (a new user's trial).
    page = html.unescape((run_dir / "map.html").read_text())
    head = page[page.index("id='hn-headline'") :]
    assert head.index(MAP_CAUTION) < head.index("Cost per day")


def test_width_key_runs_from_the_smallest_leg_to_the_largest(run_dir: Path) -> None:
    # A new user read "117 to 1,171 pallets per day" as the range of leg volumes
    # while the smallest leg carried 60: the key now starts at the smallest leg.
    volumes = read_table(run_dir / "legs.csv")["volume_per_day"].astype(float)
    low, high = volumes[volumes > 0].min(), volumes.max()
    assert 0 < low < high
    page = html.unescape((run_dir / "map.html").read_text())
    legend = page[page.index("id='hn-legend'") :]
    assert f"{low:,.0f} (thin) to {high:,.0f} (thick) pallets per day" in legend
    # one tapering wedge, not two line samples: a thick sample in its small box
    # read as a word blacked out (a new user's trial)
    row = legend[legend.index("Line width by volume") - 400 : legend.index("Line width by volume")]
    assert row.count("<polygon") == 1 and "<line" not in row.split("hn-row")[-1]


def test_map_loads_no_script_or_stylesheet_from_anywhere(run_dir: Path) -> None:
    page = (run_dir / "map.html").read_text(encoding="utf-8")
    assert scripts_and_links(page) == []
    for host in ("jsdelivr", "cdnjs", "unpkg", "code.jquery", "bootstrapcdn"):
        assert host not in page, host
    assert "jquery" not in page.lower() and "$(`" not in page
    # Leaflet itself is inlined, whole, from the xstatic-leaflet package.
    assert leaflet_version() == "1.9.3"
    assert leaflet_js() in page and leaflet_css() in page
    assert "sourceMappingURL" not in page
    assert "images/layers.png" not in page and "data:image/png;base64," in page


def test_tiles_none_requests_nothing(run_dir: Path) -> None:
    page = map_from_run(run_dir, tiles="none")
    assert "L.tileLayer(" not in page and "L.geoJson(" not in page
    assert "arcgisonline" not in page and "openstreetmap.org/{z}" not in page
    light = map_from_run(run_dir, tiles="light")
    assert "server.arcgisonline.com" in light
    osm = map_from_run(run_dir, tiles="osm")
    assert "tile.openstreetmap.org" in osm


def test_one_line_per_leg_and_one_circle_per_site(run_dir: Path) -> None:
    page = (run_dir / "map.html").read_text(encoding="utf-8")
    legs = pd.read_csv(run_dir / "legs.csv")
    hubs = pd.read_csv(run_dir / "hubs.csv")
    assert page.count('"className": "hubnet-leg ') == len(legs)
    for tier, count in legs["tier"].value_counts().items():
        assert page.count(f"hubnet-tier-{tier} ") == count
    assert page.count('"className": "hubnet-site hubnet-hub"') == len(hubs)
    assert page.count('"className": "hubnet-site hubnet-terminal"') == len(SITES) - len(hubs)


def test_hostile_names_never_reach_the_page_as_markup(run_dir: Path) -> None:
    page = (run_dir / "map.html").read_text(encoding="utf-8")
    for _, name, *_ in SITES:
        if any(ch in name for ch in "<>&\"'"):
            assert name not in page, name
    assert XSS_NAME not in page
    assert SCENARIO_NAME not in page
    # the only </script> closing tags are the page's own, one per script element
    assert page.count("</script>") == page.count("<script")
    # the scenario name is shown, escaped, in the title and the headline box
    assert "tiny &lt;script&gt;alert(&#x27;name&#x27;)&lt;/script&gt;" in page
    # A template placeholder from a site name is data in a JSON string, never
    # code: the map's own script (the last script element) has no template
    # literal at all, so ${...} cannot be evaluated.
    map_script = page.rsplit("<script>", 1)[-1]
    assert "`" not in map_script
    assert "${alert(2)}" in map_script  # present, as text inside JSON strings


def test_leg_popup_lists_every_column_and_escapes() -> None:
    leg = {
        "tier": "trunk",
        "from_site": "A",
        "to_site": "B",
        "distance_km": 363.8,
        "volume_per_day": 1171.0,
        "unit_km_per_day": 426015.2,
        "cost_per_day": 15336.5,
        "cost_per_unit": 13.1,
        # columns a later version may add: picked up with their labels
        "vehicle_class": "<b>artic</b>",
        "dispatches_per_day": 36.0,
        "fill_rate": 0.82,
        "co2e_kg_per_day": 2100.0,
        # and a column nobody has named yet: shown under its own name
        "tolls_per_day": 55.5,
    }
    html = leg_popup(leg, {"A": "Alpha", "B": XSS_NAME}, "pallets")
    assert "A Alpha → B &lt;img src=x onerror=alert(1)&gt;" in html
    assert XSS_NAME not in html and "<b>artic</b>" not in html
    for text in (
        "<th>Volume</th><td>1,171 pallets per day</td>",
        "<th>Distance</th><td>363.8 km</td>",
        "<th>Vehicle class</th><td>&lt;b&gt;artic&lt;/b&gt;</td>",
        "<th>Dispatches</th><td>36 per day</td>",
        "<th>Fill</th><td>82.0 %</td>",
        "<th>CO2e</th><td>2,100 kg per day</td>",
        "<th>Cost per pallet</th><td>13.10</td>",
        "<th>tolls_per_day</th><td>55.50</td>",
    ):
        assert text in html, text
    assert [f[0] for f in LEG_FIELDS].count("tier") == 1


def test_site_popup_shows_hub_figures_and_escapes() -> None:
    hub = {
        "throughput_per_day": 5734.0,
        "inbound_per_day": 3170.0,
        "sort_capacity_per_day": 6000.0,
        "utilisation": 0.528,
        "terminal_count": 7,
        "fixed_cost_per_day": 30000.0,
        "handling_cost_per_day": 19495.6,
    }
    html = site_popup("MAD", XSS_NAME, hub, ["MAD"], 1200.0, 1100.0, True, "pallets")
    assert XSS_NAME not in html and "&lt;img src=x onerror=alert(1)&gt;" in html
    assert "<th>Throughput</th><td>5,734 pallets per day</td>" in html
    assert "<th>Capacity used by inbound</th><td>52.8 %</td>" in html
    assert "Hub" in html
    terminal = site_popup("ZAR", "Zaragoza", None, ["MAD"], 10.0, 12.5, True, "pallets")
    assert "candidate hub, not opened" in terminal
    assert "<th>Sorted at hub</th><td>MAD</td>" in terminal
    assert "<th>Receives</th><td>12.50 pallets per day</td>" in terminal


def test_vehicle_class_column_colours_lines_by_class(run_dir: Path, tmp_path: Path) -> None:
    copy = tmp_path / "run"
    shutil.copytree(run_dir, copy)
    legs = pd.read_csv(copy / "legs.csv")
    legs["vehicle_class"] = ["artic" if t == "trunk" else "rigid" for t in legs["tier"]]
    legs.to_csv(copy / "legs.csv", index=False)
    page = map_from_run(copy, tiles="none")
    # two classes, two colours of our palette, both in the legend
    assert '"color": "#0072B2"' in page and '"color": "#E69F00"' in page
    assert "artic</div>" in page and "rigid</div>" in page
    assert page.count("Vehicle class") == len(legs)  # in every leg's popup
    # Colour now shows the class, so trunk legs (and only they) get a casing.
    trunks = int((legs["tier"] == "trunk").sum())
    assert trunks > 0 and page.count('"className": "hubnet-casing"') == trunks
    plain = (run_dir / "map.html").read_text(encoding="utf-8")  # coloured by tier
    assert "hubnet-casing" not in plain
    # And feeder legs are drawn lighter than trunks (one line per leg).
    feeders = int((legs["tier"] == "feeder").sum())
    assert feeders > 0 and page.count('"opacity": 0.6,') == feeders
    assert '"opacity": 0.6,' not in plain


def test_planar_sites_draw_without_tiles(run_dir: Path, tmp_path: Path) -> None:
    copy = tmp_path / "run"
    shutil.copytree(run_dir, copy)
    sites = pd.read_csv(copy / "sites.csv")
    sites = sites.rename(columns={"lat": "y", "lon": "x"})[["id", "name", "x", "y"]]
    sites.to_csv(copy / "sites.csv", index=False)
    page = map_from_run(copy, tiles="light")
    assert "L.CRS.Simple" in page
    assert "arcgisonline" not in page
    # no country outlines under planar x/y either: they are in degrees
    assert "L.geoJson(" not in map_from_run(copy, tiles="outline")
    assert page.count('"className": "hubnet-leg ') == len(pd.read_csv(copy / "legs.csv"))


def test_folder_without_sites_needs_a_sites_file(run_dir: Path, tmp_path: Path) -> None:
    copy = tmp_path / "old"
    shutil.copytree(run_dir, copy)
    (copy / "sites.csv").unlink()
    with pytest.raises(HubnetError, match="no site coordinates"):
        map_from_run(copy)
    page = map_from_run(copy, sites=run_dir / "sites.csv")
    assert page.count('"className": "hubnet-leg ') == len(pd.read_csv(copy / "legs.csv"))
    with pytest.raises(InputError, match=r"nope\.csv: missing"):
        map_from_run(copy, sites=tmp_path / "nope.csv")


def test_not_a_run_folder(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="no such run folder"):
        read_run(tmp_path / "absent")
    with pytest.raises(InputError, match=r"summary\.json: missing"):
        read_run(tmp_path)
    (tmp_path / "summary.json").write_text("[1, 2]")
    with pytest.raises(InputError, match="expected a JSON object"):
        read_run(tmp_path)
    (tmp_path / "summary.json").write_text(json.dumps({"scenario": "x"}))
    with pytest.raises(InputError, match=r"hubs\.csv: missing"):
        read_run(tmp_path)


def test_ids_stay_text(tmp_path: Path) -> None:
    path = tmp_path / "legs.csv"
    path.write_text("tier,from_site,to_site,volume_per_day,note\ntrunk,007,NA,5,\nfeeder,1,2,,x\n")
    table = read_table(path)
    assert list(table["from_site"]) == ["007", "1"] and list(table["to_site"]) == ["NA", "2"]
    assert table["volume_per_day"].iloc[0] == 5.0 and pd.isna(table["volume_per_day"].iloc[1])
    assert list(table["note"]) == ["", "x"]


def test_unknown_tiles_are_refused(run_dir: Path) -> None:
    with pytest.raises(HubnetError, match="tiles: expected one of outline, light, osm, none"):
        map_html(read_run(run_dir), tiles="satellite")
    assert TILES == ("outline", "light", "osm", "none")


def test_default_base_map_is_outlines_inside_the_page(run_dir: Path) -> None:
    # The default base map asks no server (a page opened offline still shows
    # coasts and borders, and no tile provider learns the area planned): the
    # countries near the sites, from Natural Earth's public-domain 1:110m data.
    assert DEFAULT_TILES == "outline"
    page = map_from_run(run_dir)
    assert "L.tileLayer(" not in page
    assert "arcgisonline" not in page and "openstreetmap" not in page.replace(
        "openstreetmap.org/copyright", ""
    )
    assert page.count("L.geoJson(") == 1
    assert "Natural Earth" in page
    # The demo's sites lie in Spain and Portugal: both outlines are drawn, and
    # no country far from them (Australia's data is in the file too).
    assert '"name": "Spain"' in page and '"name": "Portugal"' in page
    assert '"name": "Australia"' not in page


def test_outlines_near_keeps_only_nearby_polygons() -> None:
    # Bounds of the national demo (France): metropolitan France is drawn, but
    # not French Guiana, another polygon of the same country in the data.
    shapes = outlines_near(42.3, -4.5, 51.1, 8.2)
    names = [f["properties"]["name"] for f in shapes["features"]]
    assert "France" in names and "Belgium" in names and "Brazil" not in names
    france = next(f for f in shapes["features"] if f["properties"]["name"] == "France")
    lons = [p[0] for part in france["geometry"]["coordinates"] for p in part[0]]
    assert min(lons) > -10.0  # French Guiana lies at about -52 degrees
    assert outlines_near(-50.0, -140.0, -45.0, -135.0)["features"] == []  # open Pacific


def test_cli_tiles_default_is_the_maps_default() -> None:
    # The CLI spells its default out (importing the map module at start-up is slow).
    import inspect

    from hubnet.cli_report import map_command, report_command

    for command in (map_command, report_command):
        default = inspect.signature(command).parameters["tiles"].default
        assert default == DEFAULT_TILES, command


def test_write_map_replaces_own_map_but_not_other_files(run_dir: Path, tmp_path: Path) -> None:
    copy = tmp_path / "run"
    shutil.copytree(run_dir, copy)
    (copy / "map.html").write_text("old")
    assert write_map(copy, tiles="none") == copy / "map.html"
    assert (copy / "map.html").read_text().startswith("<!DOCTYPE html>")
    other = tmp_path / "elsewhere.html"
    other.write_text("keep me")
    with pytest.raises(OutputExistsError, match="already exists"):
        write_map(copy, other)
    assert other.read_text() == "keep me"
    write_map(copy, other, force=True)
    assert "hubnet-leg" in other.read_text()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]  # no temp files left


def test_cli_map(run_dir: Path, tmp_path: Path) -> None:
    runner = CliRunner()
    out = tmp_path / "m.html"
    result = runner.invoke(app, ["map", str(run_dir), "--out", str(out), "--tiles", "none"])
    assert result.exit_code == 0, result.output
    assert "wrote" in result.output and out.is_file()
    again = runner.invoke(app, ["map", str(run_dir), "--out", str(out)])
    assert again.exit_code == 5 and "already exists" in again.output
    bad = runner.invoke(app, ["map", str(run_dir), "--tiles", "satellite"])
    assert bad.exit_code == 2 and "expected one of outline, light, osm, none" in bad.output
    missing = runner.invoke(app, ["map", str(tmp_path / "nothing")])
    assert missing.exit_code == 2 and "no such run folder" in missing.output


def test_run_data_defaults(tmp_path: Path) -> None:
    run = RunData(tmp_path / "night-07", {}, {})
    assert run.scenario == "night-07" and run.volume_unit == "units"
    assert run.table("legs").empty
