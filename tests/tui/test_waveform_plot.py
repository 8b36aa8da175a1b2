"""The braille plot's geometry: what gets lit for a noisy, quantised, ringing square wave."""

from __future__ import annotations

import numpy as np

from bringup.tui.widgets.waveform_plot import _cells, braille_envelope


def _square_wave() -> tuple[np.ndarray, np.ndarray]:
    """0 V / 12 V at 25 kHz, two periods, 8-bit quantised over 16 V, noise and edge ringing."""
    rng = np.random.default_rng(7)
    t = np.linspace(0.0, 80e-6, 40_000, endpoint=False)
    high = (t % 40e-6) < 20e-6
    v = np.where(high, 12.0, 0.0)
    since_edge = t % 20e-6
    v = v + 0.6 * np.exp(-since_edge / 0.3e-6) * np.sin(2 * np.pi * since_edge / 0.1e-6)
    v = v + rng.normal(0.0, 0.05, t.size)
    lsb = 16.0 / 256
    return t, np.round(v / lsb) * lsb


def _row_of(volts: float, y_range: tuple[float, float], height: int) -> int:
    y0, y1 = y_range
    return round((y1 - volts) / (y1 - y0) * (height - 1))


def test_flat_parts_light_only_their_level_and_edges_join_them():
    t, v = _square_wave()
    cols, rows, y_range = 40, 10, (-2.0, 14.0)
    dots = braille_envelope(t, v, cols, rows, (t[0], t[-1]), y_range)
    height = rows * 4
    high_row, low_row = _row_of(12.0, y_range, height), _row_of(0.0, y_range, height)

    lit_rows = [np.flatnonzero(dots[:, c]) for c in range(cols * 2)]
    # every dot column holds samples, so every column shows something
    assert all(r.size for r in lit_rows)
    # lit dots of a column form one unbroken run (an envelope, not scattered points)
    assert all(np.all(np.diff(r) == 1) for r in lit_rows)
    # the middle of each flat part (far from the ringing) stays within 2 dot rows of its level
    # [computed]: 0.05 V rms noise and a 62.5 mV LSB are under 1 dot row (16 V / 39 rows = 0.41 V)
    for c in (6, 14, 46, 54):  # columns 1/4 and 3/4 into the first high and low half-periods
        level = high_row if c < 20 or 40 <= c < 60 else low_row
        assert lit_rows[c].min() >= level - 2 and lit_rows[c].max() <= level + 2, c
    # the edges: a column at each transition spans from one level to the other
    for c in (19, 20, 39, 40, 59, 60):
        if lit_rows[c].min() <= high_row and lit_rows[c].max() >= low_row:
            break
    else:
        raise AssertionError("no column joins the two levels at an edge")


def test_a_sparse_log_is_drawn_as_a_line_between_its_readings():
    t = np.array([0.0, 60.0, 120.0, 180.0, 240.0])  # seconds: a soak's first readings
    v = np.array([25.0, 31.0, 35.0, 37.5, 39.0])  # °C
    dots = braille_envelope(t, v, 20, 6, (0.0, 240.0), (24.0, 40.0))
    lit_columns = np.flatnonzero(dots.any(axis=0))
    assert lit_columns.tolist() == list(range(40))  # no gaps between the five readings


def test_braille_dot_numbering():
    # [memory] Unicode Braille Patterns (U+2800..U+28FF): dot k is bit k-1; dots 1-3 and 7
    # run down the left column, 4-6 and 8 down the right one.
    dots = np.zeros((4, 2), dtype=bool)
    dots[0, 0] = True  # dot 1
    assert int(_cells(dots)[0, 0]) == 0x01
    dots[:] = False
    dots[3, 1] = True  # dot 8
    assert int(_cells(dots)[0, 0]) == 0x80
    dots[:] = True  # all eight dots: U+28FF
    assert int(_cells(dots)[0, 0]) == 0xFF
