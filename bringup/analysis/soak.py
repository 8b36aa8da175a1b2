"""Predict where a thermal soak will settle from a log that has not settled yet.

Model: the first-order response T(t) = T_final - (T_final - T0) exp(-(t - t_start)/tau) of a
lumped thermal RC (a part on a heatsink driven by a constant loss). Fitted by least squares
over all samples with ``scipy.optimize.curve_fit`` (imported here, lazily: it costs ~0.5 s),
started from the three-point (Aitken) extrapolation of the log's first, middle and last
thirds. The uncertainty of T_final is the fit's standard error from the covariance, times
k = 2; it covers the noise of the log, not the sensor's own uncertainty nor model error.

Real boards have several time constants and a single-tau fit to early data underestimates
T_final: the fit is refused below ``min_taus`` time constants of data (1 by default) and a
warning is given below 2.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import numpy as np

from bringup.errors import AnalysisError

__all__ = ["SoakFit", "fit_soak"]

MIN_SAMPLES = 8
COVERAGE_K = 2.0


@dataclass(frozen=True)
class SoakFit:
    """First-order soak fit. Temperatures in °C, times in s on the log's own time axis.

    ``settle_time_s`` is when the fitted curve comes within ``band_k`` of T_final;
    ``settle_in_s`` how long after the last sample that is (0 if already). ``final_c_uncertainty``
    is expanded (k = 2). ``taus_covered`` is the log's length in time constants.
    """

    final_c: float
    final_c_uncertainty: float
    start_c: float
    tau_s: float
    tau_uncertainty_s: float
    settle_time_s: float
    settle_in_s: float
    band_k: float
    residual_rms_c: float
    taus_covered: float
    samples: int
    warnings: list[str] = field(default_factory=list)

    def to_dict(self) -> dict:
        out = {f.name: getattr(self, f.name) for f in fields(self)}
        out["warnings"] = list(self.warnings)
        return out


def _model(t, final, start, tau):
    return final - (final - start) * np.exp(-t / tau)


def _aitken(t: np.ndarray, temp: np.ndarray) -> tuple[float, float] | None:
    """T_final and tau from three equally spaced points (means of the log's thirds)."""
    n = t.size
    thirds = [slice(0, n // 3), slice(n // 3, 2 * n // 3), slice(2 * n // 3, n)]
    tm = [float(t[s].mean()) for s in thirds]
    y = [float(temp[s].mean()) for s in thirds]
    step = (tm[2] - tm[0]) / 2.0
    denom = y[0] + y[2] - 2.0 * y[1]
    if denom == 0 or step <= 0:
        return None
    final = (y[0] * y[2] - y[1] ** 2) / denom
    ratio = (y[1] - y[0]) / (y[2] - y[1]) if y[2] != y[1] else 0.0
    if ratio <= 1.0:
        return None
    return final, step / math.log(ratio)


def fit_soak(
    t_s: np.ndarray,
    temp_c: np.ndarray,
    band_k: float = 1.0,
    *,
    min_taus: float = 1.0,
) -> SoakFit:
    """Fit a first-order soak to samples ``temp_c`` (°C) taken at ``t_s`` (s, increasing).

    ``band_k``: the settling band around T_final (K). Raises ``AnalysisError`` when the data
    cannot support the fit: too few samples, no rise above the noise, noise that swamps the
    rise, less than ``min_taus`` time constants of data, or a fit that does not converge.
    """
    t = np.asarray(t_s, dtype=np.float64).ravel()
    temp = np.asarray(temp_c, dtype=np.float64).ravel()
    if t.size != temp.size:
        raise AnalysisError(f"{t.size} times but {temp.size} temperatures")
    if t.size < MIN_SAMPLES:
        raise AnalysisError(f"too few samples for a soak fit ({t.size}; need {MIN_SAMPLES})")
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(temp))):
        raise AnalysisError("the temperature log contains NaN or infinite values")
    if not np.all(np.diff(t) > 0):
        raise AnalysisError("the times of the temperature log do not increase")
    if not (math.isfinite(band_k) and band_k > 0):
        raise AnalysisError(f"settling band must be > 0 K, got {band_k!r}")

    t_start = float(t[0])
    rel = t - t_start
    # Noise from second differences (a slow trend cancels): var(d2) = 6 sigma^2 for white noise.
    noise = float(np.std(np.diff(temp, 2)) / math.sqrt(6.0))
    rise = float(temp[-(temp.size // 10 or 1) :].mean() - temp[: temp.size // 10 or 1].mean())
    if abs(rise) < 5.0 * max(noise, 1e-12) or abs(rise) < 1e-9:
        if abs(rise) < 1e-9 or noise == 0:
            raise AnalysisError("the temperature is flat: nothing to fit")
        raise AnalysisError(
            f"the rise ({rise:.3g} K) is within the noise of the log ({noise:.3g} K rms): no fit"
        )

    guess = _aitken(rel, temp)
    span = float(rel[-1])
    if guess is None or not (0 < guess[1] < 100 * span):
        guess = (float(temp[-1]) + 0.5 * rise, span / 2.0)
    p0 = (guess[0], float(temp[0]), guess[1])

    import warnings

    from scipy.optimize import OptimizeWarning, curve_fit  # lazy: ~0.5 s to import

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", OptimizeWarning)
            popt, pcov = curve_fit(
                _model,
                rel,
                temp,
                p0=p0,
                bounds=([-np.inf, -np.inf, span * 1e-3], [np.inf, np.inf, span * 1e3]),
                maxfev=5000,
            )
    except (RuntimeError, ValueError) as exc:
        raise AnalysisError(f"the first-order soak fit did not converge ({exc})") from None
    final, start, tau = (float(v) for v in popt)
    errors = np.sqrt(np.diag(pcov)) if np.all(np.isfinite(pcov)) else None
    if errors is None or not np.all(np.isfinite(errors)):
        raise AnalysisError("the soak fit is not determined by the data (singular covariance)")
    taus = span / tau
    if taus < min_taus:
        raise AnalysisError(
            f"only {taus:.2f} time constants of data (tau about {tau:.0f} s): log at least "
            f"{min_taus:g} tau ({min_taus * tau:.0f} s) before predicting T_final"
        )
    residual = temp - _model(rel, final, start, tau)
    rms = float(np.sqrt(np.mean(residual**2)))
    if rms > 0.25 * abs(final - start):
        raise AnalysisError(
            f"the log does not follow a first-order soak (residual {rms:.3g} K rms "
            f"against a rise of {abs(final - start):.3g} K)"
        )
    warnings_out = []
    if taus < 2.0:
        warnings_out.append(
            f"only {taus:.1f} tau of data: a single-tau fit to early data tends to "
            "underestimate T_final when the board has slower time constants"
        )
    # Residual runs: a first-order model that fits leaves residuals that change sign often.
    signs = np.sign(residual[residual != 0])
    runs = 1 + int(np.count_nonzero(signs[1:] != signs[:-1])) if signs.size else 0
    if signs.size >= 20 and runs < signs.size / 8:
        warnings_out.append(
            "the residuals are structured (few sign changes): the log may have more than one "
            "time constant; treat T_final with care"
        )

    gap = abs(final - start)
    settle_rel = tau * math.log(gap / band_k) if gap > band_k else 0.0
    settle_time = t_start + settle_rel
    return SoakFit(
        final_c=final,
        final_c_uncertainty=float(COVERAGE_K * errors[0]),
        start_c=start,
        tau_s=tau,
        tau_uncertainty_s=float(COVERAGE_K * errors[2]),
        settle_time_s=float(settle_time),
        settle_in_s=float(max(settle_time - float(t[-1]), 0.0)),
        band_k=float(band_k),
        residual_rms_c=rms,
        taus_covered=float(taus),
        samples=int(t.size),
        warnings=warnings_out,
    )
