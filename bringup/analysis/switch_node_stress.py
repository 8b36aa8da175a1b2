"""What each edge does to a half-bridge's switch node: excursions, ringing, loop inductance, dv/dt.

Public API (pure numpy, scipy imported lazily for the fit; no I/O; SI units)::

    measure_switch_node(v_sw, dt, t0=0.0, *, bus_v=None, capacitance_f=None,
                        capacitance_u_f=0.0, negative_rating_v=None,
                        levels=(10.0, 50.0, 90.0)) -> SwitchNodeResult
    fit_ring(y, dt, settle_v, noise_v) -> RingFit          # one ring, one edge

``SwitchNodeResult``: the state levels; ``min_v`` (most negative voltage, V) with its
expanded uncertainty, ``undershoot_v`` (how far below ground, >= 0), ``negative_margin_v``
against the driver's rated negative excursion (``negative_rating_v``, e.g. -5.0 V; positive =
inside the rating); ``max_v`` and ``overshoot_v`` above the bus; ``rising``/``falling``
(``EdgeSet``: per-edge dv/dt and ring fits, their medians with expanded uncertainties, the
ring's natural frequency and the loop inductance L = 1/((2 pi f_n)^2 C) with its
uncertainty). A value that cannot be given is None with its reason in ``reasons``: a ring
that cannot be fitted says why, never a number.

Methods and sources:

* Levels, edges and the dv/dt reference levels: IEEE Std 181-2011 (``edges.find_transitions``:
  histogram state levels, state bands with hysteresis); dv/dt of each edge between its 10 %
  and 90 % reference levels, 0.8 A / t(10-90), signed (rising > 0).
* Ringing: after each edge's far reference crossing the ring is fitted by least squares with
  the damped sinusoid y = c + exp(-alpha s) (a cos(w_d s) + b sin(w_d s)), the free response
  of a second-order (series L-C-R) system (Nise, *Control Systems Engineering*, ch. 4
  [memory]; REFERENCES §2), with Levenberg-Marquardt (``scipy.optimize.curve_fit``; its
  covariance gives u). Starting values: the frequency of the FFT's highest bin (refined by a
  parabola through it and its neighbours) and the decay from the logarithmic decrement of
  successive half-cycle peaks, delta = ln(x_n/x_{n+1}) (REFERENCES §12 [read]). The fit starts
  at the ring's first peak and ends where the envelope reaches 2 sigma of the noise (at least
  3 cycles) or at the next edge. The first peak is the largest excursion after the record
  first crosses the settling level (before it, the edge's own tail); the half cycle to the
  next opposite extreme bounds the FFT's search (0.5x to 2x its frequency) over about 8
  cycles, so a later step or a flat tail cannot pull the peak off the ring. zeta = alpha/sqrt(alpha^2 + w_d^2), the natural frequency
  f_n = sqrt(alpha^2 + w_d^2)/(2 pi) (so f_d = f_n sqrt(1 - zeta^2)).
* Loop inductance: the ring is the loop's L with the switch node's C (C_oss of the switch
  that is off plus the board's), f_n = 1/(2 pi sqrt(L C)), so L = 1/((2 pi f_n)^2 C)
  (REFERENCES §12 [computed from the LC resonance]); u(L)/L = sqrt((2 u(f)/f)^2 + (u(C)/C)^2)
  (GUM §5.1.6, a product of powers).
* A record whose two levels are within 10 sigma of its noise is refused (no switching).
* A ring is refused (with the reason) when: fewer than 3 cycles fit between the edges; fewer
  than 4 samples per cycle; its first peak is under 4 sigma of the noise; the fit does not
  converge, gives a growing or overdamped ring, leaves residuals over 2.5x the noise (not
  one damped sinusoid: two loops ringing, or a clipped record), or does not stand out of its
  own uncertainty (amplitude under 5 u, frequency's u over 10 %: a fit to noise).
* Excursions: the record's extreme samples. Their uncertainty (GUM): one sample's noise
  (type A), the highest of N noisy samples reading high by up to sigma sqrt(2 ln N)
  (rectangular), one ADC code (q/sqrt(12)) and, with a fitted ring, the peak falling between
  samples, up to A (1 - cos(pi f dt)) (rectangular).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from bringup.analysis.edges import code_step, find_transitions, noise_rms
from bringup.analysis.uncertainty import (
    COVERAGE_K,
    excursion_budget,
    loop_inductance_budget,
)
from bringup.errors import AnalysisError

__all__ = [
    "EdgeSet",
    "RingFit",
    "SwitchNodeResult",
    "fit_ring",
    "loop_inductance",
    "measure_switch_node",
]

MIN_RING_CYCLES = 3.0
MIN_SAMPLES_PER_CYCLE = 4.0
MIN_RING_SIGMAS = 4.0
MAX_RESIDUAL_RATIO = 2.5
MIN_AMPLITUDE_U = 5.0  # the fitted amplitude over its standard uncertainty, at least
MAX_FREQUENCY_U = 0.1  # the fitted frequency's relative standard uncertainty, at most
MAX_RING_SAMPLES = 16384
MAX_FITS = 64  # rings fitted per direction (evenly spread over the record)
MIN_SWING_SIGMAS = 10.0  # levels closer than this many noise sigmas: no switching


def loop_inductance(natural_frequency_hz: float, capacitance_f: float) -> float:
    """L = 1/((2 pi f)^2 C) (H): the inductance that rings at ``natural_frequency_hz`` (Hz) with
    ``capacitance_f`` (F) (the LC resonance f = 1/(2 pi sqrt(L C)), REFERENCES §12)."""
    if not (natural_frequency_hz > 0 and capacitance_f > 0):
        raise ValueError("frequency and capacitance must be > 0")
    return 1.0 / ((2.0 * math.pi * natural_frequency_hz) ** 2 * capacitance_f)


@dataclass(frozen=True)
class RingFit:
    """One ring's fit, or why there is none (``reason``; the numbers are then None).

    ``frequency_hz`` the damped frequency f_d, ``natural_frequency_hz`` f_n, ``zeta`` the
    damping ratio, ``decay_s`` 1/alpha, ``amplitude_v`` the first peak's amplitude from the fit,
    ``start_s`` where the fit starts (the first peak), ``cycles`` fitted, ``residual_v`` rms;
    ``*_u`` standard uncertainties from the fit's covariance."""

    start_s: float
    frequency_hz: float | None = None
    frequency_u_hz: float | None = None
    natural_frequency_hz: float | None = None
    zeta: float | None = None
    zeta_u: float | None = None
    decay_s: float | None = None
    amplitude_v: float | None = None
    cycles: float | None = None
    residual_v: float | None = None
    reason: str = ""

    @property
    def ok(self) -> bool:
        return self.frequency_hz is not None


