"""Predict where a thermal soak will settle from a log that has not settled yet.

Models: a lumped thermal RC, T(t) = T_final - (T_final - T0) exp(-(t - t_start)/tau), and a
two-stage Foster network, T(t) = T_final - A1 exp(-t/tau1) - A2 exp(-t/tau2) (a part on a
heatsink: a fast die-and-case term and a slow heatsink term; MOSFET datasheets give transient
thermal impedance in this form, REFERENCES §11). Both are fitted by least squares over all
samples with ``scipy.optimize.curve_fit`` (imported lazily: it costs ~0.5 s).

How the log is judged, in order:

1. The noise of the log, sigma, from its second differences (a slow trend cancels:
   var(d2) = 6 sigma^2 for white noise).
2. The one-time-constant fit's residuals are checked for misfit: their level against sigma
   (chi-square test of the residual variance, 99.9 % quantile of chi2(n - 3)/(n - 3)), and
   their structure by the Wald-Wolfowitz runs test on their signs (z < -3.09, one-sided
   0.1 %) and the Durbin-Watson statistic d = sum (e_i - e_(i-1))^2 / sum e_i^2 (about 2 for
   white residuals, near 0 for a model that misses a trend; reported, and d < 1 counts as
   structure).
3. The two-time-constant model is fitted too (a global grid over both time constants with
   the rest by linear least squares, then refined by ``curve_fit``) and the two are compared
   by the F-test of nested models (p < 0.01) and the Bayesian information criterion,
   BIC = n ln(SSE/n) + k ln n (Schwarz 1978), k = 3 and 5 parameters; a BIC lower by 6 or
   more is "strong" evidence (Kass and Raftery 1995). Either makes the one-tau model a
   misfit.
4. The stated uncertainty of T_final is a likelihood (profile) interval, not only the
   covariance: over every model of the chosen family on the grid whose SSE is within
   k^2 sigma^2 of the best (k = 2), the range of T_final, widened to at least +/- 2 standard
   errors of the fit. For two time constants that range is how far the slow term can trade
   amplitude against time constant and still fit: the model's own uncertainty
   (``model_uncertainty_c``, the part beyond the covariance). It excludes the sensor's own
   uncertainty.
5. The result is "undecided" (keep soaking; no verdict on T_final) when the log cannot say
   where the soak ends: fewer than 3 time constants logged for a one-tau prediction (exp(-3)
   = 5 % of the rise left to extrapolate [computed]; a slower term has had time to show);
   one time constant misfits and two do not converge, misfit too, or leave the slow one
   unpinned (fewer than 3 of it logged, or the likelihood interval reaching the grid's
   slowest time constants); or the prediction is still moving (the same fit on the first
   2/3 of the log differs by more than the larger expanded uncertainty). Only a "predicted"
   result may be judged. A slow term too small to see at all cannot be detected by any
   test: "predicted" means the log is consistent with the model, not that nothing slower
   exists.

The fit is refused below ``min_taus`` time constants of data (1 by default) and a warning is
given below 2.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields

import numpy as np

from bringup.errors import AnalysisError

__all__ = ["SoakFit", "fit_soak", "runs_test_z", "durbin_watson"]

MIN_SAMPLES = 8
COVERAGE_K = 2.0
#: Evidence for the two-time-constant model: BIC lower by this much (Kass and Raftery 1995,
#: "strong": 6 to 10).
BIC_STRONG = 6.0
#: One-sided 0.1 % normal quantile: the runs test's threshold for "too few runs".
RUNS_Z = -3.09
#: Durbin-Watson statistic below this counts as structured residuals (white: about 2).
DW_STRUCTURED = 1.0
#: Relative standard error of the slow time constant above which it is not known.
TAU_REL_SE_MAX = 0.25
_MIN_TWO_TAU_SAMPLES = 12
#: The F-test's significance for a second time constant.
F_TEST_P = 0.01
#: A one-time-constant prediction needs this many time constants of log: exp(-3) = 5 % of the
#: rise is left to extrapolate [computed], and a slower term has had time to show.
MIN_TAUS_PREDICT = 3.0


@dataclass(frozen=True)
class SoakFit:
    """Soak fit. Temperatures in °C, times in s on the log's own time axis.

    ``outcome`` is "predicted" (``final_c`` may be judged) or "undecided" (the log cannot tell
    where the soak ends: keep soaking; ``undecided_reason`` says why and ``keep_soaking_s``
    roughly how much longer). ``model`` is "one-tau", or "two-tau" when one time constant
    misfits; ``final_c_uncertainty`` is expanded (k = 2, a likelihood interval) and includes
    the model's own uncertainty (``model_uncertainty_c``, k = 2). ``tau_s`` is the slowest time
    constant of the chosen model (it sets the settling); ``tau_fast_s`` the faster one of a
    two-tau model (None for one-tau). ``settle_time_s`` is when the chosen model comes within
    ``band_k`` of T_final; ``settle_in_s`` how long after the last sample that is (0 if
    already). ``taus_covered`` is the log's length in (slowest) time constants.
    ``noise_c`` is the log's noise (rms) from second differences; ``residual_rms_c`` the chosen
    model's residual rms. ``misfit`` holds the one-tau fit's diagnostics: residual rms / noise,
    the runs-test z, the Durbin-Watson d, and the BIC of both models.
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
    outcome: str = "predicted"
    model: str = "one-tau"
    tau_fast_s: float | None = None
    model_uncertainty_c: float = 0.0
    noise_c: float = 0.0
    undecided_reason: str = ""
    keep_soaking_s: float | None = None
    misfit: dict[str, float | None] = field(default_factory=dict)

    @property
    def decided(self) -> bool:
        """True when ``final_c`` may be judged ("predicted")."""
        return self.outcome == "predicted"

    def to_dict(self) -> dict:
        out = {f.name: getattr(self, f.name) for f in fields(self)}
        out["warnings"] = list(self.warnings)
        out["misfit"] = dict(self.misfit)
        return out


