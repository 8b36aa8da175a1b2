"""Droop of the flat top of a long on-pulse, and the longest on-time to a floor.

For a bootstrap high-side drive the gate (or V_BS) sags over a long on-time while the
bootstrap capacitor feeds the floating side's quiescent current and leakage:
dV/dt = -(I_Q + I_leak)/C_BOOT, a straight line (TI SLUA887 §2; the charge balance of
``design.bootstrap_on_time_max``). So the top is fitted with a least-squares line, and the
on-time at which that line reaches ``floor_v`` (the driver's UVLO, or the V_GS the MOSFET needs
for its R_DS(on)) is the longest on-time the hardware supports. A top that bends (an RC
discharge through a pull-down) is extrapolated linearly from its measured part, which is
conservative only for small droops: the result says how far it extrapolates.

The top runs from the rising edge's entry into the high state band, after the ringing has
settled, to the start of the falling edge (or the end of the record). A record with no edge
at all is taken as a capture of the top alone.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import numpy as np

from bringup.analysis.edges import find_transitions
from bringup.analysis.errors import AnalysisError

__all__ = ["DroopMetrics", "measure_droop"]

_MIN_TOP_SAMPLES = 16
_CHUNK = 1 << 20


@dataclass(frozen=True)
class DroopMetrics:
    """Droop of one on-pulse. Volts, seconds; ``droop_rate_v_per_s`` > 0 when the top sags.

    ``start_v``/``end_v`` are the fitted line at the settled start and at the end of the top.
    ``on_time_s`` is the observed on-time, ``on_start_s`` to ``on_end_s`` (50 % rising to 50 %
    falling, or to the record's end when ``window`` says "edge-to-end"; ``window`` is one of
    "edge-to-edge", "edge-to-end", "start-to-edge", "whole-record", "given"). ``t_on_max_s`` is the on-time at which the line
    reaches ``floor_v`` (None with a reason when it never does). ``extrapolation`` is
    t_on_max_s / on_time_s. ``droop_rate_uncertainty_v_per_s`` is the standard error (k = 1)
    of the fitted slope.
    """

    start_v: float
    end_v: float
    droop_v: float
    droop_rate_v_per_s: float
    droop_rate_uncertainty_v_per_s: float
    on_time_s: float
    on_start_s: float
    on_end_s: float
    t_on_max_s: float | None
    floor_v: float
    top_start_s: float
    top_end_s: float
    settle_s: float
    residual_rms_v: float
    extrapolation: float | None
    window: str
    reasons: dict[str, str] = field(default_factory=dict)

    def to_dict(self) -> dict:
        out = {f.name: getattr(self, f.name) for f in fields(self)}
        out["reasons"] = dict(self.reasons)
        return out


@dataclass(frozen=True)
class _Line:
    slope: float  # V per sample
    mid: float  # fitted value at the segment's centre
    centre: float  # index of the centre
    sse: float
    n: int

    def at(self, index: float) -> float:
        return self.mid + self.slope * (index - self.centre)

    @property
    def rms(self) -> float:
        return math.sqrt(max(self.sse, 0.0) / self.n)

    @property
    def slope_se(self) -> float:
        """Standard error of the slope (V per sample)."""
        if self.n <= 2:
            return math.inf
        sxx = self.n * (self.n**2 - 1) / 12.0
        return math.sqrt(max(self.sse, 0.0) / (self.n - 2) / sxx)


def _fit_line(y: np.ndarray, a: int, b: int) -> _Line:
    """Least-squares line through y[a:b] against the sample index, in float64 chunks."""
    n = b - a
    centre = a + (n - 1) / 2.0
    s_y = s_xy = s_yy = 0.0
    for lo in range(a, b, _CHUNK):
        hi = min(lo + _CHUNK, b)
        part = y[lo:hi].astype(np.float64)
        x = np.arange(lo, hi, dtype=np.float64) - centre
        s_y += float(part.sum())
        s_xy += float(np.dot(x, part))
        s_yy += float(np.dot(part, part))
    sxx = n * (n**2 - 1) / 12.0
    mean = s_y / n
    slope = s_xy / sxx if sxx > 0 else 0.0
    sse = (s_yy - n * mean * mean) - slope * slope * sxx
    return _Line(slope, mean, centre, sse, n)


def _settled_index(y: np.ndarray, a: int, b: int, line: _Line) -> int:
    """First index after which the top stays on its line (ringing and overshoot over)."""
    half = a + (b - a) // 2
    width = max(1, (b - a) // 1000)
    idx = np.arange(a, half, dtype=np.float64)
    resid = y[a:half].astype(np.float64) - (line.mid + line.slope * (idx - line.centre))
    if width > 1:
        c = np.concatenate(([0.0], np.cumsum(resid)))
        resid = (c[width:] - c[:-width]) / width
    # A quantised record (a scope's 8 bits) leaves a staircase about the line that averaging
    # does not remove: never call a residual under 1.5 steps of the ADC "not settled".
    sample = np.abs(np.diff(y[a : min(b, a + 100_000)].astype(np.float64)))
    steps = sample[sample > 0]
    lsb = float(steps.min()) if steps.size else 0.0
    limit = max(5.0 * line.rms / math.sqrt(width), 1.5 * lsb) + 1e-12
    out = np.flatnonzero(np.abs(resid) > limit)
    return a if out.size == 0 else min(a + int(out[-1]) + width, half)


def _find_pulse(y: np.ndarray, dt: float, t0: float, n: int):
    """(on start instant, top start index, top end index, on end instant, window) of the
    longest high pulse of ``y``."""
    try:
        tr, _ = find_transitions(y, dt, t0)
    except AnalysisError as exc:
        if not str(exc).startswith("one level only"):
            raise
        tr = None
    if tr is not None and len(tr) and bool(np.any(tr.duration_s > 0.25 * n * dt)):
        # A "transition" that takes a quarter of the record is the droop itself (a capture of
        # the top alone, read by min/max levels), not an edge.
        tr = None
    pulses = []
    if tr is not None and len(tr):
        rising = tr.direction > 0
        for k in range(len(tr)):
            if rising[k]:
                start_idx = int(math.ceil((tr.t_high_s[k] - t0) / dt))
                if k + 1 < len(tr):
                    end_idx = int(math.floor((tr.t_high_s[k + 1] - t0) / dt))
                    pulses.append(
                        (tr.t_mid_s[k], start_idx, end_idx, tr.t_mid_s[k + 1], "edge-to-edge")
                    )
                else:
                    pulses.append((tr.t_mid_s[k], start_idx, n, t0 + n * dt, "edge-to-end"))
            elif k == 0:
                end_idx = int(math.floor((tr.t_high_s[k] - t0) / dt))
                pulses.append((t0, 0, end_idx, tr.t_mid_s[k], "start-to-edge"))
    else:
        pulses.append((t0, 0, n, t0 + n * dt, "whole-record"))
    if not pulses:
        raise AnalysisError("no on-pulse in the record")
    return max(pulses, key=lambda p: p[3] - p[0])


def _given_window(on_window_s, dt: float, t0: float, n: int):
    try:
        on_start, on_end = (float(v) for v in on_window_s)
    except (TypeError, ValueError):
        raise AnalysisError(f"on-window must be two instants (s), got {on_window_s!r}") from None
    if not (math.isfinite(on_start) and math.isfinite(on_end) and on_end > on_start):
        raise AnalysisError(f"on-window must run forwards, got {on_start:g} s to {on_end:g} s")
    a = max(int(math.ceil((on_start - t0) / dt)), 0)
    b = min(int(math.floor((on_end - t0) / dt)) + 1, n)
    if b <= a:
        raise AnalysisError(
            f"the on-window {on_start:g} s to {on_end:g} s is outside the record "
            f"({t0:g} s to {t0 + n * dt:g} s)"
        )
    return on_start, a, b, on_end, "given"


def measure_droop(
    y: np.ndarray,
    dt: float,
    floor_v: float,
    t0: float = 0.0,
    *,
    settle_s: float | None = None,
    on_window_s: tuple[float, float] | None = None,
) -> DroopMetrics:
    """Measure the droop of the longest on-pulse of ``y`` (V, ``dt`` s apart).

    ``floor_v``: the lowest acceptable level (V). ``settle_s``: time after the on-pulse starts
    to skip before fitting; by default found from the data (where the top starts to follow its
    line within 5 sigma of its noise). ``on_window_s``: the on-pulse's start and end instants
    (s) when another trace knows them better, e.g. V_BS, whose on-time is its lower, sagging
    part between recharge bumps: pass the ``on_start_s``/``on_end_s`` that ``measure_droop``
    found on V_GS of the same acquisition. Raises ``AnalysisError`` when there is no top.
    """
    if not (isinstance(floor_v, int | float | np.floating) and math.isfinite(floor_v)):
        raise AnalysisError(f"floor must be a finite voltage, got {floor_v!r}")
    y = np.asarray(y)
    dt, t0, n = float(dt), float(t0), int(np.asarray(y).size)
    if on_window_s is not None:
        on_start, a, b, on_end, window = _given_window(on_window_s, dt, t0, n)
    else:
        on_start, a, b, on_end, window = _find_pulse(y, dt, t0, n)
    # Stop a little before the falling edge so that its first samples do not bend the line.
    if window in ("edge-to-edge", "start-to-edge", "given"):
        b = max(a, b - max(1, (b - a) // 200))
    if b - a < _MIN_TOP_SAMPLES:
        raise AnalysisError(
            f"the on-pulse top has only {max(b - a, 0)} samples (need {_MIN_TOP_SAMPLES})"
        )

    if settle_s is not None:
        skip = int(math.ceil(max(float(settle_s), 0.0) / dt))
        a_fit = min(a + skip, b - _MIN_TOP_SAMPLES)
        if a + skip > b - _MIN_TOP_SAMPLES:
            raise AnalysisError(
                f"settle time {settle_s:g} s leaves too little of the top ({(b - a) * dt:g} s)"
            )
    elif window in ("whole-record", "start-to-edge"):
        a_fit = a  # no rising edge in the record: nothing to settle
    else:
        first = _fit_line(y, a + (b - a) // 2, b)
        a_fit = _settled_index(y, a, b, first)
    line = _fit_line(y, a_fit, b)

    slope_v_per_s = line.slope / dt
    start_v = line.at(a_fit)
    end_v = line.at(b - 1)
    top_start = t0 + a_fit * dt
    reasons: dict[str, str] = {}
    t_on_max = None
    extrapolation = None
    if start_v <= floor_v:
        reasons["t_on_max_s"] = (
            f"the top starts at {start_v:.4g} V, already at or below the floor {floor_v:.4g} V"
        )
    elif slope_v_per_s >= 0 or -line.slope <= 2.0 * line.slope_se:
        reasons["t_on_max_s"] = "the top does not droop measurably (slope within its noise)"
    else:
        t_floor = top_start + (floor_v - start_v) / slope_v_per_s
        t_on_max = t_floor - on_start
        on_time = on_end - on_start
        extrapolation = t_on_max / on_time if on_time > 0 else None
    return DroopMetrics(
        start_v=float(start_v),
        end_v=float(end_v),
        droop_v=float(start_v - end_v),
        droop_rate_v_per_s=float(-slope_v_per_s),
        droop_rate_uncertainty_v_per_s=float(line.slope_se / dt),
        on_time_s=float(on_end - on_start),
        on_start_s=float(on_start),
        on_end_s=float(on_end),
        t_on_max_s=None if t_on_max is None else float(t_on_max),
        floor_v=float(floor_v),
        top_start_s=float(top_start),
        top_end_s=float(t0 + (b - 1) * dt),
        settle_s=float(top_start - on_start),
        residual_rms_v=float(line.rms),
        extrapolation=None if extrapolation is None else float(extrapolation),
        window=window,
        reasons=reasons,
    )
