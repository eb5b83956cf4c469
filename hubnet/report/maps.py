"""The interactive route map of a run (``map.html``), drawn with folium.

:func:`map_html` draws a run folder's plan from its files alone
(``summary.json``, ``hubs.csv``, ``legs.csv``, ``routes.csv``,
``sites.csv`` and, for freight runs, ``dispatches.csv``), so ``hubnet map
RUN_DIR`` redraws any run folder:

- hubs as green circles whose area grows with throughput, terminals as
  small white circles; a popup on every site (hub figures where it is a
  hub; for every site its hub and the volume it sends and receives);
- legs as lines, one switchable layer per tier (trunk, feeder, direct),
  width by volume, colour by tier, or by vehicle class when ``legs.csv``
  has a ``vehicle_class`` column (freight runs: a leg run by several
  classes takes the colour of the one with most capacity on it, and its
  popup lists the dispatches of each class from ``dispatches.csv``); an
  empty return (a run with volume 0) is drawn thin and dotted; every leg
  bends slightly to the right of its direction of travel, so the two
  directions of a lane are drawn apart and each can be clicked; a popup
  on every leg with all its figures (columns ``legs.csv`` gains later,
  such as hours, dispatches, fill or CO2e, appear in the popup by
  themselves);
- a box with the scenario's name and headline figures, a legend, and the
  view fitted to the network.

Self-contained
    The page works from a file with no network: Leaflet's JavaScript and
    stylesheet are inlined from the PyPI package ``xstatic-leaflet`` (see
    :mod:`hubnet.report.assets`) instead of folium's CDN links, and no other
    script or stylesheet is used (folium's jQuery, Bootstrap and icon fonts
    are left out). The default base map, country outlines
    (:mod:`hubnet.report.outlines`), is drawn from data inside the page;
    only the tile base maps (``tiles="light"`` or ``"osm"``) need a
    network, and without one the network is drawn on a plain background.
    ``tiles="none"`` draws no base map at all.

Safe
    Every text from the user's files (site ids and names, the scenario's
    name and description) is HTML-escaped before it reaches the page, and
    popup and tooltip contents are handed to Leaflet as JSON strings with
    ``<``, ``>``, ``&`` and ``'`` escaped, never spliced into script text. A
    site named ``<img src=x onerror=alert(1)>`` shows as exactly that text.

Drawn elements carry class names tests and style sheets can find:
``hubnet-leg`` and ``hubnet-tier-<tier>`` on every leg line (with
``hubnet-class-<class>`` for the class its colour shows, and ``hubnet-empty``
on an empty return), ``hubnet-hub`` or ``hubnet-terminal`` on every site
circle.
"""

from __future__ import annotations

import math
import os
import re
import tempfile
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pandas as pd

from hubnet.errors import HubnetError, OutputExistsError
from hubnet.report.assets import LEAFLET_SOURCE, leaflet_css, leaflet_js
from hubnet.report.fmt import (
    CLASS_COLOURS,
    HUB_COLOUR,
    OUTLINE_COLOUR,
    TERMINAL_FILL,
    esc,
    fmt_gap,
    fmt_num,
    fmt_share,
    number,
    singular,
    status_text,
    tier_colour,
)
from hubnet.report.outlines import MIN_MARGIN_DEG, OUTLINES_CREDIT, outlines_near
from hubnet.report.rundata import RunData, coordinates, is_planar, read_run

if TYPE_CHECKING:
    import folium

#: Base map choices: country outlines drawn from hubnet's own data (no
#: server asked, works offline: the default), a plain light-grey tile map,
#: OpenStreetMap's standard tile map, or none.
TILES: tuple[str, ...] = ("outline", "light", "osm", "none")
#: The xyzservices tile provider of each choice with tiles. ``light`` needs no
#: access key and is served to pages opened from a file, under its provider's
#: terms of use; OpenStreetMap's own servers ask browsers for a Referer, which
#: a page opened from a file does not send, so ``osm`` suits pages served from
#: a web server.
TILE_PROVIDERS: dict[str, str] = {"light": "Esri.WorldGrayCanvas", "osm": "OpenStreetMap.Mapnik"}
DEFAULT_TILES = "outline"
#: Deepest zoom of a map on geographic coordinates (street level; the tile
#: layers' own limits are 16-19).
MAX_ZOOM = 18
#: Colours of the outline base map: sea, land and borders.
SEA_COLOUR = "#dce6ee"
LAND_COLOUR = "#f7f7f4"
BORDER_COLOUR = "#aab3bd"

#: Order in which tier layers are drawn and listed (first drawn lies lowest).
TIER_LAYERS: tuple[str, ...] = ("trunk", "feeder", "direct")
TIER_WORDS: dict[str, str] = {
    "trunk": "Trunk legs (hub to hub)",
    "feeder": "Feeder legs (terminal to hub and back)",
    "direct": "Direct legs (terminal to terminal)",
}

#: Line width in pixels of the smallest and of the largest leg volume.
MIN_WIDTH_PX = 1.5
MAX_WIDTH_PX = 12.0
#: Width and dash pattern of an empty return (a run with no volume).
EMPTY_WIDTH_PX = 1.5
EMPTY_DASH = "2 6"
#: Dash pattern of direct legs.
DIRECT_DASH = "6 5"
#: On maps coloured by vehicle class, trunk legs are drawn over a dark
#: casing this many pixels wider, so the fast tier stands out from the
#: feeders whatever vehicles run on it.
TRUNK_CASING_PX = 3.0
TRUNK_CASING_COLOUR = "#202124"
TRUNK_CASING_OPACITY = 0.85
#: On those maps feeder legs are drawn lighter, so that at a whole-country
#: zoom the cased trunks read as the network's spine (a new-user trial found
#: the two tiers hard to tell apart when one class runs both).
FEEDER_OPACITY_BY_CLASS = 0.6
#: Radius in pixels of a terminal, and of a hub of no and of the largest throughput.
TERMINAL_RADIUS_PX = 4.5
#: Terminals carry name labels once this many or fewer are in view (zoomed
#: in); more would cover the map with text (common practice, no source).
TERMINAL_LABELS_IN_VIEW = 30
HUB_MIN_RADIUS_PX = 7.0
HUB_MAX_RADIUS_PX = 22.0
#: How far a leg bends: the sideways offset of its middle, as a share of its length.
BEND = 0.06
#: Points per drawn leg (more: smoother bends).
LEG_POINTS = 13

MAP_FILE = "map.html"

