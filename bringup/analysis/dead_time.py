"""Dead time and shoot-through of a half-bridge, from its two gate-source voltages.

Public API (pure numpy, no I/O; times in s, voltages in V, currents in A)::

    gate_on_intervals(vgs, dt, t0=0.0, *, threshold_v, hysteresis_v=None) -> OnIntervals
    measure_dead_time(high_vgs, low_vgs, dt, t0=0.0, *, threshold_v, low_threshold_v=None,
                      hysteresis_v=None, current=None, skew_u_s=0.0) -> DeadTimeResult

``DeadTimeResult.high_to_low`` (high side off -> low side on) and ``.low_to_high`` (low side off
-> high side on) are ``Commutations``: one signed dead time per commutation found in the record
(``dead_time_s``; negative = the gates overlapped by that long), its standard uncertainty
(``u_s``) and the distribution (``count``, ``median_s``, ``min_s``, ``max_s``, each with an
expanded k = 2 uncertainty ``*_uncertainty_s``; None with a reason in ``reasons`` when there is no
commutation). ``DeadTimeResult.overlaps`` lists each shoot-through (``Overlap``: start,
duration, and with a current trace the current spike above the local baseline);
``.to_dict()`` is JSON-ready.

Method (the definition of dead time is common practice, REFERENCES §12: the interval between
one gate-source voltage falling through its threshold and the other rising through its
threshold; both above threshold at once is shoot-through):

* Each gate's on-intervals are found with hysteresis (a Schmitt trigger, as IEEE Std 181-2011
  uses state boundaries): the gate is "on" once it enters the band above threshold + h and
  "off" once it enters the band below threshold - h; noise and ringing that leave a band and
  return without reaching the other band change nothing. h defaults to the larger of 4 sigma
  of the trace's noise and 2 % of its swing (the IEEE 181 state-boundary default).
* The switching instant is the last crossing of the threshold itself before the band entry,
  by linear interpolation between the two straddling samples (IEEE 181 crossing instant:
  t = t_i + dt (V_th - y_i)/(y_{i+1} - y_i)).
* High-to-low commutation: each low-side turn-on paired with the high-side turn-off that
  preceded it (dead time = t_on,low - t_off,high), provided the low side did not switch in
  between; a low-side turn-on while the high side is still on is an overlap (negative dead
  time: the time both were above threshold). Low-to-high likewise with the roles swapped.
* Uncertainty (GUM, JCGM 100:2008; each crossing's budget in ``uncertainty.crossing_budget``):
  the noise at the crossing, sigma/|dV/dt| (type A, the slope from a local least-squares line);
  the linear interpolation's error on a curved edge, at most |V''| dt^2 / (8 |V'|) (the
  remainder of linear interpolation, rectangular); the skew between the two gate channels
  (``skew_u_s``, type B, given by the caller from the bench's deskew). The median of n values
  carries sqrt(pi/2) s/sqrt(n) for their scatter s (the median's efficiency, common practice).
* Current spike of an overlap: the peak of the current trace from the overlap's start to one
  overlap duration (at least 16 samples) after its end, above the baseline = the median of the
  current over the 10 overlap durations (at least 32 samples) before it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from bringup.analysis.edges import code_step, noise_rms
from bringup.analysis.uncertainty import COVERAGE_K, crossing_budget, dead_time_budget
from bringup.errors import AnalysisError

__all__ = [
    "Commutations",
    "DeadTimeResult",
    "OnIntervals",
    "Overlap",
    "gate_on_intervals",
    "measure_dead_time",
]

MIN_SAMPLES = 16
HYSTERESIS_NOISE_SIGMAS = 4.0
HYSTERESIS_SWING_FRACTION = 0.02  # IEEE 181's +/- 2 % state boundary
HIGH_TO_LOW = "high-to-low"  # high side off -> low side on
LOW_TO_HIGH = "low-to-high"  # low side off -> high side on


@dataclass(frozen=True)
class OnIntervals:
    """The intervals a gate spends above its threshold (with hysteresis), in time order.

    ``start_s``/``end_s``: threshold-crossing instants (s) of each turn-on/turn-off; an
    interval already on at the record's start (``open_start``) starts at the first sample, one
    still on at its end (``open_end``) ends at the last sample; those bounds are not switching
    instants and carry u = 0. ``start_u_s``/``end_u_s``: standard uncertainty of each crossing
    (s). ``threshold_v``, ``hysteresis_v`` (the half-width h of the band either side),
    ``noise_v`` (the trace's white-noise rms)."""

    start_s: np.ndarray
    end_s: np.ndarray
    start_u_s: np.ndarray
    end_u_s: np.ndarray
    open_start: bool
    open_end: bool
    threshold_v: float
    hysteresis_v: float
    noise_v: float

    def __len__(self) -> int:
        return int(self.start_s.size)

    @property
    def durations_s(self) -> np.ndarray:
        return self.end_s - self.start_s


@dataclass(frozen=True)
class Overlap:
    """One shoot-through: both gates above threshold from ``start_s`` for ``duration_s`` (s,
    standard uncertainty ``duration_u_s``), at the ``transition`` named (the gate that turned
    on too early names it). With a current trace: ``current_spike_a`` (peak above the local
    baseline, A), its standard uncertainty ``current_spike_u_a``, the ``current_baseline_a``
    and ``current_peak_s`` (when the peak came)."""

    transition: str
    start_s: float
    duration_s: float
    duration_u_s: float
    current_spike_a: float | None = None
    current_spike_u_a: float | None = None
    current_baseline_a: float | None = None
    current_peak_s: float | None = None


@dataclass(frozen=True)
class Commutations:
    """Every commutation of one direction (``name``: "high-to-low" or "low-to-high").

    Per commutation (numpy arrays, time order): ``off_s`` the turning-off gate's crossing,
    ``on_s`` the turning-on gate's crossing, ``dead_time_s`` = signed dead time (s; negative
    = overlap, its magnitude the time both were on), ``u_s`` its standard uncertainty (s).
    Distribution: ``count``, ``median_s``, ``min_s``, ``max_s`` and their expanded (k = 2)
    uncertainties; None with the reason in ``reasons`` when there is no commutation."""

    name: str
    off_s: np.ndarray
    on_s: np.ndarray
    dead_time_s: np.ndarray
    u_s: np.ndarray
    median_s: float | None
    min_s: float | None
    max_s: float | None
    median_uncertainty_s: float | None
    min_uncertainty_s: float | None
    max_uncertainty_s: float | None
    reasons: dict[str, str] = field(default_factory=dict)

    @property
    def count(self) -> int:
        return int(self.dead_time_s.size)

    def to_dict(self, per_edge: bool = False) -> dict:
        out = {
            "name": self.name,
            "count": self.count,
            "median_s": self.median_s,
            "min_s": self.min_s,
            "max_s": self.max_s,
            "median_uncertainty_s": self.median_uncertainty_s,
            "min_uncertainty_s": self.min_uncertainty_s,
            "max_uncertainty_s": self.max_uncertainty_s,
            "reasons": dict(self.reasons),
        }
        if per_edge:
            for key in ("off_s", "on_s", "dead_time_s", "u_s"):
                out[key] = getattr(self, key).tolist()
        return out


@dataclass(frozen=True)
class DeadTimeResult:
    """Dead times of both commutations, the overlaps (shoot-through) and what was used.

    ``shoot_through``: any overlap; ``worst_overlap_s``: the longest (0 without one);
    ``worst_spike_a``: the largest current spike of an overlap (None without current trace or
    overlap). ``warnings``: what limits the measurement (an overlap at the record's edge, a
    commutation with too few samples)."""

    high_to_low: Commutations
    low_to_high: Commutations
    overlaps: tuple[Overlap, ...]
    high: OnIntervals
    low: OnIntervals
    warnings: tuple[str, ...] = ()

    @property
    def shoot_through(self) -> bool:
        return bool(self.overlaps)

    @property
    def worst_overlap_s(self) -> float:
        return max((o.duration_s for o in self.overlaps), default=0.0)

    @property
    def worst_spike_a(self) -> float | None:
        spikes = [o.current_spike_a for o in self.overlaps if o.current_spike_a is not None]
        return max(spikes) if spikes else None

    def to_dict(self, per_edge: bool = False) -> dict:
        return {
            "high_to_low": self.high_to_low.to_dict(per_edge),
            "low_to_high": self.low_to_high.to_dict(per_edge),
            "overlaps": [o.__dict__.copy() for o in self.overlaps],
            "shoot_through": self.shoot_through,
            "worst_overlap_s": self.worst_overlap_s,
            "worst_spike_a": self.worst_spike_a,
            "threshold_high_v": self.high.threshold_v,
            "threshold_low_v": self.low.threshold_v,
            "hysteresis_high_v": self.high.hysteresis_v,
            "hysteresis_low_v": self.low.hysteresis_v,
            "warnings": list(self.warnings),
        }


# ------------------------------------------------------------------------------ crossings
def _as_trace(y, dt: float, what: str) -> np.ndarray:
    y = np.asarray(y)
    if y.ndim != 1 or y.dtype.kind not in "fiu":
        raise AnalysisError(f"{what}: expected a 1-D record of numbers")
    if y.size < MIN_SAMPLES:
        raise AnalysisError(f"{what}: too few samples ({y.size}; need {MIN_SAMPLES})")
    if not (isinstance(dt, int | float | np.floating) and math.isfinite(dt) and dt > 0):
        raise AnalysisError(f"sample interval must be a positive number of seconds, got {dt!r}")
    y = y.astype(np.float64)
    if not np.all(np.isfinite(y)):
        raise AnalysisError(f"{what}: the record contains NaN or infinite samples")
    return y


def _entries(inside: np.ndarray) -> np.ndarray:
    starts = np.flatnonzero(inside[1:] & ~inside[:-1]) + 1
    return np.concatenate(([0], starts)) if inside[0] else starts


def _hysteresis(y: np.ndarray, threshold_v: float, hysteresis_v: float | None, what: str):
    """(h, sigma): the band's half-width (V) and the trace's noise (V); the threshold must lie
    with its band inside the trace's swing (min to max: a short pulse at an extreme duty holds
    few samples, so no percentile)."""
    sigma = noise_rms(y)
    lo, hi = float(y.min()), float(y.max())
    if hysteresis_v is None:
        h = max(HYSTERESIS_NOISE_SIGMAS * sigma, HYSTERESIS_SWING_FRACTION * (hi - lo))
        h = max(h, code_step(y))
    else:
        h = float(hysteresis_v)
        if not (math.isfinite(h) and h > 0):
            raise AnalysisError(f"{what}: hysteresis must be a positive voltage, got {h!r}")
    if not (lo < threshold_v - h and threshold_v + h < hi):
        raise AnalysisError(
            f"{what}: never switches through {threshold_v:.4g} V +/- {h:.3g} V (it stays "
            f"between {lo:.4g} V and {hi:.4g} V): no switching to time"
        )
    return h, sigma


def _crossing_u(y: np.ndarray, j: np.ndarray, dt: float, sigma: float) -> np.ndarray:
    """Standard uncertainty (s) of each interpolated crossing between samples j and j+1: the
    noise over the local slope (least-squares line through 4 samples) and the interpolation
    remainder |y''| dt^2 / (8 |y'|) as a rectangular bound (see ``crossing_budget``)."""
    n = y.size
    idx = np.clip(j[:, None] + np.arange(-1, 3)[None, :], 0, n - 1)
    seg = y[idx]
    x = np.arange(-1, 3) - 0.5
    slope = (seg @ x) / float(x @ x) / dt  # V/s
    curv = (seg[:, 0] - seg[:, 1] - seg[:, 2] + seg[:, 3]) / (2.0 * dt * dt)  # V/s^2
    slope = np.where(np.abs(slope) > 0, np.abs(slope), np.inf)
    return np.array(
        [crossing_budget(sigma, s, c, dt).combined for s, c in zip(slope, curv, strict=True)]
    )


def gate_on_intervals(
    vgs: np.ndarray,
    dt: float,
    t0: float = 0.0,
    *,
    threshold_v: float,
    hysteresis_v: float | None = None,
    what: str = "gate",
) -> OnIntervals:
    """The intervals the gate-source voltage ``vgs`` (V, ``dt`` s apart) spends above
    ``threshold_v`` (V), found with hysteresis +/- ``hysteresis_v`` (V; default: the larger
    of 4 sigma of the noise and 2 % of the swing). See the module doc for the method."""
    y = _as_trace(vgs, dt, what)
    dt, t0, thr = float(dt), float(t0), float(threshold_v)
    h, sigma = _hysteresis(y, thr, hysteresis_v, what)
    up, down = _entries(y >= thr + h), _entries(y <= thr - h)
    where = np.concatenate((up, down))
    label = np.concatenate((np.ones(up.size, np.int8), -np.ones(down.size, np.int8)))
    order = np.argsort(where, kind="stable")
    where, label = where[order], label[order]
    change = np.concatenate(([0], np.flatnonzero(label[1:] != label[:-1]) + 1))
    entry, state = where[change], label[change]
    # Last crossing of the threshold itself before each band entry (IEEE 181 instant).
    above = y >= thr
    cross = np.flatnonzero(above[1:] != above[:-1])
    sw_entry, sw_state = entry[1:], state[1:]
    k = np.searchsorted(cross, sw_entry, side="left") - 1
    j = cross[k]
    pos = j + (thr - y[j]) / (y[j + 1] - y[j])
    times = t0 + pos * dt
    u = _crossing_u(y, j, dt, sigma) if j.size else np.empty(0)
    rises, falls = sw_state > 0, sw_state < 0
    starts, ends = list(times[rises]), list(times[falls])
    su, eu = list(u[rises]), list(u[falls])
    open_start = bool(state.size and state[0] > 0)
    open_end = bool(state.size and state[-1] > 0)
    if open_start:
        starts, su = [t0, *starts], [0.0, *su]
    if open_end:
        ends, eu = [*ends, t0 + (y.size - 1) * dt], [*eu, 0.0]
    return OnIntervals(np.array(starts), np.array(ends), np.array(su), np.array(eu),
                       open_start, open_end, thr, h, sigma)  # fmt: skip


# ------------------------------------------------------------------------------ commutations
def _pair(off: OnIntervals, on: OnIntervals, skew_u_s: float):
    """(off instants, on instants, signed dead times, u) for each turn-on of ``on`` that
    follows a turn-off of ``off`` (or happens while ``off`` is still on: an overlap)."""
    rows = []
    first_on = 1 if on.open_start else 0
    for m in range(first_on, len(on)):
        s = on.start_s[m]
        h = int(np.searchsorted(off.start_s, s, side="left")) - 1
        if h < 0:
            continue
        h_end, h_end_u = off.end_s[h], off.end_u_s[h]
        if h_end > s:  # still on: both gates above threshold from s
            off_open = off.open_end and h == len(off) - 1
            on_open = on.open_end and m == len(on) - 1
            end, end_u = min((h_end, h_end_u, off_open), (on.end_s[m], on.end_u_s[m], on_open))[:2]
            if (off_open and end == h_end) or (on_open and end == on.end_s[m]):
                continue  # the overlap runs past the record: its length is unknown
            u = dead_time_budget(-(end - s), end_u, on.start_u_s[m], skew_u_s).combined
            rows.append((end, s, -(end - s), u))
            continue
        if m > 0 and on.end_s[m - 1] > h_end:
            continue  # the turning-on gate switched since: not a commutation from ``off``
        if off.open_end and h == len(off) - 1:
            continue
        u = dead_time_budget(s - h_end, h_end_u, on.start_u_s[m], skew_u_s).combined
        rows.append((h_end, s, s - h_end, u))
    if not rows:
        return (np.empty(0),) * 4
    return tuple(np.array(c) for c in zip(*rows, strict=True))


def _commutations(name: str, off: OnIntervals, on: OnIntervals, skew_u_s: float) -> Commutations:
    off_s, on_s, dead, u = _pair(off, on, skew_u_s)
    reasons: dict[str, str] = {}
    if dead.size == 0:
        why = f"no {name} commutation in the record"
        for key in ("median_s", "min_s", "max_s"):
            reasons[key] = why
        return Commutations(name, off_s, on_s, dead, u, None, None, None, None, None, None, reasons)
    n = dead.size
    # The median's standard error: sqrt(pi/2) x (the larger of the scatter and one edge's u)
    # over sqrt(n) (common practice); min and max are one commutation each, judged alone.
    spread = float(np.std(dead, ddof=1)) if n >= 3 else 0.0
    u_med = math.sqrt(math.pi / 2.0) * max(float(np.median(u)), spread) / math.sqrt(n)
    i_min, i_max = int(np.argmin(dead)), int(np.argmax(dead))
    return Commutations(
        name, off_s, on_s, dead, u,
        float(np.median(dead)), float(dead[i_min]), float(dead[i_max]),
        COVERAGE_K * u_med, COVERAGE_K * float(u[i_min]), COVERAGE_K * float(u[i_max]),
        reasons,
    )  # fmt: skip


# ------------------------------------------------------------------------------ current
def _spike(current: np.ndarray, dt: float, t0: float, start: float, duration: float):
    """(spike above baseline A, its standard uncertainty A, baseline A, peak instant s)."""
    n = current.size
    i_start = int(math.floor((start - t0) / dt))
    i_end = int(math.ceil((start + duration - t0) / dt))
    base_len = max(int(math.ceil(10.0 * duration / dt)), 32)
    after = max(int(math.ceil(duration / dt)), 16)
    b0, b1 = max(i_start - base_len, 0), max(i_start - 1, 0)
    p0, p1 = max(i_start, 0), min(i_end + after, n)
    if b1 - b0 < 8 or p1 <= p0:
        return None, None, None, None
    baseline = float(np.median(current[b0:b1]))
    k = p0 + int(np.argmax(current[p0:p1]))
    sigma = noise_rms(current)
    # The peak sample reads the noise of one sample; the baseline is a median of many
    # (sqrt(pi/2) sigma/sqrt(n)); one code step of the ADC, rectangular (GUM §4.3.7).
    u = math.sqrt(sigma**2 + (math.pi / 2.0) * sigma**2 / (b1 - b0) + code_step(current) ** 2 / 12)
    return float(current[k]) - baseline, u, baseline, t0 + k * dt


def _overlaps(
    comms: tuple[Commutations, ...], current, dt: float, t0: float
) -> tuple[Overlap, ...]:
    found = []
    for c in comms:
        for k in np.flatnonzero(c.dead_time_s < 0):
            start, duration = float(c.on_s[k]), float(-c.dead_time_s[k])
            spike = (None,) * 4 if current is None else _spike(current, dt, t0, start, duration)
            found.append(Overlap(c.name, start, duration, float(c.u_s[k]), *spike))
    return tuple(sorted(found, key=lambda o: o.start_s))


def measure_dead_time(
    high_vgs: np.ndarray,
    low_vgs: np.ndarray,
    dt: float,
    t0: float = 0.0,
    *,
    threshold_v: float,
    low_threshold_v: float | None = None,
    hysteresis_v: float | None = None,
    current: np.ndarray | None = None,
    skew_u_s: float = 0.0,
) -> DeadTimeResult:
    """Dead times at both commutations and every overlap of a half-bridge's gates.

    ``high_vgs``/``low_vgs``: the high- and low-side gate-source voltages (V), sampled
    together ``dt`` s apart from ``t0``. ``threshold_v``: the gate threshold (V) the dead time
    is measured at (``low_threshold_v`` for the low side when it differs). ``hysteresis_v``:
    the band half-width (V; default from the noise and swing). ``current``: the supply (or
    drain) current (A) on the same time base, for the current spike of each overlap.
    ``skew_u_s``: standard uncertainty (s) of the skew between the two gate channels.
    Raises ``AnalysisError`` for records that cannot be timed (see the module doc)."""
    hi = gate_on_intervals(high_vgs, dt, t0, threshold_v=threshold_v, hysteresis_v=hysteresis_v,
                           what="high-side gate")  # fmt: skip
    lo_thr = threshold_v if low_threshold_v is None else low_threshold_v
    lo = gate_on_intervals(low_vgs, dt, t0, threshold_v=lo_thr, hysteresis_v=hysteresis_v,
                           what="low-side gate")  # fmt: skip
    if np.asarray(high_vgs).size != np.asarray(low_vgs).size:
        raise AnalysisError("the two gate records must have the same number of samples")
    cur = None
    if current is not None:
        cur = _as_trace(current, dt, "current")
        if cur.size != np.asarray(high_vgs).size:
            raise AnalysisError("the current record must have as many samples as the gates")
    h2l = _commutations(HIGH_TO_LOW, hi, lo, float(skew_u_s))
    l2h = _commutations(LOW_TO_HIGH, lo, hi, float(skew_u_s))
    overlaps = _overlaps((h2l, l2h), cur, float(dt), float(t0))
    warnings = []
    if hi.open_start and lo.open_start:
        warnings.append("both gates are on at the record's start: an overlap there is not timed")
    if hi.open_end and lo.open_end:
        warnings.append("both gates are on at the record's end: an overlap there is not timed")
    return DeadTimeResult(h2l, l2h, overlaps, hi, lo, tuple(warnings))
