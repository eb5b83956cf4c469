"""The manager report: one self-contained HTML page comparing runs side by side.

:func:`report_html` reads run folders and builds a page with, in order:

1. the headline figures of every run side by side, with the difference of
   each later run to the first (cost and its parts, hubs, volume, unit-km,
   cost per unit, legs; the hubs opened and closed against the first run;
   vehicles, vehicle-km, transit time, service level and CO2e rows appear
   when the runs' ``summary.json`` carry those figures);
2. the cautions: the plan is a decision aid, drivers' hours, weights and
   dimensions follow local regulations which the user must confirm, and
   every caution a run's summary carries (time limits, capacity);
3. charts drawn as inline SVG (:mod:`hubnet.report.charts`): cost per day by
   tier, and leg volume against rank on log–log axes; for runs in a
   frontier folder (or a frontier folder given, which stands for its
   efficient points), also the cost–time frontier
   (:func:`hubnet.frontier.frontier_section`);
4. the flow-hierarchy table of every run;
5. the route map of every run, each embedded whole in an ``<iframe
   srcdoc>`` (:mod:`hubnet.report.maps`, Leaflet inlined from the PyPI
   package ``xstatic-leaflet``), so the page needs no other file.

The page links no script, stylesheet, font or image: it renders from a
file with no network (the default base map, country outlines, is inside the
page; only ``tiles="light"`` or ``"osm"`` fetch tiles from the web). Every
text from the user's files, scenario names and site names included, is
HTML-escaped.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Callable, Mapping, Sequence
from functools import partial
from pathlib import Path
from typing import Any

from hubnet.frontier import frontier_section, report_run_dirs
from hubnet.report.charts import grouped_bars, rank_size_plot, swatch
from hubnet.report.fmt import (
    esc,
    fmt_gap,
    fmt_num,
    fmt_share,
    fmt_signed,
    number,
    singular,
    status_text,
)
from hubnet.report.maps import DEFAULT_TILES, map_html, write_text_atomic
from hubnet.report.rundata import RunData, read_run
from hubnet.report.summary import STANDING_CAUTIONS
from hubnet.report.tables import TIER_ORDER

REPORT_FILE = "report.html"

#: Cost components of summary.json, in the words the report uses.
COST_WORDS: dict[str, str] = {
    "hub_fixed": "Hub fixed cost",
    "handling": "Sorting at hubs",
    "collection": "Feeder legs into hubs",
    "transfer": "Trunk legs",
    "distribution": "Feeder legs out of hubs",
    "feeder": "Feeder legs",
    "trunk": "Trunk legs",
    "direct": "Direct legs",
    "time": "Value of transit time",
    "carbon_in_vehicles": "of which carbon price (inside the legs' costs)",
}

#: Cost components of freight runs by tier (classic runs split them otherwise).
FREIGHT_TIER_COSTS: tuple[str, ...] = ("feeder", "trunk", "direct")
#: Freight cost components shown only when some run has them above zero.
OPTIONAL_COSTS: tuple[str, ...] = ("time", "carbon_in_vehicles")

#: Figures shown only when a run's summary.json has them: key, label, unit, format.
OPTIONAL_FIGURES: tuple[tuple[str, str, str, str], ...] = (
    ("vehicles", "Vehicles", "", "num"),
    ("dispatches", "Dispatches", "per day", "num"),
    ("vehicle_km", "Vehicle-km", "km per day", "num"),
    ("avg_transit_h", "Average transit time", "h", "num"),
    ("transit_time_h", "Transit time", "h", "num"),
    ("max_transit_h", "Longest transit time", "h", "num"),
    ("service_level", "Service level (on time)", "", "share"),
    ("co2e_kg", "CO2e", "kg per day", "num"),
    ("co2e_t", "CO2e", "t per day", "num"),
)

_CSS = """
:root { --ink: #1a1a1a; --muted: #4a4f57; --line: #d9dde3; --band: #f4f6f8; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #fff;
  font: 14px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, "Noto Sans", "DejaVu Sans",
  Helvetica, Arial, sans-serif; }
main { max-width: 1180px; margin: 0 auto; padding: 22px 26px 40px; }
h1 { font-size: 24px; margin: 0 0 4px; }
h2 { font-size: 18px; margin: 30px 0 8px; padding-bottom: 4px;
  border-bottom: 2px solid var(--line); }