#: Leg columns shown in popups with a label, a unit and a number format, in this
#: order. ``{unit}`` is the volume unit, ``{one}`` its singular. Any other column
#: of legs.csv is shown after these under its own name.
LEG_FIELDS: tuple[tuple[str, str, str, str], ...] = (
    ("tier", "Tier", "", "text"),
    ("vehicle_class", "Vehicle class", "", "text"),
    ("distance_km", "Distance", "km", "num"),
    ("time_h", "Driving time", "h", "num"),
    ("hours", "Driving time", "h", "num"),
    ("transit_h", "Transit time", "h", "num"),
    ("volume_per_day", "Volume", "{unit} per day", "num"),
    ("unit_km_per_day", "Unit-km", "{unit} × km per day", "num"),
    ("vehicles", "Vehicles", "", "num"),
    ("dispatches_per_day", "Dispatches", "per day", "num"),
    ("dispatches", "Dispatches", "per day", "num"),
    ("dispatches_by_class", "Dispatches by class", "", "text"),
    ("capacity", "Capacity", "{unit} per day", "num"),
    ("fill_rate", "Fill", "", "share"),
    ("fill", "Fill", "", "share"),
    ("drive_h", "Driving time", "h", "num"),
    ("relays", "Driver changes", "per run", "num"),
    ("drivers", "Drivers on board", "", "num"),
    ("vehicle_km", "Vehicle-km", "per day", "num"),
    ("cost_per_day", "Cost", "per day", "num"),
    ("cost_per_unit", "Cost per {one}", "", "num"),
    ("co2e_kg_per_day", "CO2e", "kg per day", "num"),
    ("co2e_t_per_day", "CO2e", "t per day", "num"),
    ("co2e_wtw_kg", "CO2e well-to-wheel", "kg per day", "num"),
    ("co2e_ttw_kg", "CO2e tank-to-wheel", "kg per day", "num"),
)
#: Leg columns never listed in the popup body (they form its heading).
_LEG_HEADING = ("from_site", "to_site")

_STYLE = """
body, .leaflet-container { font: 13px/1.35 system-ui, -apple-system, "Segoe UI", Roboto,
  "Noto Sans", "DejaVu Sans", Helvetica, Arial, sans-serif; }
.leaflet-container { background: #eef1f4; }
.hn-box { position: absolute; z-index: 1000; background: rgba(255,255,255,0.95);
  border: 1px solid #c8ced6; border-radius: 6px; padding: 7px 11px;
  box-shadow: 0 1px 4px rgba(0,0,0,0.18); color: #1a1a1a; max-width: 320px; }
.hn-box summary { cursor: pointer; }
.hn-head { top: 10px; left: 54px; }
.hn-head.hn-warn { border-left: 5px solid #D55E00; }
.hn-title { font-weight: 650; font-size: 15px; overflow-wrap: anywhere; }
.hn-desc { color: #4a4f57; font-size: 12px; margin: 2px 0 5px 0; overflow-wrap: anywhere; }
.hn-label { background: rgba(255,255,255,0.8); border: none; box-shadow: none;
  padding: 0 3px; font-size: 12px; font-weight: 600; color: #1a1a1a; z-index: 2; }
.hn-label::before { display: none; }
/* terminal names below the hubs' (a new user found hub names hidden under them) */
.hn-tlabel { font-weight: 400; font-size: 11px; background: rgba(255,255,255,0.7); z-index: 1; }
.hn-box table, .hn-pop table { border-collapse: collapse; }
.hn-box th, .hn-pop th { text-align: left; font-weight: 500; color: #4a4f57;
  padding: 1px 10px 1px 0; vertical-align: top; white-space: nowrap; }
.hn-box td, .hn-pop td { padding: 1px 0; overflow-wrap: anywhere; }
.hn-legend { bottom: 64px; left: 10px; font-size: 12px; }
/* The headline box (top) and the legend (bottom) share the left column, clear
   of the zoom buttons and the scale bar. Each takes the height it needs; when
   the window is too low for both they shrink in proportion and scroll, and a
   folded box leaves its room to the other. */
.hn-side { position: absolute; z-index: 1000; top: 10px; bottom: 64px; left: 10px;
  display: flex; flex-direction: column; justify-content: space-between; gap: 10px;
  pointer-events: none; }
.hn-side > .hn-box { position: static; pointer-events: auto; overflow-y: auto; min-height: 0;
  flex: 0 1 auto; box-sizing: border-box; align-self: flex-start; max-width: min(370px, 32vw); }
.hn-side > .hn-box { margin-left: 44px; }
.hn-caution { color: #4a4f57; font-size: 11px; margin: 0 0 5px 0; }
.hn-legend .hn-k { display: inline-block; width: 38px; text-align: center;
  vertical-align: middle; }
.hn-legend div { margin: 1px 0; }
.hn-legend .hn-row { display: flex; align-items: center; }
.hn-legend .hn-row .hn-k { flex: none; }
.hn-legend .hn-note { color: #4a4f57; margin-top: 4px; }
.hn-pop h4 { margin: 0 0 4px 0; font-size: 13px; font-weight: 650; overflow-wrap: anywhere; }
.hn-pop .hn-role { color: #4a4f57; margin-bottom: 4px; }
.leaflet-control-layers-expanded { font-size: 12px; }
"""


def _macro_element() -> type:
    """The MacroElement class folium builds on (imported on first use)."""
    from branca.element import MacroElement

    return MacroElement


def _bind_class() -> type:
    """A folium element that binds a popup and a tooltip to its parent layer.

    Unlike folium's own Popup and Tooltip, which splice the content into a
    JavaScript template string (and need jQuery), the content is passed as
    a JSON string literal, so no text can break out of it.
    """
    from jinja2 import Template

    base = _macro_element()

    class _Bind(base):  # type: ignore[misc,valid-type]
        _template = Template(
            """
            {% macro script(this, kwargs) %}
            {{ this._parent.get_name() }}.bindPopup({{ this.popup|tojson }},
                {"maxWidth": 380, "className": "hn-pop"});
            {{ this._parent.get_name() }}.bindTooltip({{ this.tooltip|tojson }},
                {{ this.tooltip_options|tojson }});
            {% endmacro %}
            """
        )

        def __init__(self, popup: str, tooltip: str, label_offset: float | None = None) -> None:
            super().__init__()
            self._name = "Bind"
            self.popup = popup
            self.tooltip = tooltip
            self.tooltip_options: dict[str, object] = {"sticky": True}
            if label_offset is not None:  # a permanent label to the right of a circle
                self.tooltip_options = {
                    "permanent": True,
                    "direction": "right",
                    "offset": [label_offset, 0],
                    "className": "hn-label",
                }

    return _Bind


