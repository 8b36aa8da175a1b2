"""Statistics of one metric across a batch of boards: robust centre and spread, outliers,
process capability. Pure numpy, no I/O.

- Centre and spread: the median and the median absolute deviation (MAD), scaled by
  1/Phi^-1(3/4) = 1.4826 so that it estimates the standard deviation of normal data (what
  ``scipy.stats.median_abs_deviation(x, scale="normal")`` returns).
- Outliers: the modified z-score M_i = 0.6745 (x_i - median) / MAD, flagged when |M_i| > 3.5
  (Iglewicz and Hoaglin, *How to Detect and Handle Outliers*, 1993). A board is flagged only
  when its difference from the median is also larger than a floor the caller gives (the
  measurement's expanded uncertainty): a difference the measurement cannot resolve is not a
  finding, and quantised readings (a scope's codes) often make the MAD tiny or zero.
- Capability: Cp = (USL - LSL) / 6s, Cpu = (USL - mean) / 3s, Cpl = (mean - LSL) / 3s,
  Cpk = min(Cpu, Cpl) (NIST/SEMATECH e-Handbook of Statistical Methods, section 6.1.6); s is
  the sample standard deviation. One-sided limits give the one-sided index only. They are
  worked out only from ``MIN_CAPABILITY_BOARDS`` boards up, always with their 95 %
  confidence intervals: Cp's from the chi-square distribution of s^2, Cpk's from Bissell's
  normal approximation Cpk +- z sqrt(1/(9n) + Cpk^2 / (2(n-1))).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

__all__ = [
    "MAD_NORMAL_SCALE",
    "MIN_CAPABILITY_BOARDS",
    "MIN_OUTLIER_BOARDS",
    "MODIFIED_Z_CUTOFF",
    "Capability",
    "Distribution",
    "capability",
    "chi2_quantile",
    "distribution",
    "modified_z_scores",
    "scaled_mad",
]

#: 1 / Phi^-1(3/4): the MAD of normal data times this estimates its standard deviation
MAD_NORMAL_SCALE = 1.482602218505602
#: Iglewicz and Hoaglin's constant 0.6745 (Phi^-1(3/4) to four places) and cut-off 3.5
MODIFIED_Z_FACTOR = 0.6745
MODIFIED_Z_CUTOFF = 3.5
#: With two boards every |M| is 0.6745: the rule needs three to say anything.
MIN_OUTLIER_BOARDS = 3
#: Fewer boards than this and Cp/Cpk are not given: at n = 20 the 95 % interval of Cp already
#: spans 0.69 to 1.31 times the estimate (chi-square with 19 degrees of freedom), at n = 10
#: 0.55 to 1.45, at n = 5 0.35 to 1.67: below 20 the index says little more than its interval.
MIN_CAPABILITY_BOARDS = 20
#: Phi^-1(0.975): the two-sided 95 % normal quantile
_Z95 = 1.959963984540054


def _finite(values: Sequence[float] | np.ndarray) -> np.ndarray:
    x = np.asarray(values, dtype=float).ravel()
    if not np.all(np.isfinite(x)):
        raise ValueError("batch statistics need finite values (a NaN or inf was passed)")
    return x


def scaled_mad(values: Sequence[float] | np.ndarray) -> float:
    """MAD x 1.4826 (same unit as ``values``): a robust estimate of the standard deviation."""
    x = _finite(values)
    if x.size == 0:
        raise ValueError("no values")
    return float(np.median(np.abs(x - np.median(x))) * MAD_NORMAL_SCALE)


def modified_z_scores(values: Sequence[float] | np.ndarray) -> np.ndarray:
    """M_i = 0.6745 (x_i - median) / MAD (Iglewicz and Hoaglin 1993), dimensionless.

    When the MAD is zero (more than half the values are equal) a value equal to the median
    scores 0 and any other value +-inf: it differs from the majority, by how much the MAD
    cannot say.
    """
    x = _finite(values)
    if x.size == 0:
        return x
    centre = np.median(x)
    deviation = x - centre
    mad = float(np.median(np.abs(deviation)))
    if mad > 0.0:
        return MODIFIED_Z_FACTOR * deviation / mad
    return np.where(deviation == 0.0, 0.0, np.copysign(np.inf, deviation))


@dataclass(frozen=True)
class Capability:
    """Process capability indices (dimensionless) with 95 % confidence intervals.

    ``cp`` only for two-sided limits; ``cpk`` is min(Cpu, Cpl) for two-sided limits and the
    one index there is for a one-sided limit (Cpu for a maximum, Cpl for a minimum).
    """

    n: int
    mean: float
    std: float  # sample standard deviation (ddof = 1), in the metric's unit
    cp: float | None
    cp_interval: tuple[float, float] | None
    cpu: float | None
    cpl: float | None
    cpk: float
    cpk_interval: tuple[float, float]


def chi2_quantile(p: float, dof: int) -> float:
    """The p-quantile of the chi-square distribution with ``dof`` degrees of freedom, by the
    Wilson-Hilferty cube-root normal approximation (within 0.5 % of the exact quantile from
    10 degrees of freedom up, which is all capability needs here)."""
    z = _normal_quantile(p)
    k = 2.0 / (9.0 * dof)
    return dof * (1.0 - k + z * math.sqrt(k)) ** 3


def _normal_quantile(p: float) -> float:
    """Phi^-1(p) by bisection on erf (no scipy): exact to ~1e-12, plenty for a quantile."""
    if not 0.0 < p < 1.0:
        raise ValueError(f"probability {p} outside (0, 1)")
    lo, hi = -40.0, 40.0
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        if 0.5 * (1.0 + math.erf(mid / math.sqrt(2.0))) < p:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


def capability(
    values: Sequence[float] | np.ndarray, lower: float | None, upper: float | None
) -> Capability | None:
    """Cp/Cpk of ``values`` against ``lower``/``upper`` (either may be None, not both).

    Returns None when there are fewer than ``MIN_CAPABILITY_BOARDS`` values, no limit, or no
    spread (s = 0: the indices would be infinite). Formulas: NIST/SEMATECH e-Handbook 6.1.6;
    Cp's interval Cp sqrt(chi2_{a/2, n-1} / (n-1)) .. Cp sqrt(chi2_{1-a/2, n-1} / (n-1)); Cpk's
    Bissell's normal approximation. Both assume roughly normal, independent values.
    """
    x = _finite(values)
    n = int(x.size)
    if n < MIN_CAPABILITY_BOARDS or (lower is None and upper is None):
        return None
    mean = float(np.mean(x))
    std = float(np.std(x, ddof=1))
    if std == 0.0:
        return None
    cpu = (upper - mean) / (3.0 * std) if upper is not None else None
    cpl = (mean - lower) / (3.0 * std) if lower is not None else None
    cpk = min(c for c in (cpu, cpl) if c is not None)
    half = _Z95 * math.sqrt(1.0 / (9.0 * n) + cpk * cpk / (2.0 * (n - 1)))
    cp = cp_interval = None
    if upper is not None and lower is not None:
        cp = (upper - lower) / (6.0 * std)
        dof = n - 1
        cp_interval = (
            cp * math.sqrt(chi2_quantile(0.025, dof) / dof),
            cp * math.sqrt(chi2_quantile(0.975, dof) / dof),
        )
    return Capability(n, mean, std, cp, cp_interval, cpu, cpl, cpk, (cpk - half, cpk + half))


@dataclass(frozen=True)
class Distribution:
    """One metric across the batch: robust centre and spread, each board's modified z-score
    and outlier flag (in the order the values were given), capability when there are enough
    boards. ``mad_zero`` says the MAD is zero (more than half the boards read the same)."""

    n: int
    median: float
    scaled_mad: float
    minimum: float
    maximum: float
    z_scores: tuple[float, ...]
    outliers: tuple[bool, ...]
    mad_zero: bool
    capability: Capability | None


def distribution(
    values: Sequence[float] | np.ndarray,
    lower: float | None = None,
    upper: float | None = None,
    floors: Sequence[float] | np.ndarray | None = None,
    cutoff: float = MODIFIED_Z_CUTOFF,
) -> Distribution:
    """The batch statistics of one metric (values in its SI unit, one per board).

    A board is an outlier when |M_i| > ``cutoff`` and |x_i - median| > ``floors[i]`` (its
    reading's expanded uncertainty; 0 when not given), and only from ``MIN_OUTLIER_BOARDS``
    boards up.
    """
    x = _finite(values)
    if x.size == 0:
        raise ValueError("no values")
    floor = np.zeros_like(x) if floors is None else np.asarray(floors, dtype=float).ravel()
    if floor.shape != x.shape:
        raise ValueError("one floor per value")
    z = modified_z_scores(x)
    centre = float(np.median(x))
    far = (np.abs(z) > cutoff) & (np.abs(x - centre) > floor)
    if x.size < MIN_OUTLIER_BOARDS:
        far[:] = False
    return Distribution(
        n=int(x.size),
        median=centre,
        scaled_mad=scaled_mad(x),
        minimum=float(np.min(x)),
        maximum=float(np.max(x)),
        z_scores=tuple(float(v) for v in z),
        outliers=tuple(bool(v) for v in far),
        mad_zero=bool(np.median(np.abs(x - centre)) == 0.0),
        capability=capability(x, lower, upper),
    )