@dataclass(frozen=True)
class EdgeSet:
    """The edges of one direction ("rising" or "falling"): per-edge ``mid_s`` (50 % instants),
    ``dv_dt_v_per_s`` (signed) and ``dv_dt_u_v_per_s`` (standard), ``rings`` (the fits, with
    their reasons); the medians with expanded (k = 2) uncertainties: ``dv_dt_v_per_s`` (the
    median), ``dv_dt_max_v_per_s`` (the fastest, by magnitude), ``ring_frequency_hz`` (f_d),
    ``ring_natural_frequency_hz`` (f_n), ``ring_zeta`` and ``loop_inductance_h``. None with a
    reason in ``reasons`` where missing."""

    direction: str
    mid_s: np.ndarray
    edge_dv_dt_v_per_s: np.ndarray
    edge_dv_dt_u_v_per_s: np.ndarray
    rings: tuple[RingFit, ...]
    dv_dt_v_per_s: float | None = None
    dv_dt_uncertainty_v_per_s: float | None = None
    dv_dt_max_v_per_s: float | None = None
    dv_dt_max_uncertainty_v_per_s: float | None = None
    ring_frequency_hz: float | None = None
    ring_frequency_uncertainty_hz: float | None = None
    ring_natural_frequency_hz: float | None = None
    ring_zeta: float | None = None
    ring_zeta_uncertainty: float | None = None
    loop_inductance_h: float | None = None
    loop_inductance_uncertainty_h: float | None = None
    reasons: dict[str, str] = field(default_factory=dict)

    @property
    def count(self) -> int:
        return int(self.mid_s.size)

    def to_dict(self, per_edge: bool = False) -> dict:
        keys = ("dv_dt_v_per_s", "dv_dt_uncertainty_v_per_s", "dv_dt_max_v_per_s",
                "dv_dt_max_uncertainty_v_per_s", "ring_frequency_hz",
                "ring_frequency_uncertainty_hz", "ring_natural_frequency_hz", "ring_zeta",
                "ring_zeta_uncertainty", "loop_inductance_h", "loop_inductance_uncertainty_h")  # fmt: skip
        out = {"direction": self.direction, "count": self.count, "reasons": dict(self.reasons)}
        out.update({k: getattr(self, k) for k in keys})
        out["rings_fitted"] = sum(r.ok for r in self.rings)
        if per_edge:
            out["mid_s"] = self.mid_s.tolist()
            out["edge_dv_dt_v_per_s"] = self.edge_dv_dt_v_per_s.tolist()
            out["rings"] = [r.__dict__.copy() for r in self.rings]
        return out