def _fit_class() -> type:
    """A folium element that fits the view to bounds once the map has a size.

    A map inside an ``<iframe srcdoc>`` may run its script before the frame
    is laid out; Leaflet would then fit the bounds to a map of size zero.
    This waits (``ResizeObserver``, then the page's ``load``) until the
    container has a size, then tells Leaflet the size and fits the view once.
    """
    from jinja2 import Template

    base = _macro_element()

    class _Fit(base):  # type: ignore[misc,valid-type]
        _template = Template(
            """
            {% macro script(this, kwargs) %}
            (function () {
                var map = {{ this._parent.get_name() }};
                var bounds = {{ this.bounds|tojson }};
                var fitted = false;
                function fit() {
                    var box = map.getContainer();
                    if (fitted || box.clientWidth === 0 || box.clientHeight === 0) { return; }
                    fitted = true;
                    map.invalidateSize(false);
                    // leave the left column to the headline box and legend when the
                    // map is wide enough and they are open
                    var side = document.getElementById("hn-side");
                    var mr = box.getBoundingClientRect();
                    var area = L.latLngBounds(bounds);
                    var left = 30, top = 40, right = 90, bottom = 30;
                    if ({{ this.reserve_left|tojson }} && box.clientWidth > 900 && side) {
                        left = side.getBoundingClientRect().right + 10;
                    } else if (side) {
                        // folded boxes at the top left and bottom left (the report's
                        // maps): keep the sites beside them or between them,
                        // whichever shows the sites larger
                        var beyond = left, above = top, under = bottom;
                        side.querySelectorAll("details.hn-box:not([open])").forEach(
                            function (b) {
                                var r = b.getBoundingClientRect();
                                if (r.width === 0) { return; }
                                beyond = Math.max(beyond, r.right - mr.left + 10);
                                if (r.top - mr.top < mr.height / 2) {
                                    above = Math.max(above, r.bottom - mr.top + 10);
                                } else {
                                    under = Math.max(under, mr.bottom - r.top + 10);
                                }
                            });
                        var zAside = map.getBoundsZoom(
                            area, false, L.point(beyond + right, top + bottom));
                        var zBetween = map.getBoundsZoom(
                            area, false, L.point(left + right, above + under));
                        if (zAside >= zBetween) { left = beyond; } else {
                            top = above; bottom = under;
                        }
                    }
                    // keep the sites clear of the layer switch (top right): beside
                    // it or below it, whichever shows the sites larger
                    var layers = box.querySelector(".leaflet-control-layers");
                    if (layers) {
                        var lr = layers.getBoundingClientRect();
                        var beside = Math.max(right, mr.right - lr.left + 10);
                        var below = Math.max(top, lr.bottom - mr.top + 10);
                        var zBeside = map.getBoundsZoom(
                            area, false, L.point(left + beside, top + bottom));
                        var zBelow = map.getBoundsZoom(
                            area, false, L.point(left + right, below + bottom));
                        if (zBeside >= zBelow) { right = beside; } else { top = below; }
                    }
                    map.fitBounds(bounds, {"paddingTopLeft": [left, top],
                                           "paddingBottomRight": [right, bottom]});
                }
                fit();
                if (!fitted) {
                    if (window.ResizeObserver) {
                        new ResizeObserver(fit).observe(map.getContainer());
                    }
                    window.addEventListener("load", fit);
                }
            })();
            {% endmacro %}
            """
        )

        def __init__(self, bounds: list[list[float]], reserve_left: bool) -> None:
            super().__init__()
            self._name = "Fit"
            self.bounds = bounds
            self.reserve_left = reserve_left

    return _Fit


def _terminal_labels_class() -> type:
    """A folium element that names the terminals in view once few enough are.

    A national map has over a hundred terminals: named all at once they
    would bury the legs. When at most ``limit`` terminals lie in the view
    (after each pan or zoom), those in view get a permanent name label; the
    others, and all of them when more are in view, keep their hover tooltip.
    Markers and texts are given as (JavaScript variable, label, tooltip); the
    texts are JSON string literals.
    """
    from jinja2 import Template

    base = _macro_element()

    class _TerminalLabels(base):  # type: ignore[misc,valid-type]
        _template = Template(
            """
            {% macro script(this, kwargs) %}
            (function () {
                var map = {{ this._parent.get_name() }};
                var marks = [{% for v, label, tip in this.marks %}
                    [{{ v }}, {{ label|tojson }}, {{ tip|tojson }}],{% endfor %}
                ];
                var named = null;
                var shown = marks.map(function () { return "tip"; });
                function show(i, how) {
                    if (shown[i] === how) { return; }
                    shown[i] = how;
                    var m = marks[i];
                    m[0].unbindTooltip();
                    if (how === "label") {
                        m[0].bindTooltip(m[1], {"permanent": true,
                            "direction": "right", "offset": [{{ this.offset }}, 0],
                            "className": "hn-label hn-tlabel"});
                    } else {
                        m[0].bindTooltip(m[2], {"sticky": true});
                    }
                }
                function update() {
                    var view = map.getBounds();
                    var inside = marks.map(function (m) {
                        return view.contains(m[0].getLatLng());
                    });
                    var seen = inside.filter(Boolean).length;
                    named = seen <= {{ this.limit }};
                    // only the terminals in view carry a label: a large network
                    // keeps no off-screen labels to move at every zoom
                    marks.forEach(function (m, i) {
                        show(i, named && inside[i] ? "label" : "tip");
                    });
                    map.getContainer().classList.toggle("hn-terminals-named", named);
                }
                map.on("moveend", update);
                map.whenReady(update);
            })();
            {% endmacro %}
            """
        )

        def __init__(self, marks: list[tuple[str, str, str]], limit: int) -> None:
            super().__init__()
            self._name = "TerminalLabels"
            self.marks = marks
            self.limit = int(limit)
            self.offset = TERMINAL_RADIUS_PX + 1

    return _TerminalLabels


def _slug(text: str) -> str:
    """Text made safe for a CSS class name: lower case, ``a-z0-9-`` only."""
    return re.sub(r"[^a-z0-9-]+", "-", text.lower()).strip("-") or "other"


def _rows(rows: Iterable[tuple[str, str]]) -> str:
    """Table rows from (label, value) pairs; both are escaped here."""
    return "".join(f"<tr><th>{esc(k)}</th><td>{esc(v)}</td></tr>" for k, v in rows)


def _value(value: Any, unit: str, kind: str) -> str:
    """A popup value in its format, with its unit."""
    if kind == "text":
        text = "" if value is None or (isinstance(value, float) and math.isnan(value)) else value
        return str(text) or "–"
    if kind == "share":
        return fmt_share(value)
    shown = fmt_num(value)
    return f"{shown} {unit}".rstrip() if shown != "–" else shown


def _site_label(site_id: str, names: Mapping[str, str]) -> str:
    """``ID Name`` (or just the id when the name is empty or equal to it)."""
    name = names.get(site_id, "")
    return site_id if not name or name == site_id else f"{site_id} {name}"


