"""Waveform plots as inline SVG for the HTML record: no scripts, no fonts, no network.

A capture of many thousand samples is reduced to one (min, max) pair per pixel column before
drawing, so every spike still shows (a plain decimation could skip it) and the file stays
small. Markers are drawn with both a dash pattern and a text label, never by colour alone.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from html import escape as _html_escape

import numpy as np

from bringup.analysis.quantities import format_quantity
from bringup.literal_text import visible

__all__ = ["Marker", "StripPoint", "envelope", "plot_svg", "strip_svg"]


def _shown(text: str) -> str:
    """Text in the SVG shown literally: escaped, acting characters made visible (titles and
    labels carry waveform names and units that a checklist or a profile supplied)."""
    return _html_escape(visible(str(text)))


@dataclass(frozen=True)
class Marker:
    """Something drawn over a plot.

    ``kind``: "level" (horizontal line at ``y``), "time" (vertical line at ``t``), "window"
    (shaded span from ``t`` to ``t_end``), "point" (dot at ``t``, ``y``). Units are those of
    the plot's axes (seconds, and the trace's unit).
    """

    kind: str
    label: str
    t: float | None = None
    y: float | None = None
    t_end: float | None = None


def envelope(
    t: np.ndarray, y: np.ndarray, columns: int, t_lo: float, t_hi: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(column, min, max) of ``y`` for each pixel column holding samples, ``t`` ascending."""
    span = t_hi - t_lo if t_hi > t_lo else 1.0
    col = np.clip(((t - t_lo) / span * columns).astype(np.int64), 0, columns - 1)
    starts = np.concatenate(([0], np.flatnonzero(np.diff(col)) + 1))
    return col[starts], np.minimum.reduceat(y, starts), np.maximum.reduceat(y, starts)