@dataclass(frozen=True)
class SwitchNodeResult:
    """Switch-node stresses of a record (V, s, Hz, H). ``*_uncertainty_v``: expanded (k = 2).
    ``undershoot_v``: how far the node goes below ground (>= 0); ``negative_margin_v``:
    ``min_v`` - ``negative_rating_v`` (>= 0 inside the rating; None without a rating);
    ``overshoot_v``: how far ``max_v`` goes above ``bus_v``."""

    low_level_v: float
    high_level_v: float
    bus_v: float
    min_v: float
    min_uncertainty_v: float
    undershoot_v: float
    negative_rating_v: float | None
    negative_margin_v: float | None
    max_v: float
    max_uncertainty_v: float
    overshoot_v: float
    rising: EdgeSet
    falling: EdgeSet
    capacitance_f: float | None
    reasons: dict[str, str] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()

    def to_dict(self, per_edge: bool = False) -> dict:
        out = {k: v for k, v in self.__dict__.items() if k not in ("rising", "falling")}
        out["rising"] = self.rising.to_dict(per_edge)
        out["falling"] = self.falling.to_dict(per_edge)
        out["reasons"] = dict(self.reasons)
        out["warnings"] = list(self.warnings)
        return out


# ------------------------------------------------------------------------------ ring fit
def _fft_frequency(d: np.ndarray, dt: float, f_lo: float = 0.0, f_hi: float = math.inf) -> float:
    """Frequency (Hz) of the highest FFT bin of ``d`` between ``f_lo`` and ``f_hi`` (mean
    removed, zero-padded 8x), refined by a parabola through the peak bin and its neighbours
    (common practice). 0 when the band holds no bin."""
    n = 8 * d.size
    spec = np.abs(np.fft.rfft(d - d.mean(), n))
    freqs = np.arange(spec.size) / (n * dt)
    band = (freqs >= f_lo) & (freqs <= f_hi) & (freqs > 0)
    if not band.any():
        return 0.0
    spec = np.where(band, spec, 0.0)
    k = int(np.argmax(spec))
    if 0 < k < spec.size - 1 and spec[k - 1] > 0 and spec[k + 1] > 0:
        a, b, c = spec[k - 1], spec[k], spec[k + 1]
        den = a - 2 * b + c
        k = k + (0.5 * (a - c) / den if den != 0 else 0.0)
    return float(k) / (n * dt)


def _log_decrement(d: np.ndarray, half: int, noise_v: float) -> float | None:
    """Decay rate alpha (per sample) from the peaks of |d| in successive half-cycle windows
    above 3 sigma: ln|x_n| falls by alpha per sample (logarithmic decrement, REFERENCES §12)."""
    m = d.size // half
    if m < 2:
        return None
    blocks = np.abs(d[: m * half]).reshape(m, half)
    peak = blocks.max(axis=1)
    where = blocks.argmax(axis=1) + np.arange(m) * half
    keep = peak > 3.0 * noise_v
    first_low = np.flatnonzero(~keep)
    if first_low.size:
        keep[first_low[0] :] = False  # only the ring's own run of peaks, not late noise
    if keep.sum() < 2:
        return None
    slope = np.polyfit(where[keep], np.log(peak[keep]), 1)[0]
    return float(-slope) if slope < 0 else None


