"""The Miller plateau inside a rising gate-source edge.

While the drain-source voltage swings, the gate current flows into C_gd and V_gs stays near
V_pl ~ V_th + I_D/g_fs (TI SLUA618, "Fundamentals of MOSFET and IGBT Gate Driver Circuits",
§2). On a V_gs capture it is a shelf in the middle of the rising edge.

Method (per rising edge, between its low and high reference crossings): smooth the record with
a boxcar of about a tenth of the edge, take the slope over that span, and call "flat" where the
slope is below 20 % of the edge's mean 10-90 slope. The longest flat run that is followed by a
further rise of at least 10 % of the amplitude (so that the slow approach of an RC edge to its
top is not taken for a plateau) is the shelf. Its extent is then refined on the voltage: the
contiguous samples that stay within the shelf's voltage span +/- max(4 sigma noise, 1 % of the
amplitude). The plateau voltage is the median over the shelf; the duration its extent.
With several rising edges the medians over the edges that show a shelf are reported.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np

from bringup.analysis.edges import find_transitions

__all__ = ["PlateauResult", "find_miller_plateau"]

FLAT_SLOPE_FRACTION = 0.2
_RISE_AFTER_FRACTION = 0.10
_MIN_RUN_SAMPLES = 3


@dataclass(frozen=True)
class PlateauResult:
    """A Miller plateau: ``voltage_v`` (V), ``duration_s`` (s), ``start_s`` of the first one.

    ``edges_with_plateau`` of ``edges_examined`` rising edges showed a shelf. For its
    uncertainty (``budgets.plateau_budget``): each shelf's voltage ``edge_voltages_v``, its
    sample count ``shelf_samples``, the largest drift along a shelf ``drift_v`` (V, a line
    fitted over it), the largest gap between a shelf's median and its middle half's
    ``edge_bias_v`` (V: the ramps' samples counted in), the record's noise ``noise_v``.
    """

    voltage_v: float
    duration_s: float
    start_s: float
    edges_with_plateau: int
    edges_examined: int
    edge_voltages_v: tuple[float, ...] = ()
    shelf_samples: tuple[int, ...] = ()
    drift_v: float = 0.0
    edge_bias_v: float = 0.0
    noise_v: float = 0.0

    def to_dict(self) -> dict:
        return asdict(self)


def _boxcar(x: np.ndarray, width: int) -> np.ndarray:
    """Centred moving average (same length; the ends use the valid part only)."""
    if width <= 1:
        return x.astype(np.float64)
    c = np.concatenate(([0.0], np.cumsum(x, dtype=np.float64)))
    half = width // 2
    idx = np.arange(x.size)
    lo = np.clip(idx - half, 0, x.size)
    hi = np.clip(idx - half + width, 0, x.size)
    return (c[hi] - c[lo]) / (hi - lo)


def _runs(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Start and end (exclusive) of each run of True."""
    d = np.diff(np.concatenate(([0], mask.astype(np.int8), [0])))
    return np.flatnonzero(d == 1), np.flatnonzero(d == -1)


def _shelf(seg: np.ndarray, amp: float, slope_mean: float, dt: float, noise: float):
    """(start index, end index, voltage) of the shelf in one edge segment, or None."""
    n = seg.size
    threshold = FLAT_SLOPE_FRACTION * slope_mean
    # Boxcar width: wide enough that noise on the slope stays under a quarter of the flatness
    # threshold (slope noise ~ sigma*sqrt(2)/(w**1.5 dt)), never wider than a tenth of the edge.
    for_noise = math.ceil((4.0 * math.sqrt(2.0) * noise / (threshold * dt)) ** (2.0 / 3.0))
    width = max(3, min(n // 10, max(n // 40, for_noise)))
    smooth = _boxcar(seg, width)
    half = max(1, width // 2)
    slope = np.empty(n)
    slope[half:-half] = (smooth[2 * half :] - smooth[: -2 * half]) / (2 * half * dt)
    slope[:half] = slope[half]
    slope[-half:] = slope[-half - 1]
    flat = slope < threshold
    starts, ends = _runs(flat)
    best = None
    for s, e in zip(starts, ends, strict=True):
        if e - s < _MIN_RUN_SAMPLES:
            continue
        after = smooth[e:]
        if after.size == 0 or after.max() - smooth[e - 1] < _RISE_AFTER_FRACTION * amp:
            continue  # no further rise: the top of the edge, not a shelf
        if best is None or e - s > best[1] - best[0]:
            best = (s, e)
    if best is None:
        return None
    s, e = best
    light = _boxcar(seg, 5)
    delta = max(4.0 * noise, 0.01 * amp)
    lo_v, hi_v = light[s:e].min() - delta, light[s:e].max() + delta
    inside = (light >= lo_v) & (light <= hi_v)
    # Grow the run outwards while the samples stay in the shelf's voltage band.
    while s > 0 and inside[s - 1]:
        s -= 1
    while e < n and inside[e]:
        e += 1
    volts = float(np.median(seg[s:e]))
    # For the budget: the shelf's drift along it (a least-squares line through it) and how far
    # its median sits from the median of its middle half (where no ramp sample reaches).
    shelf = seg[s:e].astype(np.float64)
    x = np.arange(shelf.size) - (shelf.size - 1) / 2.0
    sxx = float(np.dot(x, x))
    drift = abs(float(np.dot(x, shelf)) / sxx * shelf.size) if sxx > 0 else 0.0
    quarter = shelf.size // 4
    core = shelf[quarter : shelf.size - quarter] if shelf.size >= 8 else shelf
    bias = abs(volts - float(np.median(core)))
    # The shelf starts where the incoming ramp, extended, meets the plateau voltage (and ends
    # where the outgoing ramp leaves it): remove the time the ramps spend inside the band.
    m = max(2, width // 2)
    start, end = float(s), float(e)
    if s - 1 - m >= 0:
        rate = (light[s - 1] - light[s - 1 - m]) / m
        if rate > 0:
            start = min(max(s - 1 + (volts - light[s - 1]) / rate, s - 1.0), e - 1.0)
    if e + m < n:
        rate = (light[e + m] - light[e]) / m
        if rate > 0:
            end = max(min(e - (light[e] - volts) / rate, float(e)), start + 1.0)
    return start, end, volts, (drift, bias, e - s)


def find_miller_plateau(vgs: np.ndarray, dt: float, t0: float = 0.0) -> PlateauResult | None:
    """Find the Miller plateau of the rising edges of a V_gs record (V, ``dt`` s apart).

    Returns None when no rising edge shows a shelf. Raises ``AnalysisError`` when the record
    has no rising edge to look in (too few samples, one level only).
    """
    vgs = np.asarray(vgs)
    tr, state = find_transitions(vgs, dt, t0)
    amp = state.amplitude_v
    noise = max(state.low_noise_v, state.high_noise_v)
    rising = np.flatnonzero(tr.direction > 0)
    found = []
    for k in rising:
        i0 = int(math.floor((tr.t_low_s[k] - t0) / dt))
        i1 = int(math.ceil((tr.t_high_s[k] - t0) / dt)) + 1
        i0, i1 = max(i0, 0), min(i1, vgs.size)
        if i1 - i0 < 4 * _MIN_RUN_SAMPLES:
            continue  # too few samples on this edge to see a shelf
        slope_mean = 0.8 * amp / max(tr.duration_s[k], dt)
        hit = _shelf(vgs[i0:i1], amp, slope_mean, dt, noise)
        if hit is not None:
            s, e, volts, extra = hit
            found.append((volts, (e - s) * dt, t0 + (i0 + s) * dt, *extra))
    if not found:
        return None
    volts, durations, starts, drift, bias, count = (np.array(v) for v in zip(*found, strict=True))
    return PlateauResult(
        voltage_v=float(np.median(volts)),
        duration_s=float(np.median(durations)),
        start_s=float(starts[0]),
        edges_with_plateau=len(found),
        edges_examined=int(rising.size),
        edge_voltages_v=tuple(float(v) for v in volts),
        shelf_samples=tuple(int(c) for c in count),
        drift_v=float(drift.max()),
        edge_bias_v=float(bias.max()),
        noise_v=float(noise),
    )