def _nice_ticks(lo: float, hi: float, count: int = 5) -> list[float]:
    """Round tick values covering [lo, hi] (steps of 1, 2 or 5 times a power of ten)."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo]
    raw = (hi - lo) / count
    power = 10 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1, 2, 5, 10) if m * power >= raw)
    first = math.ceil(lo / step - 1e-9) * step
    ticks = []
    v = first
    while v <= hi + step * 1e-9:
        ticks.append(0.0 if abs(v) < step * 1e-9 else v)
        v += step
    return ticks


def _f(x: float) -> str:
    return f"{x:.1f}"


_STYLES = {
    "level": 'stroke="#6a4c93" stroke-dasharray="6 3"',
    "time": 'stroke="#1b7f5c" stroke-dasharray="2 2"',
    "fit": 'stroke="#c0392b" stroke-dasharray="8 4" stroke-width="1.6"',
}


@dataclass(frozen=True)
class _Frame:
    """The plot area in pixels (``left``, ``top``, width ``pw``, height ``ph``) and the data
    ranges it shows (seconds across, the trace's unit up)."""

    left: float
    top: float
    pw: float
    ph: float
    t_lo: float
    t_hi: float
    y_lo: float
    y_hi: float

    def px(self, tv: float) -> float:
        return self.left + (tv - self.t_lo) / (self.t_hi - self.t_lo) * self.pw

    def py(self, yv: float) -> float:
        return self.top + (self.y_hi - yv) / (self.y_hi - self.y_lo) * self.ph


def _y_range(y: np.ndarray, markers: Sequence[Marker], overlay) -> tuple[float, float]:
    """The vertical range: the trace, the overlay and every level marker, padded by 6 %."""
    ys = [float(y.min()), float(y.max())]
    if overlay is not None:
        ys += [float(np.nanmin(overlay[1])), float(np.nanmax(overlay[1]))]
    ys += [m.y for m in markers if m.y is not None and math.isfinite(m.y)]
    y_lo, y_hi = min(ys), max(ys)
    pad = (y_hi - y_lo) * 0.06 or abs(y_hi) * 0.05 or 1.0
    return y_lo - pad, y_hi + pad


def _grid(f: _Frame, unit: str) -> list[str]:
    """Grid lines with their tick labels: the trace's unit up, seconds across."""
    parts = []
    for tick in _nice_ticks(f.y_lo, f.y_hi):
        yy = f.py(tick)
        parts.append(
            f'<line x1="{f.left}" x2="{f.left + f.pw}" y1="{_f(yy)}" y2="{_f(yy)}" stroke="#e2e0da"/>'
        )
        parts.append(
            f'<text x="{f.left - 4}" y="{_f(yy + 4)}" font-size="10" text-anchor="end">'
            f"{_shown(format_quantity(tick, unit))}</text>"
        )
    for tick in _nice_ticks(f.t_lo, f.t_hi, 6):
        xx = f.px(tick)
        parts.append(
            f'<line x1="{_f(xx)}" x2="{_f(xx)}" y1="{f.top}" y2="{f.top + f.ph}" stroke="#e2e0da"/>'
        )
        parts.append(
            f'<text x="{_f(xx)}" y="{f.top + f.ph + 14}" font-size="10" text-anchor="middle">'
            f"{_shown(format_quantity(tick, 's'))}</text>"
        )
    return parts


def _windows(f: _Frame, markers: Sequence[Marker]) -> list[str]:
    """The shaded spans of window markers, drawn under the trace."""
    parts = []
    for m in markers:
        if m.kind == "window" and m.t is not None and m.t_end is not None:
            x0, x1 = f.px(max(m.t, f.t_lo)), f.px(min(m.t_end, f.t_hi))
            parts.append(
                f'<rect x="{_f(x0)}" y="{f.top}" width="{_f(max(x1 - x0, 0.5))}" height="{f.ph}" '
                f'fill="#f3d9a4" fill-opacity="0.45" stroke="#b9892c" stroke-dasharray="4 2"/>'
            )
    return parts


def _trace(f: _Frame, t: np.ndarray, y: np.ndarray) -> str:
    """The trace: a line through every sample when there are few, else the min/max envelope of
    each pixel column (so every spike shows)."""
    columns = int(f.pw)
    if t.size <= 2 * columns:
        pts = " ".join(f"{_f(f.px(a))},{_f(f.py(b))}" for a, b in zip(t, y, strict=True))
        return f'<polyline points="{pts}" fill="none" stroke="#1f4e79" stroke-width="1.2"/>'
    col, lo, hi = envelope(t, y, columns, f.t_lo, f.t_hi)
    xs = f.left + col + 0.5
    upper = [f"{_f(a)},{_f(f.py(b))}" for a, b in zip(xs, hi, strict=True)]
    lower = [f"{_f(a)},{_f(f.py(b))}" for a, b in zip(xs[::-1], lo[::-1], strict=True)]
    return (
        f'<polygon points="{" ".join(upper + lower)}" fill="#1f4e79" fill-opacity="0.35" '
        f'stroke="#1f4e79" stroke-width="0.8"/>'
    )


def _overlay(f: _Frame, overlay: tuple[np.ndarray, np.ndarray, str], labels: _Labels) -> list[str]:
    """A fitted model drawn dashed over the trace, labelled in the lower right corner."""
    ot, oy, olabel = overlay
    ok = np.isfinite(ot) & np.isfinite(oy) & (ot >= f.t_lo) & (ot <= f.t_hi)
    pts = " ".join(f"{_f(f.px(a))},{_f(f.py(b))}" for a, b in zip(ot[ok], oy[ok], strict=True))
    corner = [(f.left + f.pw - 4, f.top + f.ph - 4 - _ROW_PX * r, "end") for r in range(4)]
    return [
        f'<polyline points="{pts}" fill="none" {_STYLES["fit"]}/>',
        labels.place(f"dashed: {olabel}", corner),
    ]


#: label font size (px) and the advance width per character it is given: 0.6 em is wider than
#: the average Helvetica or DejaVu Sans character, so an estimated box is never too small
_LABEL_PX = 10
_CHAR_PX = 0.6 * _LABEL_PX
_ROW_PX = 11


class _Labels:
    """Places marker labels so that no two overlap: each label tries its positions in order
    and takes the first whose box is clear of every label placed before it (a label with no
    clear position is left out; its line is still drawn and the caption or the close view
    names it)."""

    def __init__(self, f: _Frame) -> None:
        self.f = f
        self.boxes: list[tuple[float, float, float, float]] = []

    def place(self, text: str, spots: Sequence[tuple[float, float, str]]) -> str:
        """The ``<text>`` of ``text`` at the first clear spot (x, baseline y, anchor), or ""."""
        width = len(text) * _CHAR_PX
        f = self.f
        for x, y, anchor in spots:
            x0 = x - width if anchor == "end" else x
            box = (x0, y - _LABEL_PX * 0.8, x0 + width, y + _LABEL_PX * 0.25)
            inside = f.left <= box[0] and box[2] <= f.left + f.pw and f.top <= box[1]
            inside = inside and box[3] <= f.top + f.ph
            clear = all(
                min(box[2], b[2]) <= max(box[0], b[0]) or min(box[3], b[3]) <= max(box[1], b[1])
                for b in self.boxes
            )
            if inside and clear:
                self.boxes.append(box)
                end = ' text-anchor="end"' if anchor == "end" else ""
                return (
                    f'<text x="{_f(x)}" y="{_f(y)}" font-size="{_LABEL_PX}"{end}>'
                    f"{_shown(text)}</text>"
                )
        return ""


def _markers(f: _Frame, markers: Sequence[Marker], labels: _Labels | None = None) -> list[str]:
    """Level and time lines, points and window labels, each with its text label placed clear
    of the others (``_Labels``)."""
    parts: list[str] = []
    labels = labels or _Labels(f)
    left, top, pw, ph = f.left, f.top, f.pw, f.ph
    rows = [top + 12 + _ROW_PX * r for r in range(int((ph - 14) // _ROW_PX))]
    for m in markers:
        if m.kind == "level" and m.y is not None:
            yy = f.py(m.y)
            parts.append(
                f'<line x1="{left}" x2="{left + pw}" y1="{_f(yy)}" y2="{_f(yy)}" {_STYLES["level"]}/>'
            )
            # at the right end just above its line, else below it, else moved along leftwards
            spots = [(left + pw - 4 - 60 * k, yy + dy, "end") for k in range(6) for dy in (-3, 11)]
            parts.append(labels.place(m.label, spots))
        elif m.kind == "time" and m.t is not None:
            xx = f.px(m.t)
            parts.append(
                f'<line x1="{_f(xx)}" x2="{_f(xx)}" y1="{top}" y2="{top + ph}" {_STYLES["time"]}/>'
            )
            # right of its line in the first clear row from the top, else left of it
            spots = [(xx + 3, y, "start") for y in rows] + [(xx - 3, y, "end") for y in rows]
            parts.append(labels.place(m.label, spots))
        elif m.kind == "point" and m.t is not None and m.y is not None:
            xx, yy = f.px(m.t), f.py(m.y)
            parts.append(
                f'<circle cx="{_f(xx)}" cy="{_f(yy)}" r="3.5" fill="none" stroke="#000" stroke-width="1.2"/>'
            )
            spots = [(xx + 5, yy - 5, "start"), (xx - 5, yy - 5, "end"), (xx + 5, yy + 14, "start")]
            parts.append(labels.place(m.label, spots))
        elif m.kind == "window" and m.t is not None:
            x0 = f.px(max(m.t, f.t_lo)) + 3
            parts.append(labels.place(m.label, [(x0, top + ph - 4 - _ROW_PX * r, "start")
                                                for r in range(3)]))  # fmt: skip
    return [p for p in parts if p]


def plot_svg(
    t: Sequence[float] | np.ndarray,
    y: Sequence[float] | np.ndarray,
    *,
    title: str,
    unit: str,
    markers: Sequence[Marker] = (),
    overlay: tuple[np.ndarray, np.ndarray, str] | None = None,
    width: int = 640,
    height: int = 220,
) -> str:
    """An SVG plot of ``y`` (in ``unit``) against ``t`` (seconds) with ``markers``.

    ``overlay`` is an optional (t, y, label) curve drawn dashed over the trace (a fitted model).
    """
    t = np.asarray(t, dtype=float)
    y = np.asarray(y, dtype=float)
    keep = np.isfinite(t) & np.isfinite(y)
    t, y = t[keep], y[keep]
    left, right, top, bottom = 64, 12, 22, 34
    pw, ph = width - left - right, height - top - bottom
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" '
        f'width="{width}" height="{height}" role="img" aria-label="{_shown(title)}">',
        f"<title>{_shown(title)}</title>",
        f'<rect x="{left}" y="{top}" width="{pw}" height="{ph}" fill="#fbfaf7" stroke="#888"/>',
        f'<text x="{left}" y="14" font-size="12" font-weight="bold">{_shown(title)}</text>',
    ]
    if t.size < 2:
        parts.append(
            f'<text x="{left + 8}" y="{top + ph / 2:.1f}" font-size="12">no samples to plot</text>'
        )
        parts.append("</svg>")
        return "".join(parts)
    frame = _Frame(left, top, pw, ph, float(t[0]), float(t[-1]), *_y_range(y, markers, overlay))
    parts += _grid(frame, unit)
    parts += _windows(frame, markers)
    parts.append(_trace(frame, t, y))
    labels = _Labels(frame)
    if overlay is not None:
        parts += _overlay(frame, overlay, labels)
    parts += _markers(frame, markers, labels)
    parts.append("</svg>")
    return "".join(parts)


@dataclass(frozen=True)
class StripPoint:
    """One board on a strip plot: its value (in the strip's unit), a label (the serial) and
    whether it is flagged (drawn as a labelled square instead of a dot, not by colour alone)."""

    value: float
    label: str
    flagged: bool = False


def _strip_range(values: Sequence[float], lines: Sequence[float]) -> tuple[float, float]:
    """The value range of a strip: every point and every limit line, padded by 6 %."""
    every = [v for v in (*values, *lines) if math.isfinite(v)]
    lo, hi = min(every), max(every)
    pad = (hi - lo) * 0.06 or abs(hi) * 0.05 or 1.0
    return lo - pad, hi + pad


def strip_svg(
    points: Sequence[StripPoint],
    *,
    title: str,
    unit: str,
    lower: float | None = None,
    upper: float | None = None,
    centre: float | None = None,
    width: int = 640,
) -> str:
    """Every board of a batch on one horizontal strip (value across, in ``unit``), with the
    limits ``lower``/``upper`` as dashed lines and ``centre`` (the median) as a dotted one.
    Points are spread over a few rows so that equal values stay visible; each carries its
    label as an SVG ``<title>``, and flagged points show their label beside them."""
    left, right, top, rows, pitch = 16, 16, 34, 5, 9
    height = top + rows * pitch + 40
    pw = width - left - right
    parts = [
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" '
        f'width="{width}" height="{height}" role="img" aria-label="{_shown(title)}">',
        f"<title>{_shown(title)}</title>",
        f'<text x="{left}" y="14" font-size="12" font-weight="bold">{_shown(title)}</text>',
    ]
    values = [p.value for p in points if math.isfinite(p.value)]
    if not values:
        parts.append(f'<text x="{left}" y="{top + 12}" font-size="12">no values</text></svg>')
        return "".join(parts)
    lines = [v for v in (lower, upper) if v is not None]
    lo, hi = _strip_range(values, lines)

    def px(v: float) -> float:
        return left + (v - lo) / (hi - lo) * pw

    base = top + rows * pitch
    parts.append(
        f'<rect x="{left}" y="{top - 6}" width="{pw}" height="{rows * pitch + 6}" '
        f'fill="#fbfaf7" stroke="#888"/>'
    )
    for tick in _nice_ticks(lo, hi, 6):
        parts.append(
            f'<text x="{_f(px(tick))}" y="{base + 14}" font-size="10" text-anchor="middle">'
            f"{_shown(format_quantity(tick, unit))}</text>"
        )
    for value, name in ((lower, "min"), (upper, "max")):
        if value is not None:
            x = _f(px(value))
            parts.append(
                f'<line x1="{x}" x2="{x}" y1="{top - 10}" y2="{base}" {_STYLES["level"]}/>'
                f'<text x="{x}" y="{top - 12}" font-size="10" text-anchor="middle">{name} '
                f"{_shown(format_quantity(value, unit))}</text>"
            )
    if centre is not None and math.isfinite(centre):
        x = _f(px(centre))
        parts.append(
            f'<line x1="{x}" x2="{x}" y1="{top - 6}" y2="{base}" {_STYLES["time"]}/>'
            f'<text x="{x}" y="{base + 26}" font-size="10" text-anchor="middle">median</text>'
        )
    for i, p in enumerate(points):
        if not math.isfinite(p.value):
            continue
        x, y = px(p.value), top + (i % rows) * pitch
        tip = f"<title>{_shown(p.label)}: {_shown(format_quantity(p.value, unit))}</title>"
        if p.flagged:
            parts.append(
                f'<rect x="{_f(x - 4)}" y="{_f(y - 4)}" width="8" height="8" fill="#c0392b" '
                f'stroke="#000">{tip}</rect><text x="{_f(x + 6)}" y="{_f(y + 4)}" '
                f'font-size="10">{_shown(p.label)}</text>'
            )
        else:
            parts.append(
                f'<circle cx="{_f(x)}" cy="{_f(y)}" r="3" fill="#1f4e79" fill-opacity="0.6">'
                f"{tip}</circle>"
            )
    parts.append("</svg>")
    return "".join(parts)