def _model(t, final, start, tau):
    return final - (final - start) * np.exp(-t / tau)


def _model2(t, final, a1, tau1, a2, tau2):
    return final - a1 * np.exp(-t / tau1) - a2 * np.exp(-t / tau2)


def runs_test_z(residual: np.ndarray) -> float | None:
    """Wald-Wolfowitz runs test on the signs of ``residual``: the z-score of the number of
    runs against its expectation for random signs, mu = 2 n+ n- / N + 1,
    var = (mu - 1)(mu - 2)/(N - 1). Strongly negative: too few runs (structure). None when
    there are too few non-zero residuals of each sign (< 5)."""
    r = np.asarray(residual, dtype=np.float64)
    signs = np.sign(r[r != 0])
    pos, neg = int(np.count_nonzero(signs > 0)), int(np.count_nonzero(signs < 0))
    if pos < 5 or neg < 5:
        return None
    total = pos + neg
    runs = 1 + int(np.count_nonzero(signs[1:] != signs[:-1]))
    mu = 2.0 * pos * neg / total + 1.0
    var = (mu - 1.0) * (mu - 2.0) / (total - 1.0)
    return float((runs - mu) / math.sqrt(var)) if var > 0 else None


def durbin_watson(residual: np.ndarray) -> float | None:
    """Durbin-Watson statistic sum (e_i - e_(i-1))^2 / sum e_i^2 (2 for white residuals,
    towards 0 for positively correlated ones). None for all-zero residuals."""
    r = np.asarray(residual, dtype=np.float64)
    ss = float(np.dot(r, r))
    if ss <= 0 or r.size < 3:
        return None
    return float(np.sum(np.diff(r) ** 2) / ss)


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


@dataclass(frozen=True)
class _Fit:
    popt: np.ndarray
    errors: np.ndarray
    sse: float
    k: int

    def bic(self, n: int) -> float:
        return n * math.log(max(self.sse, 1e-300) / n) + self.k * math.log(n)


def _curve_fit(model, t, y, p0, bounds) -> _Fit | None:
    import warnings

    from scipy.optimize import OptimizeWarning, curve_fit  # lazy: ~0.5 s to import

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", OptimizeWarning)
            warnings.simplefilter("ignore", RuntimeWarning)
            popt, pcov = curve_fit(model, t, y, p0=p0, bounds=bounds, maxfev=5000)
    except (RuntimeError, ValueError):
        return None
    if not np.all(np.isfinite(pcov)):
        return None
    errors = np.sqrt(np.clip(np.diag(pcov), 0.0, None))
    sse = float(np.sum((y - model(t, *popt)) ** 2))
    return _Fit(popt, errors, sse, len(p0))


