"""The manager report: runs side by side, differences, cautions, charts, maps; escaped."""

from __future__ import annotations

import html
import json
import os
import re
import shutil
import stat
from pathlib import Path

import pandas as pd
import pytest
from reportdata import SCENARIO_NAME, XSS_NAME, tiny_run
from typer.testing import CliRunner

from hubnet.cli import app
from hubnet.report.charts import frontier_plot, grouped_bars, nice_ticks, rank_size_plot
from hubnet.report.fmt import (
    CLASS_COLOURS,
    HUB_COLOUR,
    OTHER_TIER_COLOUR,
    RUN_COLOURS,
    TIER_COLOURS,
    fmt_gap,
)
from hubnet.report.html import report_html, write_report
from hubnet.report.summary import STANDING_CAUTIONS


@pytest.fixture(scope="module")
def runs(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path]:
    """The tiny scenario twice: single allocation, and multiple allocation with cheap trunks."""
    first = tiny_run(tmp_path_factory.mktemp("single"))
    second = tiny_run(tmp_path_factory.mktemp("multiple"), allocation="multiple", transfer=0.4)
    return first, second


def cell_after(page: str, label: str) -> list[str]:
    """The text of the cells of the headline row whose heading starts with ``label``."""
    row = re.search(rf"<tr[^>]*><th>{re.escape(label)}[ <].*?</tr>", page)
    assert row is not None, label
    return [html.unescape(c) for c in re.findall(r"<td[^>]*>(.*?)</td>", row.group(0))]


def test_headline_side_by_side_with_differences(runs: tuple[Path, Path]) -> None:
    page = report_html(runs, tiles="none")
    a, b = (json.loads((r / "summary.json").read_text()) for r in runs)
    cost = cell_after(page, "Cost")
    total_a, total_b = a["costs"]["total"], b["costs"]["total"]
    assert cost[0] == f"{total_a:,.0f}" and cost[1] == f"{total_b:,.0f}"
    diff = total_b - total_a
    sign = "+" if diff > 0 else "−"
    shown = re.fullmatch(r"([+−])([\d,.]+) \(([+−])([\d.]+) %\)", cost[2])
    assert shown is not None, cost[2]
    assert shown.group(1) == shown.group(3) == sign
    assert float(shown.group(2).replace(",", "")) == pytest.approx(abs(diff), abs=0.5)
    assert float(shown.group(4)) == pytest.approx(abs(100 * diff / total_a), abs=0.05)
    hubs = cell_after(page, "Hubs")
    assert hubs[:2] == [str(a["hub_count"]), str(b["hub_count"])]
    opened = cell_after(page, "Hubs opened vs first")
    closed = cell_after(page, "Hubs closed vs first")
    assert opened[1] == (", ".join(sorted(set(b["hubs"]) - set(a["hubs"]))) or "none")
    assert closed[1] == (", ".join(sorted(set(a["hubs"]) - set(b["hubs"]))) or "none")
    unit_km = cell_after(page, "Unit-km")
    assert unit_km[0] == f"{a['unit_km']:,.0f}"
    volume = cell_after(page, "Volume")
    assert volume[0] == f"{a['total_volume']:,.0f}" and volume[2] == "0"
    # figures that do not exist yet are left out, not shown as zero
    for absent in ("Vehicles", "Vehicle-km", "CO2e", "Service level", "transit time"):
        assert f"<th>{absent}" not in page


def test_optional_figures_appear_when_the_summary_has_them(
    runs: tuple[Path, Path], tmp_path: Path
) -> None:
    copy = tmp_path / "with-vehicles"
    shutil.copytree(runs[1], copy)
    summary = json.loads((copy / "summary.json").read_text())
    summary.update(vehicles=42, vehicle_km=12345.6, co2e_kg=8100.0, service_level=0.975)
    (copy / "summary.json").write_text(json.dumps(summary))
    page = report_html([runs[0], copy], tiles="none")
    assert cell_after(page, "Vehicles")[1] == "42"
    assert cell_after(page, "Vehicle-km")[1] == "12,346"
    assert cell_after(page, "CO2e")[1] == "8,100"
    assert cell_after(page, "Service level (on time)")[1] == "97.5 %"
    assert cell_after(page, "Vehicles")[0] == "–"  # the first run has no such figure