def leg_popup(leg: Mapping[str, Any], names: Mapping[str, str], volume_unit: str) -> str:
    """The popup HTML of one leg: every column of its ``legs.csv`` row.

    Parameters
    ----------
    leg
        One row of ``legs.csv`` by column name.
    names
        Site names by id.
    volume_unit
        The run's volume unit.

    Returns
    -------
    str
        HTML with every user text escaped: a heading ``from -> to`` and a
        table of the leg's figures, the known columns (:data:`LEG_FIELDS`)
        first with labels and units, any other column under its own name.
    """
    one = singular(volume_unit)
    rows: list[tuple[str, str]] = []
    done = set(_LEG_HEADING)
    for column, label, unit, kind in LEG_FIELDS:
        if column in leg and column not in done:
            done.add(column)
            rows.append(
                (
                    label.format(unit=volume_unit, one=one),
                    _value(leg[column], unit.format(unit=volume_unit, one=one), kind),
                )
            )
    for column, value in leg.items():
        if column not in done:
            kind = "num" if number(value) is not None else "text"
            rows.append((str(column), _value(value, "", kind)))
    head = (
        f"{_site_label(str(leg.get('from_site', '')), names)} → "
        f"{_site_label(str(leg.get('to_site', '')), names)}"
    )
    role = ""
    if is_empty_return(leg):
        role = "<div class='hn-role'>Empty return: the vehicles run back without load</div>"
    return f"<div class='hn-pop'><h4>{esc(head)}</h4>{role}<table>{_rows(rows)}</table></div>"


def is_empty_return(leg: Mapping[str, Any]) -> bool:
    """True for a ``legs.csv`` row with dispatches but no volume (a vehicle's way back)."""
    volume = number(leg.get("volume_per_day"))
    runs = number(leg.get("dispatches"))
    return volume is not None and volume <= 0 and runs is not None and runs > 0


def _bend(
    a: tuple[float, float], b: tuple[float, float], planar: bool
) -> list[tuple[float, float]]:
    """Points of a gentle arc from ``a`` to ``b``, bowing to the right of travel.

    Coordinates are ``(vertical, horizontal)`` pairs: ``(lat, lon)``, or
    ``(y, x)`` for planar data. For latitude and longitude the bend is
    computed in a local plane where a degree of longitude is ``cos(lat)``
    as long as a degree of latitude, so arcs look alike everywhere.
    """
    (ya, xa), (yb, xb) = a, b
    scale = 1.0 if planar else max(math.cos(math.radians((ya + yb) / 2)), 0.05)
    dx, dy = (xb - xa) * scale, yb - ya
    # Control point: the middle, moved sideways by BEND x 2 of the length (the
    # arc's middle then lies BEND x length aside); (dy, -dx) points right.
    cx = (xa * scale + xb * scale) / 2 + 2 * BEND * dy
    cy = (ya + yb) / 2 - 2 * BEND * dx
    points = []
    for k in range(LEG_POINTS):
        t = k / (LEG_POINTS - 1)
        u = 1 - t
        x = u * u * xa * scale + 2 * u * t * cx + t * t * xb * scale
        y = u * u * ya + 2 * u * t * cy + t * t * yb
        points.append((round(y, 6), round(x / scale, 6)))
    return points


def _width(volume: float | None, largest: float) -> float:
    """Line width in pixels: linear in volume between the smallest and largest widths."""
    if volume is None or largest <= 0:
        return MIN_WIDTH_PX
    return round(MIN_WIDTH_PX + (MAX_WIDTH_PX - MIN_WIDTH_PX) * max(volume, 0) / largest, 2)


def _hub_radius(throughput: float | None, largest: float) -> float:
    """Hub circle radius in pixels: area grows linearly with throughput."""
    if throughput is None or largest <= 0:
        return HUB_MIN_RADIUS_PX
    share = math.sqrt(max(throughput, 0) / largest)
    return round(HUB_MIN_RADIUS_PX + (HUB_MAX_RADIUS_PX - HUB_MIN_RADIUS_PX) * share, 2)


def _records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    return [dict(zip(frame.columns, row, strict=True)) for row in frame.itertuples(index=False)]


def _hub_rows(hub: Mapping[str, Any], unit: str) -> list[tuple[str, str]]:
    per_day = f"{unit} per day"
    rows = [
        ("Throughput", _value(hub.get("throughput_per_day"), per_day, "num")),
        ("Inbound from its terminals", _value(hub.get("inbound_per_day"), per_day, "num")),
        # The sort capacity limits the inbound volume (the classic capacitated
        # model's rule), not the throughput: the labels say so, since an
        # operator would read "capacity" as everything sorted.
        ("Sort capacity, for inbound", _value(hub.get("sort_capacity_per_day"), per_day, "num")),
        ("Capacity used by inbound", fmt_share(hub.get("utilisation"))),
        ("Terminals", _value(hub.get("terminal_count"), "", "num")),
        ("Fixed cost", _value(hub.get("fixed_cost_per_day"), "per day", "num")),
        ("Handling cost", _value(hub.get("handling_cost_per_day"), "per day", "num")),
    ]
    if number(hub.get("sort_capacity_per_day")) is None:
        rows[2] = ("Sort capacity, for inbound", "unlimited")
        rows[3] = ("Capacity used by inbound", "–")
    return rows


def site_popup(
    site_id: str,
    name: str,
    hub: Mapping[str, Any] | None,
    allocated_to: Sequence[str],
    sends: float,
    receives: float,
    candidate: bool,
    volume_unit: str,
) -> str:
    """The popup HTML of one site, every user text escaped.

    Parameters
    ----------
    site_id, name
        The site.
    hub
        Its ``hubs.csv`` row when the site is an open hub, else ``None``.
    allocated_to
        Ids of the hubs the site sends through (``hubs.csv`` terminal ids).
    sends, receives
        OD volume originating and ending at the site, volume unit per day.
    candidate
        Whether the site was a candidate hub.
    volume_unit
        The run's volume unit.
    """
    if hub is not None:
        role = "Hub"
    elif candidate:
        role = "Terminal (candidate hub, not opened)"
    else:
        role = "Terminal"
    per_day = f"{volume_unit} per day"
    rows: list[tuple[str, str]] = []
    if hub is not None:
        rows += _hub_rows(hub, volume_unit)
    rows += [
        ("Sorted at hub" if len(allocated_to) < 2 else "Sorted at hubs", ", ".join(allocated_to)),
        ("Sends", _value(sends, per_day, "num")),
        ("Receives", _value(receives, per_day, "num")),
    ]
    head = site_id if not name or name == site_id else f"{site_id} · {name}"
    return (
        f"<div class='hn-pop'><h4>{esc(head)}</h4><div class='hn-role'>{esc(role)}</div>"
        f"<table>{_rows(rows)}</table></div>"
    )


