"""Measured switching energy: deskew of the voltage and current channels, E_on and E_off per edge.

Public API (pure numpy, no I/O; SI units)::

    measure_deskew(v, i, dt, t0=0.0) -> Deskew          # on a resistive step
    deskewed(i, dt, skew_s) -> np.ndarray               # the current moved earlier by skew_s
    measure_switching_energy(v_ds, i_d, dt, t0=0.0, *, skew_s=0.0, skew_u_s=0.0,
                             frequency_hz=None, window_pct=10.0,
                             gain_u=0.0) -> SwitchingEnergy

``Deskew``: ``skew_s`` = how late the current channel reads against the voltage channel (s;
subtract it by ``deskewed``), its expanded uncertainty, the edges used. ``SwitchingEnergy``:
per-edge ``e_on_j``/``e_off_j`` arrays with standard uncertainties, their medians
``e_on_median_j``/``e_off_median_j`` with expanded (k = 2) uncertainties, and the switching
power ``power_w`` = (E_on + E_off) f_sw with its expanded uncertainty; None with a reason in
``reasons`` where missing.

Method and sources:

* Deskew (REFERENCES §12 [read: power-measurement and probe-deskew application notes]): on a
  resistive step the current is in phase with the voltage, so the skew is the difference of
  the two channels' 50 % instants (IEEE Std 181-2011 mid-reference crossings, linearly
  interpolated: sub-sample), each current edge paired with the nearest voltage edge; the
  median over the edges, u = sqrt(pi/2) x max(scatter, one pair's crossing u)/sqrt(n).
* Deskewing: i_corrected(t) = i(t + skew) by linear interpolation between samples.
* Levels of each channel: IEEE 181 histogram levels of the record clipped to its 0.5th/99.5th
  percentiles (a shoot-through spike must not become a "state"); a channel whose levels lie
  within 10 sigma of its noise is refused (no switching).
* Energy: E = integral of v_DS i_D dt (REFERENCES §12) by the trapezoid rule, the window's ends
  interpolated. Window rule (``window_pct`` = x, 10 % by default): turn-on from the current
  rising through x % of its on-state level to the voltage falling through x % of its off-state
  level; turn-off from the voltage rising through x % to the current falling through x %
  (the 10 %/10 % points used by device datasheets and power-measurement notes [memory];
  IEC 60747-9 uses 10 % and 2 % for IGBTs [memory]). On a linear, clamped-inductive crossover
  the whole transition holds E = 1/2 V I (t_ri + t_fv) (Mohan, Undeland, Robbins, *Power
  Electronics*, ch. 2, W_c(on) = 1/2 V_d I_o t_c(on) [memory]); the 10 % window leaves out 1 %
  of it [computed].
* Switching power: P_sw = (E_on + E_off) f_sw (REFERENCES §12).
* Uncertainty per edge (GUM, JCGM 100:2008; ``uncertainty.switching_energy_budget``): the
  channels' noise, u^2 = dt^2 sum(v_k^2 sigma_i^2 + i_k^2 sigma_v^2) (white, uncorrelated
  samples); the skew's uncertainty times the energy's sensitivity to skew, dE/dskew, found by
  recomputing E at skew +/- delta with the current's own window end moving with it (a fast,
  overlapping crossover makes it large: REFERENCES §12); the window's
  ends, p(t_end) u(t_end) with u(t) = sigma/slope at each end; the probes' gain accuracy
  (``gain_u``, relative, of E).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from bringup.analysis.edges import find_transitions, noise_rms, state_levels
from bringup.analysis.uncertainty import COVERAGE_K, switching_energy_budget
from bringup.errors import AnalysisError

__all__ = [
    "Deskew",
    "SwitchingEnergy",
    "deskewed",
    "measure_deskew",
    "measure_switching_energy",
]


@dataclass(frozen=True)
class Deskew:
    """``skew_s``: the current channel's delay against the voltage channel (s), its expanded
    (k = 2) ``uncertainty_s``, ``edges`` paired, ``per_edge_s`` each pair's skew."""

    skew_s: float
    uncertainty_s: float
    edges: int
    per_edge_s: tuple[float, ...]