h3 { font-size: 15px; margin: 18px 0 6px; }
.meta, .note, figcaption { color: var(--muted); }
.note { font-size: 13px; }
table { border-collapse: collapse; margin: 6px 0 10px; }
th, td { padding: 4px 10px; border-bottom: 1px solid var(--line); vertical-align: top; }
thead th { background: var(--band); text-align: left; font-weight: 600; }
td.n, th.n { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.d { color: var(--muted); text-align: right; font-variant-numeric: tabular-nums;
  white-space: nowrap; }
tbody th { text-align: left; font-weight: 500; white-space: nowrap; }
tr.sub th { padding-left: 24px; font-weight: 400; color: var(--muted); }
tr.total th, tr.total td, td.total, th.total { font-weight: 650; }
.unit { color: var(--muted); font-weight: 400; font-size: 12px; }
.runs li { margin: 2px 0; }
.folder { color: var(--muted); font-size: 12px; overflow-wrap: anywhere; }
.cautions { border-left: 5px solid #E69F00; background: #fdf7ea; padding: 10px 16px;
  margin: 18px 0; }
.cautions h2 { border: none; margin: 0 0 4px; padding: 0; }
.cautions ul { margin: 4px 0; padding-left: 20px; }
.cautions li { margin: 3px 0; }
.warn { color: #a33f00; font-weight: 600; }
.charts { display: grid; grid-template-columns: repeat(auto-fit, minmax(440px, 1fr));
  gap: 10px 36px; }
figure { margin: 8px 0 18px; }
figure h3 { margin-top: 4px; }
svg.chart { width: 100%; max-width: 760px; height: auto; display: block; }
#headline thead th { white-space: normal; max-width: 240px; vertical-align: bottom; }
#headline td.t { white-space: normal; max-width: 200px; }
table.hierarchy thead th { min-width: 88px; }
.legend span { margin-right: 16px; white-space: nowrap; }
.legend svg { vertical-align: -1px; margin-right: 4px; }
iframe.map { width: 100%; height: 640px; border: 1px solid var(--line); border-radius: 4px; }
.scroll { overflow-x: auto; }
footer { margin-top: 36px; color: var(--muted); font-size: 12px; }
"""


def _f(value: Any, kind: str = "num") -> str:
    """A figure as text for a table cell: ``num``, ``share``, ``gap`` or ``text``."""
    if kind == "share":
        return fmt_share(value)
    if kind == "gap":
        return fmt_gap(value)
    if kind == "text":
        return "–" if value is None or value == "" else str(value)
    return fmt_num(value)


def _diff(first: Any, other: Any) -> str:
    """``+1,234 (+2.7 %)`` from the first run's value to another's."""
    a, b = number(first), number(other)
    if a is None or b is None:
        return ""
    d = b - a
    text = fmt_signed(d)
    if a != 0 and d != 0:
        text += f" ({'+' if d > 0 else '−'}{abs(100 * d / a):.1f} %)"
    return text


def _costs(run: RunData) -> dict[str, Any]:
    costs = run.summary.get("costs")
    return dict(costs) if isinstance(costs, Mapping) else {}


def _legs_by_tier(run: RunData) -> dict[str, Any]:
    legs = run.summary.get("legs_by_tier")
    return dict(legs) if isinstance(legs, Mapping) else {}


def _hub_ids(run: RunData) -> list[str]:
    hubs = run.summary.get("hubs")
    if isinstance(hubs, list):
        return [str(h) for h in hubs]
    frame = run.table("hubs")
    return [str(h) for h in frame.get("hub_id", [])]


def _cost_of(key: str, run: RunData) -> Any:
    return _costs(run).get(key)


def _tier_cost_of(key: str, run: RunData) -> Any:
    """A freight tier cost, or a classic run's same figure.

    Classic feeder: collection plus distribution; classic trunk: transfer.
    """
    costs = _costs(run)
    if key in costs:
        return costs[key]
    if key == "trunk":
        return costs.get("transfer")
    if key == "feeder" and ("collection" in costs or "distribution" in costs):
        parts = [number(costs.get("collection")), number(costs.get("distribution"))]
        return sum(p for p in parts if p is not None)
    return None


def _legs_of(tier: str, run: RunData) -> Any:
    return _legs_by_tier(run).get(tier, 0)


def _figure_of(key: str, run: RunData) -> Any:
    return run.summary.get(key)


def _cost_per_unit(run: RunData) -> float | None:
    total, volume = number(_costs(run).get("total")), number(run.summary.get("total_volume"))
    return total / volume if total is not None and volume else None


def _run_labels(runs: Sequence[RunData]) -> list[str]:
    """A short distinct label per run: the scenario name, with the folder when names repeat."""
    names = [r.scenario for r in runs]
    return [
        f"{n} ({r.folder.name})" if names.count(n) > 1 else n
        for n, r in zip(names, runs, strict=True)
    ]


Row = tuple[str, str, str, Callable[[RunData], Any], str]


def _headline_rows(runs: Sequence[RunData]) -> list[Row]:
    """(css class, label, unit, getter, format) of every headline row shown."""
    unit = runs[0].volume_unit
    rows: list[Row] = [
        ("", "Status", "", lambda r: status_text(r.summary), "text"),
        ("", "Gap to the best bound", "", lambda r: r.summary.get("gap"), "gap"),
        ("total", "Cost", "per day", lambda r: _costs(r).get("total"), "num"),
    ]
    keys: list[str] = []
    for r in runs:
        keys += [k for k in _costs(r) if k != "total" and k not in keys]
    if any(k in keys for k in FREIGHT_TIER_COSTS):
        # A freight run: its feeder and trunk rows take a classic run's figures too,
        # so the two compare; the classic split of the feeder legs stays below.
        keys = [k for k in keys if k != "transfer"]
        keys = [k for k in keys if k not in OPTIONAL_COSTS or any(_cost_of(k, r) for r in runs)]
    for key in keys:
        rows.append(
            (
                "sub",
                COST_WORDS.get(key, key.replace("_", " ")),
                "per day",
                partial(_tier_cost_of, key)
                if key in FREIGHT_TIER_COSTS
                else partial(_cost_of, key),
                "num",
            )
        )
    rows += [
        ("", "Hubs", "", lambda r: len(_hub_ids(r)), "num"),
        ("sub", "Hub sites", "", lambda r: ", ".join(_hub_ids(r)) or "none", "text"),
        ("", "Volume", f"{unit} per day", lambda r: r.summary.get("total_volume"), "num"),
        ("", f"Cost per {singular(unit)}", "", _cost_per_unit, "num"),
        ("", "Unit-km", f"{unit} × km per day", lambda r: r.summary.get("unit_km"), "num"),
    ]
    tiers = [t for t in TIER_ORDER if any(number(_legs_by_tier(r).get(t)) for r in runs)]
    rows.append(
        ("", "Legs", "", lambda r: sum(number(v) or 0 for v in _legs_by_tier(r).values()), "num")
    )
    for tier in tiers:
        rows.append(("sub", f"{tier} legs", "", partial(_legs_of, tier), "num"))
    has_kg = any(number(r.summary.get("co2e_kg")) is not None for r in runs)
    for key, label, unit_text, kind in OPTIONAL_FIGURES:
        if key == "co2e_t" and has_kg:
            continue  # the same figure in kg is shown
        if any(number(r.summary.get(key)) is not None for r in runs):
            rows.append(("", label, unit_text, partial(_figure_of, key), kind))
    return rows


def _headline_table(runs: Sequence[RunData], labels: Sequence[str]) -> str:
    head = ["<th>Figure</th>"]
    for i, (label, run) in enumerate(zip(labels, runs, strict=True)):
        folder = f"<div class='folder'>{esc(run.folder)}</div>"
        head.append(f"<th class='n'>{swatch(i)} {esc(label)}{folder}</th>")
        if i > 0:
            head.append("<th class='n'>vs first</th>")
    body = []
    for css, label, unit, get, kind in _headline_rows(runs):
        cells = [f"<th>{esc(label)} <span class='unit'>{esc(unit)}</span></th>"]
        first = get(runs[0])
        for i, run in enumerate(runs):
            value = get(run)
            warn = kind == "text" and label == "Status" and run.summary.get("status") != "optimal"
            # text cells (hub lists) may wrap: three runs side by side must fit
            cls = "n warn t" if warn else "n t" if kind == "text" else "n"
            cells.append(f"<td class='{cls}'>{esc(_f(value, kind))}</td>")
            if i > 0:
                diff = _diff(first, value) if kind in ("num",) else ""
                cells.append(f"<td class='d'>{esc(diff)}</td>")
        body.append(f"<tr class='{css}'>{''.join(cells)}</tr>")
    if len(runs) > 1:
        first_hubs = set(_hub_ids(runs[0]))
        for word, pick in (
            ("Hubs opened vs first", lambda h: sorted(h - first_hubs)),
            ("Hubs closed vs first", lambda h: sorted(first_hubs - h)),
        ):
            cells = [f"<th>{esc(word)}</th>", "<td class='n'></td>"]
            for run in runs[1:]:
                changed = pick(set(_hub_ids(run)))
                cells.append(f"<td class='n t'>{esc(', '.join(changed) or 'none')}</td><td></td>")
            body.append(f"<tr>{''.join(cells)}</tr>")
    return (
        "<div class='scroll'><table id='headline'><thead><tr>"
        + "".join(head)
        + "</tr></thead><tbody>"
        + "".join(body)
        + "</tbody></table></div>"
    )


def _cautions(runs: Sequence[RunData], labels: Sequence[str]) -> str:
    """The "Read this first" box: the standing cautions, then each run's own.

    A caution several runs share is listed once, with the runs it applies to
    (a trial's report of three frontier points listed the same two sentences
    three times each).
    """
    items = [f"<li>{esc(c)}</li>" for c in STANDING_CAUTIONS]
    standing = set(STANDING_CAUTIONS)
    by_text: dict[str, list[str]] = {}
    for label, run in zip(labels, runs, strict=True):
        cautions = run.summary.get("cautions")
        for text in cautions if isinstance(cautions, list) else []:
            if str(text) not in standing and label not in by_text.get(str(text), []):
                by_text.setdefault(str(text), []).append(label)
    for text, who in by_text.items():
        if len(who) == len(runs) > 1:
            named = "Every run"
        else:
            named = ", ".join(who)
        items.append(f"<li><b>{esc(named)}:</b> {esc(text)}</li>")
    return (
        "<section class='cautions' id='cautions'><h2>Read this first</h2><ul>"
        + "".join(items)
        + "</ul></section>"
    )


def _tier_costs(run: RunData) -> dict[str, float | None]:
    """Cost per day by tier and hub cost, from hierarchy.csv and the summary."""
    out: dict[str, float | None] = {}
    hierarchy = run.table("hierarchy")
    costs = _costs(run)
    if {"tier", "cost_per_day"} <= set(hierarchy.columns):
        for tier, cost in zip(hierarchy["tier"], hierarchy["cost_per_day"], strict=True):
            if tier != "all":
                out[f"{tier} legs"] = number(cost)
    elif any(k in costs for k in ("feeder", "trunk", "direct")):  # freight cost keys
        for tier in TIER_ORDER:
            if tier in costs:
                out[f"{tier} legs"] = number(costs.get(tier))
    else:
        out["trunk legs"] = number(costs.get("transfer"))
        parts = [number(costs.get("collection")), number(costs.get("distribution"))]
        out["feeder legs"] = sum(p for p in parts if p is not None) if any(parts) else None
    out["hub fixed cost"] = number(costs.get("hub_fixed"))
    out["sorting at hubs"] = number(costs.get("handling"))
    if number(costs.get("time")):  # freight model with a value of time
        out["transit time"] = number(costs.get("time"))
    return out


def _charts(runs: Sequence[RunData], labels: Sequence[str]) -> str:
    per_run = [_tier_costs(r) for r in runs]
    groups: list[str] = []
    for costs in per_run:
        groups += [g for g in costs if g not in groups]
    values = [[costs.get(g) for g in groups] for costs in per_run]
    legend = "".join(f"<span>{swatch(i)}{esc(label)}</span>" for i, label in enumerate(labels))
    bars = grouped_bars(
        [g[0].upper() + g[1:] for g in groups],
        labels,
        values,
        title="Cost per day by tier",
        unit="cost per day",
    )
    volumes = []
    exponents = []
    for run in runs:
        table = run.table("rank_size")
        if "volume_per_day" not in table.columns:
            table = run.table("legs")
        vs = sorted(
            (v for v in (number(x) for x in table.get("volume_per_day", [])) if v is not None),
            reverse=True,
        )
        volumes.append(vs)
        exponents.append(number(run.summary.get("rank_size_exponent")))
    rank_legend = "".join(
        f"<span>{swatch(i)}{esc(label)}"
        + (f": exponent {e:.2f}" if e is not None else "")
        + "</span>"
        for i, (label, e) in enumerate(zip(labels, exponents, strict=True))
    )
    plot = rank_size_plot(labels, volumes, title="Leg volume by rank", unit=runs[0].volume_unit)
    time_note = ", and the value of the transit time" if "transit time" in groups else ""
    return (
        "<h2 id='charts'>Charts</h2><div class='charts'>"
        f"<figure><h3>Where the money goes</h3>{bars}"
        f"<figcaption class='legend'>{legend}</figcaption>"
        "<figcaption>Transport cost of the legs of each tier, and the hubs' fixed and "
        f"sorting costs{time_note}, per day.</figcaption></figure>"
        f"<figure><h3>Few large legs, many small ones</h3>{plot}"
        f"<figcaption class='legend'>{rank_legend}</figcaption>"
        "<figcaption>Every leg's volume against its rank, both on log scales. A steeper fall "
        "(a larger exponent b in volume ∝ rank<sup>−b</sup>) means volume is more concentrated "
        "on a few large legs.</figcaption></figure></div>"
    )


_HIERARCHY_COLUMNS: tuple[tuple[str, str, str], ...] = (
    ("legs", "Legs", "num"),
    ("volume_per_day", "Volume, {unit} per day", "num"),
    ("share_of_volume", "Share of volume", "share"),
    ("unit_km_per_day", "Unit-km per day", "num"),
    ("share_of_unit_km", "Share of unit-km", "share"),
    ("cost_per_day", "Cost per day", "num"),
    ("share_of_cost", "Share of cost", "share"),
    ("avg_distance_km", "Average leg, km", "num"),
    ("avg_volume_per_leg", "Average leg, {unit} per day", "num"),
    # freight runs only (hierarchy.csv has these columns when the plan has vehicles)
    ("dispatches", "Vehicle runs per day", "num"),
    ("vehicle_km", "Vehicle-km per day", "num"),
    ("avg_load", "Average load, {unit} per run", "num"),
    ("fill_rate", "Fill", "share"),
    ("share_of_time", "Share of transit time", "share"),
    ("co2e_wtw_kg", "CO2e well-to-wheel, kg per day", "num"),
)


def _hierarchy(runs: Sequence[RunData], labels: Sequence[str]) -> str:
    parts = [
        "<h2 id='hierarchy'>Flow hierarchy</h2><p class='note'>Per tier: how many legs, how "
        "much volume, unit-km and transport cost; volume counts once on every leg it travels, "
        "so the all column exceeds the volume sent.</p>"
    ]
    for i, (label, run) in enumerate(zip(labels, runs, strict=True)):
        table = run.table("hierarchy")
        parts.append(f"<h3>{swatch(i)} {esc(label)}</h3>")
        if table.empty or "tier" not in table.columns:
            parts.append("<p class='note'>This run folder has no hierarchy.csv.</p>")
            continue
        unit = run.volume_unit
        # Measures down, tiers across: a handful of tiers never needs a
        # sideways scroll, however many measures a freight plan adds.
        records = table.to_dict("records")
        tiers = [str(r.get("tier", "")) for r in records]
        head = "".join(
            f"<th class='n{' total' if t == 'all' else ''}'>{esc(t)}</th>" for t in tiers
        )
        rows = []
        for column, title, kind in _HIERARCHY_COLUMNS:
            if column not in table.columns:
                continue
            cells = "".join(
                f"<td class='n{' total' if t == 'all' else ''}'>{esc(_f(r.get(column), kind))}</td>"
                for t, r in zip(tiers, records, strict=True)
            )
            rows.append(f"<tr><th>{esc(title.format(unit=unit))}</th>{cells}</tr>")
        parts.append(
            "<div class='scroll'><table class='hierarchy'><thead><tr><th>Per tier</th>"
            f"{head}</tr></thead><tbody>{''.join(rows)}</tbody></table></div>"
        )
    return "".join(parts)


def _maps(runs: Sequence[RunData], labels: Sequence[str], tiles: str) -> str:
    parts = [
        "<h2 id='maps'>Maps</h2><p class='note'>Click a line or a circle for its figures; "
        "switch tiers on and off at the top right of each map; open the legend at its "
        "bottom left.</p>"
    ]
    for i, (label, run) in enumerate(zip(labels, runs, strict=True)):
        parts.append(f"<h3>{swatch(i)} {esc(label)}</h3>")
        try:
            page = map_html(run, tiles=tiles, compact=True)
        except Exception as err:  # noqa: BLE001 - a missing map must not lose the report
            parts.append(f"<p class='note'>No map for this run: {esc(err)}</p>")
            continue
        parts.append(
            f"<iframe class='map' title='{esc(f'Map of {label}')}' sandbox='allow-scripts' "
            f"srcdoc='{esc(page)}'></iframe>"
        )
    return "".join(parts)


def report_from_runs(
    runs: Sequence[RunData],
    *,
    tiles: str = DEFAULT_TILES,
    made: _dt.datetime | None = None,
) -> str:
    """The report page of runs already read.

    Parameters
    ----------
    runs
        The runs, the first being the one the others are compared with.
    tiles
        Base map of the embedded maps: ``outline``, ``light``, ``osm`` or ``none``.
    made
        When the page was made (shown in its heading); now by default.

    Returns
    -------
    str
        The complete HTML document.

    Raises
    ------
    ValueError
        When no run is given.
    """
    if not runs:
        raise ValueError("give at least one run folder")
    labels = _run_labels(runs)
    made = made or _dt.datetime.now()
    from hubnet.report.summary import hubnet_version

    title = " vs ".join(labels) if len(labels) <= 3 else f"{len(labels)} runs"
    run_list = "".join(
        f"<li>{swatch(i)} <b>{esc(label)}</b>"
        + (f" — {esc(r.summary.get('description'))}" if r.summary.get("description") else "")
        + f"<div class='folder'>{esc(r.folder)}</div></li>"
        for i, (label, r) in enumerate(zip(labels, runs, strict=True))
    )
    first = "<p class='note'>Differences are to the first run.</p>" if len(runs) > 1 else ""
    body = (
        f"<header><h1>Network plan report</h1><p class='meta'>{len(runs)} run"
        f"{'s' if len(runs) != 1 else ''}, made {esc(made.strftime('%Y-%m-%d %H:%M'))} "
        f"with hubnet {esc(hubnet_version())}. Volumes in {esc(runs[0].volume_unit)}; money "
        "in the scenario's currency.</p><ul class='runs'>"
        f"{run_list}</ul></header>"
        f"<h2 id='headline-figures'>Headline figures</h2>{first}"
        f"{_headline_table(runs, labels)}"
        f"{_cautions(runs, labels)}"
        f"{_charts(runs, labels)}"
        f"{frontier_section([r.folder for r in runs])}"
        f"{_hierarchy(runs, labels)}"
        f"{_maps(runs, labels, tiles)}"
        "<footer>Made by hubnet from the run folders listed above; every figure is in their "
        "summary.json and CSV tables. Maps drawn with Leaflet (BSD-2-Clause licence), inlined "
        "from the PyPI package xstatic-leaflet; the base map (Natural Earth's public-domain "
        "country outlines, or a tile provider's map when asked for) is credited on each "
        "map.</footer>"
    )
    return (
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
        "<meta name='viewport' content='width=device-width, initial-scale=1'>"
        f"<title>{esc(title)} · hubnet report</title><style>{_CSS}</style></head>"
        f"<body><main>{body}</main></body></html>\n"
    )


def report_html(run_dirs: Sequence[str | Path], *, tiles: str = DEFAULT_TILES) -> str:
    """Read run folders and build the report page.

    Parameters
    ----------
    run_dirs
        Run folders; the first is the one the others are compared with.
    tiles
        Base map of the embedded maps: ``outline``, ``light``, ``osm`` or ``none``.

    Returns
    -------
    str
        The complete HTML document.

    Raises
    ------
    InputError
        When a folder is not a readable run folder.
    """
    return report_from_runs([read_run(d) for d in report_run_dirs(run_dirs)], tiles=tiles)


def write_report(
    run_dirs: Sequence[str | Path],
    out: str | Path = REPORT_FILE,
    *,
    tiles: str = DEFAULT_TILES,
    force: bool = False,
) -> Path:
    """Build the report of run folders and write it atomically.

    Parameters
    ----------
    run_dirs
        Run folders; the first is the one the others are compared with.
    out
        The HTML file to write.
    tiles
        Base map of the embedded maps.
    force
        Replace an existing ``out``.

    Returns
    -------
    pathlib.Path
        The file written.

    Raises
    ------
    OutputExistsError
        When ``out`` exists and ``force`` is false.
    """
    target = Path(out)
    if target.exists() and not force and not target.is_dir():
        from hubnet.errors import OutputExistsError

        raise OutputExistsError(
            f"{str(target)!r} already exists: choose another file, or replace it with --force"
        )
    return write_text_atomic(target, report_html(run_dirs, tiles=tiles), force=force)