def _first_peak(d: np.ndarray) -> int:
    """Index of the ring's first extremum: the largest |d| after ``d`` first crosses the
    settling level (before that crossing it is still the edge's own tail; after it the ring
    only decays, so its first extreme is its largest)."""
    crossed = np.flatnonzero(d * np.sign(d[0]) < 0) if d[0] != 0 else np.array([0])
    z = int(crossed[0]) if crossed.size else 0
    # Within the first quarter of the record after the edge: a ring starts at once, and the
    # extreme of a long flat tail is only noise.
    span = max(d.size // 4, 16)
    return z + int(np.argmax(np.abs(d[z : z + span])))


def _half_cycle(d: np.ndarray, p: int) -> int | None:
    """Samples from the first extremum ``p`` to the next one of the other sign (half a ring
    cycle): found between the crossing back through the settling level and three quarter
    cycles after it. None when the record never swings back."""
    sign = 1.0 if d[p] > 0 else -1.0
    back = np.flatnonzero(d[p + 1 :] * sign < 0)
    if back.size == 0:
        return None
    c1 = p + 1 + int(back[0])
    quarter = max(c1 - p, 1)
    q = c1 + int(np.argmax(-sign * d[c1 : c1 + 3 * quarter + 2]))
    return max(q - p, 1)


def _ring_model(s, c, a, b, alpha, w):
    e = np.exp(-alpha * s)
    return c + e * (a * np.cos(w * s) + b * np.sin(w * s))


def fit_ring(y: np.ndarray, dt: float, settle_v: float, noise_v: float, t0: float = 0.0) -> RingFit:
    """Fit the ring in ``y`` (V, the samples after an edge up to the next one; ``dt`` s apart,
    the first at ``t0``) around the level it settles to, ``settle_v``, with ``noise_v`` the
    record's noise (V rms). See the module doc for the method and the refusals."""
    y = np.asarray(y, dtype=np.float64)[:MAX_RING_SAMPLES]
    floor = max(noise_v, 1e-15)
    if y.size < 16:
        return RingFit(t0, reason=f"only {y.size} samples before the next edge")
    d = y - settle_v
    p = _first_peak(d)
    start = t0 + p * dt
    if abs(d[p]) < MIN_RING_SIGMAS * floor:
        return RingFit(start, reason=f"no ring above the noise: first peak {abs(d[p]):.3g} V, "
                       f"noise {noise_v:.3g} V rms")  # fmt: skip
    half0 = _half_cycle(d, p)
    if half0 is None:
        return RingFit(start, reason="no ring: the record does not swing back through its "
                       "settling level after the first peak")  # fmt: skip
    d = d[p:]
    # About 8 cycles from the first peak: enough for the FFT and the decrement, and short of a
    # later step (the body diode handing over to the low side's channel).
    w = d[: min(d.size, 16 * half0)]
    f0 = _fft_frequency(w, dt, 0.5 / (2 * half0 * dt), 2.0 / (2 * half0 * dt))
    per = 1.0 / (f0 * dt) if f0 > 0 else 2.0 * half0
    if per < MIN_SAMPLES_PER_CYCLE:
        return RingFit(start, reason=f"sampled too slowly: {per:.1f} samples per ring cycle at "
                       f"{1 / (per * dt):.3g} Hz (need {MIN_SAMPLES_PER_CYCLE:g})")  # fmt: skip
    alpha = _log_decrement(w - float(np.median(w)), max(int(round(per / 2)), 1), floor)
    if alpha is None:
        return RingFit(start, reason="no ring above the noise: fewer than two successive "
                       "half-cycle peaks over 3 sigma of the noise (overdamped or too small)")  # fmt: skip
    # Fit up to where the envelope reaches 2 sigma (at least 3 cycles): the tail adds only noise.
    n_fit = int(math.ceil(math.log(abs(d[0]) / (2.0 * floor)) / alpha))
    n_fit = min(max(n_fit, int(math.ceil(MIN_RING_CYCLES * per))), d.size)
    cycles = n_fit / per
    if cycles < MIN_RING_CYCLES:
        return RingFit(start, reason=f"only {cycles:.1f} ring cycles before the next edge "
                       f"(need {MIN_RING_CYCLES:g})")  # fmt: skip
    return _fit(d[:n_fit], dt, settle_v, floor, start, f0, alpha / dt, cycles)


def _fit(d, dt, settle_v, noise_v, start, f0, alpha0, cycles) -> RingFit:
    from scipy.optimize import curve_fit

    s = np.arange(d.size) * dt
    w0 = 2.0 * math.pi * f0
    guess = (0.0, float(d[0]), 0.0, alpha0, w0)
    try:
        popt, pcov = curve_fit(_ring_model, s, d, p0=guess, maxfev=4000)
    except (RuntimeError, ValueError) as exc:
        return RingFit(start, reason=f"the damped-sinusoid fit did not converge ({exc})")
    _, a, b, alpha, w = (float(v) for v in popt)
    w = abs(w)
    resid = float(np.sqrt(np.mean((d - _ring_model(s, *popt)) ** 2)))
    if not (alpha > 0 and np.all(np.isfinite(pcov))):
        return RingFit(start, reason="the fit gives a growing or undetermined ring")
    if resid > MAX_RESIDUAL_RATIO * noise_v:
        return RingFit(start, residual_v=resid, reason=f"not one damped sinusoid: residuals "
                       f"{resid:.3g} V rms against {noise_v:.3g} V of noise")  # fmt: skip
    amp = math.hypot(a, b)
    ab = np.array([a, b]) / max(amp, 1e-300)
    u_amp = math.sqrt(max(float(ab @ pcov[np.ix_([1, 2], [1, 2])] @ ab), 0.0))
    u_f = math.sqrt(float(pcov[4, 4])) / (2.0 * math.pi)
    f_d = w / (2.0 * math.pi)
    # A fit to noise also leaves noise-sized residuals: the ring must stand out of its own
    # uncertainty (amplitude over 5 u, frequency to 10 %) to be a ring.
    if amp < MIN_AMPLITUDE_U * u_amp or u_f > MAX_FREQUENCY_U * f_d:
        return RingFit(start, residual_v=resid, reason=f"no ring above the noise: the fit's "
                       f"amplitude {amp:.3g} V +/- {u_amp:.3g} V, frequency {f_d:.3g} Hz "
                       f"+/- {u_f:.3g} Hz")  # fmt: skip
    wn = math.hypot(alpha, w)
    zeta = alpha / wn
    # d zeta/d alpha = w^2/wn^3, d zeta/d w = -alpha w/wn^3 (GUM §5.2, the fit's covariance).
    g = np.array([w * w, -alpha * w]) / wn**3
    cov = pcov[np.ix_([3, 4], [3, 4])]
    return RingFit(
        start_s=start,
        frequency_hz=f_d,
        frequency_u_hz=u_f,
        natural_frequency_hz=wn / (2.0 * math.pi),
        zeta=zeta,
        zeta_u=math.sqrt(max(float(g @ cov @ g), 0.0)),
        decay_s=1.0 / alpha,
        amplitude_v=amp,
        cycles=cycles,
        residual_v=resid,
    )


# ------------------------------------------------------------------------------ per direction
def _median_u(values: np.ndarray, u: np.ndarray) -> tuple[float, float]:
    """Median and its expanded (k = 2) uncertainty: sqrt(pi/2) x the larger of the typical
    standard uncertainty and the scatter, over sqrt(n) (the median's efficiency, common
    practice)."""
    n = values.size
    spread = float(np.std(values, ddof=1)) if n >= 3 else 0.0
    u_med = math.sqrt(math.pi / 2.0) * max(float(np.median(u)), spread) / math.sqrt(n)
    return float(np.median(values)), COVERAGE_K * u_med


def _edge_set(direction, sel, y, tr, dt, t0, state, noise_v, span, cap, cap_u) -> EdgeSet:
    """dv/dt (between the outer reference levels, ``span`` V apart) and the rings of the
    edges ``sel`` of one direction."""
    idx = np.flatnonzero(sel)
    dur = tr.duration_s[idx]
    dvdt = (span if direction == "rising" else -span) / dur
    # Each reference crossing moves by noise/slope, and the last-crossing choice by up to as
    # much again (rectangular): two crossings, GUM §5.1.2; u(dv/dt)/(dv/dt) = u(t)/t.
    slope = span / dur
    u_t = math.sqrt(2.0 * (4.0 / 3.0)) * noise_v / slope
    u_dvdt = np.abs(dvdt) * u_t / dur
    reasons: dict[str, str] = {}
    es = dict(direction=direction, mid_s=tr.t_mid_s[idx], edge_dv_dt_v_per_s=dvdt,
              edge_dv_dt_u_v_per_s=u_dvdt)  # fmt: skip
    if idx.size == 0:
        why = f"no {direction} edge in the record"
        for key in ("dv_dt_v_per_s", "dv_dt_max_v_per_s", "ring_frequency_hz"):
            reasons[key] = why
        return EdgeSet(rings=(), reasons=reasons, **es)
    med, u_med = _median_u(dvdt, u_dvdt)
    k = int(np.argmax(np.abs(dvdt)))
    rings = _rings(direction, y, tr, idx, dt, t0, state, noise_v)
    return EdgeSet(
        rings=rings, dv_dt_v_per_s=med, dv_dt_uncertainty_v_per_s=u_med,
        dv_dt_max_v_per_s=float(dvdt[k]), dv_dt_max_uncertainty_v_per_s=COVERAGE_K * float(u_dvdt[k]),
        reasons=reasons, **es, **_ring_summary(rings, cap, cap_u, reasons),
    )  # fmt: skip


def _rings(direction, y, tr, idx, dt, t0, state, noise_v) -> tuple[RingFit, ...]:
    """Fit the ring after each edge of ``idx`` (at most ``MAX_FITS``, spread evenly)."""
    pick = idx if idx.size <= MAX_FITS else idx[np.linspace(0, idx.size - 1, MAX_FITS).astype(int)]
    settle = state.high_v if direction == "rising" else state.low_v
    far = tr.t_high_s if direction == "rising" else tr.t_low_s
    fits = []
    for k in pick:
        a = int(math.ceil((far[k] - t0) / dt))
        if k + 1 < len(tr):  # stop before the next edge starts (its first reference crossing)
            nxt = tr.t_high_s[k + 1] if tr.direction[k + 1] < 0 else tr.t_low_s[k + 1]
            b = int(math.floor((nxt - t0) / dt)) - 1
        else:
            b = y.size
        fits.append(fit_ring(y[a:b], dt, settle, noise_v, t0 + a * dt))
    return tuple(fits)


def _ring_summary(rings, cap, cap_u, reasons) -> dict:
    ok = [r for r in rings if r.ok]
    if not ok:
        why = rings[0].reason if rings else "no edge"
        reasons["ring_frequency_hz"] = f"no ring could be fitted: {why}"
        reasons["ring_zeta"] = reasons["loop_inductance_h"] = reasons["ring_frequency_hz"]
        return {}
    f, fu = np.array([r.frequency_hz for r in ok]), np.array([r.frequency_u_hz for r in ok])
    z, zu = np.array([r.zeta for r in ok]), np.array([r.zeta_u for r in ok])
    fn = np.array([r.natural_frequency_hz for r in ok])
    f_med, f_u = _median_u(f, fu)
    z_med, z_u = _median_u(z, zu)
    fn_med = float(np.median(fn))
    out = {"ring_frequency_hz": f_med, "ring_frequency_uncertainty_hz": f_u,
           "ring_natural_frequency_hz": fn_med, "ring_zeta": z_med, "ring_zeta_uncertainty": z_u}  # fmt: skip
    if cap is None:
        reasons["loop_inductance_h"] = "no switch-node capacitance given (C_oss and the board's)"
    else:
        # u(f_n) ~ u(f_d): f_n = f_d / sqrt(1 - zeta^2) scales both alike for small zeta.
        b = loop_inductance_budget(fn_med, f_u / COVERAGE_K * fn_med / f_med, cap, cap_u)
        out["loop_inductance_h"] = b.value
        out["loop_inductance_uncertainty_h"] = b.expanded
    return out


# ------------------------------------------------------------------------------ record
def _extremes(y, dt, noise_v, rings, negative_rating_v, reasons):
    """Budgets of the lowest and highest samples, and the margin to the negative rating."""
    q = code_step(y)
    ring_ok = [r for r in rings if r.ok]
    miss = 0.0
    if ring_ok:
        r = max(ring_ok, key=lambda x: x.amplitude_v)
        miss = r.amplitude_v * (1.0 - math.cos(math.pi * r.frequency_hz * dt))
    lo = excursion_budget(
        float(y.min()), noise_v, y.size, q, miss, quantity="lowest switch-node voltage"
    )
    hi = excursion_budget(
        float(y.max()), noise_v, y.size, q, miss, quantity="highest switch-node voltage"
    )
    margin = None
    if negative_rating_v is None:
        reasons["negative_margin_v"] = "no rated negative excursion given (the driver's VS rating)"
    else:
        margin = lo.value - float(negative_rating_v)
    return lo, hi, margin


def _check_swing(y, low_v: float, high_v: float, what: str) -> None:
    """Refuse a record whose two levels lie within the noise: a quantised flat record can
    split into two "levels" one code apart, and its "edges" are noise, not switching."""
    sigma = noise_rms(np.asarray(y, dtype=np.float64))
    if high_v - low_v < MIN_SWING_SIGMAS * sigma:
        raise AnalysisError(
            f"{what}: no switching: its levels {low_v:.4g} V and {high_v:.4g} V are within "
            f"{MIN_SWING_SIGMAS:g} x its noise ({sigma:.3g} V rms)"
        )


def measure_switch_node(
    v_sw: np.ndarray,
    dt: float,
    t0: float = 0.0,
    *,
    bus_v: float | None = None,
    capacitance_f: float | None = None,
    capacitance_u_f: float = 0.0,
    negative_rating_v: float | None = None,
    levels: tuple[float, float, float] = (10.0, 50.0, 90.0),
) -> SwitchNodeResult:
    """Measure the switch node ``v_sw`` (V against ground, ``dt`` s apart from ``t0``).

    ``bus_v``: the bus voltage (V) the overshoot is read from (default: the high state level);
    ``capacitance_f``/``capacitance_u_f``: the switch node's capacitance (F) and its standard
    uncertainty, for the loop inductance; ``negative_rating_v``: the driver's rated negative
    excursion of its floating return (V, negative); ``levels``: the IEEE 181 reference levels
    (%) the dv/dt is taken between (outer two) and the edges are timed at."""
    tr, state = find_transitions(v_sw, dt, t0, levels)
    _check_swing(v_sw, state.low_v, state.high_v, "switch node")
    if len(tr) == 0:
        raise AnalysisError(
            f"no complete switch-node edge between {state.low_v:.4g} V and {state.high_v:.4g} V"
        )
    y = np.asarray(v_sw, dtype=np.float64)
    dt, t0 = float(dt), float(t0)
    noise_v = noise_rms(y)
    rising = tr.direction > 0
    span = (float(levels[2]) - float(levels[0])) / 100.0 * state.amplitude_v
    common = (y, tr, dt, t0, state, noise_v, span, capacitance_f, capacitance_u_f)
    up = _edge_set("rising", rising, *common)
    down = _edge_set("falling", ~rising, *common)
    reasons: dict[str, str] = {}
    bus = state.high_v if bus_v is None else float(bus_v)
    lo, hi, margin = _extremes(y, dt, noise_v, up.rings + down.rings, negative_rating_v, reasons)
    warnings = []
    if bus_v is None:
        warnings.append("no bus voltage given: the overshoot is read above the high state level")
    return SwitchNodeResult(
        low_level_v=state.low_v, high_level_v=state.high_v, bus_v=bus,
        min_v=lo.value, min_uncertainty_v=lo.expanded, undershoot_v=max(0.0, -lo.value),
        negative_rating_v=negative_rating_v, negative_margin_v=margin,
        max_v=hi.value, max_uncertainty_v=hi.expanded, overshoot_v=max(0.0, hi.value - bus),
        rising=up, falling=down, capacitance_f=capacitance_f, reasons=reasons,
        warnings=tuple(warnings),
    )  # fmt: skip