@dataclass(frozen=True)
class SwitchingEnergy:
    """Per-edge energies (J) and their standard uncertainties, the medians with expanded
    (k = 2) uncertainties and the switching power (W). ``e_on_at_s``/``e_off_at_s``: where each
    window starts. ``skew_s``: the deskew applied."""

    e_on_j: np.ndarray
    e_on_u_j: np.ndarray
    e_on_at_s: np.ndarray
    e_off_j: np.ndarray
    e_off_u_j: np.ndarray
    e_off_at_s: np.ndarray
    e_on_median_j: float | None
    e_on_uncertainty_j: float | None
    e_off_median_j: float | None
    e_off_uncertainty_j: float | None
    power_w: float | None
    power_uncertainty_w: float | None
    skew_s: float
    window_pct: float
    reasons: dict[str, str] = field(default_factory=dict)

    def to_dict(self, per_edge: bool = False) -> dict:
        out = {k: v for k, v in self.__dict__.items() if not isinstance(v, np.ndarray)}
        out["reasons"] = dict(self.reasons)
        out["turn_on_edges"], out["turn_off_edges"] = int(self.e_on_j.size), int(self.e_off_j.size)
        if per_edge:
            for k in ("e_on_j", "e_on_u_j", "e_on_at_s", "e_off_j", "e_off_u_j", "e_off_at_s"):
                out[k] = getattr(self, k).tolist()
        return out


def _median_u(values: np.ndarray, u: np.ndarray) -> tuple[float, float]:
    """Median and its expanded uncertainty: sqrt(pi/2) max(typical u, scatter)/sqrt(n)."""
    n = values.size
    spread = float(np.std(values, ddof=1)) if n >= 3 else 0.0
    return float(np.median(values)), COVERAGE_K * math.sqrt(math.pi / 2.0) * max(
        float(np.median(u)), spread
    ) / math.sqrt(n)


def _transitions(y: np.ndarray, dt: float, t0: float, pct, what: str):
    """Transitions of ``y`` with its state levels found on the record clipped to its 0.5th
    and 99.5th percentiles: a shoot-through or recovery spike (a few samples per period)
    would otherwise stretch the histogram until the on-state and the off-state share its
    lower half. Refuses a record whose levels lie within 10 sigma of its noise."""
    y = np.asarray(y, dtype=np.float64)
    lo, hi = (float(v) for v in np.percentile(y, [0.5, 99.5]))
    try:
        state = state_levels(np.clip(y, lo, hi))
    except AnalysisError as exc:
        raise AnalysisError(f"{what}: {exc}") from None
    sigma = noise_rms(y)
    if state.amplitude_v < 10.0 * sigma:
        raise AnalysisError(
            f"{what}: no switching: its levels {state.low_v:.4g} and {state.high_v:.4g} lie "
            f"within 10 x its noise ({sigma:.3g} rms)"
        )
    return find_transitions(y, dt, t0, pct, state=state)


def measure_deskew(v: np.ndarray, i: np.ndarray, dt: float, t0: float = 0.0) -> Deskew:
    """The current channel's delay (s) against the voltage channel from a resistive step
    (``v`` V and ``i`` A, same time base): 50 % instants, paired, median (module doc)."""
    tv, sv = _transitions(v, dt, t0, (10.0, 50.0, 90.0), "deskew voltage")
    ti, si = _transitions(i, dt, t0, (10.0, 50.0, 90.0), "deskew current")
    if len(tv) == 0 or len(ti) == 0:
        raise AnalysisError("deskew: no complete edge on the voltage or the current channel")
    k = np.clip(np.searchsorted(tv.t_mid_s, ti.t_mid_s), 1, len(tv) - 1) if len(tv) > 1 else None
    if k is None:
        nearest = np.zeros(len(ti), int)
    else:
        left, right = tv.t_mid_s[k - 1], tv.t_mid_s[k]
        nearest = np.where(np.abs(ti.t_mid_s - left) <= np.abs(ti.t_mid_s - right), k - 1, k)
    skews = ti.t_mid_s - tv.t_mid_s[nearest]
    # One pair's u: each 50 % crossing moves by noise/slope, slope = 0.8 A / t(10-90).
    u_v = noise_rms(np.asarray(v, float)) * tv.duration_s[nearest] / (0.8 * sv.amplitude_v)
    u_i = noise_rms(np.asarray(i, float)) * ti.duration_s / (0.8 * si.amplitude_v)
    skew, big_u = _median_u(skews, np.hypot(u_v, u_i))
    return Deskew(skew, big_u, int(skews.size), tuple(float(s) for s in skews))


