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

__all__ = ["Marker", "envelope", "plot_svg"]


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
    t_lo, t_hi = float(t[0]), float(t[-1])
    ys = [float(y.min()), float(y.max())]
    if overlay is not None:
        ys += [float(np.nanmin(overlay[1])), float(np.nanmax(overlay[1]))]
    ys += [m.y for m in markers if m.y is not None and math.isfinite(m.y)]
    y_lo, y_hi = min(ys), max(ys)
    pad = (y_hi - y_lo) * 0.06 or abs(y_hi) * 0.05 or 1.0
    y_lo, y_hi = y_lo - pad, y_hi + pad

    def px(tv: float) -> float:
        return left + (tv - t_lo) / (t_hi - t_lo) * pw

    def py(yv: float) -> float:
        return top + (y_hi - yv) / (y_hi - y_lo) * ph

    for tick in _nice_ticks(y_lo, y_hi):
        yy = py(tick)
        parts.append(
            f'<line x1="{left}" x2="{left + pw}" y1="{_f(yy)}" y2="{_f(yy)}" stroke="#e2e0da"/>'
        )
        parts.append(
            f'<text x="{left - 4}" y="{_f(yy + 4)}" font-size="10" text-anchor="end">'
            f"{_shown(format_quantity(tick, unit))}</text>"
        )
    for tick in _nice_ticks(t_lo, t_hi, 6):
        xx = px(tick)
        parts.append(
            f'<line x1="{_f(xx)}" x2="{_f(xx)}" y1="{top}" y2="{top + ph}" stroke="#e2e0da"/>'
        )
        parts.append(
            f'<text x="{_f(xx)}" y="{top + ph + 14}" font-size="10" text-anchor="middle">'
            f"{_shown(format_quantity(tick, 's'))}</text>"
        )
    for m in markers:
        if m.kind == "window" and m.t is not None and m.t_end is not None:
            x0, x1 = px(max(m.t, t_lo)), px(min(m.t_end, t_hi))
            parts.append(
                f'<rect x="{_f(x0)}" y="{top}" width="{_f(max(x1 - x0, 0.5))}" height="{ph}" '
                f'fill="#f3d9a4" fill-opacity="0.45" stroke="#b9892c" stroke-dasharray="4 2"/>'
            )
    columns = pw
    if t.size <= 2 * columns:
        pts = " ".join(f"{_f(px(a))},{_f(py(b))}" for a, b in zip(t, y, strict=True))
        parts.append(f'<polyline points="{pts}" fill="none" stroke="#1f4e79" stroke-width="1.2"/>')
    else:
        col, lo, hi = envelope(t, y, columns, t_lo, t_hi)
        xs = left + col + 0.5
        upper = [f"{_f(a)},{_f(py(b))}" for a, b in zip(xs, hi, strict=True)]
        lower = [f"{_f(a)},{_f(py(b))}" for a, b in zip(xs[::-1], lo[::-1], strict=True)]
        parts.append(
            f'<polygon points="{" ".join(upper + lower)}" fill="#1f4e79" fill-opacity="0.35" '
            f'stroke="#1f4e79" stroke-width="0.8"/>'
        )
    if overlay is not None:
        ot, oy, olabel = overlay
        ok = np.isfinite(ot) & np.isfinite(oy) & (ot >= t_lo) & (ot <= t_hi)
        pts = " ".join(f"{_f(px(a))},{_f(py(b))}" for a, b in zip(ot[ok], oy[ok], strict=True))
        parts.append(f'<polyline points="{pts}" fill="none" {_STYLES["fit"]}/>')
        parts.append(
            f'<text x="{left + pw - 4}" y="{top + ph - 4}" font-size="10" text-anchor="end">'
            f"dashed: {_shown(olabel)}</text>"
        )
    placed: list[float] = []
    for i, m in enumerate(markers):
        label = _shown(m.label)
        if m.kind == "level" and m.y is not None:
            yy = py(m.y)
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
            xx = px(m.t)
            parts.append(
                f'<line x1="{_f(xx)}" x2="{_f(xx)}" y1="{top}" y2="{top + ph}" {_STYLES["time"]}/>'
            )
            parts.append(
                f'<text x="{_f(xx + 3)}" y="{top + 12 + 11 * (i % 3)}" font-size="10">{label}</text>'
            )
        elif m.kind == "point" and m.t is not None and m.y is not None:
            xx, yy = px(m.t), py(m.y)
            parts.append(
                f'<circle cx="{_f(xx)}" cy="{_f(yy)}" r="3.5" fill="none" stroke="#000" stroke-width="1.2"/>'
            )
            parts.append(f'<text x="{_f(xx + 5)}" y="{_f(yy - 5)}" font-size="10">{label}</text>')
        elif m.kind == "window" and m.t is not None:
            parts.append(
                f'<text x="{_f(px(max(m.t, t_lo)) + 3)}" y="{top + ph - 4}" font-size="10">{label}</text>'
            )
    parts.append("</svg>")
    return "".join(parts)