def _tau_grid(span: float) -> np.ndarray:
    """Time constants tried by the grid search (s): span/200 to 100 x span, 25 % apart."""
    return np.geomspace(span / 200.0, span * 100.0, 45)


def _grid_two(rel: np.ndarray, temp: np.ndarray, taus: np.ndarray):
    """Every pair tau_i < tau_j of the grid (not neighbours): the linear least-squares
    T_final, A1, A2 of T_final - A1 exp(-t/tau_i) - A2 exp(-t/tau_j) and its SSE
    (variable projection: for fixed time constants the model is linear). Solved on centred,
    unit-norm columns (2 x 2 normal equations); a pair whose columns are collinear to 1e-9
    (both time constants far longer than the log) is left out (NaN)."""
    e = np.exp(-rel[None, :] / taus[:, None])
    mean_e = e.mean(axis=1)
    ec = e - mean_e[:, None]
    norm = np.sqrt(np.einsum("kn,kn->k", ec, ec))
    norm = np.where(norm > 0, norm, np.nan)
    u = ec / norm[:, None]
    yc = temp - temp.mean()
    gram = u @ u.T
    b = u @ yc
    i, j = np.triu_indices(taus.size, 2)
    rho = gram[i, j]
    det = 1.0 - rho**2
    det = np.where(det > 1e-9, det, np.nan)
    # Coefficients of the unit columns (c_i, c_j), then back to A1, A2 (the model subtracts).
    c_i = (b[i] - rho * b[j]) / det
    c_j = (b[j] - rho * b[i]) / det
    sse = float(yc @ yc) - (c_i * b[i] + c_j * b[j])
    a1, a2 = -c_i / norm[i], -c_j / norm[j]
    final = temp.mean() + a1 * mean_e[i] + a2 * mean_e[j]
    coef = np.stack([final, a1, a2], axis=1)
    return i, j, coef, sse