def test_cautions_hierarchy_charts_and_maps(runs: tuple[Path, Path]) -> None:
    page = report_html(runs, tiles="none")
    for caution in STANDING_CAUTIONS:
        assert html.escape(caution) in page
    assert page.count("<table class='hierarchy'>") == 2
    # Tiers across, measures down: one column per row of hierarchy.csv.
    tiers = list(pd.read_csv(runs[0] / "hierarchy.csv")["tier"].astype(str))
    first = page[page.index("<table class='hierarchy'>") :]
    first = first[: first.index("</table>")]
    head = re.findall(r"<th class='n(?: total)?'>([^<]*)</th>", first[: first.index("</thead>")])
    assert head == tiers and "all" in tiers
    assert first.count("<tr><th>Legs</th>") == 1
    body = first[first.index("<tbody>") :]
    assert body.count("<td class='n total'>") == body.count("<tr><th>") >= 9
    assert page.count("<svg class='chart'") == 2
    assert "Cost per day by tier" in page and "Leg volume by rank" in page
    assert page.count("<iframe class='map'") == 2
    assert page.count("sandbox='allow-scripts'") == 2
    # nothing is loaded from elsewhere: no script src, no stylesheet link
    assert not re.search(r"<(script|img)[^>]*\ssrc=|<link[^>]*href=", page)


def test_report_escapes_every_user_text(runs: tuple[Path, Path]) -> None:
    page = report_html(runs, tiles="none")
    assert SCENARIO_NAME not in page and XSS_NAME not in page
    assert html.escape(SCENARIO_NAME) in page
    # outside the maps' srcdoc attributes, the only script is none at all
    outside = re.sub(r"srcdoc='[^']*'", "", page)
    assert "<script" not in outside
    # inside a srcdoc, the map page is attribute-escaped whole: no raw quote or tag
    for doc in re.findall(r"srcdoc='([^']*)'", page):
        assert "<" not in doc and "'" not in doc
        inner = html.unescape(doc)
        assert XSS_NAME not in inner and inner.startswith("<!DOCTYPE html>")


def test_one_run_report(runs: tuple[Path, Path]) -> None:
    page = report_html([runs[0]], tiles="none")
    assert "vs first" not in page and "Hubs opened" not in page
    assert page.count("<iframe class='map'") == 1


def test_run_without_sites_still_reports(runs: tuple[Path, Path], tmp_path: Path) -> None:
    copy = tmp_path / "old"
    shutil.copytree(runs[0], copy)
    (copy / "sites.csv").unlink()
    page = report_html([copy], tiles="none")
    assert "No map for this run" in page and "<iframe" not in page
    assert "Headline figures" in page


def test_write_report_and_cli(runs: tuple[Path, Path], tmp_path: Path) -> None:
    out = tmp_path / "report.html"
    old_mask = os.umask(0o022)
    try:
        write_report(runs, out, tiles="none")
    finally:
        os.umask(old_mask)
    assert out.read_text().startswith("<!DOCTYPE html>")
    # Readable by others as any new file is (0666 less the umask 022), not
    # private to its owner as a bare temporary file would be.
    assert stat.S_IMODE(out.stat().st_mode) == 0o644
    runner = CliRunner()
    refused = runner.invoke(app, ["report", *map(str, runs), "--out", str(out)])
    assert refused.exit_code == 5 and "already exists" in refused.output
    result = runner.invoke(app, ["report", *map(str, runs), "--out", str(out), "--force"])
    assert result.exit_code == 0, result.output
    assert "wrote" in result.output and "(2 runs)" in result.output
    fresh = tmp_path / "fresh.html"
    missing = runner.invoke(app, ["report", str(tmp_path / "nothing"), "--out", str(fresh)])
    assert missing.exit_code == 2 and "no such run folder" in missing.output
    assert not fresh.exists()


