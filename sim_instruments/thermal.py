"""The heatsink's temperature: an exact first-order response to a piecewise-constant loss.

For a loss P held from t_k on, T(t) = T_inf - (T_inf - T(t_k)) * exp(-(t - t_k)/tau) with
T_inf = T_ambient + P * R_th (first-order soak; T_J = T_A + P * theta, REFERENCES §5, TI datasheets'
thermal sections [read]). Each change of the loss restarts the exponential from the temperature
reached, so any history of constant pieces is followed exactly, whatever the step sizes.
"""

from __future__ import annotations

import math

__all__ = ["FirstOrderHeatsink"]


class FirstOrderHeatsink:
    """Heatsink temperature (degC) driven by a loss (W) that changes at chosen instants (s)."""

    def __init__(self, ambient_c: float, r_th_k_per_w: float, tau_s: float) -> None:
        if r_th_k_per_w < 0 or tau_s <= 0:
            raise ValueError("thermal resistance must be >= 0 K/W and time constant > 0 s")
        self.ambient_c = float(ambient_c)
        self.r_th = float(r_th_k_per_w)
        self.tau_s = float(tau_s)
        self._t_s = 0.0  # instant of the last loss change, s
        self._temp_c = self.ambient_c  # temperature at that instant, degC
        self._power_w = 0.0

    @property
    def power_w(self) -> float:
        """The loss heating the heatsink now, W."""
        return self._power_w

    def final_c(self, power_w: float | None = None) -> float:
        """T_ambient + P * R_th (degC): where the temperature settles at a constant loss."""
        p = self._power_w if power_w is None else power_w
        return self.ambient_c + p * self.r_th

    def temperature(self, t_s: float) -> float:
        """Temperature at ``t_s`` (degC); times before the last change read the value there."""
        elapsed = max(0.0, t_s - self._t_s)
        final = self.final_c()
        return final - (final - self._temp_c) * math.exp(-elapsed / self.tau_s)

    def set_power(self, t_s: float, power_w: float) -> None:
        """From ``t_s`` on the loss is ``power_w`` (W). Earlier times are taken as the last change."""
        t_s = max(t_s, self._t_s)
        self._temp_c = self.temperature(t_s)
        self._t_s = t_s
        self._power_w = float(power_w)
