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


def _overlay(f: _Frame, overlay: tuple[np.ndarray, np.ndarray, str]) -> list[str]:
    """A fitted model drawn dashed over the trace, labelled in the lower right corner."""
    ot, oy, olabel = overlay
    ok = np.isfinite(ot) & np.isfinite(oy) & (ot >= f.t_lo) & (ot <= f.t_hi)
    pts = " ".join(f"{_f(f.px(a))},{_f(f.py(b))}" for a, b in zip(ot[ok], oy[ok], strict=True))
    return [
        f'<polyline points="{pts}" fill="none" {_STYLES["fit"]}/>',
        f'<text x="{f.left + f.pw - 4}" y="{f.top + f.ph - 4}" font-size="10" text-anchor="end">'
        f"dashed: {_shown(olabel)}</text>",
    ]


def _markers(f: _Frame, markers: Sequence[Marker]) -> list[str]:
    """Level and time lines, points and window labels, each with its text label."""
    parts: list[str] = []
    placed: list[float] = []
    left, top, pw, ph = f.left, f.top, f.pw, f.ph
    for i, m in enumerate(markers):
        label = _shown(m.label)
        if m.kind == "level" and m.y is not None:
            yy = f.py(m.y)
            parts.append(
                f'<line x1="{left}" x2="{left + pw}" y1="{_f(yy)}" y2="{_f(yy)}" {_STYLES["level"]}/>'
            )
            # Labels of nearby levels (high, 90 %) would overprint: move each one along.
            slot = sum(1 for y0 in placed if abs(y0 - yy) < 11)
            placed.append(yy)
            parts.append(
                f'<text x="{left + pw - 4 - 56 * slot}" y="{_f(yy - 3)}" font-size="10" '
                f'text-anchor="end">{label}</text>'
            )
        elif m.kind == "time" and m.t is not None:
            xx = f.px(m.t)
            parts.append(
                f'<line x1="{_f(xx)}" x2="{_f(xx)}" y1="{top}" y2="{top + ph}" {_STYLES["time"]}/>'
            )
            parts.append(
                f'<text x="{_f(xx + 3)}" y="{top + 12 + 11 * (i % 3)}" font-size="10">{label}</text>'
            )
        elif m.kind == "point" and m.t is not None and m.y is not None:
            xx, yy = f.px(m.t), f.py(m.y)
            parts.append(
                f'<circle cx="{_f(xx)}" cy="{_f(yy)}" r="3.5" fill="none" stroke="#000" stroke-width="1.2"/>'
            )
            parts.append(f'<text x="{_f(xx + 5)}" y="{_f(yy - 5)}" font-size="10">{label}</text>')
        elif m.kind == "window" and m.t is not None:
            parts.append(
                f'<text x="{_f(f.px(max(m.t, f.t_lo)) + 3)}" y="{top + ph - 4}" font-size="10">{label}</text>'
            )
    return parts


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
    if overlay is not None:
        parts += _overlay(frame, overlay)
    parts += _markers(frame, markers)
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
