"""Every board of a batch on one strip of the terminal: braille dots against the limits.

The same braille cells as the waveform plot (``waveform_plot._DOT_BITS``: 2 x 4 dots per
cell), used differently: the value runs across (two dots per cell), and the four dot rows of
a cell are four lanes, board i on lane i mod 4, so boards with equal values stay apart. An
outlier is not a dot but ``◆`` (told by shape and by its name in the legend, not by colour),
a limit is ``┃`` and the median ``┆`` where no board sits. Under the strip a row names the
ends of the scale and the limits.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from rich.text import Text

from bringup.analysis.quantities import format_quantity
from bringup.tui.widgets.waveform_plot import _DOT_BITS

__all__ = ["OUTLIER_MARK", "strip_rows", "strip_text"]

OUTLIER_MARK = "◆"
LIMIT_MARK = "┃"
MEDIAN_MARK = "┆"


def _scale(values: Sequence[float], lines: Sequence[float]) -> tuple[float, float]:
    every = [v for v in (*values, *lines) if math.isfinite(v)]
    lo, hi = min(every), max(every)
    pad = (hi - lo) * 0.04 or abs(hi) * 0.05 or 1.0
    return lo - pad, hi + pad


def _place(row: list[str], at: int, text: str) -> None:
    """Write ``text`` into ``row`` from cell ``at`` where it fits over blanks only."""
    if len(text) > len(row):
        return
    at = max(0, min(at, len(row) - len(text)))
    if any(c != " " for c in row[at : at + len(text)]):
        return
    row[at : at + len(text)] = list(text)


def strip_rows(
    points: Sequence[tuple[float, bool]],
    *,
    unit: str,
    lower: float | None,
    upper: float | None,
    centre: float | None,
    width: int,
) -> tuple[str, str]:
    """(strip row, scale row), each ``width`` cells: ``points`` are (value, flagged) pairs in
    the batch's order; values in ``unit`` (SI)."""
    width = max(width, 12)
    values = [v for v, _ in points if math.isfinite(v)]
    if not values:
        return "no values".ljust(width), " " * width
    limits = [v for v in (lower, upper) if v is not None]
    lo, hi = _scale(values, limits)

    def dot(v: float) -> int:  # dot column, 0 .. 2 width - 1
        return min(max(int((v - lo) / (hi - lo) * (2 * width - 1) + 0.5), 0), 2 * width - 1)

    bits = np.zeros(width, dtype=np.uint16)
    chars = [" "] * width
    for i, (v, flagged) in enumerate(points):
        if not math.isfinite(v):
            continue
        x = dot(v)
        if flagged:
            chars[x // 2] = OUTLIER_MARK
        else:
            bits[x // 2] |= _DOT_BITS[i % 4][x % 2]
    for c in range(width):
        if chars[c] == " " and bits[c]:
            chars[c] = chr(0x2800 + int(bits[c]))
    scale = [" "] * width
    marks = [(v, LIMIT_MARK, n) for v, n in ((lower, "min"), (upper, "max")) if v is not None]
    if centre is not None and math.isfinite(centre):
        marks.append((centre, MEDIAN_MARK, ""))
    for value, mark, name in marks:
        c = dot(value) // 2
        if chars[c] == " ":
            chars[c] = mark
        if name:
            label = f"{name} {format_quantity(value, unit, 3)}"
            _place(scale, c - len(label) // 2, label)
    _place(scale, 0, format_quantity(lo, unit, 3))
    end = format_quantity(hi, unit, 3)
    _place(scale, width - len(end), end)
    return "".join(chars), "".join(scale)


def strip_text(
    title: str,
    points: Sequence[tuple[float, bool]],
    flagged_names: Sequence[str],
    *,
    unit: str,
    lower: float | None,
    upper: float | None,
    centre: float | None,
    width: int,
) -> Text:
    """Three lines for one metric: its title (with the outliers' names, given already made
    visible), the strip and the scale."""
    strip, scale = strip_rows(
        points, unit=unit, lower=lower, upper=upper, centre=centre, width=width
    )
    head = Text(title, style="bold", end="")
    if flagged_names:
        head.append(f"   {OUTLIER_MARK} outlier: " + ", ".join(flagged_names))
    out = Text(end="")
    out.append_text(head)
    out.append("\n" + strip + "\n", style="")
    out.append(scale, style="dim")
    return out
