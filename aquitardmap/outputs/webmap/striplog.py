"""A borehole log as a small strip diagram (inline SVG) for the map's popups.

The column is drawn to depth scale, each interval filled with its unit's colour
(:func:`aquitardmap.outputs.presentation.unit_colours`), unit codes beside the column, depth ticks
on the left and, for a hole that stopped before the aquifer, an open base marked "hole
ends" so nobody reads the bottom of the log as the bottom of the clay.

The page draws the same figure in the browser from each hole's intervals (``holes.js``,
``aqmStripSvg``), so a popup is built only when it opens; the two are kept equal
character for character (tests/test_webmap_browser.py). Numbers are written with
:func:`f1` and :func:`g6`, which JavaScript reproduces exactly.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from aquitardmap.outputs.presentation import unit_colour
from aquitardmap.outputs.webmap.markup import esc

_PART = re.compile(r"^\s*(\d+(?:\.\d+)?)\s*[–-]\s*(\d+(?:\.\d+)?)\s+(\S.*?)\s*$")


@dataclass(frozen=True)
class Interval:
    """One logged interval, depths below ground (m)."""

    top_m: float
    bottom_m: float
    unit: str


def parse_log(text: str) -> list[Interval]:
    """Intervals from the compact log text of ``boreholes.gpkg``
    (``"0.0–2.1 SAND; 2.1–14.0 UMC"``); parts that do not parse are skipped."""
    out = []
    for part in (text or "").split(";"):
        m = _PART.match(part)
        if m:
            top, bottom = float(m.group(1)), float(m.group(2))
            if bottom > top:
                out.append(Interval(top, bottom, m.group(3)))
    return out


def f1(value: float) -> str:
    """``value`` with one decimal, halves rounded up (``floor(10 v + 0.5) / 10``): the
    same digits in Python and in JavaScript (``toFixed`` and ``%.1f`` break exact ties
    differently)."""
    return f"{math.floor(value * 10 + 0.5) / 10:.1f}"


def g6(value: float) -> str:
    """``value`` as Python's ``%g`` writes it (6 significant digits, exponent outside
    1e-4..1e6); ``holes.js`` has the same rule."""
    return f"{value:g}"


def _tick_step_m(depth_m: float) -> float:
    """A round depth step giving 2 to 5 ticks."""
    for step in (1, 2, 5, 10, 20, 25, 50, 100, 200, 500, 1000):
        if depth_m / step <= 5:
            return float(step)
    return 10.0 ** math.ceil(math.log10(depth_m / 5))


def strip_log_svg(intervals: list[Interval], colours: dict[str, str], *,
                  total_depth_m: float | None, reached_aquifer: bool,
                  title: str = "", height_px: int = 160) -> str:
    """Inline SVG of a borehole log; empty string when there is no interval.

    Args:
        intervals: the log, top down (depths in m below ground).
        colours: unit code -> fill colour.
        total_depth_m: drilled depth; the column is drawn to the larger of it and the
            deepest interval.
        reached_aquifer: False marks the base as "hole ends" (the units continue below).
        title: accessible name of the figure (plain text; escaped here).
        height_px: height of the drawing.
    """
    if not intervals:
        return ""
    deepest = max(iv.bottom_m for iv in intervals)
    depth = max(deepest, total_depth_m or 0.0)
    top_px, bottom_pad = 8.0, 18.0
    col_h = height_px - top_px - bottom_pad
    x0, w = 34.0, 26.0
    scale = col_h / depth

    def y(d: float) -> float:
        return top_px + d * scale

    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" class="aqm-strip" width="120" '
             f'height="{height_px}" viewBox="0 0 120 {height_px}" role="img">',
             f"<title>{esc(title)}</title>",
             f'<rect x="{f1(x0)}" y="{f1(top_px)}" width="{f1(w)}" height="{f1(col_h)}" '
             'fill="#ffffff" stroke="#999" stroke-dasharray="2 2"/>']
    last_label_y = -100.0
    for iv in intervals:
        y0, y1 = y(iv.top_m), y(iv.bottom_m)
        parts.append(f'<rect x="{f1(x0)}" y="{f1(y0)}" width="{f1(w)}" '
                     f'height="{f1(max(y1 - y0, 0.5))}" fill="{unit_colour(colours, iv.unit)}" '
                     'stroke="#333" stroke-width="0.5"/>')
        mid = (y0 + y1) / 2 + 3
        if y1 - y0 >= 8 and mid - last_label_y >= 9:
            parts.append(f'<text x="{f1(x0 + w + 4)}" y="{f1(mid)}" font-size="9">'
                         f"{esc(iv.unit)}</text>")
            last_label_y = mid
    step = _tick_step_m(depth)
    d = 0.0
    while d <= depth + 1e-9:
        yy = y(d)
        parts.append(f'<line x1="{f1(x0 - 3)}" y1="{f1(yy)}" x2="{f1(x0)}" y2="{f1(yy)}" '
                     'stroke="#333" stroke-width="0.7"/>')
        parts.append(f'<text x="{f1(x0 - 5)}" y="{f1(yy + 3)}" font-size="8" '
                     f'text-anchor="end">{g6(d)} m</text>')
        d += step
    base = y(depth)
    if reached_aquifer:
        parts.append(f'<line x1="{f1(x0)}" y1="{f1(base)}" x2="{f1(x0 + w)}" y2="{f1(base)}" '
                     'stroke="#333" stroke-width="1.2"/>')
    else:
        zig = " ".join(f"{f1(x0 + i * w / 6)},{f1(base + (2.5 if i % 2 else -2.5))}"
                       for i in range(7))
        parts.append(f'<polyline points="{zig}" fill="none" stroke="#c0392b" '
                     'stroke-width="1.2"/>')
        parts.append(f'<text x="{f1(x0 + w / 2)}" y="{f1(base + 13)}" font-size="8.5" '
                     'fill="#c0392b" text-anchor="middle">hole ends</text>')
    parts.append("</svg>")
    return "".join(parts)
