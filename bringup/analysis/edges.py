"""Transitions and pulses of a two-level waveform, by the methods of IEEE Std 181-2011.

* State levels: histogram of the record (100 bins between min and max), split halfway between
  the lowest and the highest occupied bins; each level is the mode of its half, refined to the
  mean of the samples in the modal bin and its two neighbours (a bin centre alone is off by up to
  half a bin: 0.5 % of the amplitude). The bins are taken on the normalised record
  (y - min)/(max - min), so the levels follow an affine change of the record to rounding (a
  quantised sample on a bin edge is counted in the same bin whatever the scale). Records too
  short or too sparse for a histogram (and records whose histogram has no distinct peaks) fall
  back to min/max; ``level_method`` says which was used. Overshoot is 0 by construction with
  min/max.
* A flat record is "one level only", quantised ones too: levels within 8 sigma of the
  record's robust noise, or "states" lasting a median of under 3 samples (an 8-bit record of
  a flat node hopping between adjacent codes), are not two states.
* Reference levels: y_x = y_low + x/100 * (y_high - y_low), 10/50/90 % by default.
* Transitions: a transition is a run from inside one state's band to inside the other's
  (IEEE 181 state boundaries: level +/- 2 % of the amplitude, widened to 4 sigma of the noise on
  that state when the record is noisy, never past 80 % of the way to the outer reference
  levels; with min/max levels, that widest band, since the extremes are not the states). Noise that leaves
  a band and comes back without reaching the other band is not a transition: that is the
  hysteresis. Found vectorised: only the few thousand band entries are looked at one by one.
* Crossing instants: the last crossing of each reference level before the transition enters
  the other band, by linear interpolation between the two samples that straddle the level:
  t_x = t_i + dt (y_x - y_i)/(y_{i+1} - y_i).
* Per edge: 10-90 duration (rise time t90 - t10, fall time t10 - t90), 50 % instant, and the
  post-transition aberration over about three transition durations after the edge reaches its
  state band: overshoot (rising edges, peak above the high level) and undershoot (falling edges,
  dip below the low level, e.g. a switch node ringing below ground), in % of the amplitude.
  The peak is that of the settled response, not the highest noisy sample (which reads about
  sigma sqrt(2 ln N) high): located on the even samples smoothed, estimated by a quadratic
  through the odd samples within a quarter of the transition duration either side
  (``_settled_peak``), with its uncertainty from the record's noise (``noise_rms``), the
  edges' scatter and the level's histogram bin (expanded, k = 2).
* Per record: median/min/max rise and fall time, median and worst overshoot/undershoot, pulse
  width (50 % rising to the next 50 % falling), period (between successive 50 % instants of the
  same direction), frequency, duty cycle, the mean of the record and over whole periods.

Waveforms are uniformly sampled: ``y`` with sample interval ``dt`` (s) and first instant ``t0``.
Memory: the record plus a few boolean masks (each 1/4 of a float32 record).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import numpy as np

from bringup.errors import AnalysisError

__all__ = [
    "EdgeMetrics",
    "StateLevels",
    "Transitions",
    "Trough",
    "crossing_noise",
    "find_transitions",
    "measure_edges",
    "negative_excursion",
    "noise_rms",
    "settled_trough",
    "slow_reading_fraction",
    "state_levels",
]

HISTOGRAM_BINS = 100
_FINE = 32  # fine bins per histogram bin, for the refined levels (same cost as 100 bins)
MIN_SAMPLES = 8  # below this nothing is measured
_MIN_HISTOGRAM_SAMPLES = 2 * HISTOGRAM_BINS
STATE_BAND_PCT = 2.0  # IEEE 181 default state boundaries: level +/- 2 % of amplitude
ABERRATION_DURATIONS = 3.0  # post-transition aberration region, in transition durations
PEAK_FIT_DURATIONS = 0.25  # the overshoot's local fit: this many durations either side
#: Fewer samples than this between the low and high reference crossings of an edge and the
#: linearly interpolated duration reads slow: a first-order edge by +0.5 % at 8 samples,
#: +1.9 % at 6, +2.9 % at 5, +5 % at 4, +8.7 % at 3, +18 % at 2 [computed on exact
#: exponential edges, medians over sub-sample phases].
MIN_EDGE_SAMPLES = 8
_SLOW_READING_PCT = ((2.0, 18.4), (3.0, 8.7), (4.0, 5.0), (5.0, 2.9), (6.0, 1.9), (8.0, 0.5))
_MIN_ABERRATION_SAMPLES = 4
MIN_STATE_SAMPLES = 3  # median samples between transitions below this: noise, not states


@dataclass(frozen=True)
class StateLevels:
    """Low and high state levels (V) and how they were found ("histogram" or "minmax").

    ``low_noise_v``/``high_noise_v`` are the standard deviation of the samples near each level
    (from the histogram; 0 with min/max).
    """

    low_v: float
    high_v: float
    method: str
    low_noise_v: float = 0.0
    high_noise_v: float = 0.0

    @property
    def amplitude_v(self) -> float:
        return self.high_v - self.low_v

    def reference(self, pct: float) -> float:
        """The reference level at ``pct`` % of the amplitude (IEEE 181 §5.3.3)."""
        return self.low_v + pct / 100.0 * (self.high_v - self.low_v)


@dataclass(frozen=True)
class Transitions:
    """Every transition of a record, one entry per edge, in time order (numpy arrays).

    ``direction`` is +1 rising, -1 falling. ``t_low_s``/``t_mid_s``/``t_high_s`` are the
    crossing instants of the low/mid/high reference levels. ``duration_s`` is the
    low-to-high reference duration (10-90 % by default). ``aberration_pct`` is the overshoot of
    a rising edge or the undershoot of a falling one (% of amplitude, >= 0), from a local fit
    (see ``_settled_peak``); ``aberration_u_pct`` its standard uncertainty from the state's
    noise (% of amplitude, k = 1).
    """

    direction: np.ndarray
    t_low_s: np.ndarray
    t_mid_s: np.ndarray
    t_high_s: np.ndarray
    duration_s: np.ndarray
    aberration_pct: np.ndarray
    aberration_u_pct: np.ndarray | None = None

    def __len__(self) -> int:
        return int(self.direction.size)

    def to_dict(self) -> dict:
        return {
            f.name: getattr(self, f.name).tolist()
            for f in fields(self)
            if getattr(self, f.name) is not None
        }


@dataclass(frozen=True)
class EdgeMetrics:
    """Per-record edge metrics. Times in s, levels in V, ratios as fractions, aberrations in %.

    A value that cannot be computed (no falling edge, fewer than two edges of one direction)
    is None, and ``reasons`` maps its name to why. ``overshoot_uncertainty_pct`` and
    ``overshoot_max_uncertainty_pct`` (and the undershoot's) are the expanded (k = 2)
    uncertainties of the median and of the largest aberration, in % of the amplitude.
    ``rise_time_samples``/``fall_time_samples``: samples across the fastest edge's low-to-high
    reference span (``MIN_EDGE_SAMPLES`` or more for an accurate duration). ``warnings``:
    what limits the record's own accuracy (too few samples on an edge, with the fix).
    """

    low_level_v: float
    high_level_v: float
    level_method: str
    amplitude_v: float
    reference_levels_pct: tuple[float, float, float]
    reference_levels_v: tuple[float, float, float]
    edges: int
    rising_edges: int
    falling_edges: int
    rise_time_s: float | None
    rise_time_min_s: float | None
    rise_time_max_s: float | None
    fall_time_s: float | None
    fall_time_min_s: float | None
    fall_time_max_s: float | None
    overshoot_pct: float | None
    overshoot_max_pct: float | None
    undershoot_pct: float | None
    undershoot_max_pct: float | None
    slew_rate_rise_v_per_s: float | None
    slew_rate_fall_v_per_s: float | None
    pulse_width_s: float | None
    negative_pulse_width_s: float | None
    period_s: float | None
    frequency_hz: float | None
    duty_cycle: float | None
    mean_v: float
    cycle_mean_v: float | None
    min_v: float
    max_v: float
    negative_excursion_v: float
    samples: int
    dt_s: float
    record_length_s: float
    reasons: dict[str, str] = field(default_factory=dict)
    transitions: Transitions | None = field(default=None, repr=False, compare=False)
    rise_time_samples: float | None = None
    fall_time_samples: float | None = None
    overshoot_uncertainty_pct: float | None = None
    overshoot_max_uncertainty_pct: float | None = None
    undershoot_uncertainty_pct: float | None = None
    undershoot_max_uncertainty_pct: float | None = None
    level_uncertainty_pct: float | None = None
    warnings: list[str] = field(default_factory=list)

    def to_dict(self, per_edge: bool = False) -> dict:
        """Plain JSON-ready dict; ``per_edge=True`` adds the per-edge arrays as lists."""
        out = {}
        for f in fields(self):
            if f.name == "transitions":
                continue
            value = getattr(self, f.name)
            out[f.name] = list(value) if isinstance(value, tuple) else value
        out["reasons"] = dict(self.reasons)
        out["warnings"] = list(self.warnings)
        if per_edge and self.transitions is not None:
            out["transitions"] = self.transitions.to_dict()
        return out


def _as_record(y: np.ndarray, dt: float) -> np.ndarray:
    y = np.asarray(y)
    if y.ndim != 1:
        raise AnalysisError(f"expected a 1-D record, got shape {y.shape}")
    if y.dtype.kind not in "fiu":
        raise AnalysisError(f"expected numbers, got {y.dtype}")
    if y.size < MIN_SAMPLES:
        raise AnalysisError(f"too few samples ({y.size}; need at least {MIN_SAMPLES})")
    if not (isinstance(dt, int | float | np.floating) and math.isfinite(dt) and dt > 0):
        raise AnalysisError(f"sample interval must be a positive number of seconds, got {dt!r}")
    return y


def _min_max(y: np.ndarray) -> tuple[float, float]:
    lo, hi = float(y.min()), float(y.max())  # NaN propagates through both
    if not (math.isfinite(lo) and math.isfinite(hi)):
        raise AnalysisError("the record contains NaN or infinite samples")
    return lo, hi


def state_levels(y: np.ndarray, method: str = "auto") -> StateLevels:
    """Low and high state levels of ``y`` by the IEEE 181 histogram method (or min/max).

    ``method``: "auto" (histogram, min/max when the record is too short or its histogram has
    no clear peaks), "histogram" or "minmax". Raises ``AnalysisError`` for a flat record.
    """
    y = _as_record(y, 1.0)
    return _state_levels(y, method, *_min_max(y))


def _state_levels(y: np.ndarray, method: str, ymin: float, ymax: float) -> StateLevels:
    if method not in ("auto", "histogram", "minmax"):
        raise ValueError(f"unknown state-level method {method!r}")
    if not ymax > ymin:
        raise AnalysisError(f"one level only: every sample is {ymin:.6g}, so there is no edge")
    if method == "minmax" or (method == "auto" and y.size < _MIN_HISTOGRAM_SAMPLES):
        return _checked_minmax(y, ymin, ymax)

    nb = HISTOGRAM_BINS
    span = ymax - ymin
    fine, sum_u, sum_u2 = _fine_histogram(y, ymin, span, nb * _FINE)
    coarse = fine.reshape(nb, _FINE).sum(axis=1)
    centres_u = (np.arange(nb * _FINE) + 0.5) / (nb * _FINE)
    # Split halfway between the lowest and highest occupied bins (bins 0 and nb-1 always hold
    # min and max).
    half = nb // 2
    modes = (int(np.argmax(coarse[:half])), half + int(np.argmax(coarse[half:])))
    peaky = True
    levels_u, noise_u = [], []
    for mode, (first, last) in zip(modes, ((0, half), (half, nb)), strict=True):
        # A state is a peak: the 7 bins about the mode must hold a quarter of its half (a
        # ramp, a triangle or a slow ramp's quantisation staircase spread their samples). The
        # 7 bins are kept inside the half: a mode in the first or last bin (a clean top at the
        # record's maximum) is judged on 7 bins like any other, not on the 4 left of them.
        lo_near = min(max(mode - 3, first), max(last - 7, first))
        near = coarse[lo_near : lo_near + 7].sum()
        if near < 0.25 * coarse[first:last].sum():
            peaky = False
        # The level: mean of the samples in the modal bin and its two neighbours.
        lo_bin, hi_bin = max(mode - 1, first) * _FINE, min(mode + 2, last) * _FINE
        levels_u.append(float(sum_u[lo_bin:hi_bin].sum() / fine[lo_bin:hi_bin].sum()))
        # Noise on the state: spread of the samples within +/- 3 bins of the mode.
        lo_n, hi_n = max(mode - 3, first) * _FINE, min(mode + 4, last) * _FINE
        count = fine[lo_n:hi_n].sum()
        mu = sum_u[lo_n:hi_n].sum() / count
        var = sum_u2[lo_n:hi_n].sum() / count - mu * mu
        noise_u.append(float(math.sqrt(max(var, 0.0))))
    if not peaky and method == "auto":
        return _checked_minmax(y, ymin, ymax)
    low_u, high_u = levels_u
    amp_u = high_u - low_u
    mid = (centres_u > low_u + 0.25 * amp_u) & (centres_u < low_u + 0.75 * amp_u)
    low, high = ymin + span * low_u, ymin + span * high_u
    noise = [span * v for v in noise_u]
    if amp_u < 8.0 * max(noise_u) or fine[mid].sum() > 0.5 * y.size:
        raise _one_level(low, high)
    # A quantised flat record sits on a few adjacent codes: each "state" is then one code with
    # no spread of its own (noise_u = 0), so the levels must also stand clear of the record's
    # own noise (the robust second-difference estimate of ``noise_rms`` without its one-code
    # floor, which a clean two-level record would trip; on its first 64 k samples). Noise
    # under one code is caught in ``_find`` (states that last a sample or two).
    head = np.asarray(y[: 1 << 16], dtype=np.float64)
    if head.size >= 3:
        robust = 1.4826 * float(np.median(np.abs(np.diff(head, 2)))) / math.sqrt(6.0)
        if high - low < 8.0 * robust:
            raise _one_level(low, high)
    return StateLevels(low, high, "histogram", noise[0], noise[1])


_CHUNK = 1 << 16  # samples normalised at a time (bounded float64 scratch memory)
_EDGE_SNAP = 1e-7  # of a fine bin: a sample this close below a bin edge counts as on it


def _fine_histogram(
    y: np.ndarray, ymin: float, span: float, bins: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Counts, sums of u and sums of u^2 per bin of u = (y - ymin)/span over [0, 1].

    Binning the normalised record makes the bins scale and shift with the data, so the state
    levels follow an affine change of the record to float rounding. A sample on a bin edge
    (an 8-bit record over a round range puts every code on one) is always counted in the bin
    above: the index is snapped by 1e-7 of a bin, far more than the rounding of u (~1e-13)
    and far less than the gap between a 16-bit code and the nearest edge it is not on
    (>= 1.5e-5 of a bin).
    """
    counts = np.zeros(bins, np.int64)
    sum_u = np.zeros(bins)
    sum_u2 = np.zeros(bins)
    for start in range(0, y.size, _CHUNK):
        u = (y[start : start + _CHUNK].astype(np.float64) - ymin) / span
        idx = np.clip(np.floor(u * bins + _EDGE_SNAP), 0, bins - 1).astype(np.intp)
        counts += np.bincount(idx, minlength=bins)
        sum_u += np.bincount(idx, weights=u, minlength=bins)
        sum_u2 += np.bincount(idx, weights=u * u, minlength=bins)
    return counts, sum_u, sum_u2


def _one_level(low: float, high: float) -> AnalysisError:
    return AnalysisError(
        f"one level only: the record is {0.5 * (low + high):.6g} with noise "
        f"({low:.4g} to {high:.4g}), no two distinct states (no edge)"
    )


def _checked_minmax(y: np.ndarray, ymin: float, ymax: float) -> StateLevels:
    """Min/max levels, refused for noise about one level: a two-level record keeps most of
    its samples out of the middle half of its range; noise about one level does not."""
    amp = ymax - ymin
    lo, hi = ymin + 0.25 * amp, ymin + 0.75 * amp
    middle = int(np.count_nonzero((y > lo) & (y < hi)))
    if middle > 0.5 * y.size:
        raise _one_level(ymin, ymax)
    return StateLevels(ymin, ymax, "minmax")


def _crossings(y: np.ndarray, level: float) -> np.ndarray:
    """Indices i where the record crosses ``level`` between samples i and i+1."""
    above = y >= level
    return np.flatnonzero(above[1:] != above[:-1])


def _entries(inside: np.ndarray) -> np.ndarray:
    """Indices of the first sample of each run of True in ``inside``."""
    starts = np.flatnonzero(inside[1:] > inside[:-1]) + 1
    if inside[0]:
        starts = np.concatenate(([0], starts))
    return starts


def _interpolate(y: np.ndarray, idx: np.ndarray, level: float) -> np.ndarray:
    """Fractional sample positions where y crosses ``level`` between idx and idx+1."""
    y0 = y[idx].astype(np.float64)
    y1 = y[idx + 1].astype(np.float64)
    return idx + (level - y0) / (y1 - y0)


def find_transitions(
    y: np.ndarray,
    dt: float,
    t0: float = 0.0,
    levels: tuple[float, float, float] = (10.0, 50.0, 90.0),
    state: StateLevels | None = None,
    band_pct: float = STATE_BAND_PCT,
) -> tuple[Transitions, StateLevels]:
    """Every complete transition of ``y`` (see module doc); returns them and the state levels."""
    y = _as_record(y, dt)
    pct = _check_levels(levels)
    if state is None:
        state = _state_levels(y, "auto", *_min_max(y))
    return _find(y, float(dt), float(t0), pct, state, band_pct), state


def _check_levels(levels) -> tuple[float, float, float]:
    try:
        lo, mid, hi = (float(v) for v in levels)
    except (TypeError, ValueError):
        raise AnalysisError(f"reference levels must be three percentages, got {levels!r}") from None
    if not 0.0 < lo < mid < hi < 100.0:
        raise AnalysisError(
            f"reference levels must rise strictly between 0 and 100 %, got {lo:g},{mid:g},{hi:g}"
        )
    return lo, mid, hi


def _refuse_code_hopping(entry: np.ndarray, state: StateLevels) -> None:
    """States that mostly last a sample or two are a quantised flat record hopping between
    adjacent codes, not switching (a real state holds many samples): one level only."""
    if entry.size >= 8 and float(np.median(np.diff(entry))) < MIN_STATE_SAMPLES:
        raise _one_level(state.low_v, state.high_v)


def _find(y, dt, t0, pct, state: StateLevels, band_pct: float) -> Transitions:
    amp = state.amplitude_v
    ref = tuple(state.reference(p) for p in pct)
    # State bands: IEEE 181 boundaries, widened for noise, kept inside the outer references.
    cap_low = 0.8 * pct[0] / 100.0 * amp
    cap_high = 0.8 * (100.0 - pct[2]) / 100.0 * amp
    if state.method == "minmax":
        # Min/max levels are the extremes (an overshoot peak, a noise spike): the states sit
        # inside them, so use the widest bands the reference levels allow.
        band_low, band_high = cap_low, cap_high
    else:
        band_low = min(max(band_pct / 100.0 * amp, 4.0 * state.low_noise_v), cap_low)
        band_high = min(max(band_pct / 100.0 * amp, 4.0 * state.high_noise_v), cap_high)
    enter_low = _entries(y <= state.low_v + band_low)
    enter_high = _entries(y >= state.high_v - band_high)

    # Hysteresis on band entries only: a transition is where the band entered changes.
    where = np.concatenate((enter_low, enter_high))
    label = np.concatenate(
        (np.full(enter_low.size, -1, np.int8), np.full(enter_high.size, 1, np.int8))
    )
    order = np.argsort(where, kind="stable")
    where, label = where[order], label[order]
    change = np.flatnonzero(label[1:] != label[:-1]) + 1
    entry = where[change]  # first sample inside the new state's band
    direction = label[change]
    n_edges = entry.size
    _refuse_code_hopping(entry, state)
    empty = np.empty(0)
    if n_edges == 0:
        return Transitions(np.empty(0, np.int8), empty, empty, empty, empty, empty, empty)

    # Last crossing of each reference level before the band entry (see module doc).
    pos = []
    for level in ref:
        cross = _crossings(y, level)
        k = np.searchsorted(cross, entry, side="left") - 1
        pos.append(_interpolate(y, cross[k], level))
    p_low, p_mid, p_high = pos
    duration = np.abs(p_high - p_low) * dt

    # Post-transition aberration region: from the band entry for ~3 durations, stopping
    # before the next transition starts (its first reference crossing).
    rising = direction > 0
    start_next = np.where(rising, p_low, p_high)[1:]  # where the next edge starts
    length = np.maximum(np.ceil(ABERRATION_DURATIONS * duration / dt), _MIN_ABERRATION_SAMPLES)
    end = entry + length.astype(np.int64)
    end[:-1] = np.minimum(end[:-1], np.floor(start_next).astype(np.int64) + 1)
    end = np.clip(np.maximum(end, entry + 1), None, y.size)
    bounds = np.empty(2 * n_edges, np.int64)
    bounds[0::2], bounds[1::2] = entry, end
    if bounds[-1] >= y.size:
        bounds = bounds[:-1]
    aberration = np.zeros(n_edges)
    aberration_u = np.zeros(n_edges)
    sigma = noise_rms(y) if state.method != "minmax" else 0.0
    if state.method != "minmax":  # min/max levels: 0 by construction (REFERENCES §1)
        for k in range(n_edges):
            seg = y[entry[k] : end[k]].astype(np.float64)
            half = int(round(PEAK_FIT_DURATIONS * duration[k] / dt))
            if rising[k]:
                peak, var = _settled_peak(seg, half)
                aberration[k] = peak - state.high_v
                aberration_u[k] = sigma * math.sqrt(var)
            else:
                peak, var = _settled_peak(-seg, half)
                aberration[k] = state.low_v + peak
                aberration_u[k] = sigma * math.sqrt(var)
        aberration = np.maximum(aberration, 0.0) / amp * 100.0
        aberration_u = aberration_u / amp * 100.0

    return Transitions(
        direction.astype(np.int8),
        t0 + p_low * dt,
        t0 + p_mid * dt,
        t0 + p_high * dt,
        duration,
        aberration,
        aberration_u,
    )


def slow_reading_fraction(samples: float) -> float:
    """How much slow (a fraction) linear interpolation reads a first-order edge that spans
    ``samples`` samples between its reference levels: the computed table beside
    ``MIN_EDGE_SAMPLES``, interpolated; 0 from 10 samples on."""
    if samples >= 10.0:
        return 0.0
    xs, ys = zip(*_SLOW_READING_PCT, (10.0, 0.0), strict=True)
    return float(np.interp(samples, xs, ys)) / 100.0


def noise_rms(y: np.ndarray) -> float:
    """The record's white-noise rms (V), robustly: 1.4826 x the median absolute second
    difference / sqrt(6) (var(d2) = 6 sigma^2 for white noise; the median ignores the few
    large second differences at edges and steps; 1.4826 = 1/Phi^-1(3/4) makes a MAD a
    normal sigma, common practice), at least one ADC code / sqrt(12). On at most the first
    2^20 samples."""
    part = np.asarray(y[: 1 << 20], dtype=np.float64)
    if part.size < 3:
        return 0.0
    d2 = np.abs(np.diff(part, 2))
    robust = 1.4826 * float(np.median(d2)) / math.sqrt(6.0)
    # A quantised record whose noise is under one code has a median second difference of 0:
    # its noise is then the quantisation's own, one code / sqrt(12) (GUM §4.3.7).
    return max(robust, code_step(part) / math.sqrt(12.0))


def crossing_noise(
    y: np.ndarray, dt: float, t0: float, tr: Transitions, rising: bool, sigma: float
) -> float:
    """The standard uncertainty (s) that noise of ``sigma`` V rms gives one edge's 10-90
    duration: at each reference crossing a time error of sigma / (the local slope there) (a
    crossing's time uncertainty is u(y)/slope, REFERENCES §10 [computed]), the two crossings
    in quadrature; the median over the record's edges of one direction. The local slope is
    read across +/- a tenth of the edge's duration around the crossing (not the edge's mean
    slope: on a first-order edge the slope at 90 % is a ninth of that at 10 %). 0 when no
    edge of that direction has samples around both crossings."""
    y = np.asarray(y)
    sel = (tr.direction > 0) == rising
    per_edge = []
    for t_lo, t_hi, d in zip(tr.t_low_s[sel], tr.t_high_s[sel], tr.duration_s[sel], strict=True):
        h = max(1, int(round(0.1 * float(d) / dt)))
        u2, ok = 0.0, True
        for t in (t_lo, t_hi):
            i = int(round((float(t) - t0) / dt))
            if i - h < 0 or i + h >= y.size:
                ok = False
                break
            slope = abs(float(y[i + h]) - float(y[i - h])) / (2 * h * dt)
            if slope <= 0:
                ok = False
                break
            u2 += (sigma / slope) ** 2
        if ok:
            per_edge.append(math.sqrt(u2))
    return float(np.median(per_edge)) if per_edge else 0.0


def code_step(y: np.ndarray) -> float:
    """The smallest non-zero step between successive samples (V): one ADC code of a
    quantised record (0 for a constant one). On at most the first 100 000 samples."""
    steps = np.abs(np.diff(np.asarray(y[:100_000], dtype=np.float64)))
    steps = steps[steps > 0]
    return float(steps.min()) if steps.size else 0.0


def _settled_peak(seg: np.ndarray, half: int) -> tuple[float, float]:
    """The highest point of the settled response in ``seg`` (float64) and the variance factor
    of that estimate (its variance is factor x sigma^2 for white noise sigma).

    Not the highest noisy sample, which reads about sigma sqrt(2 ln N) high on N samples:
    the peak is located on the even samples smoothed over ``half`` of them (a moving average
    spanning about 2 x ``half`` samples), and estimated by a least-squares quadratic through
    the odd samples within ``half`` samples of it (its vertex inside the window, else its value
    at the located centre). Locating and estimating on disjoint samples keeps the noise that chose the
    location out of the estimate (no selection bias). The window, ``half`` = a quarter of
    the 10-90 transition duration either side, is short against a ringing's half period
    (about 2.5 rise times at zeta = 0.3 [computed]): a quadratic follows the peak of a
    cosine over +/- 0.31 rad to 0.04 % [computed]. With fewer than 3 samples either side
    it falls back to the highest sample (factor 1).
    """
    n = seg.size
    if half < 3 or n < 2 * half + 2:
        return float(seg.max()), 1.0
    even = seg[0::2]
    w = max(1, half // 2)  # even samples cover twice their count in the record
    c = np.concatenate(([0.0], np.cumsum(even)))
    smooth = (c[w:] - c[:-w]) / w
    # Ties (a quantised record has many) must break the same way whatever the volts per
    # division: compare the smoothed values normalised to their range, rounded to 1e-9.
    spread = float(smooth.max() - smooth.min())
    if spread > 0:
        smooth = np.round((smooth - smooth.min()) / spread * 1e9)
    centre = 2 * (int(np.argmax(smooth)) + (w - 1) / 2.0)
    lo = max(int(math.ceil(centre - half)), 0)
    hi = min(int(math.floor(centre + half)), n - 1)
    idx = np.arange(lo, hi + 1)
    idx = idx[idx % 2 == 1]
    if idx.size < 4:
        return float(seg.max()), 1.0
    x = (idx - centre) / max(half, 1)
    design = np.stack([np.ones_like(x), x, x * x], axis=1)
    gram_inv = np.linalg.inv(design.T @ design)
    coef = gram_inv @ (design.T @ seg[idx])
    a, b = coef[2], coef[1]
    # The vertex when the fit has a peak inside the window, else the located centre; never
    # the higher of several noisy points (that would bring the selection bias back).
    v = 0.0
    if a < 0 and x[0] <= -b / (2 * a) <= x[-1]:
        v = float(-b / (2 * a))
    basis = np.array([1.0, v, v * v])
    return float(coef[0] + b * v + a * v * v), float(basis @ gram_inv @ basis)


def negative_excursion(y: np.ndarray) -> float:
    """The most negative value of the record in volts, or 0.0 if it never goes below 0 V.

    For a switch node this is how far it rings below ground at turn-off (the body diode or
    the low-side switch clamps it; the driver's VS pin has a negative rating to check).
    """
    y = np.asarray(y)
    if y.size == 0:
        raise AnalysisError("empty record")
    low = float(y.min())
    if math.isnan(low):
        raise AnalysisError("the record contains NaN samples")
    return min(low, 0.0)


@dataclass(frozen=True)
class Trough:
    """The lowest point of a record's settled response (V): ``value_v``, the standard
    uncertainty of its fit ``u_fit_v`` (V, k = 1), the record's noise ``noise_v`` (V rms),
    how many troughs it is the lowest of (``candidates``) and ``method``: "settled" (after a
    falling edge, by the settled-peak method) or "lowest sample" (a dip no edge explains)."""

    value_v: float
    u_fit_v: float
    noise_v: float
    candidates: int
    method: str


def settled_trough(y: np.ndarray, m: EdgeMetrics) -> Trough:
    """The lowest point of the record's settled response (V), not its lowest noisy sample.

    After each falling edge the trough is the undershoot found by the settled-peak method
    (``_settled_peak``: located and estimated on disjoint samples, so the noise that chose it
    does not bias it), or the low state level when the edge does not undershoot; the lowest
    of them is taken. The lowest noisy sample of N reads about sigma sqrt(2 ln N) low (the
    expected extreme of N normal draws, common practice): if the record dips further below
    that trough than 3 sigma more, the dip is something no falling edge explains (a spike
    elsewhere) and the lowest sample itself is reported."""
    tr = m.transitions
    sigma = noise_rms(np.asarray(y))
    amp = m.amplitude_v
    u_level = (m.level_uncertainty_pct or 0.0) * amp / 100.0
    values, us = [], []
    if tr is not None:
        falling = tr.direction < 0
        for ab, u in zip(tr.aberration_pct[falling], tr.aberration_u_pct[falling], strict=True):
            values.append(m.low_level_v - float(ab) * amp / 100.0)
            u_fit = float(u) * amp / 100.0 if ab > 0 else sigma / math.sqrt(max(m.samples, 1))
            us.append(math.hypot(u_fit, u_level))
    n = max(int(np.asarray(y).size), 2)
    lowest = float(m.min_v)
    if not values or lowest < min(values) - sigma * (math.sqrt(2.0 * math.log(n)) + 3.0):
        return Trough(lowest, sigma, sigma, n, "lowest sample")
    k = int(np.argmin(values))
    return Trough(float(values[k]), float(us[k]), sigma, len(values), "settled")


def _stats(values: np.ndarray) -> tuple[float | None, float | None, float | None]:
    if values.size == 0:
        return None, None, None
    return float(np.median(values)), float(values.min()), float(values.max())


def _median_max(values: np.ndarray) -> tuple[float | None, float | None]:
    if values.size == 0:
        return None, None
    return float(np.median(values)), float(values.max())


def _no_edge_reasons(rise_found: bool, fall_found: bool, reasons: dict[str, str]) -> None:
    """Why each rising (falling) edge metric is absent when the record has no such edge."""
    if not rise_found:
        for k in ("rise_time_s", "rise_time_min_s", "rise_time_max_s", "overshoot_pct"):
            reasons[k] = "no rising edge in the record"
        reasons["overshoot_max_pct"] = reasons["slew_rate_rise_v_per_s"] = reasons["rise_time_s"]
    if not fall_found:
        for k in ("fall_time_s", "fall_time_min_s", "fall_time_max_s", "undershoot_pct"):
            reasons[k] = "no falling edge in the record"
        reasons["undershoot_max_pct"] = reasons["slew_rate_fall_v_per_s"] = reasons["fall_time_s"]


def _level_uncertainty_pct(y: np.ndarray, state: StateLevels) -> float:
    """Standard uncertainty (% of amplitude) of the state level an aberration is read from.

    The level is known to within its histogram bin (the refined level lies in the modal bin):
    rectangular over +/- half a bin, u = bin/sqrt(12) (GUM §4.3.7), common to every edge of the
    record; 0 with min/max levels. One ADC code adds its own rectangular part (the level and
    the peak are read in codes)."""
    if state.method == "minmax":
        return 0.0
    code_pct = 100.0 * code_step(y) / state.amplitude_v
    return math.hypot(100.0 / HISTOGRAM_BINS, code_pct) / math.sqrt(12.0)


def _aberration_uncertainty(
    values: np.ndarray, u: np.ndarray, u_level: float
) -> tuple[float | None, float | None]:
    """Expanded (k = 2) uncertainty of the median and of the largest of ``values`` (%):
    the median of n estimates has a standard error sqrt(pi/2) u/sqrt(n) for normal errors
    (the median's asymptotic efficiency, common practice); the largest is one edge's
    (the fit's, without the scatter: the largest is not a typical edge); the
    level's part is added in quadrature to both (GUM §5.1.2, uncorrelated inputs)."""
    if values.size == 0:
        return None, None
    # Per edge: the fit's noise (type B from the record's noise), or the edges' own
    # scatter when it is larger (type A, GUM §4.2: the location's jitter shows there).
    u_edge = float(np.median(u))
    if values.size >= 3:
        u_edge = max(u_edge, float(np.std(values, ddof=1)))
    u_median = math.sqrt(math.pi / 2.0) * u_edge / math.sqrt(values.size)
    u_max = float(u[int(np.argmax(values))])
    return 2.0 * math.hypot(u_median, u_level), 2.0 * math.hypot(u_max, u_level)


def _pulse_timing(
    mids: np.ndarray, rising: np.ndarray, reasons: dict[str, str]
) -> tuple[float | None, float | None, float | None, float | None, float | None]:
    """(pulse width s, negative pulse width s, period s, frequency Hz, duty cycle) from the
    edges' mid-reference instants (IEEE 181), each None with its reason when the record
    lacks the edges it needs."""
    falling = ~rising
    gaps = np.diff(mids)
    high_widths = gaps[rising[:-1]]
    low_widths = gaps[falling[:-1]]
    pulse_width = float(np.median(high_widths)) if high_widths.size else None
    negative_width = float(np.median(low_widths)) if low_widths.size else None
    if pulse_width is None:
        reasons["pulse_width_s"] = "no rising edge followed by a falling edge"
    if negative_width is None:
        reasons["negative_pulse_width_s"] = "no falling edge followed by a rising edge"
    periods = np.concatenate((np.diff(mids[rising]), np.diff(mids[falling])))
    if periods.size:
        period = float(np.median(periods))
        frequency = 1.0 / period
    else:
        period = frequency = None
        reasons["period_s"] = reasons["frequency_hz"] = (
            "fewer than two edges of the same direction (no full period)"
        )
    if period is not None and pulse_width is not None:
        duty = pulse_width / period
    elif period is not None and negative_width is not None:
        duty = 1.0 - negative_width / period
    else:
        duty = None
        reasons["duty_cycle"] = reasons.get("period_s", "no complete pulse in the record")
    return pulse_width, negative_width, period, frequency, duty


def _few_samples_warnings(
    rise_samples: float | None,
    fall_samples: float | None,
    pct: tuple[float, float, float],
    dt: float,
) -> list[str]:
    """A warning per direction whose fastest edge spans fewer than ``MIN_EDGE_SAMPLES``."""
    warnings: list[str] = []
    for what, count in (("rising", rise_samples), ("falling", fall_samples)):
        if count is not None and count < MIN_EDGE_SAMPLES:
            slow = 100.0 * slow_reading_fraction(count)
            warnings.append(
                f"the fastest {what} edge spans only {count:.1f} samples between its "
                f"{pct[0]:g} % and {pct[2]:g} % levels (fewer than {MIN_EDGE_SAMPLES}): "
                f"interpolating between so few samples reads a first-order edge about "
                f"+{slow:.1f} % slow; sample faster: more record points over the same time span, "
                f"or a shorter time span with the same points (now {dt:.3g} s per sample; aim "
                f"for {count * dt / MIN_EDGE_SAMPLES:.3g} s or less)"
            )
    return warnings


def _cycle_mean(
    y: np.ndarray, mids: np.ndarray, rising: np.ndarray, t0: float, dt: float
) -> float | None:
    """The record's mean (V) over whole periods only, so that a part-period at either end
    does not bias it; None without a full period."""
    falling = ~rising
    same = mids[rising] if rising.sum() >= 2 else mids[falling]
    if same.size >= 2:
        i0 = int(round((same[0] - t0) / dt))
        i1 = int(round((same[-1] - t0) / dt))
        if i1 > i0:
            return float(np.mean(y[i0:i1], dtype=np.float64))
    return None


def _edge_shape(
    y: np.ndarray,
    tr: Transitions,
    rising: np.ndarray,
    state: StateLevels,
    pct: tuple[float, float, float],
    reasons: dict[str, str],
) -> dict[str, float | None]:
    """The ``EdgeMetrics`` fields of the edges' shape: rise and fall times (median, fastest,
    slowest; s), overshoot and undershoot (median, largest; % of amplitude) with their
    expanded uncertainties, and the slew rates between the low and high reference levels
    (V/s). Each absent one gets its reason in ``reasons``."""
    falling = ~rising
    span = pct[2] - pct[0]
    amp = state.amplitude_v
    rise = _stats(tr.duration_s[rising])
    fall = _stats(tr.duration_s[falling])
    _no_edge_reasons(rise[0] is not None, fall[0] is not None, reasons)
    u_level = _level_uncertainty_pct(y, state)
    overshoot = _median_max(tr.aberration_pct[rising])
    undershoot = _median_max(tr.aberration_pct[falling])
    u_over = _aberration_uncertainty(
        tr.aberration_pct[rising], tr.aberration_u_pct[rising], u_level
    )
    u_under = _aberration_uncertainty(
        tr.aberration_pct[falling], tr.aberration_u_pct[falling], u_level
    )
    return {
        "rise_time_s": rise[0],
        "rise_time_min_s": rise[1],
        "rise_time_max_s": rise[2],
        "fall_time_s": fall[0],
        "fall_time_min_s": fall[1],
        "fall_time_max_s": fall[2],
        "overshoot_pct": overshoot[0],
        "overshoot_max_pct": overshoot[1],
        "undershoot_pct": undershoot[0],
        "undershoot_max_pct": undershoot[1],
        "slew_rate_rise_v_per_s": None if rise[0] is None else span / 100.0 * amp / rise[0],
        "slew_rate_fall_v_per_s": None if fall[0] is None else -span / 100.0 * amp / fall[0],
        "overshoot_uncertainty_pct": u_over[0],
        "overshoot_max_uncertainty_pct": u_over[1],
        "undershoot_uncertainty_pct": u_under[0],
        "undershoot_max_uncertainty_pct": u_under[1],
        "level_uncertainty_pct": u_level,
    }


def measure_edges(
    y: np.ndarray,
    dt: float,
    t0: float = 0.0,
    levels: tuple[float, float, float] = (10, 50, 90),
    *,
    level_method: str = "auto",
    band_pct: float = STATE_BAND_PCT,
) -> EdgeMetrics:
    """Measure every transition of the uniformly sampled record ``y`` (V; ``dt`` s apart).

    ``levels`` are the low/mid/high reference levels in % of amplitude (IEEE 181; 10/50/90 by
    default, 20/80 for very fast edges). Raises ``AnalysisError`` when nothing can be measured:
    too few samples, NaN, one level only, or no complete transition.
    """
    y = _as_record(y, dt)
    pct = _check_levels(levels)
    dt, t0 = float(dt), float(t0)
    ymin, ymax = _min_max(y)
    state = _state_levels(y, level_method, ymin, ymax)
    tr = _find(y, dt, t0, pct, state, band_pct)
    if len(tr) == 0:
        raise AnalysisError(
            "no complete transition between the low and high levels "
            f"({state.low_v:.4g} V and {state.high_v:.4g} V)"
        )
    reasons: dict[str, str] = {}
    rising = tr.direction > 0
    shape = _edge_shape(y, tr, rising, state, pct, reasons)
    pulse_width, negative_width, period, frequency, duty = _pulse_timing(
        tr.t_mid_s, rising, reasons
    )
    fastest_rise, fastest_fall = shape["rise_time_min_s"], shape["fall_time_min_s"]
    rise_samples = None if fastest_rise is None else fastest_rise / dt
    fall_samples = None if fastest_fall is None else fastest_fall / dt
    warnings = _few_samples_warnings(rise_samples, fall_samples, pct, dt)
    mean_v = float(np.mean(y, dtype=np.float64))
    cycle_mean = _cycle_mean(y, tr.t_mid_s, rising, t0, dt)
    if cycle_mean is None:
        reasons["cycle_mean_v"] = "no full period in the record"

    ref_v = tuple(float(state.reference(p)) for p in pct)
    return EdgeMetrics(
        low_level_v=float(state.low_v),
        high_level_v=float(state.high_v),
        level_method=state.method,
        amplitude_v=float(state.amplitude_v),
        reference_levels_pct=pct,
        reference_levels_v=ref_v,  # type: ignore[arg-type]
        edges=len(tr),
        rising_edges=int(rising.sum()),
        falling_edges=int((~rising).sum()),
        **shape,
        pulse_width_s=pulse_width,
        negative_pulse_width_s=negative_width,
        period_s=period,
        frequency_hz=frequency,
        duty_cycle=duty,
        mean_v=mean_v,
        cycle_mean_v=cycle_mean,
        min_v=ymin,
        max_v=ymax,
        negative_excursion_v=min(ymin, 0.0),
        samples=int(y.size),
        dt_s=dt,
        record_length_s=dt * y.size,
        reasons=reasons,
        transitions=tr,
        rise_time_samples=rise_samples,
        fall_time_samples=fall_samples,
        warnings=warnings,
    )
