"""A strip plot of one estimate per person for each lagged path, as SVG text (vector).

One row per path; in each row one dot per person at their estimate with their 95% interval as
a line through it. Teal: the interval lies above 0; orange (dashed interval): below 0; grey:
it includes 0. A vertical rule marks 0. Names are escaped; the picture holds no script and no
link, so it can sit inline in a report.
"""

from __future__ import annotations

from collections.abc import Sequence
from html import escape

import numpy as np

from lagwise.models.numbers import fmt
from lagwise.models.reporting.palette import INK, MUTED, NEGATIVE, POSITIVE, RULE

WIDTH = 600
LABEL_WIDTH = 170
ROW = 34
TOP = 12
AXIS = 34
RIGHT = 16


def nice_ticks(low: float, high: float, count: int = 5) -> list[float]:
    """Round tick values from at or below `low` to at or above `high` (steps of 1, 2 or 5
    times a power of ten, about `count` of them)."""
    span = max(high - low, 1e-12)
    raw = span / max(count - 1, 1)
    power = 10 ** np.floor(np.log10(raw))
    step = next(m * power for m in (1, 2, 5, 10) if m * power >= raw)
    first, last = np.floor(low / step), np.ceil(high / step)
    return [float(round(n * step, 12)) + 0.0 for n in np.arange(first, last + 1)]


def strip_svg(paths: Sequence[tuple[str, Sequence[tuple[float, float | None, float | None]]]],
              title: str = "") -> str:
    """The strip plot of `paths`: (label, [(estimate, lower, upper) per person]) in row order.
    Interval ends may be None (no standard error): then only the dot is drawn."""
    values = [v for _label, people in paths for e, lo, hi in people
              for v in (e, lo, hi) if v is not None and np.isfinite(v)]
    low, high = (min(values + [0.0]), max(values + [0.0])) if values else (-1.0, 1.0)
    pad = 0.05 * max(high - low, 0.2)
    low, high = low - pad, high + pad
    ticks = nice_ticks(low, high)
    low, high = min(low, ticks[0]), max(high, ticks[-1])
    step = ticks[1] - ticks[0] if len(ticks) > 1 else 1.0
    decimals = max(0, int(-np.floor(np.log10(step)))) if step < 1 else 0
    left, right = LABEL_WIDTH, WIDTH - RIGHT

    def x(value: float) -> float:
        return left + (right - left) * (value - low) / (high - low)

    height = TOP + ROW * len(paths) + AXIS
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{height}" '
           f'viewBox="0 0 {WIDTH} {height}" font-family="Helvetica, Arial, sans-serif" '
           f'font-size="12" role="img">']
    if title:
        out.append(f"<title>{escape(title)}</title>")
    bottom = TOP + ROW * len(paths)
    for tick in ticks:
        rule = ' stroke-width="1.4"' if tick == 0 else ' stroke-width="0.6" stroke-dasharray="2 3"'
        out.append(f'<line x1="{x(tick):.1f}" y1="{TOP}" x2="{x(tick):.1f}" y2="{bottom}" '
                   f'stroke="{RULE}"{rule}/>')
        out.append(f'<text x="{x(tick):.1f}" y="{bottom + 16}" text-anchor="middle" '
                   f'fill="{INK}">{escape(fmt(tick, digits=decimals))}</text>')
    out.append(f'<line x1="{left}" y1="{bottom}" x2="{right}" y2="{bottom}" stroke="{INK}" '
               f'stroke-width="1"/>')
    for row, (label, people) in enumerate(paths):
        middle = TOP + ROW * row + ROW / 2
        out.append(f'<text x="{left - 10}" y="{middle + 4:.1f}" text-anchor="end" '
                   f'fill="{INK}">{escape(label)}</text>')
        for n, (estimate, lower, upper) in enumerate(people):
            y = middle + ((n % 5) - 2) * 3.0   # a small fixed jitter keeps people apart
            colour, dashed = MUTED, ""
            if lower is not None and upper is not None:
                if lower > 0:
                    colour = POSITIVE
                elif upper < 0:
                    colour, dashed = NEGATIVE, ' stroke-dasharray="3 2"'
                out.append(f'<line x1="{x(lower):.1f}" y1="{y:.1f}" x2="{x(upper):.1f}" '
                           f'y2="{y:.1f}" stroke="{colour}" stroke-opacity="0.55" '
                           f'stroke-width="1.2"{dashed}/>')
            out.append(f'<circle cx="{x(estimate):.1f}" cy="{y:.1f}" r="3" fill="{colour}"/>')
    out.append("</svg>")
    return "\n".join(out)