def _mapping(value: Any) -> dict[str, Any]:
    """A summary value that should be a mapping, as a dict (empty when it is not one)."""
    return {str(k): v for k, v in value.items()} if isinstance(value, Mapping) else {}


#: Shown under the headline figures of every map: a map travels further than
#: its run folder (see the cautions in ``summary.json``).
MAP_CAUTION = (
    "Planning advice only. Drivers' hours, vehicle weights and dimensions are not "
    "guaranteed: check every leg and vehicle against your local regulations."
)


def _headline(run: RunData, note: str = "", *, open_box: bool = True) -> str:
    """The fixed box with the scenario's name and headline figures (``note``: HTML after)."""
    s = run.summary
    unit = run.volume_unit
    costs = _mapping(s.get("costs"))
    hubs = s.get("hubs") if isinstance(s.get("hubs"), list) else []
    legs = _mapping(s.get("legs_by_tier"))
    leg_text = ", ".join(f"{fmt_num(v)} {k}" for k, v in legs.items() if number(v))
    rows = [
        ("Cost per day", fmt_num(costs.get("total", s.get("objective")), 0)),
        ("Hubs", f"{len(hubs)}: {', '.join(map(str, hubs))}" if hubs else "none"),
        ("Status", status_text(s)),
        ("Volume", f"{fmt_num(s.get('total_volume'))} {unit} per day"),
        ("Legs", leg_text or "none"),
    ]
    if s.get("status") not in ("optimal", "time_limit") and number(s.get("gap")) is not None:
        rows.insert(3, ("Gap", fmt_gap(s.get("gap"))))  # status_text gives it for these two
    for key, label, unit_text in (
        ("vehicles", "Vehicles", ""),
        ("vehicle_km", "Vehicle-km", "per day"),
        ("avg_transit_h", "Average transit", "h"),
        ("co2e_kg", "CO2e", "kg per day"),
    ):
        if number(s.get(key)) is not None:
            rows.append((label, f"{fmt_num(s.get(key))} {unit_text}".rstrip()))
    description = s.get("description")
    desc = f"<div class='hn-desc'>{esc(description)}</div>" if description else ""
    warn = "" if s.get("status") == "optimal" else " hn-warn"
    return (
        f"<details{' open' if open_box else ''} class='hn-box hn-head{warn}' id='hn-headline'>"
        f"<summary class='hn-title'>{esc(run.scenario)}</summary>{desc}"
        f"<div class='hn-caution'>{esc(MAP_CAUTION)}</div>"
        f"<table>{_rows(rows)}</table>{note}"
        "</details>"
    )


def _line_key(colour: str, width: float, dash: str | None = None, cased: bool = False) -> str:
    dash_attr = f" stroke-dasharray='{dash}'" if dash else ""
    casing = (
        f"<line x1='2' y1='7' x2='32' y2='7' stroke='{TRUNK_CASING_COLOUR}' "
        f"stroke-width='{width + TRUNK_CASING_PX}' stroke-linecap='round'/>"
        if cased
        else ""
    )
    return (
        f"<span class='hn-k'><svg width='34' height='14' aria-hidden='true'>{casing}"
        f"<line x1='2' y1='7' x2='32' y2='7' stroke='{colour}' stroke-width='{width}' "
        f"stroke-linecap='round'{dash_attr}/></svg></span>"
    )


def _add_outlines(m: folium.Map, points: list[tuple[float, float]]) -> None:
    """Draw the countries near the sites (``(lat, lon)`` degrees) as the base map.

    Land is filled (the page's background is the sea, see :func:`build_map`),
    under every leg and site, and takes no clicks; the attribution line
    credits the data.
    """
    import folium

    lats = [p[0] for p in points]
    lons = [p[1] for p in points]
    # The page's background is the sea: countries left out would show as sea
    # once zoomed out, so the margin grows with the network's extent.
    span = max(max(lats) - min(lats), max(lons) - min(lons))
    shapes = outlines_near(
        min(lats), min(lons), max(lats), max(lons), margin_deg=max(MIN_MARGIN_DEG, span)
    )
    style = {
        "fillColor": LAND_COLOUR,
        "fillOpacity": 1.0,
        "color": BORDER_COLOUR,
        "weight": 0.8,
    }
    folium.GeoJson(
        shapes,
        name="Country outlines",
        control=False,
        style_function=lambda _feature: style,
        interactive=False,
        attribution=OUTLINES_CREDIT,
    ).add_to(m)


def _width_key(thin: float, thick: float) -> str:
    """A wedge from ``thin`` to ``thick`` pixels wide: the legend's line-width scale.

    Two separate line samples read as a word blacked out when the thick one
    fills its box; one tapering shape reads as a scale.
    """
    height = thick + 4
    mid = height / 2
    points = (
        f"2,{mid - thin / 2:.2f} 34,{mid - thick / 2:.2f} "
        f"34,{mid + thick / 2:.2f} 2,{mid + thin / 2:.2f}"
    )
    return (
        f"<span class='hn-k'><svg width='36' height='{height:g}' aria-hidden='true'>"
        f"<polygon points='{points}' fill='#555'/></svg></span>"
    )


def _circle_key(radius: float, fill: str) -> str:
    size = int(2 * radius + 4)
    return (
        f"<span class='hn-k'><svg width='{size}' height='{size}' aria-hidden='true'>"
        f"<circle cx='{size / 2}' cy='{size / 2}' r='{radius}' fill='{fill}' "
        f"fill-opacity='0.85' stroke='{OUTLINE_COLOUR}' stroke-width='1.2'/></svg></span>"
    )


