"""The switch node (MOSFET source to ground) over one period, with its ringing.

The ideal node is piecewise linear: low until the turn-on plateau, a linear ramp to the high
level while Q_gd is delivered (the drain-source voltage moves with the Miller charge at constant
gate current, TI SLUA618 [memory]), the high level (bus minus I * R_DS(on), carrying the bus
ripple), a linear ramp down during the turn-off plateau to -V_f, where the freewheeling diode
carries the load inductor's current until it has decayed:
i(t) = (I0 + V_f/R) exp(-t R/L) - V_f/R, zero after (L/R) ln((I0 + V_f/R)/(V_f/R)) (first-order RL
with a constant diode drop, common practice, no source). The diode then lets go and the node rings
back to 0 V through the load's L with the node's capacitance, damped by the load resistance.

The ringing of the edges is the node's stray L with the node C: the ideal ramps pass through
G(s) = wn^2 / (s^2 + 2 zeta wn s + wn^2), wn = 1/sqrt(L C). A ramp of slope s from instant a adds
s * r(t - a), with the exact ramp response of G (REFERENCES §2 second-order system)
r(u) = u - 2 zeta/wn + exp(-zeta wn u) [(2 zeta/wn) cos(wd u) + ((2 zeta^2 - 1)/wd) sin(wd u)];
only the difference from the ideal ramp is computed, and only where it has not died away.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["Resonance", "SwitchPlan", "switch_wave"]

# Beyond this many time constants 1/(zeta wn) the ringing is below 1e-9 of its start.
_DECAY_SPAN = 21.0


@dataclass(frozen=True)
class Resonance:
    """A damped second-order resonance: natural frequency ``wn`` (rad/s), damping ``zeta``."""

    wn: float
    zeta: float

    @classmethod
    def of(cls, inductance_h: float, capacitance_f: float, zeta: float) -> Resonance:
        """The resonance of L and C: wn = 1/sqrt(L C)."""
        # Kept under-damped (the closed forms below need wd > 0).
        return cls(1.0 / math.sqrt(inductance_h * capacitance_f), min(max(zeta, 1e-3), 0.99))

    @property
    def decay_s(self) -> float:
        """How long the ringing lasts (s): 21 time constants of its envelope."""
        return _DECAY_SPAN / (self.zeta * self.wn)

    def ramp_error(self, u: np.ndarray) -> np.ndarray:
        """r(u) - u for u >= 0 (s -> s): the output's lag behind a unit-slope ramp."""
        z, wn = self.zeta, self.wn
        sigma = z * wn
        wd = wn * math.sqrt(1.0 - z * z)
        env = np.exp(-sigma * u)
        return -2.0 * z / wn + env * (
            (2.0 * z / wn) * np.cos(wd * u) + ((2.0 * z * z - 1.0) / wd) * np.sin(wd * u)
        )


@dataclass(frozen=True)
class SwitchPlan:
    """Instants (s) and levels (V) of the ideal switch node over one period."""

    t_rise0: float  # turn-on plateau starts
    t_rise1: float  # turn-on ramp ends (plateau end, or turn-off start if earlier)
    t_fall0: float  # turn-off plateau starts
    t_fall1: float  # turn-off plateau ends: node at -V_f
    t_release: float  # freewheel diode stops conducting
    v_high: float  # mean high level (bus - I R_DS(on)), V
    v_reached: float  # level reached when the turn-off starts, V
    v_diode: float  # freewheeling diode drop (positive), V
    edge: Resonance  # stray L with the node C
    release: Resonance  # load L with the node C, damped by the load R
    period: float


def _where(ph: np.ndarray, lo: float, hi: float) -> np.ndarray:
    return np.flatnonzero((ph >= lo) & (ph < hi))


def _ramp_ringing(
    out: np.ndarray, ph: np.ndarray, start: float, stop: float, slope: float, res: Resonance
) -> None:
    """Add the ringing of a ramp of ``slope`` (V/s) between ``start`` and ``stop`` (s)."""
    if slope == 0.0 or stop <= start:
        return
    i = _where(ph, start, stop + res.decay_s)
    u = ph[i] - start
    err = res.ramp_error(u)
    after = u >= stop - start
    if after.any():
        err[after] -= res.ramp_error(u[after] - (stop - start))
    out[i] += slope * err


def switch_wave(plan: SwitchPlan, ph: np.ndarray, bus_ripple: np.ndarray | None) -> np.ndarray:
    """Switch node to ground (V) at phases ``ph`` (s); ``bus_ripple`` (V, same shape) rides on
    the high level."""
    if plan.v_reached <= 0.0:
        return np.zeros_like(ph)
    knots = [0.0, plan.t_rise0, plan.t_rise1, plan.t_fall0, plan.t_fall1, plan.t_release]
    levels = [0.0, 0.0, plan.v_reached, plan.v_reached, -plan.v_diode, -plan.v_diode]
    out = np.interp(ph, knots, levels)
    if bus_ripple is not None:
        # The high level follows the bus: weight the ripple by how far up the node is.
        share = np.clip(out * (1.0 / plan.v_high), 0.0, 1.0)
        out += share * bus_ripple
    rise_slope = 0.0
    if plan.t_rise1 > plan.t_rise0:
        rise_slope = plan.v_reached / (plan.t_rise1 - plan.t_rise0)
    _ramp_ringing(out, ph, plan.t_rise0, plan.t_rise1, rise_slope, plan.edge)
    fall_slope = -(plan.v_reached + plan.v_diode) / max(plan.t_fall1 - plan.t_fall0, 1e-15)
    _ramp_ringing(out, ph, plan.t_fall0, plan.t_fall1, fall_slope, plan.edge)
    # After the diode lets go: -V_f rings back to 0 through the load L and the node C.
    i = _where(ph, plan.t_release, plan.period)
    if i.size:
        res = plan.release
        sigma = res.zeta * res.wn
        wd = res.wn * math.sqrt(1.0 - res.zeta**2)
        u = ph[i] - plan.t_release
        out[i] = (
            -plan.v_diode * np.exp(-sigma * u) * (np.cos(wd * u) + (sigma / wd) * np.sin(wd * u))
        )
    return out
