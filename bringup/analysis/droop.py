"""Droop of the flat top of a long on-pulse, and the longest on-time to a floor.

For a bootstrap high-side drive the gate (or V_BS) sags over a long on-time while the
bootstrap capacitor feeds the floating side's quiescent current and leakage:
dV/dt = -(I_Q + I_leak)/C_BOOT, a straight line (TI SLUA887 §2; the charge balance of
``design.bootstrap_on_time_max``). So the top is fitted with a least-squares line, and the
on-time at which that line reaches ``floor_v`` (the driver's UVLO, or the V_GS the MOSFET needs
for its R_DS(on)) is the longest on-time the hardware supports. A top that bends (an RC
discharge through a pull-down) is extrapolated linearly from its measured part, which is
conservative only for small droops: the result says how far it extrapolates.

The on-time runs between the 50 % instants of the rising and the falling edge (IEEE 181 pulse
duration), found with 40/50/60 % reference levels so that a top sagging below the 90 % level is
still a top, not a slow falling edge. The fitted top runs from where the rising edge's ringing
has settled (the samples stay on the line) to where the falling edge leaves the line for good.
The droop is reported over the whole on-time: ``start_v``/``end_v`` are the line at the two
50 % instants and ``droop_v`` = rate x on-time, whatever part of the top was clean enough to
fit. A record with no edge at all is taken as a capture of the top alone (with a warning).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import numpy as np

from bringup.analysis.edges import find_transitions
from bringup.errors import AnalysisError

__all__ = ["DroopMetrics", "measure_droop"]

_MIN_TOP_SAMPLES = 16
_CHUNK = 1 << 20


@dataclass(frozen=True)
class DroopMetrics:
    """Droop of one on-pulse. Volts, seconds; ``droop_rate_v_per_s`` > 0 when the top sags.

    ``start_v``/``end_v`` are the fitted line at the on-pulse's start and end (``on_start_s``,
    ``on_end_s``), so ``droop_v`` = start_v - end_v = rate x ``on_time_s``: the droop over the
    whole on-time the record shows. The on-time runs 50 % rising to 50 % falling, or to the
    record's end when ``window`` says "edge-to-end"; ``window`` is one of "edge-to-edge",
    "edge-to-end", "start-to-edge", "whole-record", "given". The line is fitted over
    ``top_start_s`` to ``top_end_s`` (the settled top). ``t_on_max_s`` is the on-time at
    which the line reaches ``floor_v`` (None with a reason when it never does).
    ``extrapolation`` is t_on_max_s / on_time_s. ``droop_rate_uncertainty_v_per_s`` is the
    standard error (k = 1) of the fitted slope. ``warnings``: what the reader should know
    (no edge in the record, a top that bends, a fit covering little of the on-time).
    ``on_start_uncertainty_s``/``on_end_uncertainty_s``: standard uncertainty of the two
    instants (0 where the record's start or end, or a given window, sets them);
    ``bend_rates_v_per_s``: the two halves' droop rates when the top bends, else None.
    ``edge_slopes_v_per_s``: the rising and falling edges' slopes at their 50 % instants (0
    where the record's start or end sets the instant); ``mid_level_v``: the level the instants
    were read at (None for a given window or a record without edges).
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
    warnings: list[str] = field(default_factory=list)
    on_start_uncertainty_s: float = 0.0
    on_end_uncertainty_s: float = 0.0
    bend_rates_v_per_s: tuple[float, float] | None = None
    edge_slopes_v_per_s: tuple[float, float] = (0.0, 0.0)
    mid_level_v: float | None = None

    def to_dict(self) -> dict:
        out = {f.name: getattr(self, f.name) for f in fields(self)}
        out["reasons"] = dict(self.reasons)
        out["warnings"] = list(self.warnings)
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


def _lsb(y: np.ndarray, a: int, b: int) -> float:
    """The smallest step between successive samples of y[a:b] (one ADC code when quantised)."""
    sample = np.abs(np.diff(y[a : min(b, a + 100_000)].astype(np.float64)))
    steps = sample[sample > 0]
    return float(steps.min()) if steps.size else 0.0


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
    limit = max(5.0 * line.rms / math.sqrt(width), 1.5 * _lsb(y, a, b)) + 1e-12
    out = np.flatnonzero(np.abs(resid) > limit)
    return a if out.size == 0 else min(a + int(out[-1]) + width, half)


def _departed_index(y: np.ndarray, a: int, b: int, line: _Line) -> int:
    """End (exclusive) of the top: the last index of the second half still on the line.

    The mirror of ``_settled_index`` for the falling edge: its samples leave the line for good,
    so everything after the last sample that is on it belongs to the edge."""
    half = a + (b - a) // 2
    width = max(1, (b - a) // 1000)
    idx = np.arange(half, b, dtype=np.float64)
    resid = y[half:b].astype(np.float64) - (line.mid + line.slope * (idx - line.centre))
    if width > 1:
        c = np.concatenate(([0.0], np.cumsum(resid)))
        resid = (c[width:] - c[:-width]) / width
    limit = max(5.0 * line.rms / math.sqrt(width), 1.5 * _lsb(y, half, b)) + 1e-12
    inside = np.flatnonzero(np.abs(resid) <= limit)
    return b if inside.size == 0 else max(half + int(inside[-1]) + 1, half)


# A transition of the droop record is an edge only when its middle (40-60 % of the swing)
# takes less than this fraction of the record: a top-only capture read by min/max levels
# "falls" through its middle over about a fifth of the record, a real edge in nanoseconds to
# microseconds. The 40/60 % levels, not 10/90 %, because a sagging top can lie below the 90 %
# level (its 90 % crossing is then on the top, not on the edge).
_EDGE_MAX_FRACTION = 0.05


def _bend_rates(
    y: np.ndarray, a: int, b: int, line: _Line, dt: float
) -> tuple[float, float] | None:
    """The droop rates (V/s) of the top's two halves when it is not straight: they differ by
    more than 25 % of the whole top's and by more than 4 standard errors (a constant-current
    sag is a line; an RC discharge through a pull-down or a leakage that grows bends it);
    None for a straight top."""
    n = b - a
    if n < 4 * _MIN_TOP_SAMPLES or line.slope == 0:
        return None
    early, late = _fit_line(y, a, a + n // 2), _fit_line(y, a + n // 2, b)
    diff = late.slope - early.slope
    se = math.hypot(early.slope_se, late.slope_se)
    if abs(diff) <= 0.25 * abs(line.slope) or abs(diff) <= 4.0 * se:
        return None
    return -early.slope / dt, -late.slope / dt


def _bend(y: np.ndarray, a: int, b: int, line: _Line, dt: float) -> str | None:
    """A warning when the top is not straight (``_bend_rates``)."""
    rates = _bend_rates(y, a, b, line, dt)
    if rates is None:
        return None
    return (
        f"the top is not a straight sag ({rates[0]:.4g} V/s then "
        f"{rates[1]:.4g} V/s over its two halves): not a constant current, "
        "so the longest on-time extrapolated from the line is only a first estimate"
    )


def _find_pulse(y: np.ndarray, dt: float, t0: float, n: int):
    """(on start instant, top start index, top end index, on end instant, window) of the
    longest high pulse of ``y``; the on-pulse runs between 50 % instants (IEEE 181 pulse
    duration), the top between the edges' ends."""
    try:
        tr, state = find_transitions(y, dt, t0, levels=(40.0, 50.0, 60.0))
    except AnalysisError as exc:
        if not str(exc).startswith("one level only"):
            raise
        tr = None
    if tr is not None and len(tr) and bool(np.any(tr.duration_s > _EDGE_MAX_FRACTION * n * dt)):
        tr = None  # the "edge" is the droop itself: a capture of the top alone
    pulses = []
    if tr is not None and len(tr):
        rising = tr.direction > 0
        u = _crossing_u(tr, state, dt)
        # each edge's slope at its 50 % instant (V/s), over its 40-60 % span
        slopes = [0.2 * abs(state.amplitude_v) / max(float(d), dt) for d in tr.duration_s]
        mid_v = state.reference(50.0)
        for k in range(len(tr)):
            start_idx = int(math.ceil((tr.t_mid_s[k] - t0) / dt))
            if rising[k]:
                if k + 1 < len(tr):
                    end_idx = int(math.floor((tr.t_mid_s[k + 1] - t0) / dt)) + 1
                    pulses.append((tr.t_mid_s[k], start_idx, end_idx, tr.t_mid_s[k + 1],
                                   "edge-to-edge", (u[k], u[k + 1]),
                                   (slopes[k], slopes[k + 1])))  # fmt: skip
                else:
                    pulses.append((tr.t_mid_s[k], start_idx, n, t0 + n * dt, "edge-to-end",
                                   (u[k], 0.0), (slopes[k], 0.0)))  # fmt: skip
            elif k == 0:
                end_idx = int(math.floor((tr.t_mid_s[k] - t0) / dt)) + 1
                pulses.append((t0, 0, end_idx, tr.t_mid_s[k], "start-to-edge", (0.0, u[k]),
                               (0.0, slopes[k])))  # fmt: skip
    else:
        pulses.append((t0, 0, n, t0 + n * dt, "whole-record", (0.0, 0.0), (0.0, 0.0)))
    if not pulses:
        raise AnalysisError("no on-pulse in the record")
    best = max(pulses, key=lambda p: p[3] - p[0])
    return (*best, mid_v if tr is not None and len(tr) else None)


def _crossing_u(tr, state, dt: float) -> list[float]:
    """Standard uncertainty (s) of each edge's 50 % instant: the noise at the level over the
    edge's slope there (a time error of u(y)/slope, REFERENCES §10 [computed]), the slope
    taken over the 40-60 % span, and the interpolation within one sample interval
    (rectangular, dt/sqrt(12)), in quadrature."""
    noise = max(state.low_noise_v, state.high_noise_v)
    out = []
    for duration in tr.duration_s:
        slope = 0.2 * abs(state.amplitude_v) / max(float(duration), dt)
        out.append(math.hypot(noise / slope if slope > 0 else 0.0, dt / math.sqrt(12.0)))
    return out


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
    return on_start, a, b, on_end, "given", (0.0, 0.0), (0.0, 0.0), None


def _top_span(
    y: np.ndarray,
    dt: float,
    a: int,
    b: int,
    window: str,
    settle_s: float | None,
) -> tuple[int, int]:
    """[a_fit, b_fit): the settled top of the on-pulse's samples [a, b), clear of the rising
    edge's settling (``settle_s``, or where the top starts to follow its line) and of the
    falling edge's first samples; ``AnalysisError`` when too little of it is left."""
    if b - a < _MIN_TOP_SAMPLES:
        raise AnalysisError(
            f"the on-pulse top has only {max(b - a, 0)} samples (need {_MIN_TOP_SAMPLES})"
        )
    # A first line through the middle half of the on-pulse, clear of both edges, against
    # which the ends of the top are found.
    quarter = (b - a) // 4
    first = _fit_line(y, a + quarter, max(b - quarter, a + quarter + 2))
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
        a_fit = _settled_index(y, a, b, first)
    # The falling edge's first samples would bend the line: the top ends where the record
    # leaves the line for good.
    # (A record that ends on an incomplete falling edge is cut there too.)
    b_fit = b if window == "whole-record" else _departed_index(y, a, b, first)
    if b_fit - a_fit < _MIN_TOP_SAMPLES:
        raise AnalysisError(
            f"the settled top has only {max(b_fit - a_fit, 0)} samples (need {_MIN_TOP_SAMPLES})"
        )
    return a_fit, b_fit


def _longest_on_time(
    line: _Line,
    dt: float,
    start_v: float,
    floor_v: float,
    on_time: float,
    reasons: dict[str, str],
) -> tuple[float | None, float | None]:
    """(longest on-time s, its ratio to the on-time shown) before the line reaches
    ``floor_v``; (None, None) with the reason in ``reasons`` when it cannot be said."""
    slope_v_per_s = line.slope / dt
    if start_v <= floor_v:
        reasons["t_on_max_s"] = (
            f"the top starts at {start_v:.4g} V, already at or below the floor {floor_v:.4g} V"
        )
    elif slope_v_per_s >= 0 or -line.slope <= 2.0 * line.slope_se:
        reasons["t_on_max_s"] = "the top does not droop measurably (slope within its noise)"
    else:
        t_on_max = (floor_v - start_v) / slope_v_per_s
        return t_on_max, t_on_max / on_time if on_time > 0 else None
    return None, None


def _top_warnings(
    y: np.ndarray,
    dt: float,
    a_fit: int,
    b_fit: int,
    line: _Line,
    window: str,
    on_time: float,
) -> list[str]:
    """What limits the reading: no edge, a fitted top short of the on-time, a bent top."""
    warnings: list[str] = []
    if window == "whole-record":
        warnings.append(
            "no edge found: the whole record is taken as the top of one on-pulse (a capture of "
            "the top alone); capture an edge to anchor the on-time"
        )
    covered = (b_fit - a_fit) * dt / on_time if on_time > 0 else 1.0
    if covered < 0.5:
        warnings.append(
            f"the fitted top covers only {100 * covered:.0f} % of the {on_time:.3g} s on-time: "
            "the droop over the rest is carried by the line"
        )
    bend = _bend(y, a_fit, b_fit, line, dt)
    if bend is not None:
        warnings.append(bend)
    return warnings


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
        pulse = _given_window(on_window_s, dt, t0, n)
    else:
        pulse = _find_pulse(y, dt, t0, n)
    on_start, a, b, on_end, window, on_u, slopes, mid_v = pulse
    a_fit, b_fit = _top_span(y, dt, a, b, window, settle_s)
    line = _fit_line(y, a_fit, b_fit)

    slope_v_per_s = line.slope / dt
    # The droop over the whole on-time the record shows (50 % to 50 %), not only over the
    # fitted samples: the line is carried over the settling at the start and over the
    # falling edge's first half at the end, so that droop_v = rate x on_time.
    on_time = on_end - on_start
    start_v = line.at((on_start - t0) / dt)
    end_v = line.at((on_end - t0) / dt)
    top_start = t0 + a_fit * dt
    reasons: dict[str, str] = {}
    t_on_max, extrapolation = _longest_on_time(line, dt, start_v, floor_v, on_time, reasons)
    warnings = _top_warnings(y, dt, a_fit, b_fit, line, window, on_time)
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
        top_end_s=float(t0 + (b_fit - 1) * dt),
        settle_s=float(top_start - on_start),
        residual_rms_v=float(line.rms),
        extrapolation=None if extrapolation is None else float(extrapolation),
        window=window,
        reasons=reasons,
        warnings=warnings,
        on_start_uncertainty_s=float(on_u[0]),
        on_end_uncertainty_s=float(on_u[1]),
        bend_rates_v_per_s=_bend_rates(y, a_fit, b_fit, line, dt),
        edge_slopes_v_per_s=(float(slopes[0]), float(slopes[1])),
        mid_level_v=None if mid_v is None else float(mid_v),
    )