def _legend(
    tiers: Sequence[str],
    classes: Mapping[str, str],
    largest_volume: float,
    largest_throughput: float,
    unit: str,
    *,
    open_box: bool = True,
    class_names: Mapping[str, str] | None = None,
    mixed: bool = False,
    empty_returns: bool = False,
    smallest_volume: float = 0.0,
) -> str:
    """The legend box: line colours, widths, site symbols and how legs are drawn.

    The width key runs from ``smallest_volume`` (the smallest leg's volume,
    when given) to ``largest_volume``.

    With vehicle classes, one entry per class (``id: name`` when the
    summary names it), a note on legs shared by classes (``mixed``) and an
    entry for empty returns (``empty_returns``).
    """
    parts = [
        f"<details{' open' if open_box else ''} class='hn-box hn-legend' id='hn-legend'>"
        "<summary><b>Legend</b></summary>"
    ]
    mid = (MIN_WIDTH_PX + MAX_WIDTH_PX) / 4
    names = class_names or {}
    if classes:
        for cls, colour in classes.items():
            name = names.get(cls, "")
            text = f"{cls}: {name}" if name and name != cls else cls
            parts.append(f"<div class='hn-row'>{_line_key(colour, mid)}{esc(text)}</div>")
        if mixed:
            parts.append(
                "<div class='hn-note'>Line colour: the vehicle class with most capacity "
                "on the leg.</div>"
            )
        for tier in tiers:
            dash = DIRECT_DASH if tier == "direct" else None
            key = _line_key("#9aa0a6", 2, dash, cased=tier == "trunk")
            parts.append(f"<div class='hn-row'>{key}{esc(TIER_WORDS.get(tier, tier))}</div>")
    else:
        for tier in tiers:
            word = TIER_WORDS.get(tier, f"{tier} legs")
            dash = DIRECT_DASH if tier == "direct" else None
            parts.append(
                f"<div class='hn-row'>{_line_key(tier_colour(tier), mid, dash)}{esc(word)}</div>"
            )
    if empty_returns:
        parts.append(
            f"<div class='hn-row'>{_line_key('#555', EMPTY_WIDTH_PX, EMPTY_DASH)}"
            "Empty return (no load)</div>"
        )
    if largest_volume > 0:
        small = smallest_volume if 0 < smallest_volume < largest_volume else largest_volume / 10
        parts.append(
            f"<div class='hn-row'>{_width_key(_width(small, largest_volume), MAX_WIDTH_PX)}"
            f"Line width by volume: {esc(fmt_num(small, 0))} (thin) to "
            f"{esc(fmt_num(largest_volume, 0))} (thick) {esc(unit)} per day</div>"
        )
    parts.append(
        f"<div class='hn-row'>{_circle_key(9, HUB_COLOUR)}Hub, area by throughput (largest "
        f"{esc(fmt_num(largest_throughput, 0))} {esc(unit)} per day)</div>"
        f"<div class='hn-row'>{_circle_key(TERMINAL_RADIUS_PX, TERMINAL_FILL)}Terminal "
        f"(named once {TERMINAL_LABELS_IN_VIEW} or fewer are in view)</div>"
        "<div class='hn-note'>Each leg bends to the right of its direction of travel, "
        "so the two directions of a lane are drawn side by side. Click a line or a "
        "circle for its figures.</div></details>"
    )
    return "".join(parts)


def _class_names(run: RunData) -> dict[str, str]:
    """Vehicle class id to name, in the order of the summary's ``freight.by_class``."""
    by_class = _mapping(_mapping(run.summary.get("freight")).get("by_class"))
    return {c: str(_mapping(rec).get("name") or "") for c, rec in by_class.items()}


def _class_colours(legs: pd.DataFrame, order: Sequence[str] = ()) -> dict[str, str]:
    """Colour of each vehicle class, when ``legs.csv`` has a ``vehicle_class`` column.

    Classes take the colours of :data:`CLASS_COLOURS` in ``order`` (the
    summary's class order, so runs on the same vehicles file colour alike),
    then in order of first appearance in ``legs.csv``; a cell naming several
    classes (``artic+van``) counts each.
    """
    if "vehicle_class" not in legs.columns:
        return {}
    seen = [c for cell in legs["vehicle_class"].astype(str) for c in cell.split("+") if c]
    classes = list(dict.fromkeys([*order, *seen]))
    return {c: CLASS_COLOURS[i % len(CLASS_COLOURS)] for i, c in enumerate(classes)}


def _runs_by_leg(
    dispatches: pd.DataFrame,
) -> dict[tuple[str, str, str], list[tuple[str, float, float]]]:
    """``dispatches.csv`` by leg: ``(tier, from, to)`` -> ``[(class, dispatches, capacity)]``.

    Capacity is dispatches x payload (dispatches alone when the payload is
    unknown); empty for a run folder without ``dispatches.csv``.
    """
    need = {"tier", "origin", "destination", "vehicle_class", "dispatches"}
    out: dict[tuple[str, str, str], list[tuple[str, float, float]]] = {}
    if not need <= set(dispatches.columns):
        return out
    for row in _records(dispatches):
        n = number(row.get("dispatches")) or 0.0
        payload = number(row.get("payload"))
        key = (str(row["tier"]), str(row["origin"]), str(row["destination"]))
        out.setdefault(key, []).append(
            (str(row["vehicle_class"]), n, n * payload if payload is not None else n)
        )
    return out


def _leg_class(
    leg: Mapping[str, Any],
    runs: Sequence[tuple[str, float, float]],
    colours: Mapping[str, str],
) -> str:
    """The class whose colour a leg takes: the one with most capacity on it.

    Without ``dispatches.csv`` rows, the first class named in the leg's
    ``vehicle_class`` cell (in colour order); ``""`` when it names none.
    """
    rank = {c: i for i, c in enumerate(colours)}
    if runs:
        return max(runs, key=lambda r: (r[2], -rank.get(r[0], len(rank))))[0]
    named = [c for c in str(leg.get("vehicle_class") or "").split("+") if c]
    return min(named, key=lambda c: rank.get(c, len(rank))) if named else ""


def _dispatch_text(runs: Sequence[tuple[str, float, float]], names: Mapping[str, str]) -> str:
    """``34 × artic (40 t articulated), 1 × van`` for a leg's popup."""
    parts = []
    for cls, n, _ in runs:
        name = names.get(cls, "")
        parts.append(f"{fmt_num(n)} × {cls}" + (f" ({name})" if name and name != cls else ""))
    return ", ".join(parts)


def _inline_map_class() -> type:
    """folium.Map without CDN links: the page inlines Leaflet itself."""
    import folium

    class _InlineMap(folium.Map):
        default_js: list[tuple[str, str]] = []
        default_css: list[tuple[str, str]] = []

    return _InlineMap


