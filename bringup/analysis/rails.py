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