def deskewed(i: np.ndarray, dt: float, skew_s: float) -> np.ndarray:
    """The current record moved earlier by ``skew_s`` (s): i_corrected(t) = i(t + skew), by
    linear interpolation (the ends hold their first/last sample)."""
    i = np.asarray(i, dtype=np.float64)
    x = np.arange(i.size, dtype=np.float64)
    return np.interp(x + float(skew_s) / float(dt), x, i)


def _integrate(p: np.ndarray, t0: float, dt: float, ta: float, tb: float) -> float:
    """Trapezoid integral (J) of ``p`` (W) from ``ta`` to ``tb`` (s), ends interpolated."""
    xa, xb = (ta - t0) / dt, (tb - t0) / dt
    inner = np.arange(int(math.floor(xa)) + 1, int(math.ceil(xb)))
    x = np.concatenate(([xa], inner, [xb]))
    y = np.interp(x, np.arange(p.size), p)
    return float(np.sum((y[1:] + y[:-1]) * np.diff(x)) * 0.5 * dt)


def _windows(tv, ti, rising_current: bool) -> list[tuple[float, float]]:
    """(start, end) of each turn-on (``rising_current``) or turn-off window: the first
    channel's x % crossing to the next opposite-direction x % crossing of the other."""
    if rising_current:  # turn-on: current rises first, then the voltage falls
        first, second = ti.t_low_s[ti.direction > 0], tv.t_low_s[tv.direction < 0]
    else:  # turn-off: the voltage rises first, then the current falls
        first, second = tv.t_low_s[tv.direction > 0], ti.t_low_s[ti.direction < 0]
    out = []
    for k, ta in enumerate(first):
        j = int(np.searchsorted(second, ta))
        nxt = first[k + 1] if k + 1 < first.size else math.inf
        if j < second.size and second[j] < nxt:
            out.append((float(ta), float(second[j])))
    return out


def _energies(windows, turn_on, v, i_c, i_raw, dt, t0, skew_s, skew_u_s, sig_v, sig_i, gain_u):
    """Energy (J) and its standard uncertainty for each window. The skew's sensitivity is
    found by recomputing E with the current moved by +/- delta, its own crossing (the window's
    start at turn-on, its end at turn-off) moving with it."""
    p = v * i_c
    delta = max(skew_u_s, 0.05 * dt)
    # deskewed(i, skew + delta) moves the current earlier by delta: its crossings by -delta.
    shifted = ((v * deskewed(i_raw, dt, skew_s + delta), -delta),
               (v * deskewed(i_raw, dt, skew_s - delta), delta))  # fmt: skip
    e, u = [], []
    for ta, tb in windows:
        energy = _integrate(p, t0, dt, ta, tb)
        moved = [
            _integrate(ps, t0, dt, ta + sh, tb) if turn_on else _integrate(ps, t0, dt, ta, tb + sh)
            for ps, sh in shifted
        ]
        sens = (moved[0] - moved[1]) / (2 * delta)
        a, b = int(math.floor((ta - t0) / dt)), int(math.ceil((tb - t0) / dt)) + 1
        noise_j = dt * math.sqrt(float(np.sum(v[a:b] ** 2 * sig_i**2 + i_c[a:b] ** 2 * sig_v**2)))
        ends_j = _end_terms(p, v, i_c, dt, t0, ta, tb, sig_v, sig_i)
        budget = switching_energy_budget(energy, noise_j, sens, skew_u_s, ends_j, gain_u)
        e.append(energy)
        u.append(budget.combined)
    return np.array(e), np.array(u)