def build_map(run: RunData, *, tiles: str = DEFAULT_TILES, compact: bool = False) -> folium.Map:
    """Draw a run as a folium map.

    Parameters
    ----------
    run
        The run folder's files (:func:`hubnet.report.rundata.read_run`);
        needs a ``sites`` table with coordinates.
    tiles
        ``outline`` (default: country outlines from hubnet's own data, no
        server asked), ``light`` or ``osm`` (tiles from a tile server) or
        ``none``. Planar data (x/y) is always drawn without a base map.
    compact
        Show the headline box and the legend folded (one line each, opened
        by a click), for a map embedded in a page that gives the figures.

    Returns
    -------
    folium.Map
        The map; :func:`map_html` renders it with Leaflet inlined.

    Raises
    ------
    HubnetError
        When ``tiles`` is not one of :data:`TILES`, or no site has
        coordinates.
    """
    import folium
    from branca.element import Element
    from folium.map import CustomPane

    if tiles not in TILES:
        raise HubnetError(f"tiles: expected one of {', '.join(TILES)}, got {tiles!r}")
    sites = run.table("sites")
    where = coordinates(sites) if not sites.empty else {}
    if not where:
        raise HubnetError(
            f"run folder {str(run.folder)!r}: no site coordinates (sites.csv is missing or has "
            "no lat/lon or x/y); give a sites file with columns id, name, lat, lon"
        )
    planar = is_planar(sites)
    hubs, legs, routes = run.table("hubs"), run.table("legs"), run.table("routes")
    unit = run.volume_unit
    names = {
        str(i): str(n) for i, n in zip(sites["id"], sites.get("name", sites["id"]), strict=True)
    }
    for hub_id, name in zip(hubs.get("hub_id", []), hubs.get("name", []), strict=False):
        names.setdefault(str(hub_id), str(name))

    map_class = _inline_map_class()
    m = map_class(
        location=None,
        tiles=None,
        crs="Simple" if planar else "EPSG3857",
        control_scale=not planar,
        zoom_snap=0.25,
        zoom_delta=0.5,
    )
    if planar:
        m.options["min_zoom"] = -30
    else:
        # A tile layer would set the deepest zoom; with outlines or no base map
        # the map needs its own, or a lone site (or sites a few metres apart)
        # is fitted at an endless zoom.
        m.options["max_zoom"] = MAX_ZOOM
    # Outlines are in degrees: no base map under planar x/y.
    outlined = tiles == "outline" and not planar
    if tiles in TILE_PROVIDERS and not planar:
        folium.TileLayer(TILE_PROVIDERS[tiles], name="Base map", control=False).add_to(m)
    if outlined:
        _add_outlines(m, list(where.values()))
    CustomPane("hubnetLegs", z_index=410, pointer_events=True).add_to(m)
    CustomPane("hubnetSites", z_index=420, pointer_events=True).add_to(m)
    bind = _bind_class()

    # Legs: one layer per tier, the largest legs drawn first (lowest).
    class_names = _class_names(run)
    class_colours = _class_colours(legs, list(class_names))
    runs_by_leg = _runs_by_leg(run.table("dispatches"))
    mixed = False
    empty = 0
    volumes = [number(v) or 0.0 for v in legs.get("volume_per_day", [])]
    largest_volume = max(volumes, default=0.0)
    smallest_volume = min((v for v in volumes if v > 0), default=0.0)
    leg_records = _records(legs)
    tiers = [t for t in TIER_LAYERS if any(r.get("tier") == t for r in leg_records)]
    tiers += sorted({str(r.get("tier")) for r in leg_records} - set(tiers))
    if not tiers:
        tiers = ["trunk", "feeder"]
    missing = 0
    for tier in tiers:
        rows = [(i, r) for i, r in enumerate(leg_records) if str(r.get("tier")) == tier]
        rows.sort(key=lambda ir: -(number(ir[1].get("volume_per_day")) or 0.0))
        group = folium.FeatureGroup(name=f"{TIER_WORDS.get(tier, tier)} ({len(rows)})")
        for i, leg in rows:
            a, b = str(leg.get("from_site")), str(leg.get("to_site"))
            if a not in where or b not in where:
                missing += 1
                continue
            volume = number(leg.get("volume_per_day"))
            runs = runs_by_leg.get((tier, a, b), [])
            cls = _leg_class(leg, runs, class_colours) if class_colours else ""
            mixed = mixed or len(runs) > 1 or "+" in str(leg.get("vehicle_class") or "")
            colour = class_colours.get(cls) or tier_colour(tier)
            css = f"hubnet-leg hubnet-tier-{_slug(tier)} hubnet-row-{i}"
            if cls:
                css += f" hubnet-class-{_slug(cls)}"
            back = is_empty_return(leg)
            if back:
                empty += 1
                css += " hubnet-empty"
            path = _bend(where[a], where[b], planar)
            weight = EMPTY_WIDTH_PX if back else _width(volume, largest_volume)
            cased = bool(class_colours) and tier == "trunk" and not back
            if cased:
                casing = folium.PolyLine(
                    path,
                    color=TRUNK_CASING_COLOUR,
                    weight=weight + TRUNK_CASING_PX,
                    opacity=TRUNK_CASING_OPACITY,
                    class_name="hubnet-casing",
                )
                casing.options["pane"] = "hubnetLegs"
                casing.options["interactive"] = False  # clicks go to the leg above
                casing.add_to(group)
            line = folium.PolyLine(
                path,
                color=colour,
                weight=weight,
                # Over a casing: keep the class colour true.
                opacity=1.0
                if cased
                else (FEEDER_OPACITY_BY_CLASS if class_colours and tier == "feeder" else 0.85),
                dash_array=EMPTY_DASH if back else (DIRECT_DASH if tier == "direct" else None),
                class_name=css,
            )
            line.options["pane"] = "hubnetLegs"
            tip = (
                f"{_site_label(a, names)} → {_site_label(b, names)}: "
                f"{fmt_num(volume)} {unit} per day" + (" (empty return)" if back else "")
            )
            shown = dict(leg)
            if runs:
                shown["dispatches_by_class"] = _dispatch_text(runs, class_names)
            bind(leg_popup(shown, names, unit), esc(tip)).add_to(line)
            line.add_to(group)
        group.add_to(m)

    # Sites: hubs sized by throughput, terminals small and drawn last (on top),
    # so a terminal next to a large hub stays in sight and can be clicked.
    hub_rows = {str(h["hub_id"]): h for h in _records(hubs)} if "hub_id" in hubs else {}
    throughputs = [number(h.get("throughput_per_day")) or 0.0 for h in hub_rows.values()]
    largest_throughput = max(throughputs, default=0.0)
    allocated: dict[str, list[str]] = {}
    for hub_id, hub in hub_rows.items():
        for t in str(hub.get("terminal_ids") or "").split(";"):
            if t:
                allocated.setdefault(t, []).append(hub_id)
    sends: dict[str, float] = {}
    receives: dict[str, float] = {}
    if {"origin", "destination", "volume_per_day"} <= set(routes.columns):
        for origin, destination, volume in zip(
            routes["origin"], routes["destination"], routes["volume_per_day"], strict=True
        ):
            v = number(volume) or 0.0
            sends[str(origin)] = sends.get(str(origin), 0.0) + v
            receives[str(destination)] = receives.get(str(destination), 0.0) + v
    candidate = {}
    if "candidate_hub" in sites.columns:
        candidate = {
            str(i): str(c).strip().lower() in ("true", "1", "yes")
            for i, c in zip(sites["id"], sites["candidate_hub"], strict=True)
        }
    group = folium.FeatureGroup(name=f"Hubs ({len(hub_rows)}) and terminals")
    order = [s for s in hub_rows if s in where] + [s for s in where if s not in hub_rows]
    terminal_marks: list[tuple[str, str, str]] = []
    for site_id in order:
        site_hub = hub_rows.get(site_id)
        name = names.get(site_id, "")
        if site_hub is not None:
            radius = _hub_radius(number(site_hub.get("throughput_per_day")), largest_throughput)
            fill, cls, role = HUB_COLOUR, "hubnet-site hubnet-hub", "hub"
        else:
            radius, fill, cls, role = (
                TERMINAL_RADIUS_PX,
                TERMINAL_FILL,
                "hubnet-site hubnet-terminal",
                "terminal",
            )
        marker = folium.CircleMarker(
            where[site_id],
            radius=radius,
            color=OUTLINE_COLOUR,
            weight=1.2,
            fill_color=fill,
            fill_opacity=0.85 if site_hub is not None else 1.0,
            class_name=cls,
        )
        marker.options["pane"] = "hubnetSites"
        popup = site_popup(
            site_id,
            name,
            site_hub,
            allocated.get(site_id, []),
            float(sends.get(site_id, 0.0)),
            float(receives.get(site_id, 0.0)),
            candidate.get(site_id, False),
            unit,
        )
        if site_hub is not None:  # hubs carry a permanent name label
            bind(popup, esc(name or site_id), label_offset=radius + 1).add_to(marker)
        else:
            tip = esc(f"{_site_label(site_id, names)} ({role})")
            bind(popup, tip).add_to(marker)
            terminal_marks.append((marker.get_name(), esc(name or site_id), tip))
        marker.add_to(group)
    group.add_to(m)
    if terminal_marks:
        _terminal_labels_class()(terminal_marks, TERMINAL_LABELS_IN_VIEW).add_to(m)

    folium.LayerControl(collapsed=False, position="topright").add_to(m)
    ys = [p[0] for p in where.values()]
    xs = [p[1] for p in where.values()]
    _fit_class()([[min(ys), min(xs)], [max(ys), max(xs)]], not compact).add_to(m)

    root = m.get_root()
    root.header.add_child(Element(f"<title>{esc(run.scenario)} · hubnet map</title>"), "title")
    root.header.add_child(
        Element(f"<!-- {esc(LEAFLET_SOURCE)} -->\n<style>{leaflet_css()}</style>"),
        "leaflet_css_inline",
    )
    root.header.add_child(Element(f"<script>{leaflet_js()}</script>"), "leaflet_js_inline")
    root.header.add_child(Element(f"<style>{_STYLE}</style>"), "hubnet_style")
    if outlined:
        root.header.add_child(
            Element(f"<style>html .leaflet-container {{ background: {SEA_COLOUR}; }}</style>"),
            "hubnet_sea",
        )
    note = ""
    if missing:
        note = (
            f"<div class='hn-desc'>{missing} leg(s) not drawn: "
            "their sites have no coordinates.</div>"
        )
    legend = _legend(
        tiers,
        class_colours,
        largest_volume,
        largest_throughput,
        unit,
        open_box=not compact,
        class_names=class_names,
        mixed=mixed,
        empty_returns=empty > 0,
        smallest_volume=smallest_volume,
    )
    root.html.add_child(
        Element(
            f"<div class='hn-side' id='hn-side'>"
            f"{_headline(run, note, open_box=not compact)}{legend}</div>"
        )
    )
    return m


