r"""Leaflet's JavaScript and stylesheet, inlined so pages open without a network.

A map page must render from a file on a laptop with no network (tile base
maps aside, which are asked for by name), so it cannot link Leaflet from a
CDN as folium does by default.
hubnet takes Leaflet's own release files from the PyPI package
``xstatic-leaflet`` (XStatic packaging: the upstream ``leaflet.js``,
``leaflet.css`` and ``images/`` of one Leaflet release as package data, no
code and no further dependencies), a normal dependency of hubnet. Its
Leaflet version (1.9.3) is the one folium's templates are written for.

No third-party JavaScript is kept in the hubnet repository: the files are
read from the installed package at run time, and inlined into each page:

- ``leaflet.js`` goes into a ``<script>`` element, with its source-map
  comment removed (the map file is not shipped inline) and any ``</`` made
  ``<\/`` so the text cannot close the element early;
- ``leaflet.css`` goes into a ``<style>`` element, with every
  ``url(images/...)`` it names replaced by a ``data:`` URL of that image,
  so the layer-control icon needs no file beside the page.
"""

from __future__ import annotations

import base64
import functools
import re
from pathlib import Path

from hubnet.errors import HubnetError

#: Where Leaflet's files come from, named on every page that inlines them.
LEAFLET_SOURCE = "Leaflet (BSD-2-Clause licence), from the PyPI package xstatic-leaflet"


def _leaflet_dir() -> Path:
    """Folder of the installed Leaflet release files."""
    try:
        from xstatic.pkg import leaflet  # type: ignore[import-not-found,unused-ignore]
    except ImportError as err:  # pragma: no cover - a broken install
        raise HubnetError(
            "the map needs Leaflet's files from the package xstatic-leaflet, which is not "
            "installed: pip install xstatic-leaflet"
        ) from err
    return Path(leaflet.BASE_DIR)


def leaflet_version() -> str:
    """The version of the inlined Leaflet release, for example ``1.9.3``."""
    from xstatic.pkg import leaflet  # type: ignore[import-not-found,unused-ignore]

    return str(leaflet.VERSION)


@functools.cache
def leaflet_js() -> str:
    r"""Leaflet's minified JavaScript, safe to place inside a ``<script>`` element.

    Returns
    -------
    str
        The text of ``leaflet.js`` without its ``sourceMappingURL`` comment
        and with every ``</`` written ``<\/``.
    """
    text = (_leaflet_dir() / "leaflet.js").read_text(encoding="utf-8")
    text = re.sub(r"^//# sourceMappingURL=.*$", "", text, flags=re.MULTILINE)
    return text.replace("</", "<\\/")


@functools.cache
def leaflet_css() -> str:
    """Leaflet's stylesheet with its images inlined as ``data:`` URLs.

    Returns
    -------
    str
        The text of ``leaflet.css``; every ``url(images/NAME)`` whose file
        exists becomes ``url(data:image/png;base64,...)``.
    """
    folder = _leaflet_dir()
    text = (folder / "leaflet.css").read_text(encoding="utf-8")

    def inline(match: re.Match[str]) -> str:
        image = folder / "images" / match.group(1)
        if not image.is_file():
            return match.group(0)
        data = base64.b64encode(image.read_bytes()).decode("ascii")
        return f"url(data:image/png;base64,{data})"

    text = re.sub(r"url\(\s*['\"]?images/([A-Za-z0-9_.-]+\.png)['\"]?\s*\)", inline, text)
    return text.replace("</", "<\\/")
