"""Charts for the manager report, drawn as inline SVG text (no plotting library).

Two charts compare runs: :func:`grouped_bars` (cost per day by tier, one bar
per run in each group) and :func:`rank_size_plot` (leg volume against rank
on log–log axes, one series per run). :func:`frontier_plot` draws a
cost–time frontier (cost per day against average transit time, one point
per plan). Each returns an ``<svg>`` element as a string, sized by a
``viewBox`` so it scales with the page; every text in it is escaped.
Colours come from :data:`hubnet.report.fmt.RUN_COLOURS`.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from hubnet.report.fmt import RUN_COLOURS, esc, fmt_num

_FONT = (
    "font-family='system-ui, -apple-system, Segoe UI, Roboto, Noto Sans, DejaVu Sans, sans-serif'"
)


def nice_ticks(top: float, count: int = 5) -> list[float]:
    """Round tick values from 0 to at least ``top``: steps of 1, 2 or 5 times a power of 10.

    Examples
    --------
    >>> nice_ticks(460_000)
    [0.0, 100000.0, 200000.0, 300000.0, 400000.0, 500000.0]
    >>> nice_ticks(0)
    [0.0, 1.0]
    """
    if not top > 0 or not math.isfinite(top):
        return [0.0, 1.0]
    raw = top / count
    power = 10 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1, 2, 5, 10) if m * power >= raw)
    n = math.ceil(top / step - 1e-9)
    return [float(i * step) for i in range(n + 1)]


def _colour(i: int) -> str:
    return RUN_COLOURS[i % len(RUN_COLOURS)]


def grouped_bars(
    groups: Sequence[str],
    series: Sequence[str],
    values: Sequence[Sequence[float | None]],
    *,
    title: str,
    unit: str = "",
) -> str:
    """Horizontal bars: for each group, one bar per series.

    Parameters
    ----------
    groups
        Group labels (for example tiers), top to bottom.
    series
        Series labels (for example runs), each in its own colour.
    values
        ``values[s][g]``: the value of series ``s`` in group ``g`` (``None``
        draws no bar and writes ``–``).
    title
        Accessible title of the chart.
    unit
        Unit written after the axis numbers' caption.

    Returns
    -------
    str
        An ``<svg>`` element.
    """
    bar, gap, label_w, right, top_pad, axis_h = 16, 14, 130, 70, 8, 34
    plot_w = 380
    width = label_w + plot_w + right
    group_h = len(series) * bar + gap
    height = top_pad + len(groups) * group_h + axis_h
    finite = [v for row in values for v in row if v is not None and math.isfinite(v)]
    ticks = nice_ticks(max([0.0, *finite]))
    scale = plot_w / ticks[-1]
    out = [
        f"<svg class='chart' viewBox='0 0 {width} {height}' role='img' {_FONT} "
        f"font-size='12' xmlns='http://www.w3.org/2000/svg'><title>{esc(title)}</title>"
    ]
    axis_y = top_pad + len(groups) * group_h
    for t in ticks:
        x = label_w + t * scale
        out.append(
            f"<line x1='{x:.1f}' y1='{top_pad}' x2='{x:.1f}' y2='{axis_y}' stroke='#e3e6ea'/>"
            f"<text x='{x:.1f}' y='{axis_y + 15}' text-anchor='middle' fill='#4a4f57'>"
            f"{esc(fmt_num(t, 0))}</text>"
        )
    out.append(
        f"<text x='{label_w + plot_w / 2}' y='{axis_y + 30}' text-anchor='middle' "
        f"fill='#4a4f57'>{esc(unit)}</text>"
    )
    for g, group in enumerate(groups):
        y0 = top_pad + g * group_h
        out.append(
            f"<text x='{label_w - 8}' y='{y0 + len(series) * bar / 2 + 4:.1f}' "
            f"text-anchor='end' fill='#1a1a1a'>{esc(group)}</text>"
        )
        for s, name in enumerate(series):
            v = values[s][g]
            y = y0 + s * bar
            if v is None or not math.isfinite(v):
                out.append(f"<text x='{label_w + 4}' y='{y + bar - 4}' fill='#4a4f57'>–</text>")
                continue
            w = max(v, 0.0) * scale
            out.append(
                f"<rect x='{label_w}' y='{y + 1}' width='{w:.1f}' height='{bar - 2}' "
                f"fill='{_colour(s)}'><title>{esc(name)}: {esc(fmt_num(v, 0))}</title></rect>"
                f"<text x='{label_w + w + 4:.1f}' y='{y + bar - 4}' fill='#1a1a1a'>"
                f"{esc(fmt_num(v, 0))}</text>"
            )
    out.append(
        f"<line x1='{label_w}' y1='{top_pad}' x2='{label_w}' y2='{axis_y}' stroke='#888'/></svg>"
    )
    return "".join(out)


def _log_ticks(low: float, high: float) -> list[float]:
    """Powers of ten covering ``[low, high]`` (both > 0)."""
    a = math.floor(math.log10(low))
    b = math.ceil(math.log10(high))
    if a == b:
        b += 1
    return [10.0**k for k in range(a, b + 1)]


def rank_size_plot(
    series: Sequence[str],
    volumes: Sequence[Sequence[float]],
    *,
    title: str,
    unit: str,
) -> str:
    """Leg volume against rank, both on log scales, one series per run.

    Parameters
    ----------
    series
        Series labels (runs).
    volumes
        For each series, leg volumes from the largest down (rank 1 first);
        zero and negative volumes are left out (they have no logarithm).
    title
        Accessible title.
    unit
        Volume unit for the vertical axis caption.

    Returns
    -------
    str
        An ``<svg>`` element; a straight falling line means volume falls as a
        power of rank.
    """
    left, right, top, bottom = 62, 14, 10, 44
    plot_w, plot_h = 440, 250
    width, height = left + plot_w + right, top + plot_h + bottom
    positive = [[v for v in vs if v > 0 and math.isfinite(v)] for vs in volumes]
    all_v = [v for vs in positive for v in vs]
    out = [
        f"<svg class='chart' viewBox='0 0 {width} {height}' role='img' {_FONT} "
        f"font-size='12' xmlns='http://www.w3.org/2000/svg'><title>{esc(title)}</title>"
    ]
    if not all_v:
        middle = f"x='{width / 2}' y='{height / 2}' text-anchor='middle'"
        out.append(f"<text {middle}>no leg volume</text></svg>")
        return "".join(out)
    xt = _log_ticks(1, max(len(vs) for vs in positive))
    yt = _log_ticks(min(all_v), max(all_v))
    lx0, lx1 = math.log10(xt[0]), math.log10(xt[-1])
    ly0, ly1 = math.log10(yt[0]), math.log10(yt[-1])

    def px(rank: float) -> float:
        return left + (math.log10(rank) - lx0) / (lx1 - lx0) * plot_w

    def py(v: float) -> float:
        return top + plot_h - (math.log10(v) - ly0) / (ly1 - ly0) * plot_h

    for t in xt:
        x = px(t)
        out.append(
            f"<line x1='{x:.1f}' y1='{top}' x2='{x:.1f}' y2='{top + plot_h}' stroke='#e3e6ea'/>"
            f"<text x='{x:.1f}' y='{top + plot_h + 15}' text-anchor='middle' fill='#4a4f57'>"
            f"{esc(fmt_num(t, 0))}</text>"
        )
    for t in yt:
        y = py(t)
        out.append(
            f"<line x1='{left}' y1='{y:.1f}' x2='{left + plot_w}' y2='{y:.1f}' stroke='#e3e6ea'/>"
            f"<text x='{left - 6}' y='{y + 4:.1f}' text-anchor='end' fill='#4a4f57'>"
            f"{esc(fmt_num(t))}</text>"
        )
    out.append(
        f"<text x='{left + plot_w / 2}' y='{height - 6}' text-anchor='middle' fill='#4a4f57'>"
        "rank of the leg by volume (1 = largest), log scale</text>"
        f"<text transform='translate(14 {top + plot_h / 2}) rotate(-90)' text-anchor='middle' "
        f"fill='#4a4f57'>{esc(unit)} per day on the leg, log scale</text>"
        f"<rect x='{left}' y='{top}' width='{plot_w}' height='{plot_h}' fill='none' "
        "stroke='#888'/>"
    )
    for s, vs in enumerate(positive):
        colour = _colour(s)
        points = " ".join(f"{px(r):.1f},{py(v):.1f}" for r, v in enumerate(vs, start=1))
        out.append(
            f"<polyline points='{points}' fill='none' stroke='{colour}' stroke-width='1.5' "
            f"stroke-opacity='0.7'/>"
        )
        for r, v in enumerate(vs, start=1):
            out.append(
                f"<circle cx='{px(r):.1f}' cy='{py(v):.1f}' r='2.6' fill='{colour}'>"
                f"<title>{esc(series[s])}: rank {r}, {esc(fmt_num(v))}</title></circle>"
            )
    out.append("</svg>")
    return "".join(out)


def swatch(i: int) -> str:
    """A small square in the colour of series ``i``, for HTML legends."""
    return (
        f"<svg width='12' height='12' aria-hidden='true'><rect width='12' height='12' "
        f"fill='{_colour(i)}'/></svg>"
    )


def range_ticks(low: float, high: float, count: int = 5) -> list[float]:
    """Round tick values covering ``[low, high]``: steps of 1, 2 or 5 times a power of 10.

    Unlike :func:`nice_ticks` the axis need not start at 0, so a narrow
    range (transit times from 20 h to 23 h) fills the plot.

    Examples
    --------
    >>> range_ticks(20.3, 23.1)
    [20.0, 21.0, 22.0, 23.0, 24.0]
    >>> range_ticks(5.0, 5.0)
    [4.0, 4.5, 5.0, 5.5, 6.0]
    """
    if not (math.isfinite(low) and math.isfinite(high)):
        return [0.0, 1.0]
    if high < low:
        low, high = high, low
    if high - low < 1e-9 * max(1.0, abs(high)):
        pad = max(abs(high) * 0.1, 1.0)
        low, high = low - pad, high + pad
    raw = (high - low) / count
    power = 10 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1, 2, 5, 10) if m * power >= raw)
    first = math.floor(low / step + 1e-9)
    last = math.ceil(high / step - 1e-9)
    return [round(i * step, 12) for i in range(first, last + 1)]


def frontier_plot(
    transit_h: Sequence[float],
    cost: Sequence[float],
    labels: Sequence[str],
    efficient: Sequence[bool],
    *,
    title: str,
    names: Sequence[str] | None = None,
    series: Sequence[int | None] | None = None,
) -> str:
    """Cost per day against average transit time, one point per plan.

    The efficient points (no other plan is both cheaper and faster) are
    joined by a line from the cheapest to the fastest; the others are drawn
    as hollow grey circles.

    Parameters
    ----------
    transit_h
        Volume-weighted average transit time of each plan, hours.
    cost
        Cost of each plan, currency per day.
    labels
        Short label of each point (for example ``1``), written beside it.
    efficient
        Whether each point is on the frontier.
    title
        Accessible title of the chart.
    names
        Optional longer name of each point (``cheapest``, ``fastest``), written
        under its label; empty strings write nothing.
    series
        Optional report run index of each point: the point is drawn in that
        run's colour (as in the report's other charts); ``None`` draws it in
        the neutral colour.

    Returns
    -------
    str
        An ``<svg>`` element; without points, one saying so.
    """
    left, right, top, bottom = 78, 24, 14, 46
    plot_w, plot_h = 440, 250
    width, height = left + plot_w + right, top + plot_h + bottom
    out = [
        f"<svg class='chart' viewBox='0 0 {width} {height}' role='img' {_FONT} "
        f"font-size='12' xmlns='http://www.w3.org/2000/svg'><title>{esc(title)}</title>"
    ]
    pts = [
        (i, float(x), float(y))
        for i, (x, y) in enumerate(zip(transit_h, cost, strict=True))
        if math.isfinite(x) and math.isfinite(y)
    ]
    if not pts:
        middle = f"x='{width / 2}' y='{height / 2}' text-anchor='middle'"
        out.append(f"<text {middle}>no plan on the frontier</text></svg>")
        return "".join(out)
    xs, ys = [p[1] for p in pts], [p[2] for p in pts]
    pad_x, pad_y = 0.06 * (max(xs) - min(xs)), 0.06 * (max(ys) - min(ys))
    xt = range_ticks(min(xs) - pad_x, max(xs) + pad_x)
    # costs are not negative: the padding stops at 0 (a trial's axis, padded
    # below a 0.35 million cheapest plan on a 10.7 million range, began at -5 million)
    y_low = min(ys) - pad_y
    if min(ys) >= 0:
        y_low = max(y_low, 0.0)
    yt = range_ticks(y_low, max(ys) + pad_y)
    x_dec = max(0, -math.floor(math.log10(xt[1] - xt[0]) + 1e-9))
    y_dec = max(0, -math.floor(math.log10(yt[1] - yt[0]) + 1e-9))

    def px(x: float) -> float:  # faster to the right: cost rises as time is bought
        return left + (xt[-1] - x) / (xt[-1] - xt[0]) * plot_w

    def py(y: float) -> float:
        return top + plot_h - (y - yt[0]) / (yt[-1] - yt[0]) * plot_h

    for t in xt:
        x = px(t)
        out.append(
            f"<line x1='{x:.1f}' y1='{top}' x2='{x:.1f}' y2='{top + plot_h}' stroke='#e3e6ea'/>"
            f"<text x='{x:.1f}' y='{top + plot_h + 15}' text-anchor='middle' fill='#4a4f57'>"
            f"{esc(fmt_num(t, x_dec))}</text>"
        )
    for t in yt:
        y = py(t)
        out.append(
            f"<line x1='{left}' y1='{y:.1f}' x2='{left + plot_w}' y2='{y:.1f}' stroke='#e3e6ea'/>"
            f"<text x='{left - 6}' y='{y + 4:.1f}' text-anchor='end' fill='#4a4f57'>"
            f"{esc(fmt_num(t, y_dec))}</text>"
        )
    out.append(
        f"<text x='{left + plot_w / 2}' y='{height - 8}' text-anchor='middle' fill='#4a4f57'>"
        "average transit time, hours (volume-weighted; faster to the right)</text>"
        f"<text transform='translate(14 {top + plot_h / 2}) rotate(-90)' text-anchor='middle' "
        "fill='#4a4f57'>cost per day</text>"
        f"<rect x='{left}' y='{top}' width='{plot_w}' height='{plot_h}' fill='none' "
        "stroke='#888'/>"
    )
    line = sorted((p for p in pts if efficient[p[0]]), key=lambda p: (-p[1], p[2]))
    if len(line) > 1:
        points = " ".join(f"{px(x):.1f},{py(y):.1f}" for _, x, y in line)
        out.append(f"<polyline points='{points}' fill='none' stroke='#4a4f57' stroke-width='1.5'/>")
    for i, x, y in pts:
        run = series[i] if series is not None else None
        colour = _colour(run) if run is not None else "#4a4f57"
        name = names[i] if names is not None else ""
        tip = f"{labels[i]}{f' ({name})' if name else ''}: cost {fmt_num(y)} per day, "
        tip += f"average transit {fmt_num(x)} h"
        if not efficient[i]:
            tip += ", not on the frontier"
        shape = (
            f"fill='{colour}'"
            if efficient[i]
            else "fill='#fff' stroke='#9aa0a6' stroke-width='1.5'"
        )
        cx, cy = px(x), py(y)
        out.append(
            f"<circle cx='{cx:.1f}' cy='{cy:.1f}' r='{5 if run is not None else 4}' {shape}>"
            f"<title>{esc(tip)}</title></circle>"
        )
        # labels to the right, or to the left near the right edge
        anchor, dx = ("end", -8) if cx > left + plot_w - 70 else ("start", 8)
        out.append(
            f"<text x='{cx + dx:.1f}' y='{cy - 4:.1f}' text-anchor='{anchor}' "
            f"fill='{'#1a1a1a' if efficient[i] else '#9aa0a6'}'>{esc(labels[i])}</text>"
        )
        if name:
            out.append(
                f"<text x='{cx + dx:.1f}' y='{cy + 10:.1f}' text-anchor='{anchor}' "
                f"fill='#4a4f57' font-size='11'>{esc(name)}</text>"
            )
    out.append("</svg>")
    return "".join(out)
