"""Country outlines for maps drawn with no tile server (``tiles="outline"``).

The outlines are Natural Earth's 1:110m "Admin 0 - Countries" (public
domain, naturalearthdata.com), as shipped in the pyogrio package's test
data (``naturalearth_lowres``), with the country name kept and coordinates
rounded to 0.01 degree (about 1 km; the 1:110m lines themselves are far
coarser). They give a map its coasts and borders with no request to any
server: the page works offline and tells no tile provider which area is
being planned.
"""

from __future__ import annotations

import json
from functools import cache
from importlib import resources
from typing import Any

#: Package data file holding the outlines (GeoJSON, WGS84 degrees).
OUTLINES_FILE = "countries_110m.geojson"
#: Least margin (degrees) around the sites within which countries are drawn.
MIN_MARGIN_DEG = 6.0
#: Shown in the map's attribution line.
OUTLINES_CREDIT = "Country outlines: Natural Earth (public domain)"


@cache
def _polygons() -> tuple[tuple[tuple[float, float, float, float], str, Any], ...]:
    """Every polygon of every country, with its box, its country and its rings.

    Each entry: bounding box ``(south, west, north, east)`` in degrees, the
    country's name, and the polygon's rings (``[lon, lat]`` pairs).
    """
    text = resources.files("hubnet.report").joinpath("data", OUTLINES_FILE).read_text("utf-8")
    out = []
    for feature in json.loads(text)["features"]:
        geometry = feature["geometry"]
        parts = (
            geometry["coordinates"]
            if geometry["type"] == "MultiPolygon"
            else [geometry["coordinates"]]
        )
        for rings in parts:
            lons = [float(p[0]) for p in rings[0]]
            lats = [float(p[1]) for p in rings[0]]
            box = (min(lats), min(lons), max(lats), max(lons))
            out.append((box, str(feature["properties"].get("name", "")), rings))
    return tuple(out)


def outlines_near(
    south: float, west: float, north: float, east: float, margin_deg: float = MIN_MARGIN_DEG
) -> dict[str, Any]:
    """The country polygons whose bounding box meets the given box widened by ``margin_deg``.

    Bounds in degrees (WGS84). Returns a GeoJSON ``FeatureCollection``, one
    ``MultiPolygon`` feature per country with its ``name`` (only the
    country's polygons near the box: metropolitan France without French
    Guiana); empty when no country is near (open sea).
    """
    s, w = south - margin_deg, west - margin_deg
    n, e = north + margin_deg, east + margin_deg
    near: dict[str, list[Any]] = {}
    for (ps, pw, pn, pe), name, rings in _polygons():
        if ps <= n and pn >= s and pw <= e and pe >= w:
            near.setdefault(name, []).append(rings)
    features = [
        {
            "type": "Feature",
            "properties": {"name": name},
            "geometry": {"type": "MultiPolygon", "coordinates": parts},
        }
        for name, parts in near.items()
    ]
    return {"type": "FeatureCollection", "features": features}


__all__ = ["MIN_MARGIN_DEG", "OUTLINES_CREDIT", "OUTLINES_FILE", "outlines_near"]