def test_nice_ticks() -> None:
    assert nice_ticks(460_000) == [0.0, 100000.0, 200000.0, 300000.0, 400000.0, 500000.0]
    assert nice_ticks(7) == [0.0, 2.0, 4.0, 6.0, 8.0]
    assert nice_ticks(0) == [0.0, 1.0]


def test_charts_escape_and_scale() -> None:
    svg = grouped_bars(["<b>"], ["run <i>"], [[50.0]], title="t & u", unit="per day")
    assert "<b>" not in svg and "&lt;b&gt;" in svg and "t &amp; u" in svg
    # 50 on an axis to 50: the bar fills the plot width (380 px)
    assert "width='380.0'" in svg
    plot = rank_size_plot(["r"], [[1000.0, 100.0, 10.0, 0.0]], title="x", unit="pallets")
    assert plot.count("<circle") == 3  # the zero volume has no logarithm: left out
    empty = rank_size_plot(["r"], [[]], title="x", unit="pallets")
    assert "no leg volume" in empty


def test_run_colours_differ_from_map_colours() -> None:
    # The report shows runs' charts above maps of the same runs: a run's
    # colour must never be read as a tier's, a vehicle class's or the hubs'.
    map_colours = {*TIER_COLOURS.values(), OTHER_TIER_COLOUR, HUB_COLOUR, *CLASS_COLOURS}
    assert not {c.upper() for c in RUN_COLOURS} & {c.upper() for c in map_colours}
    assert len(set(RUN_COLOURS)) == len(RUN_COLOURS)


def test_gap_in_fixed_point() -> None:
    # The terminal prints a gap as a fixed-point percentage (4 decimals); the
    # report and map must not switch to exponent form for small gaps.
    assert fmt_gap(6e-7) == "0.0001 %"
    assert fmt_gap(1e-8) == "< 0.0001 %"
    assert fmt_gap(0.000123) == "0.0123 %"
    assert fmt_gap(0.031734) == "3.17 %"
    assert fmt_gap(0.0) == "0 %"
    assert fmt_gap(None) == "unknown"
    assert all("e" not in fmt_gap(10.0**-k) for k in range(1, 12))


def test_frontier_chart_cost_axis_does_not_go_below_zero() -> None:
    # A trial's frontier (0.35, 5.3 and 10.7 million per day) had its cost
    # axis padded down to -5,000,000: costs are never negative.
    svg = frontier_plot(
        [9.45, 7.70, 7.12],
        [348_986.0, 5_324_499.0, 10_697_604.0],
        ["1", "4", "5"],
        [True, True, True],
        title="frontier",
    )
    ticks = re.findall(r"text-anchor='end' fill='#4a4f57'>([^<]+)</text>", svg)
    assert ticks and ticks[0] == "0"
    assert not any(t.startswith(("-", "\u2212")) for t in ticks), ticks


def test_a_caution_runs_share_is_listed_once(runs: tuple[Path, Path], tmp_path: Path) -> None:
    # A trial's report of three frontier points listed each point's two
    # cautions three times over: a caution every run gives is listed once.
    folders = []
    for name, extra in (("a", ["shared note", "only in a"]), ("b", ["shared note"])):
        copy = tmp_path / name
        shutil.copytree(runs[0], copy)
        summary = json.loads((copy / "summary.json").read_text())
        summary["cautions"] = [*summary.get("cautions", []), *extra]
        (copy / "summary.json").write_text(json.dumps(summary))
        folders.append(copy)
    page = report_html(folders, tiles="none")
    box = page[page.index("id='cautions'") : page.index("</section>", page.index("id='cautions'"))]
    assert box.count("shared note") == 1 and "<b>Every run:</b> shared note" in box
    assert box.count("only in a") == 1 and ":</b> only in a" in box