def _end_terms(p, v, i_c, dt, t0, ta, tb, sig_v, sig_i) -> float:
    """p(t_end) u(t_end) at both ends, u(t) = sigma/slope of the channel that defines each."""
    out = 0.0
    for t in (ta, tb):
        k = int(np.clip(round((t - t0) / dt), 1, p.size - 2))
        sv = abs(v[k + 1] - v[k - 1]) / (2 * dt)
        si = abs(i_c[k + 1] - i_c[k - 1]) / (2 * dt)
        # Whichever channel is moving there defines the end; its slope times the noise.
        u_t = min(sig_v / sv if sv > 0 else math.inf, sig_i / si if si > 0 else math.inf)
        if math.isfinite(u_t):
            out += (abs(p[k]) * u_t) ** 2
    return math.sqrt(out)


def measure_switching_energy(
    v_ds: np.ndarray,
    i_d: np.ndarray,
    dt: float,
    t0: float = 0.0,
    *,
    skew_s: float = 0.0,
    skew_u_s: float = 0.0,
    frequency_hz: float | None = None,
    window_pct: float = 10.0,
    gain_u: float = 0.0,
) -> SwitchingEnergy:
    """E_on and E_off (J) of every edge of the switch whose drain-source voltage ``v_ds`` (V)
    and drain current ``i_d`` (A) were captured together (``dt`` s apart from ``t0``).

    ``skew_s``/``skew_u_s``: the current channel's delay and its standard uncertainty (s),
    from ``measure_deskew`` on a resistive step; ``frequency_hz``: f_sw for the switching power;
    ``window_pct``: the window's x % points (module doc); ``gain_u``: the probes' combined gain
    uncertainty (relative, standard)."""
    v = np.asarray(v_ds, dtype=np.float64)
    i_raw = np.asarray(i_d, dtype=np.float64)
    if v.size != i_raw.size:
        raise AnalysisError("switching energy: the voltage and current records differ in length")
    pct = (float(window_pct), 50.0, 100.0 - float(window_pct))
    i_c = deskewed(i_raw, dt, skew_s)
    tv, _ = _transitions(v, dt, t0, pct, "switching energy, voltage")
    ti, _ = _transitions(i_c, dt, t0, pct, "switching energy, current")
    sig_v, sig_i = noise_rms(v), noise_rms(i_raw)
    common = (
        v,
        i_c,
        i_raw,
        float(dt),
        float(t0),
        float(skew_s),
        float(skew_u_s),
        sig_v,
        sig_i,
        gain_u,
    )
    on_w, off_w = _windows(tv, ti, True), _windows(tv, ti, False)
    e_on, u_on = _energies(on_w, True, *common)
    e_off, u_off = _energies(off_w, False, *common)
    return _summary(
        e_on, u_on, on_w, e_off, u_off, off_w, frequency_hz, float(skew_s), float(window_pct)
    )


def _summary(e_on, u_on, on_w, e_off, u_off, off_w, f, skew, pct) -> SwitchingEnergy:
    reasons: dict[str, str] = {}
    on = _median_u(e_on, u_on) if e_on.size else (None, None)
    off = _median_u(e_off, u_off) if e_off.size else (None, None)
    if e_on.size == 0:
        reasons["e_on_median_j"] = "no turn-on (current rising, then voltage falling) in the record"
    if e_off.size == 0:
        reasons["e_off_median_j"] = (
            "no turn-off (voltage rising, then current falling) in the record"
        )
    power = power_u = None
    if f is None:
        reasons["power_w"] = "no switching frequency given"
    elif on[0] is None or off[0] is None:
        reasons["power_w"] = "needs both a turn-on and a turn-off"
    else:
        power = (on[0] + off[0]) * float(f)
        power_u = float(f) * math.hypot(on[1], off[1])
    return SwitchingEnergy(
        e_on_j=e_on, e_on_u_j=u_on, e_on_at_s=np.array([w[0] for w in on_w]),
        e_off_j=e_off, e_off_u_j=u_off, e_off_at_s=np.array([w[0] for w in off_w]),
        e_on_median_j=on[0], e_on_uncertainty_j=on[1],
        e_off_median_j=off[0], e_off_uncertainty_j=off[1],
        power_w=power, power_uncertainty_w=power_u, skew_s=skew, window_pct=pct, reasons=reasons,
    )  # fmt: skip