def _fit_two(rel: np.ndarray, temp: np.ndarray, span: float, refine: bool):
    """The two-time-constant fit: a global grid search over both time constants (on at most
    ~120 samples: every k-th one keeps the noise per sample, so the same sigma^2 judges its
    SSE), then the best pair's linear fit over all samples, refined by ``curve_fit`` when
    ``refine``. Returns (fit or None, grid) where grid is (T_final per pair, SSE per pair,
    slow tau per pair) for the profile of T_final."""
    taus = _tau_grid(span)
    step = max(1, rel.size // 120)
    i, j, coef, sse = _grid_two(rel[::step], temp[::step], taus)
    good = np.isfinite(sse)
    if not np.any(good):
        return None, None
    k = int(np.argmin(np.where(good, sse, np.inf)))
    t1, t2 = float(taus[i[k]]), float(taus[j[k]])
    x = np.stack([np.ones_like(rel), -np.exp(-rel / t1), -np.exp(-rel / t2)], axis=1)
    lin, *_ = np.linalg.lstsq(x, temp, rcond=None)
    resid = temp - x @ lin
    popt = np.array([lin[0], lin[1], t1, lin[2], t2])
    fit = _Fit(popt, np.full(5, np.nan), float(resid @ resid), 5)
    grid = (coef[:, 0], sse, taus[j])
    if not refine:
        return fit, grid
    lo_tau, hi_tau = taus[0] * 0.5, taus[-1] * 2.0
    fine = _curve_fit(
        _model2,
        rel,
        temp,
        tuple(popt),
        ([-np.inf, -np.inf, lo_tau, -np.inf, lo_tau], [np.inf, np.inf, hi_tau, np.inf, hi_tau]),
    )
    if fine is None:
        return None, grid
    final, a1, t1, a2, t2 = (float(v) for v in fine.popt)
    e = fine.errors
    if t1 > t2:  # order the terms: fast first
        fine = _Fit(np.array([final, a2, t2, a1, t1]), np.array([e[0], e[3], e[4], e[1], e[2]]),
                    fine.sse, fine.k)  # fmt: skip
    return fine, grid


def _profile_one(rel: np.ndarray, temp: np.ndarray, tau: float, limit: float):
    """The range of T_final over the one-tau fits (tau on a fine grid, 1 % apart, from a
    quarter to four times the fitted ``tau``; T_final and the rise by linear least squares)
    whose SSE is within ``limit`` of the grid's best: a likelihood interval."""
    taus = np.geomspace(tau / 4.0, tau * 4.0, 280)
    step = max(1, rel.size // 600)
    rel, temp = rel[::step], temp[::step]
    e = np.exp(-rel[None, :] / taus[:, None])
    mean_e = e.mean(axis=1)
    ec = e - mean_e[:, None]
    yc = temp - temp.mean()
    see = np.einsum("kn,kn->k", ec, ec)
    sey = ec @ yc
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.where(see > 0, sey / see, np.nan)
        sse = float(yc @ yc) - slope * sey
    final = temp.mean() - slope * mean_e
    good = np.isfinite(sse) & np.isfinite(final)
    if not np.any(good):
        return math.inf, -math.inf
    ok = good & (sse <= float(sse[good].min()) + limit)
    return float(final[ok].min()), float(final[ok].max())


def _misfit(residual: np.ndarray, noise: float, params: int) -> tuple[bool, dict, list[str]]:
    """(misfit?, diagnostics, plain-words findings) of a fit's residuals."""
    # chdtri(dof, 1 - q) is scipy.stats.chi2.ppf(q, dof): the same cephes routine, without
    # importing scipy.stats (seconds of start-up the soak step paid on its first fit).
    from scipy.special import chdtri

    n = residual.size
    rms = float(np.sqrt(np.mean(residual**2)))
    dof = max(n - params, 1)
    ratio = rms / noise if noise > 0 else None  # None: a noise-free log, no level test
    # Chi-square test of the residual variance against the noise from second differences.
    limit = math.sqrt(float(chdtri(dof, 0.001)) / dof * n / dof) if noise > 0 else math.inf
    z = runs_test_z(residual)
    d = durbin_watson(residual)
    findings = []
    if ratio is not None and ratio > limit:
        findings.append(f"residual {rms:.3g} K rms against {noise:.3g} K of noise")
    if z is not None and z < RUNS_Z:
        findings.append(f"runs test z = {z:.1f} (too few sign changes)")
    if d is not None and d < DW_STRUCTURED:
        findings.append(f"Durbin-Watson d = {d:.2f} (white residuals give about 2)")
    return bool(findings), {"rms_over_noise": ratio, "runs_z": z, "durbin_watson": d}, findings


def _settle(final: float, terms: list[tuple[float, float]], band: float) -> float:
    """Time (s after the log's start) after which sum a_i exp(-t/tau_i) stays within band."""
    if not terms:
        return 0.0
    tau_max = max(tau for _, tau in terms)
    grid = np.linspace(0.0, 30.0 * tau_max, 30_001)
    gap = np.abs(sum(a * np.exp(-grid / tau) for a, tau in terms))
    out = np.flatnonzero(gap > band)
    return 0.0 if out.size == 0 else float(grid[min(out[-1] + 1, grid.size - 1)])


def _checked_log(
    t_s: np.ndarray, temp_c: np.ndarray, band_k: float
) -> tuple[np.ndarray, np.ndarray]:
    """The log as flat float arrays (s, °C), or ``AnalysisError`` naming what is wrong with it."""
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
    return t, temp


def _noise_and_rise(temp: np.ndarray) -> tuple[float, float]:
    """(noise K rms, rise K) of the log; ``AnalysisError`` when the rise is not above the noise."""
    # Noise from second differences (a slow trend cancels): var(d2) = 6 sigma^2 for white noise.
    noise = float(np.std(np.diff(temp, 2)) / math.sqrt(6.0))
    rise = float(temp[-(temp.size // 10 or 1) :].mean() - temp[: temp.size // 10 or 1].mean())
    if abs(rise) < 5.0 * max(noise, 1e-12) or abs(rise) < 1e-9:
        if abs(rise) < 1e-9 or noise == 0:
            raise AnalysisError("the temperature is flat: nothing to fit")
        raise AnalysisError(
            f"the rise ({rise:.3g} K) is within the noise of the log ({noise:.3g} K rms): no fit"
        )
    return noise, rise


def _fit_first_order(
    rel: np.ndarray, temp: np.ndarray, span: float, rise: float, min_taus: float
) -> tuple[_Fit, np.ndarray]:
    """The one-time-constant fit and its residual (K); raises
    ``AnalysisError`` when it does not converge, is not determined, covers fewer than
    ``min_taus`` time constants or misses the log's shape by more than a quarter of the rise."""
    guess = _aitken(rel, temp)
    if guess is None or not (0 < guess[1] < 100 * span):
        guess = (float(temp[-1]) + 0.5 * rise, span / 2.0)
    p0 = (guess[0], float(temp[0]), guess[1])
    one = _curve_fit(
        _model, rel, temp, p0, ([-np.inf, -np.inf, span * 1e-3], [np.inf, np.inf, span * 1e3])
    )
    if one is None:
        raise AnalysisError("the first-order soak fit did not converge or is not determined")
    final1, start1, tau1 = (float(v) for v in one.popt)
    if not np.all(np.isfinite(one.errors)):
        raise AnalysisError("the soak fit is not determined by the data (singular covariance)")
    taus1 = span / tau1
    if taus1 < min_taus:
        raise AnalysisError(
            f"only {taus1:.2f} time constants of data (tau about {tau1:.0f} s): log at least "
            f"{min_taus:g} tau ({min_taus * tau1:.0f} s) before predicting T_final"
        )
    resid1 = temp - _model(rel, final1, start1, tau1)
    rms1 = float(np.sqrt(np.mean(resid1**2)))
    if rms1 > 0.25 * abs(final1 - start1):
        raise AnalysisError(
            f"the log does not follow a first-order soak (residual {rms1:.3g} K rms "
            f"against a rise of {abs(final1 - start1):.3g} K)"
        )
    return one, resid1


def _second_tau_wins(
    one: _Fit, two: _Fit | None, n: int, bad1: bool, diag: dict, findings1: list[str]
) -> bool:
    """Whether the one-time-constant model is rejected: by its own misfit (``bad1``) or because
    a second time constant lowers the BIC by ``BIC_STRONG`` or passes the nested F-test.
    Fills ``diag`` (the BICs, the F-test's p) and ``findings1`` (why)."""
    diag["bic_one_tau"] = one.bic(n)
    diag["bic_two_tau"] = two.bic(n) if two is not None else None
    diag["f_test_p"] = None
    diag["drift_c"] = None
    if two is not None and two.sse < one.sse:
        from scipy.special import fdtrc  # scipy.stats.f.sf(x, d1, d2) = fdtrc(d1, d2, x)

        # F-test of the nested models (3 vs 5 parameters).
        f_stat = (one.sse - two.sse) / 2.0 / (two.sse / (n - 5))
        diag["f_test_p"] = float(fdtrc(2, n - 5, f_stat))
        bic_gain = diag["bic_one_tau"] - diag["bic_two_tau"]
        if not bad1 and (bic_gain >= BIC_STRONG or diag["f_test_p"] < F_TEST_P):
            bad1 = True
            findings1.append(
                f"a second time constant lowers the BIC by {bic_gain:.1f} "
                f"(F-test p = {diag['f_test_p']:.2g})"
            )
    return bad1


@dataclass
class _Choice:
    """The chosen model's numbers before the expanded uncertainty and the stability check
    (°C, s; ``lo``/``hi`` bound T_final from the profile or the grid)."""

    model: str
    final: float
    tau: float
    tau_fast: float | None
    tau_se: float
    start: float
    terms: list[tuple[float, float]]
    resid: np.ndarray
    se: float
    lo: float
    hi: float
    undecided: str = ""
    keep_soaking: float | None = None


def _one_tau(one, resid1: np.ndarray, lo: float, hi: float, **outcome) -> _Choice:
    """The one-time-constant model as the choice (``one``: its fit of final, start, tau),
    with the interval ``lo``..``hi`` (degC) and any ``undecided``/``keep_soaking`` outcome."""
    final1, start1, tau1 = (float(v) for v in one.popt)
    return _Choice(model="one-tau", final=final1, tau=tau1, tau_fast=None,
                   tau_se=float(one.errors[2]), start=start1, terms=[(final1 - start1, tau1)],
                   resid=resid1, se=float(one.errors[0]), lo=lo, hi=hi, **outcome)  # fmt: skip


def _choose_one_tau(
    rel: np.ndarray,
    temp: np.ndarray,
    span: float,
    one: _Fit,
    resid1: np.ndarray,
    noise: float,
    n: int,
    stability: bool,
) -> _Choice:
    """One time constant describes the log: T_final's interval from the profile likelihood,
    undecided when fewer than ``MIN_TAUS_PREDICT`` time constants are logged."""
    tau1 = float(one.popt[2])
    taus1 = span / tau1
    sigma2 = max(noise**2, one.sse / max(n - 3, 1))
    lo, hi = _profile_one(rel, temp, tau1, COVERAGE_K**2 * sigma2)
    choice = _one_tau(one, resid1, lo, hi)
    if taus1 < MIN_TAUS_PREDICT and stability:
        choice.undecided = (
            f"only {taus1:.1f} time constants logged (tau about {tau1:.0f} s): a fit to early "
            "data tends to underestimate T_final when the board has slower time constants; "
            f"a one-time-constant prediction needs {MIN_TAUS_PREDICT:g} tau "
            f"({MIN_TAUS_PREDICT * tau1:.0f} s, 95 % of the rise seen)"
        )
        choice.keep_soaking = MIN_TAUS_PREDICT * tau1 - span
    return choice


def _choose_two_tau(
    rel: np.ndarray,
    temp: np.ndarray,
    span: float,
    one: _Fit,
    two: _Fit | None,
    resid1: np.ndarray,
    noise: float,
    n: int,
    findings1: list[str],
    stability: bool,
) -> _Choice:
    """One time constant does not describe the log: the refined two-time-constant fit with
    T_final's interval from its grid profile, undecided when that fit fails, misfits too, or
    its slow time constant is not pinned by the log; the one-tau numbers when it does not
    converge."""
    what = "the log does not follow one time constant (" + "; ".join(findings1) + ")"
    grid = None
    if two is not None:
        two, grid = _fit_two(rel, temp, span, refine=True)
    if two is None:
        final1 = float(one.popt[0])
        return _one_tau(one, resid1, final1, final1,
                        undecided=f"{what}, and a two-time-constant fit does not converge",
                        keep_soaking=span)  # fmt: skip
    final, a1, t1, a2, t2 = (float(v) for v in two.popt)
    resid = temp - _model2(rel, *two.popt)
    bad2, _, findings2 = _misfit(resid, noise, 5)
    # Profile of T_final over the grid: every pair of time constants whose fit is
    # within k^2 sigma^2 of the best (a likelihood interval, k = 2).
    finals, sses, slow = grid
    sigma2 = max(noise**2, two.sse / max(n - 5, 1))
    good = np.isfinite(sses) & np.isfinite(finals)
    # Against the grid's own best, so that its 25 % steps do not narrow the interval.
    best = float(sses[good].min()) if np.any(good) else two.sse
    ok = good & (sses <= best + COVERAGE_K**2 * sigma2)
    lo, hi = (final, final)
    if np.any(ok):
        lo, hi = float(finals[ok].min()), float(finals[ok].max())
    choice = _Choice(
        model="two-tau",
        final=final,
        tau=t2,
        tau_fast=t1,
        tau_se=float(two.errors[4]),
        start=final - a1 - a2,
        terms=[(a1, t1), (a2, t2)],
        resid=resid,
        se=float(two.errors[0]),
        lo=lo,
        hi=hi,
    )
    top = _tau_grid(span)[-4]
    if bad2:
        choice.undecided = (
            f"{what}, nor two (" + "; ".join(findings2) + "): the soak has a shape these "
            "models do not describe"
        )
        choice.keep_soaking = span
    elif bool(np.any(slow[ok] >= top)) or (span < MIN_TAUS_PREDICT * t2 and stability):
        choice.undecided = (
            f"{what}; its slow time constant (about {t2:.0f} s) is not pinned by "
            f"{span:.0f} s of log (a prediction needs {MIN_TAUS_PREDICT:g} of it): "
            f"T_final may lie anywhere from {lo:.1f} degC up"
        )
        choice.keep_soaking = max(min(MIN_TAUS_PREDICT * t2, 20.0 * span) - span, span / 2)
    return choice


def _still_moving(
    t: np.ndarray,
    temp: np.ndarray,
    band_k: float,
    final: float,
    expanded: float,
    diag: dict,
) -> tuple[str, float] | None:
    """(why, s more to log) when the prediction has not stopped moving, else None.

    The same fit on the first 2/3 of the log must agree within the larger of the two expanded
    uncertainties (under the right model the two differ by less than the earlier one's
    uncertainty; a slow term that neither model sees yet makes the prediction climb as the log
    grows). Fills ``diag["drift_c"]`` when the early fit succeeds."""
    n = int(t.size)
    rel = t - float(t[0])
    span = float(rel[-1])
    part = (2 * n) // 3
    try:
        early = fit_soak(t[:part], temp[:part], band_k, min_taus=0.0, _stability=False)
    except AnalysisError:
        return None
    drift = final - early.final_c
    diag["drift_c"] = drift
    if abs(drift) > max(early.final_c_uncertainty, expanded):
        why = (
            f"the prediction is still moving: {early.final_c:.2f} degC from the first "
            f"{float(rel[part - 1]):.0f} s of log, {final:.2f} degC from all "
            f"{span:.0f} s (more than either's uncertainty)"
        )
        return why, span / 2.0
    return None


def fit_soak(
    t_s: np.ndarray,
    temp_c: np.ndarray,
    band_k: float = 1.0,
    *,
    min_taus: float = 1.0,
    _stability: bool = True,
) -> SoakFit:
    """Fit a soak to samples ``temp_c`` (°C) taken at ``t_s`` (s, increasing); see the module
    doc for the models, the misfit tests, the model choice and the "undecided" outcome.

    ``band_k``: the settling band around T_final (K). Raises ``AnalysisError`` when the data
    cannot support any fit: too few samples, no rise above the noise, noise that swamps the
    rise, less than ``min_taus`` time constants of data, or a fit that does not converge.
    """
    t, temp = _checked_log(t_s, temp_c, band_k)
    t_start = float(t[0])
    rel = t - t_start
    noise, rise = _noise_and_rise(temp)
    span = float(rel[-1])
    one, resid1 = _fit_first_order(rel, temp, span, rise, min_taus)
    n = int(t.size)
    bad1, diag, findings1 = _misfit(resid1, noise, 3)
    two = None
    if n >= _MIN_TWO_TAU_SAMPLES:
        two, _ = _fit_two(rel, temp, span, refine=False)
    if not _second_tau_wins(one, two, n, bad1, diag, findings1):
        chosen = _choose_one_tau(rel, temp, span, one, resid1, noise, n, _stability)
    else:
        chosen = _choose_two_tau(rel, temp, span, one, two, resid1, noise, n, findings1, _stability)
    final, se = chosen.final, chosen.se
    undecided, keep_soaking = chosen.undecided, chosen.keep_soaking
    lo, hi = min(chosen.lo, final - COVERAGE_K * se), max(chosen.hi, final + COVERAGE_K * se)
    expanded = max(final - lo, hi - final)
    if not undecided and _stability and n >= 2 * _MIN_TWO_TAU_SAMPLES:
        moving = _still_moving(t, temp, band_k, final, expanded, diag)
        if moving is not None:
            undecided, keep_soaking = moving
    if undecided:
        more = f" (about {keep_soaking:.0f} s more)" if keep_soaking else ""
        undecided = f"undecided, keep soaking{more}: {undecided}"
    model_u = math.sqrt(max(expanded**2 - (COVERAGE_K * se) ** 2, 0.0))
    warnings_out = [undecided] if undecided else []
    rms = float(np.sqrt(np.mean(chosen.resid**2)))
    taus = span / chosen.tau
    settle_rel = _settle(final, chosen.terms, band_k)
    settle_time = t_start + settle_rel
    return SoakFit(
        final_c=final,
        final_c_uncertainty=float(expanded),
        start_c=chosen.start,
        tau_s=chosen.tau,
        tau_uncertainty_s=float(COVERAGE_K * chosen.tau_se),
        settle_time_s=float(settle_time),
        settle_in_s=float(max(settle_time - float(t[-1]), 0.0)),
        band_k=float(band_k),
        residual_rms_c=rms,
        taus_covered=float(taus),
        samples=n,
        warnings=warnings_out,
        outcome="undecided" if undecided else "predicted",
        model=chosen.model,
        tau_fast_s=chosen.tau_fast,
        model_uncertainty_c=float(model_u),
        noise_c=noise,
        undecided_reason=undecided,
        keep_soaking_s=None if keep_soaking is None else float(keep_soaking),
        misfit=diag,
    )