def map_html(run: RunData, *, tiles: str = DEFAULT_TILES, compact: bool = False) -> str:
    """The self-contained HTML page of a run's map.

    Parameters
    ----------
    run
        The run folder's files.
    tiles
        ``outline`` (default), ``light``, ``osm`` or ``none`` (see
        :func:`build_map`).
    compact
        Fold the headline box and the legend (see :func:`build_map`).

    Returns
    -------
    str
        A complete HTML document with Leaflet inlined; it loads nothing
        but the base map tiles of ``tiles="light"`` or ``"osm"``.
    """
    return str(build_map(run, tiles=tiles, compact=compact).get_root().render())


def map_from_run(
    run_dir: str | Path, *, tiles: str = DEFAULT_TILES, sites: str | Path | None = None
) -> str:
    """Read a run folder and return its map page (see :func:`map_html`).

    Parameters
    ----------
    run_dir
        The run folder.
    tiles
        ``outline`` (default), ``light``, ``osm`` or ``none``.
    sites
        A sites file to use instead of the folder's ``sites.csv``.
    """
    return map_html(read_run(run_dir, sites=sites), tiles=tiles)


def _umask() -> int:
    """The process's file-creation mask (read by setting it and setting it back)."""
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def write_text_atomic(path: str | Path, text: str, *, force: bool = False) -> Path:
    """Write a text file whole or not at all (temporary file, then rename).

    Parameters
    ----------
    path
        The file to write.
    text
        Its content, written as UTF-8.
    force
        Replace an existing file.

    Raises
    ------
    OutputExistsError
        When the file exists and ``force`` is false, or the path is a folder.
    """
    path = Path(path)
    if path.is_dir():
        raise OutputExistsError(f"{str(path)!r} is a folder: give a file name")
    if path.exists() and not force:
        raise OutputExistsError(
            f"{str(path)!r} already exists: choose another file, or replace it with --force"
        )
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        # mkstemp makes the file private (0600); give it the permissions any
        # other new file gets (0666 less the umask), so colleagues and web
        # servers can read a report or map as they read the run folder.
        os.chmod(tmp, 0o666 & ~_umask())
        with os.fdopen(fd, "wb") as fh:
            fh.write(text.encode("utf-8"))
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path


def write_map(
    run_dir: str | Path,
    out: str | Path | None = None,
    *,
    tiles: str = DEFAULT_TILES,
    sites: str | Path | None = None,
    force: bool = False,
) -> Path:
    """Draw a run folder's map and write it.

    Parameters
    ----------
    run_dir
        The run folder.
    out
        The HTML file to write; by default ``map.html`` inside the run
        folder, which is replaced (it is drawn from the folder's own files,
        so nothing is lost). Any other existing file is replaced only with
        ``force``.
    tiles, sites
        As for :func:`map_from_run`.
    force
        Replace an existing ``out`` file.

    Returns
    -------
    pathlib.Path
        The file written.
    """
    target = Path(out) if out is not None else Path(run_dir) / MAP_FILE
    own = out is None
    return write_text_atomic(
        target, map_from_run(run_dir, tiles=tiles, sites=sites), force=force or own
    )
