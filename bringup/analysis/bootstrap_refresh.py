"""Bootstrap refresh in a half-bridge: VB - VS recovering while the low side is on.

Public API (pure numpy, scipy imported lazily for the fit; no I/O; SI units)::

    measure_refresh(vbs, dt, t0=0.0, *, low_on, uvlo_v, high_on=None, tau_s=None,
                    tau_u_s=0.0, full_v=None, full_u_v=0.0, margin_v=0.0) -> RefreshResult
    shortest_refresh_time(tau_s, full_v, droop_v, required_v) -> float   # s, inf if none
                                                       # (defined in design.py, re-exported)

``low_on``: the low side's on-intervals (``dead_time.gate_on_intervals`` of the low-side gate,
or any ``OnIntervals``). ``RefreshResult``: per low-side on-time (``Refresh``) its start, length,
the level at its start and the level reached at its end; over the record the lowest level
reached at an end (``lowest_end_v``), the lowest level between refreshes (``lowest_v``, the
bottom of the droop while the high side is on) and its margin to the UVLO
(``uvlo_margin_v``), the droop per period, the recharge time constant and full level (from the
data or the design, ``tau_source``), and the shortest low-side on-time that still refreshes it
(``refresh_on_time_min_s``) beside the shortest low-side on-time in the record
(``low_on_time_min_s``; ``on_time_margin_s`` = the second less the first, > 0 when it
refreshes). Each with an expanded (k = 2) uncertainty; None with a reason in ``reasons`` where
it cannot be given. ``RefreshResult.refreshed``: the lowest level stays above the UVLO.

Method and sources:

* The capacitor recharges only while the low side conducts (REFERENCES §12 [read: gate-driver
  datasheets' bootstrap sections]), through the bootstrap diode, resistor and the low-side
  switch: a first-order RC charge, V(s) = V_f - (V_f - V_0) exp(-s/tau), tau = (R_BOOT +
  R_diode + R_DS(on),LS) C_BOOT (REFERENCES §3 "Refresh" [computed]).
* tau and V_f from the data: the recoveries of every on-time, each from its start (after a
  guard of 10 % of it for the switching glitch), aligned and averaged, then fitted by least
  squares (``scipy.optimize.curve_fit``, its covariance for u). When the recovery is too
  nearly straight to tell both (tau's u over 30 %, or V_f's over 10 % of the swing it
  recovers), tau is fitted with the design's V_f (``full_v``: the slope (V_f - V_0)/tau
  still tells it; ``tau_source`` "data with the design's full level"); failing that the
  design's tau is used (``tau_s``, from R and C; V_f given or fitted with it, a linear
  least-squares fit); without either, none.
* Level at an on-time's end: a least-squares quadratic through its last 10 % (at least 8
  samples) evaluated at the end (its standard error for u). Lowest level between refreshes: a
  least-squares line through the middle 90 % of the time from one on-time's end to the high
  side's turn-off (the glitches at the edges left out), evaluated at that turn-off; without
  the high side's intervals, at the next low-side turn-on (lower by the dead time's droop:
  on the safe side). The droop per period is the median over the periods, from the end of
  one refresh to the next bottom.
* Shortest on-time that still refreshes: in steady state with a droop D per period, the level
  reached at the end of an on-time t obeys V_f - V_end = (V_f - V_end + D) exp(-t/tau) (the RC
  law above), so V_f - V_end = D/(exp(t/tau) - 1); the bottom V_end - D stays at or above
  V_req = UVLO + margin when t >= tau ln((V_f - V_req)/(V_f - V_req - D)) [computed from the
  RC charge law]. No on-time suffices when D >= V_f - V_req (the capacitor loses more per
  period than it may: too small, or the high side on too long).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from bringup.analysis.dead_time import OnIntervals
from bringup.analysis.design import shortest_refresh_time
from bringup.analysis.edges import code_step, noise_rms
from bringup.analysis.uncertainty import COVERAGE_K, refresh_time_budget
from bringup.errors import AnalysisError

__all__ = ["Refresh", "RefreshResult", "measure_refresh", "shortest_refresh_time"]

GUARD_FRACTION = 0.10
END_FIT_FRACTION = 0.10
MAX_TAU_RELATIVE_U = 0.3


@dataclass(frozen=True)
class Refresh:
    """One low-side on-time: ``start_s``, ``on_time_s``, ``start_v`` (level as it began),
    ``end_v`` (level reached at its end) and ``end_u_v`` (standard uncertainty)."""

    start_s: float
    on_time_s: float
    start_v: float
    end_v: float
    end_u_v: float


@dataclass(frozen=True)
class RefreshResult:
    """The bootstrap's refresh over a record (V, s). ``*_uncertainty_*``: expanded (k = 2).
    ``required_v``: the UVLO plus the margin asked for; ``tau_source``: "data", "design" or
    "none". See the module doc for each field."""

    refreshes: tuple[Refresh, ...]
    lowest_end_v: float | None
    lowest_end_uncertainty_v: float | None
    lowest_v: float | None
    lowest_uncertainty_v: float | None
    uvlo_v: float
    uvlo_margin_v: float | None
    droop_v: float | None
    droop_uncertainty_v: float | None
    tau_s: float | None
    tau_uncertainty_s: float | None
    tau_source: str
    full_v: float | None
    full_uncertainty_v: float | None
    required_v: float
    refresh_on_time_min_s: float | None
    refresh_on_time_min_uncertainty_s: float | None
    low_on_time_min_s: float | None
    on_time_margin_s: float | None
    reasons: dict[str, str] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()

    @property
    def refreshed(self) -> bool | None:
        """True when the lowest level stays above the UVLO (None when not measured)."""
        return None if self.uvlo_margin_v is None else self.uvlo_margin_v > 0

    def to_dict(self, per_edge: bool = False) -> dict:
        out = {k: v for k, v in self.__dict__.items() if k != "refreshes"}
        out["reasons"], out["warnings"] = dict(self.reasons), list(self.warnings)
        out["count"] = len(self.refreshes)
        if per_edge:
            out["refreshes"] = [r.__dict__.copy() for r in self.refreshes]
        return out


# ------------------------------------------------------------------------------ levels
def _index(t: float, t0: float, dt: float) -> int:
    return int(round((t - t0) / dt))


def _end_level(y: np.ndarray, a: int, b: int, sigma: float) -> tuple[float, float]:
    """Level (V) at sample ``b`` from a least-squares quadratic through the last 10 % of
    [a, b] (at least 8 samples; a quadratic follows the recharge's curvature where a short
    on-time leaves it steep), and its standard uncertainty (the fit's standard error at b,
    with the record's noise)."""
    m = max(int(END_FIT_FRACTION * (b - a)), 8)
    lo = max(b - m, a)
    seg = y[lo:b]
    if seg.size < 4:
        return float(y[b - 1]), sigma
    x = (np.arange(lo, b) - (b - 1)) / max(seg.size, 1)
    design = np.stack([np.ones_like(x), x, x * x], axis=1)
    gram_inv = np.linalg.inv(design.T @ design)
    coef = gram_inv @ (design.T @ seg)
    x_end = 1.0 / seg.size  # sample b, one past the last one fitted
    basis = np.array([1.0, x_end, x_end * x_end])
    return float(basis @ coef), sigma * math.sqrt(float(basis @ gram_inv @ basis))


def _bottom(y: np.ndarray, a: int, b: int, at: int, sigma: float) -> tuple[float, float] | None:
    """The droop's bottom: a least-squares line through the middle 90 % of [a, b] (the
    switching glitches at either end left out) evaluated at sample ``at``, and its standard
    error (V); None if the span is too short."""
    span = b - a
    lo, hi = a + int(0.05 * span), b - int(0.05 * span)
    if hi - lo < 8:
        return None
    x = np.arange(lo, hi) - at
    slope, icpt = np.polyfit(x, y[lo:hi], 1)
    xm = x.mean()
    se = sigma * math.sqrt(1.0 / x.size + xm * xm / float(((x - xm) ** 2).sum()))
    return float(icpt), se


def _refreshes(y, on: OnIntervals, dt, t0, sigma) -> list[Refresh]:
    out = []
    first = 1 if on.open_start else 0
    last = len(on) - (1 if on.open_end else 0)
    for k in range(first, last):
        a, b = _index(on.start_s[k], t0, dt), _index(on.end_s[k], t0, dt)
        if b - a < 16 or a < 1 or b > y.size:
            continue
        w = max(int(0.02 * (b - a)), 4)
        start_v = float(np.median(y[max(a - w, 0) : a]))
        end_v, end_u = _end_level(y, a, b, sigma)
        out.append(Refresh(float(on.start_s[k]), float(on.end_s[k] - on.start_s[k]), start_v,
                           end_v, end_u))  # fmt: skip
    return out


# ------------------------------------------------------------------------------ tau, V_f
def _recovery(y, refreshes, dt, t0) -> np.ndarray | None:
    """The recoveries aligned at their starts (after the guard) and averaged."""
    segs = []
    for r in refreshes:
        a = _index(r.start_s, t0, dt)
        b = _index(r.start_s + r.on_time_s, t0, dt)
        a += max(int(GUARD_FRACTION * (b - a)), 2)
        segs.append(y[a:b])
    n = min(s.size for s in segs)
    if n < 8:
        return None
    return np.mean([s[:n] for s in segs], axis=0)


def _rc(s, vf, v0, tau):
    return vf - (vf - v0) * np.exp(-s / tau)


def _fit_tau(seg: np.ndarray, dt: float):
    """(tau, u_tau, V_f, u_V_f) from a free fit of the RC law, or None when tau is not
    determined (relative u over ``MAX_TAU_RELATIVE_U``, or no convergence)."""
    from scipy.optimize import curve_fit

    s = np.arange(seg.size) * dt
    length = seg.size * dt
    guess = (float(seg[-1]) + 0.1 * abs(float(seg[-1] - seg[0])), float(seg[0]), length / 3.0)
    try:
        popt, pcov = curve_fit(_rc, s, seg, p0=guess, maxfev=4000)
    except (RuntimeError, ValueError):
        return None
    vf, _, tau = (float(v) for v in popt)
    if not (np.all(np.isfinite(pcov)) and tau > 0):
        return None
    u_tau, u_vf = math.sqrt(pcov[2, 2]), math.sqrt(pcov[0, 0])
    # Determined only if tau is known to 30 % and V_f to 10 % of the swing it recovers.
    if u_tau > MAX_TAU_RELATIVE_U * tau or u_vf > 0.1 * abs(vf - float(popt[1])):
        return None
    return tau, u_tau, vf, u_vf


def _fit_tau_given_full(seg: np.ndarray, dt: float, vf: float, vf_u: float):
    """(tau, u_tau) with V_f known (the design's full level): V = V_f - (V_f - V_0) exp(-s/tau)
    in V_0 and tau. A nearly straight recovery still tells tau through its slope,
    (V_f - V_0)/tau, so this holds where the free fit cannot. u adds V_f's own: dtau/dV_f =
    tau/(V_f - V_0) (GUM §5.1.3). None when tau is not determined to 30 %."""
    from scipy.optimize import curve_fit

    s = np.arange(seg.size) * dt
    k = max(seg.size // 4, 2)
    slope = (float(seg[k]) - float(seg[0])) / (k * dt)
    if not (slope > 0 and vf > seg[0]):
        return None
    try:
        popt, pcov = curve_fit(lambda x, v0, tau: _rc(x, vf, v0, tau), s, seg,
                               p0=(float(seg[0]), (vf - float(seg[0])) / slope), maxfev=4000)  # fmt: skip
    except (RuntimeError, ValueError):
        return None
    v0, tau = float(popt[0]), float(popt[1])
    if not (np.all(np.isfinite(pcov)) and tau > 0 and vf > v0):
        return None
    u_tau = math.hypot(math.sqrt(pcov[1, 1]), tau / (vf - v0) * vf_u)
    return (tau, u_tau) if u_tau <= MAX_TAU_RELATIVE_U * tau else None


def _fit_full(seg: np.ndarray, dt: float, tau: float, sigma: float) -> tuple[float, float]:
    """(V_f, u) with tau known: V = V_f (1 - e) + V_0 e, e = exp(-s/tau), is linear."""
    e = np.exp(-np.arange(seg.size) * dt / tau)
    a = np.stack([1.0 - e, e], axis=1)
    coef, *_ = np.linalg.lstsq(a, seg, rcond=None)
    cov = sigma * sigma * np.linalg.inv(a.T @ a)
    return float(coef[0]), math.sqrt(float(cov[0, 0]))


def _time_constant(y, refreshes, dt, t0, sigma, n, tau_s, tau_u_s, full_v, full_u_v, reasons):
    """(tau, u_tau, source, V_f, u_V_f): a free fit where the data tell both; else tau from the
    data with the design's V_f; else the design's tau; else none (with the reason)."""
    seg = _recovery(y, refreshes, dt, t0)
    fit = None if seg is None else _fit_tau(seg, dt)
    if fit is not None:
        return fit[0], fit[1], "data", fit[2], fit[3]
    if seg is not None and full_v is not None:
        given = _fit_tau_given_full(seg, dt, float(full_v), float(full_u_v))
        if given is not None:
            return (
                given[0],
                given[1],
                "data with the design's full level",
                float(full_v),
                float(full_u_v),
            )
    why = "the recovery is too short or too straight to tell its time constant"
    if tau_s is None:
        reasons["tau_s"] = f"{why}, and no design time constant was given (R and C)"
        return None, None, "none", None, None
    if full_v is not None:
        return float(tau_s), float(tau_u_s), "design", float(full_v), float(full_u_v)
    if seg is None:
        return float(tau_s), float(tau_u_s), "design", None, None
    vf, u_vf = _fit_full(seg, dt, float(tau_s), sigma / math.sqrt(n))
    return float(tau_s), float(tau_u_s), "design", vf, u_vf


def measure_refresh(
    vbs: np.ndarray,
    dt: float,
    t0: float = 0.0,
    *,
    low_on: OnIntervals,
    uvlo_v: float,
    high_on: OnIntervals | None = None,
    tau_s: float | None = None,
    tau_u_s: float = 0.0,
    full_v: float | None = None,
    full_u_v: float = 0.0,
    margin_v: float = 0.0,
) -> RefreshResult:
    """Measure the bootstrap's refresh from ``vbs`` (VB - VS, V, ``dt`` s apart from ``t0``).

    ``low_on``: the low side's on-intervals on the same time base; ``uvlo_v``: the driver's
    floating-supply undervoltage lockout (falling threshold, V); ``high_on``: the high side's
    on-intervals, when its gate was captured too (the droop's bottom is then read at its
    turn-off rather than at the next low-side turn-on); ``tau_s``/``tau_u_s``: the
    design's recharge time constant (R C, s) and its standard uncertainty, used when the data
    cannot tell; ``full_v``: the design's full level (gate-drive rail less the diode drop, V),
    used with the design's tau; ``margin_v``: headroom wanted above the UVLO (V)."""
    y = np.asarray(vbs, dtype=np.float64)
    if y.ndim != 1 or y.size < 32 or not np.all(np.isfinite(y)):
        raise AnalysisError(
            "bootstrap voltage: expected a 1-D record of at least 32 finite samples"
        )
    dt, t0 = float(dt), float(t0)
    sigma = math.hypot(noise_rms(y), code_step(y) / math.sqrt(12.0))
    refreshes = _refreshes(y, low_on, dt, t0, sigma)
    if not refreshes:
        raise AnalysisError(
            "no complete low-side on-time in the record: the bootstrap is never refreshed in it"
        )
    reasons: dict[str, str] = {}
    ends = np.array([r.end_v for r in refreshes])
    k_end = int(np.argmin(ends))
    bottoms, bottoms_u, droops = _droops(y, refreshes, dt, t0, sigma, high_on)
    tau, u_tau, source, vf, u_vf = _time_constant(
        y, refreshes, dt, t0, sigma, len(refreshes), tau_s, tau_u_s, full_v, full_u_v, reasons
    )
    return _result(refreshes, ends, k_end, bottoms, bottoms_u, droops, float(uvlo_v),
                   float(margin_v), tau, u_tau, source, vf, u_vf, reasons)  # fmt: skip


def _droops(y, refreshes, dt, t0, sigma, high_on: OnIntervals | None):
    """The bottom between each pair of refreshes (at the high side's turn-off when its
    on-intervals are given, else at the next low-side turn-on: lower by the dead time's
    droop, on the safe side), its standard uncertainty, and the droop from the end of the
    previous refresh."""
    bottoms, u, droops = [], [], []
    for prev, nxt in zip(refreshes, refreshes[1:], strict=False):
        a = _index(prev.start_s + prev.on_time_s, t0, dt)
        b = _index(nxt.start_s, t0, dt)
        if high_on is not None and len(high_on):
            k = int(np.searchsorted(high_on.end_s, nxt.start_s, side="right")) - 1
            if k >= 0 and high_on.end_s[k] > prev.start_s + prev.on_time_s:
                b = _index(float(high_on.end_s[k]), t0, dt)
        low = _bottom(y, a, b, b, sigma)
        if low is not None:
            bottoms.append(low[0])
            u.append(low[1])
            droops.append(prev.end_v - low[0])
    return np.array(bottoms), np.array(u), np.array(droops)


def _lowest_u(u: float, n: int) -> float:
    """Standard uncertainty of the lowest of ``n`` readings each of standard uncertainty
    ``u``: its own, and the lowest of n noisy readings reading low by up to u sqrt(2 ln n)
    (the expected extreme of n normal draws, common practice; rectangular, GUM §4.3.7)."""
    return math.hypot(u, u * math.sqrt(2.0 * math.log(max(n, 1))) / math.sqrt(3.0))


def _result(refreshes, ends, k_end, bottoms, bottoms_u, droops, uvlo, margin, tau, u_tau,
            source, vf, u_vf, reasons) -> RefreshResult:  # fmt: skip
    lowest = u_low = droop = None
    u_droop = 0.0
    if bottoms.size:
        k_low = int(np.argmin(bottoms))
        lowest, u_low = float(bottoms[k_low]), _lowest_u(float(bottoms_u[k_low]), bottoms.size)
        # The droop per period: the median over the periods (the duty is steady in a record).
        each = np.hypot(bottoms_u, [r.end_u_v for r in refreshes[: droops.size]])
        spread = float(np.std(droops, ddof=1)) if droops.size >= 3 else 0.0
        droop = float(np.median(droops))
        u_droop = (
            math.sqrt(math.pi / 2.0) * max(float(np.median(each)), spread) / math.sqrt(droops.size)
        )
    else:
        reasons["lowest_v"] = reasons["droop_v"] = "fewer than two low-side on-times in the record"
    on_times = np.array([r.on_time_s for r in refreshes])
    required = uvlo + margin
    t_min = u_t = None
    if droop is not None and tau is not None and vf is not None:
        b = refresh_time_budget(tau, u_tau, vf, u_vf, droop, u_droop, required)
        t_min, u_t = b.value, b.expanded
        if math.isinf(t_min):
            reasons["refresh_on_time_min_s"] = (
                f"no low-side on-time refreshes it: the bootstrap loses {droop:.3g} V per period, "
                f"at least the {vf - required:.3g} V between its full level {vf:.4g} V and "
                f"{required:.4g} V (capacitor too small, or the high side on too long)"
            )
            t_min = u_t = None
    elif "refresh_on_time_min_s" not in reasons:
        reasons["refresh_on_time_min_s"] = reasons.get("tau_s") or reasons.get("droop_v", "")
    return RefreshResult(
        refreshes=tuple(refreshes),
        lowest_end_v=float(ends[k_end]),
        lowest_end_uncertainty_v=COVERAGE_K * _lowest_u(refreshes[k_end].end_u_v, len(refreshes)),
        lowest_v=lowest,
        lowest_uncertainty_v=None if u_low is None else COVERAGE_K * u_low,
        uvlo_v=uvlo,
        uvlo_margin_v=None if lowest is None else lowest - uvlo,
        droop_v=droop,
        droop_uncertainty_v=None if droop is None else COVERAGE_K * u_droop,
        tau_s=tau, tau_uncertainty_s=None if u_tau is None else COVERAGE_K * u_tau,
        tau_source=source,
        full_v=vf, full_uncertainty_v=None if u_vf is None else COVERAGE_K * u_vf,
        required_v=required,
        refresh_on_time_min_s=t_min, refresh_on_time_min_uncertainty_s=u_t,
        low_on_time_min_s=float(on_times.min()),
        on_time_margin_s=None if t_min is None else float(on_times.min()) - t_min,
        reasons=reasons,
    )  # fmt: skip
