"""A waveform drawn in the terminal with braille dots, with its reference levels, crossings
and the on-time window marked.

Why our own widget and not a plotting library: a plot of a scope record at the bench needs
exactly four things (an envelope of the samples, horizontal reference levels, vertical
crossing instants and a shaded time window) and must redraw from a numpy array of up to
millions of points without copying it into Python lists. plotext (through textual-plotext)
would add two dependencies, is pinned below an incompatible major release, draws block
characters at half the resolution of braille and takes lists. A braille cell holds 2 x 4
dots, so an 80 x 16 cell plot resolves 160 x 64 points; each dot column shows the min..max
envelope of the samples that fall in it (numpy ``reduceat``), so a 1 ns edge in a 10 us
record is never lost between columns. The widget draws with ``render_line`` and ``Strip``.

Marks are told by shape and label, not colour alone: levels are dashed lines labelled at the
right edge, crossings are ``▲`` under the plot with their names in the legend, the window is
``├──┤`` on the marker row and a tinted band.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
from rich.segment import Segment
from rich.style import Style
from textual.reactive import reactive
from textual.strip import Strip
from textual.widget import Widget

from bringup.analysis.quantities import format_quantity
from bringup.tui.literal import visible

__all__ = ["PlotMarks", "WaveformPlot", "braille_envelope"]

# Braille dot bits by (row, column) inside a cell: Unicode Braille Patterns block U+2800.
_DOT_BITS = np.array(
    [[0x01, 0x08], [0x02, 0x10], [0x04, 0x20], [0x40, 0x80]],
    dtype=np.uint16,
)
_LEFT = 10  # value axis gutter, cells
_RIGHT = 8  # level labels gutter, cells


@dataclass(frozen=True)
class PlotMarks:
    """What to mark on the plot.

    ``levels``: (label, volts) horizontal reference levels (e.g. "90 %", 10.8).
    ``crossings``: (label, seconds) instants where the trace crosses a level.
    ``window``: (start, end) seconds of the on-time window, or None.
    """

    levels: tuple[tuple[str, float], ...] = ()
    crossings: tuple[tuple[str, float], ...] = ()
    window: tuple[float, float] | None = None
    window_label: str = "on-time"
    extra_legend: tuple[str, ...] = field(default=())
    #: a level with ripple on it (a rail): drawn as a band in the middle of the plot with its
    #: highest and lowest values marked and its peak-to-peak in the legend
    band: bool = False
    #: (lower, upper) values at each sample of the trace: an uncertainty band drawn as its two
    #: edges around the trace (a prediction and its ±)
    edges: tuple[tuple[float, ...], tuple[float, ...]] | None = None


def _value_ticks(y0: float, y1: float, rows: int, unit: str) -> dict[int, str]:
    """Labels of the value axis at the top, middle and bottom rows, all different: with three
    significant digits when they tell the rows apart, else the middle value and the top and
    bottom as offsets from it ("+25 mV", "-25 mV") so that a small ripple on a large level
    does not read "12 V" three times."""
    at = {r: y1 - (r + 0.5) / rows * (y1 - y0) for r in (0, rows // 2, rows - 1)}
    plain = {r: format_quantity(val, unit, 3) for r, val in at.items()}
    if len(set(plain.values())) == len(plain):
        return plain
    mid = rows // 2
    out = {mid: format_quantity(at[mid], unit, 4)}
    for r in (0, rows - 1):
        delta = at[r] - at[mid]
        out[r] = ("+" if delta >= 0 else "-") + format_quantity(abs(delta), unit, 2)
    return out


def braille_envelope(
    t: np.ndarray,
    v: np.ndarray,
    cols: int,
    rows: int,
    x_range: tuple[float, float],
    y_range: tuple[float, float],
) -> np.ndarray:
    """Dots lit by the trace: a bool array of shape (rows*4, cols*2), row 0 at the top.

    Each dot column spans an equal slice of ``x_range`` (seconds) and lights every dot row
    between the min and the max of the samples (volts) that fall in it, joined to the
    neighbouring column so that steep edges stay continuous.
    """
    width, height = cols * 2, rows * 4
    dots = np.zeros((height, width), dtype=bool)
    if t.size == 0 or width == 0 or height == 0:
        return dots
    x0, x1 = x_range
    y0, y1 = y_range
    if t.size < width and t.size >= 2:
        # sparse samples (a temperature log): draw the line between them, one per dot column
        centres = x0 + (np.arange(width) + 0.5) * ((x1 - x0) / width)
        inside = (centres >= t[0]) & (centres <= t[-1])
        t, v = centres[inside], np.interp(centres[inside], t, v)
    span_x = (x1 - x0) or 1.0
    span_y = (y1 - y0) or 1.0
    col = np.clip(((t - x0) / span_x * width).astype(np.int64), 0, width - 1)
    # t is sorted (a scope record), so each column's samples are one contiguous run.
    starts = np.flatnonzero(np.r_[True, col[1:] != col[:-1]])
    lo = np.minimum.reduceat(v, starts)
    hi = np.maximum.reduceat(v, starts)
    used = col[starts]

    def to_row(y: np.ndarray) -> np.ndarray:
        r = ((y1 - y) / span_y * (height - 1)).round().astype(np.int64)
        return np.clip(r, 0, height - 1)

    r_top, r_bot = to_row(hi), to_row(lo)
    # join each column to the previous one: a vertical run covering both envelopes
    prev_top = np.r_[r_top[:1], r_top[:-1]]
    prev_bot = np.r_[r_bot[:1], r_bot[:-1]]
    adjacent = np.r_[False, used[1:] == used[:-1] + 1]
    top = np.where(adjacent, np.minimum(r_top, prev_bot), r_top)
    bot = np.where(adjacent, np.maximum(r_bot, prev_top), r_bot)
    top, bot = np.minimum(top, bot), np.maximum(top, bot)
    rows_idx = np.arange(height)[:, None]
    dots[:, used] = (rows_idx >= top[None, :]) & (rows_idx <= bot[None, :])
    return dots


def _cells(dots: np.ndarray) -> np.ndarray:
    """Braille code points (uint16 offsets from U+2800) for each cell of a dot array."""
    h, w = dots.shape
    cells = dots.reshape(h // 4, 4, w // 2, 2).astype(np.uint16)
    return np.einsum("rayb,ab->ry", cells, _DOT_BITS).astype(np.uint16)


class WaveformPlot(Widget):
    """A scope record (seconds, volts) with levels, crossings and the on-time window.

    Call ``show(t, v, marks, title)``; the arrays stay in plain attributes (a reactive holding
    an array would compare with ``!=``), and the ``revision`` counter triggers the redraw.
    """

    DEFAULT_CSS = """
    WaveformPlot { height: 18; min-height: 8; }
    """
    COMPONENT_CLASSES = {
        "plot--trace",
        "plot--level",
        "plot--crossing",
        "plot--window",
        "plot--axis",
        "plot--title",
    }

    revision: reactive[int] = reactive(0, layout=False)
    #: show only the neighbourhood of the first crossings (an edge) instead of the whole record
    zoomed: reactive[bool] = reactive(False)

    def __init__(
        self, *, name: str | None = None, id: str | None = None, classes: str | None = None
    ) -> None:
        super().__init__(name=name, id=id, classes=classes)
        self._t: np.ndarray = np.zeros(0)
        self._v: np.ndarray = np.zeros(0)
        self._marks = PlotMarks()
        self._title = "no waveform yet"
        self._unit = "V"
        self._lines: list[Strip] = []
        self._drawn_for: tuple[int, int, int] | None = None

    def show(
        self,
        t: np.ndarray,
        v: np.ndarray,
        marks: PlotMarks | None = None,
        title: str = "",
        unit: str = "V",
    ) -> None:
        """Plot ``v`` (``unit``) against ``t`` (seconds); arrays are used as they are."""
        t = np.asarray(t, dtype=float)
        v = np.asarray(v, dtype=float)
        n = min(t.size, v.size)
        finite = np.isfinite(v[:n]) & np.isfinite(t[:n])
        self._t, self._v = t[:n][finite], v[:n][finite]
        self._marks = marks or PlotMarks()
        self._title = visible(title, multiline=False)  # a net or file name: shown as typed
        self._unit = unit
        self.revision += 1

    def clear(self, title: str = "no waveform yet") -> None:
        """Drop the trace and show ``title`` alone."""
        self.show(np.zeros(0), np.zeros(0), None, title)

    @property
    def point_count(self) -> int:
        """How many samples the trace holds."""
        return int(self._t.size)

    @property
    def has_trace(self) -> bool:
        """True when a trace is shown."""
        return self._t.size > 0

    def watch_zoomed(self) -> None:
        self._drawn_for = None
        self.refresh()

    def _view(self) -> tuple[np.ndarray, np.ndarray]:
        """The samples to draw: all of them, or (zoomed) those around the first edge.

        The window spans the first two crossings plus four times their spacing on each side,
        at least 40 samples, so a 10-90 % rise fills the plot instead of one column."""
        t, v = self._t, self._v
        crossings = sorted(ts for _, ts in self._marks.crossings)
        if not self.zoomed or len(crossings) < 1 or t.size < 2:
            return t, v
        first = crossings[0]
        second = crossings[1] if len(crossings) > 1 else first
        dt = float(t[1] - t[0]) or 1e-12
        span = max(4.0 * abs(second - first), 20 * dt)
        lo, hi = np.searchsorted(t, [first - span, second + span])
        lo, hi = int(max(0, lo)), int(min(t.size, max(hi, lo + 2)))
        return t[lo:hi], v[lo:hi]

    def watch_revision(self) -> None:
        self._drawn_for = None
        self.refresh()

    def on_resize(self) -> None:
        self._drawn_for = None

    # -- drawing -------------------------------------------------------------------------
    def render_line(self, y: int) -> Strip:
        width, height = self.size
        key = (width, height, self.revision)
        if self._drawn_for != key:
            self._lines = self._draw(width, height)
            self._drawn_for = key
        if y < len(self._lines):
            return self._lines[y]
        return Strip.blank(width, self.rich_style)

    def _style(self, name: str) -> Style:
        return self.get_component_rich_style(name)

    def _draw(self, width: int, height: int) -> list[Strip]:
        """The plot's lines: title, one row per text row of trace, the marker row, the time
        axis and the legend."""
        title_style = self._style("plot--title")
        lines: list[Strip] = [
            Strip([Segment(self._title[:width].ljust(width), title_style)]).simplify()
        ]
        cols = width - _LEFT - _RIGHT
        rows = height - 4  # title, marker row, time axis, legend
        if cols < 8 or rows < 2 or self._t.size == 0:
            return lines

        t, v = self._view()
        x0, x1 = float(t[0]), float(t[-1])
        if x1 <= x0:
            x1 = x0 + 1e-12
        marks, extra_legend = self._banded(self._marks, v)
        lower, upper = self._edges(t)
        values = [float(v.min()), float(v.max())] + [lv for _, lv in marks.levels]
        if lower is not None:
            values += [float(lower.min()), float(upper.max())]
        y0, y1 = min(values), max(values)
        # a band sits in the middle half of the plot (its width readable against the frame);
        # an edge uses nearly the whole height
        pad = (y1 - y0) * (0.5 if marks.band else 0.06) or 0.5
        y0, y1 = y0 - pad, y1 + pad
        dots = braille_envelope(t, v, cols, rows, (x0, x1), (y0, y1))
        codes = _cells(dots)
        edge_codes = None
        if lower is not None:
            edge_dots = braille_envelope(t, lower, cols, rows, (x0, x1), (y0, y1))
            edge_dots |= braille_envelope(t, upper, cols, rows, (x0, x1), (y0, y1))
            edge_codes = _cells(edge_dots & ~dots)

        def col_of(ts: float) -> int:
            return int(np.clip((ts - x0) / (x1 - x0) * cols, 0, cols - 1))

        def row_of(val: float) -> int:
            return int(np.clip(round((y1 - val) / (y1 - y0) * (rows * 4 - 1)) // 4, 0, rows - 1))

        level_rows: dict[int, str] = {}
        for label, val in marks.levels:
            level_rows.setdefault(row_of(val), label)
        cross_cols = {col_of(ts): label for label, ts in marks.crossings if x0 <= ts <= x1}
        win = None
        if marks.window is not None:
            w0, w1 = marks.window
            win = (col_of(max(w0, x0)), col_of(min(w1, x1)))

        ticks = _value_ticks(y0, y1, rows, self._unit)
        lines.extend(self._trace_rows(codes, ticks, level_rows, cross_cols, win, edge_codes))
        lines.append(self._marker_row(cols, win, marks.window_label, cross_cols))
        lines.append(self._time_axis(cols, x0, x1))
        lines.append(self._legend(width, marks, x0, x1, extra_legend))
        return lines[:height]

    def _edges(self, t: np.ndarray) -> tuple[np.ndarray | None, np.ndarray | None]:
        """The band's lower and upper edges at the samples in view (None: no band)."""
        edges = self._marks.edges
        if edges is None or len(edges[0]) != self._t.size or len(edges[1]) != self._t.size:
            return None, None
        lo, hi = np.asarray(edges[0], dtype=float), np.asarray(edges[1], dtype=float)
        keep = np.isin(self._t, t)  # the view is a slice of the samples
        if not keep.any() or not (np.isfinite(lo[keep]).all() and np.isfinite(hi[keep]).all()):
            return None, None
        return lo[keep], hi[keep]

    def _banded(self, marks: PlotMarks, v: np.ndarray) -> tuple[PlotMarks, list[str]]:
        """A band's marks gain its max and min levels and its peak-to-peak in the legend."""
        extra_legend = list(marks.extra_legend)
        if marks.band:
            vmin, vmax = float(v.min()), float(v.max())
            # replace() keeps ``band`` (and every other mark), so the band keeps its padding
            marks = replace(marks, levels=(*marks.levels, ("max", vmax), ("min", vmin)))
            extra_legend.insert(
                0, f"peak-to-peak {format_quantity(vmax - vmin, self._unit, 3)} (max - min)"
            )
        return marks, extra_legend

    def _trace_rows(
        self,
        codes: np.ndarray,
        ticks: dict[int, str],
        level_rows: dict[int, str],
        cross_cols: dict[int, str],
        win: tuple[int, int] | None,
        edge_codes: np.ndarray | None = None,
    ) -> list[Strip]:
        """One line per text row: the value axis, the braille trace over a band's edges, the
        level and crossing marks (the window shaded), and the level's label."""
        base = self.rich_style
        axis = self._style("plot--axis")
        trace, level, cross = (
            self._style("plot--trace"),
            self._style("plot--level"),
            self._style("plot--crossing"),
        )
        shade = Style(bgcolor=self._style("plot--window").bgcolor)
        rows, cols = codes.shape
        lines: list[Strip] = []
        for r in range(rows):
            # the value axis: top, middle and bottom carry a value
            tick = ticks.get(r, "")
            segs = [Segment(tick.rjust(_LEFT - 2)[: _LEFT - 2] + " ┤", axis)]
            for c in range(cols):
                code = int(codes[r, c])
                in_win = win is not None and win[0] <= c <= win[1]
                bg = shade if in_win else Style()
                edge = int(edge_codes[r, c]) if edge_codes is not None else 0
                if code:
                    segs.append(Segment(chr(0x2800 + code), trace + bg))
                elif edge:
                    segs.append(Segment(chr(0x2800 + edge), level + bg))
                elif c in cross_cols:
                    segs.append(Segment("┆", cross + bg))
                elif r in level_rows:
                    segs.append(Segment("╌", level + bg))
                else:
                    segs.append(Segment(" ", base + bg))
            label = level_rows.get(r, "")
            segs.append(Segment((" " + label)[:_RIGHT].ljust(_RIGHT), level))
            lines.append(Strip(segs).simplify())
        return lines

    def _marker_row(
        self, cols: int, win: tuple[int, int] | None, window_label: str, cross_cols: dict[int, str]
    ) -> Strip:
        """The window's bracket with its label, and an arrow under each crossing."""
        base = self.rich_style
        cross = self._style("plot--crossing")
        marker = [" "] * cols
        if win is not None:
            a, b = win
            for c in range(a, b + 1):
                marker[c] = "─"
            marker[a], marker[b] = "├", "┤"
            text = f" {window_label} "
            mid = (a + b - len(text)) // 2
            if b - a > len(text) + 2:
                for i, ch in enumerate(text):
                    marker[mid + i] = ch
        for c in cross_cols:
            marker[c] = "▲"
        return Strip(
            [
                Segment(" " * _LEFT, base),
                Segment("".join(marker), cross),
                Segment(" " * _RIGHT, base),
            ]
        ).simplify()

    def _time_axis(self, cols: int, x0: float, x1: float) -> Strip:
        """Start, middle and end of the view's time span."""
        base = self.rich_style
        axis = self._style("plot--axis")
        axis_chars = [" "] * (cols + _RIGHT)
        for frac in (0.0, 0.5, 1.0):
            at = x0 + frac * (x1 - x0)
            if abs(at) < 1e-6 * (x1 - x0):
                at = 0.0  # rounding residue of a window centred on zero
            text = format_quantity(at, "s", 3)
            pos = int(frac * (cols - 1))
            pos = min(max(0, pos - len(text) // 2), len(axis_chars) - len(text))
            axis_chars[pos : pos + len(text)] = list(text)
        return Strip([Segment(" " * _LEFT, base), Segment("".join(axis_chars), axis)])

    def _legend(
        self, width: int, marks: PlotMarks, x0: float, x1: float, extra_legend: list[str]
    ) -> Strip:
        """The first four crossings in view with their instants, then the extra notes."""
        axis = self._style("plot--axis")
        visible = [(label, ts) for label, ts in marks.crossings if x0 <= ts <= x1]
        shown = [f"▲ {label} {format_quantity(ts, 's', 4)}" for label, ts in visible[:4]]
        if len(visible) > 4:
            shown.append(f"(+{len(visible) - 4} more crossings)")
        if self.zoomed:
            shown.append("[z: whole record]")
        legend = "  ".join(shown + extra_legend)
        return Strip([Segment(legend[:width].ljust(width), axis)])
