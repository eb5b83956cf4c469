"""Plain text for pages: escaping, number formats, status wording and colours.

Every piece of text that came from a user's file (site ids and names,
scenario names, descriptions) reaches a page only through :func:`esc`,
which escapes ``& < > " '`` so the text shows literally and never runs.

Colours are from the Okabe–Ito palette (Okabe and Ito, 2008, "Color
Universal Design"), chosen because readers with the common forms of colour
blindness can tell them apart; the assignment to tiers, hubs and runs is
hubnet's own.
"""

from __future__ import annotations

import html
import math
from collections.abc import Mapping
from typing import Any

#: Line colour of each tier when the legs carry no vehicle class.
TIER_COLOURS: dict[str, str] = {
    "trunk": "#0072B2",  # blue
    "feeder": "#E69F00",  # orange
    "direct": "#CC79A7",  # reddish purple
}
#: Colour of a tier hubnet does not know yet.
OTHER_TIER_COLOUR = "#56B4E9"  # sky blue
#: Fill of a hub circle.
HUB_COLOUR = "#009E73"  # bluish green
#: Outline of hubs and terminals.
OUTLINE_COLOUR = "#222222"
#: Fill of a terminal.
TERMINAL_FILL = "#FFFFFF"
#: Line colours of vehicle classes, in order of first appearance (hub green left out).
CLASS_COLOURS: tuple[str, ...] = (
    "#0072B2",
    "#E69F00",
    "#CC79A7",
    "#56B4E9",
    "#D55E00",
    "#000000",
    "#F0E442",
)
#: Colours of runs in the report's charts, first run first: Paul Tol's
#: colour-blind-safe "muted" scheme, none of them a tier's, a class's or the
#: hubs' colour on the maps of the same page.
RUN_COLOURS: tuple[str, ...] = (
    "#332288",  # indigo
    "#CC6677",  # rose
    "#117733",  # green
    "#999933",  # olive
    "#882255",  # wine
    "#44AA99",  # teal
    "#AA4499",  # purple
)

#: Singular of each volume unit, for "currency per pallet".
_SINGULAR = {"units": "unit", "parcels": "parcel", "pallets": "pallet", "tonnes": "tonne"}


def esc(value: object) -> str:
    """Text of any value, HTML-escaped (``& < > " '``) for element text and attributes."""
    return html.escape("" if value is None else str(value), quote=True)


def singular(unit: str) -> str:
    """The singular of a volume unit: ``pallets`` -> ``pallet``; ``m3`` stays ``m3``."""
    return _SINGULAR.get(unit, unit)


def number(value: Any) -> float | None:
    """A finite float, or ``None`` for None, NaN, infinity and text that is no number."""
    if value is None or isinstance(value, bool):
        return None
    try:
        x = float(value)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def fmt_num(value: Any, decimals: int | None = None) -> str:
    """A number with thousands separators; ``–`` when unknown.

    Parameters
    ----------
    value
        The number (anything :func:`number` accepts).
    decimals
        Decimal places; by default 0 for whole numbers and for magnitudes of
        1,000 or more, 1 from 100, 2 from 1 and 3 below 1.

    Examples
    --------
    >>> fmt_num(1171.0), fmt_num(12.345), fmt_num(None), fmt_num(0.5, 1)
    ('1,171', '12.35', '–', '0.5')
    """
    x = number(value)
    if x is None:
        return "–"
    if decimals is None:
        size = abs(x)
        if x == round(x) or size >= 1000:
            decimals = 0
        elif size >= 100:
            decimals = 1
        elif size >= 1:
            decimals = 2
        else:
            decimals = 3
    return f"{x:,.{decimals}f}"


def fmt_share(value: Any, decimals: int = 1) -> str:
    """A fraction as a percentage: ``0.4175`` -> ``41.8 %``; ``–`` when unknown."""
    x = number(value)
    return "–" if x is None else f"{100 * x:.{decimals}f} %"


def fmt_gap(value: Any) -> str:
    """A relative gap as a percentage in fixed point, never in exponent form.

    ``0.0123`` -> ``1.23 %``, ``0.000123`` -> ``0.0123 %``, ``6e-7`` ->
    ``0.0001 %`` (as the terminal prints it), below half of that ``< 0.0001 %``.
    """
    x = number(value)
    if x is None:
        return "unknown"
    if abs(x) < 1e-9:
        return "0 %"
    pct = 100 * x
    if abs(pct) < 0.00005:
        return "< 0.0001 %"
    if abs(pct) < 0.01:
        return f"{pct:.4f} %"
    return f"{float(f'{pct:.3g}'):g} %"


def fmt_signed(value: Any, decimals: int | None = None) -> str:
    """A difference with its sign: ``+1,234``, ``−56``, ``0``; ``–`` when unknown."""
    x = number(value)
    if x is None:
        return "–"
    if x == 0:
        return "0"
    text = fmt_num(abs(x), decimals)
    return ("+" if x > 0 else "−") + text


def status_text(summary: Mapping[str, Any]) -> str:
    """The solver status in plain words, for headline boxes.

    Examples
    --------
    >>> status_text({"status": "optimal", "gap": 0.0})
    'optimal (proven)'
    >>> status_text({"status": "optimal", "gap": 0.0099})
    'optimal within 0.99 % (proven)'
    >>> status_text({"status": "time_limit", "gap": 0.0123})
    'time limit reached: not proven optimal, gap 1.23 %'
    """
    status = str(summary.get("status") or "unknown")
    if status == "optimal":
        gap = summary.get("gap")
        if isinstance(gap, int | float) and gap > 1e-6:
            return f"optimal within {fmt_gap(gap)} (proven)"
        return "optimal (proven)"
    if status == "time_limit":
        return f"time limit reached: not proven optimal, gap {fmt_gap(summary.get('gap'))}"
    return status.replace("_", " ")


def tier_colour(tier: str) -> str:
    """Line colour of a tier."""
    return TIER_COLOURS.get(tier, OTHER_TIER_COLOUR)
