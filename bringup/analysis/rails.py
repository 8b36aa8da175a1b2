"""A DC rail record: mean, ripple and noise."""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np

from bringup.errors import AnalysisError

__all__ = ["RailMetrics", "measure_rail"]

_MIN_SAMPLES = 2


@dataclass(frozen=True)
class RailMetrics:
    """A DC rail (V): ``mean_v``, ``ripple_pp_v`` (max - min over the record), ``noise_rms_v``
    (AC rms: standard deviation about the mean), ``min_v``, ``max_v``."""

    mean_v: float
    ripple_pp_v: float
    noise_rms_v: float
    min_v: float
    max_v: float
    samples: int

    def to_dict(self) -> dict:
        return asdict(self)


def measure_rail(y: np.ndarray) -> RailMetrics:
    """Mean, peak-to-peak ripple, rms noise, min and max of a DC rail record (V).

    Peak-to-peak is over the whole record, as a scope's Vpp: its bandwidth and record length
    set what it includes. Raises ``AnalysisError`` for fewer than 2 samples or NaN.
    """
    y = np.asarray(y)
    if y.ndim != 1 or y.size < _MIN_SAMPLES:
        raise AnalysisError(f"a rail record needs at least {_MIN_SAMPLES} samples, got {y.size}")
    lo, hi = float(y.min()), float(y.max())
    if not (math.isfinite(lo) and math.isfinite(hi)):
        raise AnalysisError("the rail record contains NaN or infinite samples")
    mean = float(np.mean(y, dtype=np.float64))
    rms = float(np.std(y, dtype=np.float64))
    return RailMetrics(mean, hi - lo, rms, lo, hi, int(y.size))


@dataclass(frozen=True)
class RippleEstimate:
    """The peak-to-peak of a rail's ripple with the record's random noise taken out (V).

    ``value_v`` is the estimate; ``raw_pp_v`` the record's max - min (a scope's Vpp, noise
    included); ``smoothed_pp_v``/``coarse_pp_v`` the peak-to-peak after a moving average of
    ``width`` and 2 x ``width`` samples; ``noise_rms_v`` the record's white noise (V rms);
    ``selection_v`` the correction for the noise that lifts the smoothed maximum and lowers
    the minimum (V, subtracted; its half-range is the same); ``attenuation_v`` the correction
    for what the moving average takes off the peaks (V, added; its half-range is half of it).
    """

    value_v: float
    raw_pp_v: float
    smoothed_pp_v: float
    coarse_pp_v: float
    width: int
    noise_rms_v: float
    selection_v: float
    attenuation_v: float
    samples: int

    def to_dict(self) -> dict:
        return asdict(self)


def _moving_pp(y: np.ndarray, width: int) -> float:
    """Peak-to-peak of the moving average of ``width`` samples (valid part only)."""
    if width <= 1:
        return float(y.max() - y.min())
    c = np.concatenate(([0.0], np.cumsum(y, dtype=np.float64)))
    smooth = (c[width:] - c[:-width]) / width
    return float(smooth.max() - smooth.min())


def _selection(noise_v: float, width: int, samples: int) -> float:
    """Upper bound (V) of what noise adds to a peak-to-peak read on the moving average of
    ``width`` samples: each extreme reads high by up to sigma_w sqrt(2 ln m), the expected
    largest of m = samples/width independent normal draws (common practice), so the sum of
    both lies between 0 and twice that."""
    m = samples / max(width, 1)
    if m < 2:
        return 0.0
    return 2.0 * noise_v / math.sqrt(width) * math.sqrt(2.0 * math.log(m))


def ripple_estimate(y: np.ndarray) -> RippleEstimate:
    """Peak-to-peak ripple (V) of a rail record, unbiased by its random noise.

    A record's max - min is biased: white noise of sigma adds about 2 sigma sqrt(2 ln N) on N
    samples (4.3 sigma at 10 000: the expected extreme of normal draws), whatever the ripple.
    So the record is first averaged over ``width`` samples (a power of two, about N/512: a
    ripple period spans hundreds of samples in a rail record, so the peaks lose little while
    the noise drops by sqrt(width)); the noise still lifting the averaged extremes is
    subtracted (half of ``_selection``'s bound, with the other half as its uncertainty);
    and what the average takes off the peaks is estimated from the same average over twice
    the width (Richardson's idea: a triangle's apex loses in proportion to the width, a
    rounded peak to its square, so the loss at ``width`` lies between 1/3 and 1 times the
    difference of the two, noise bias removed; the middle, 2/3, is added). The noise is
    ``edges.noise_rms`` (second differences: blind to slow ripple and to a few steps).
    """
    from bringup.analysis.edges import noise_rms

    y = np.asarray(y)
    if y.ndim != 1 or y.size < _MIN_SAMPLES:
        raise AnalysisError(f"a rail record needs at least {_MIN_SAMPLES} samples, got {y.size}")
    n = int(y.size)
    sigma = noise_rms(y)
    width = 1 << max(int(math.floor(math.log2(max(n // 512, 1)))), 0)
    pp_w = _moving_pp(y, width)
    pp_2w = _moving_pp(y, 2 * width) if n >= 4 * width else pp_w
    sel_w, sel_2w = _selection(sigma, width, n), _selection(sigma, 2 * width, n)
    loss = max((pp_w - sel_w / 2) - (pp_2w - sel_2w / 2), 0.0)
    value = max(pp_w - sel_w / 2 + 2.0 * loss / 3.0, 0.0)
    return RippleEstimate(value, float(y.max() - y.min()), pp_w, pp_2w, width, sigma,
                          sel_w / 2, 2.0 * loss / 3.0, n)  # fmt: skip
