"""The physical model of the simulated board: a high-side N-channel MOSFET with a bootstrap gate
driver switching a resistive-inductive load, as the simulated instruments see it.

``StageModel(design, scenario, seed)`` takes the board file's [design] values (SI floats) and a
scenario name (``sim_instruments.scenarios.SCENARIOS``). The instruments tell it the bus voltage
and the PWM setting, ask for the true analogue waveform of a net (no scope noise, bandwidth or
quantisation: the scope adds those), the average input current, the losses and the heatsink's
temperature at a simulated time.

The physics is in ``gate_drive`` (Vgs with its Miller plateau, the bootstrap capacitor),
``switch_node`` (edges, ringing, the freewheel below ground), ``rails``, ``thermal`` and
``operating_point`` (the steady state and the losses). A period is evaluated on the sample
phases of one repeat of the sample grid and tiled, so a 10 Mpt record costs about one period of
samples plus one copy.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from fractions import Fraction

import numpy as np

from sim_instruments.gate_drive import vbs_wave, vgs_wave
from sim_instruments.operating_point import OperatingPoint, solve_operating_point
from sim_instruments.rails import ripple
from sim_instruments.scenarios import SCENARIOS
from sim_instruments.stage_params import StageParameters
from sim_instruments.switch_node import switch_wave
from sim_instruments.thermal import FirstOrderHeatsink

__all__ = ["StageModel", "NETS"]

#: The nets the model can produce (DEVELOPERS.md, "Nets").
NETS = ("gate", "switch", "vgs", "vbs", "bus", "vdrv", "logic")
# The sample grid repeats after p samples covering q periods; q is kept small.
_MAX_PERIODS_PER_REPEAT = 64
_CHUNK = 1 << 16
_CURRENT_CACHE_SIZE = 512


class StageModel:
    """The simulated stage. Not thread-safe: the bench serialises calls (one lock)."""

    def __init__(
        self, design: Mapping[str, float], scenario: str = "healthy", seed: int = 0
    ) -> None:
        """``design``: the board file's [design] values parsed to SI floats (keys as in
        checklists/demo-board.toml; temperatures in degC, duty as a fraction). The scenario's
        parameter changes (``SCENARIOS[scenario].changes``) are applied here."""
        if scenario not in SCENARIOS:
            known = ", ".join(sorted(SCENARIOS))
            raise ValueError(f"unknown scenario {scenario!r} (known: {known})")
        self._scenario = scenario
        self.params = StageParameters.from_design(design, **SCENARIOS[scenario].changes)
        rng = np.random.default_rng(seed)
        # The seed sets the phases of the regulators' ripple: a board's own fingerprint.
        self._phases = rng.uniform(0.0, 2.0 * np.pi, size=2)
        self._v_bus = 0.0
        self._pwm = False
        self._duty = 0.5
        self._now_s = 0.0
        p = self.params
        self._heatsink = FirstOrderHeatsink(
            p.ambient_temperature, p.thermal_resistance, p.thermal_time_constant
        )
        self._op = solve_operating_point(p, 0.0, False, self._duty)
        # The supply asks for the current at the same few voltages again and again.
        self._current_cache: dict[tuple, float] = {}

    # --- state ---
    @property
    def scenario(self) -> str:
        """The scenario's name (read-only)."""
        return self._scenario

    @property
    def operating_point(self) -> OperatingPoint:
        """The present steady state (levels, timings, losses)."""
        return self._op

    @property
    def duty(self) -> float:
        """The PWM duty cycle (fraction)."""
        return self._duty

    @property
    def pwm_enabled(self) -> bool:
        return self._pwm

    def set_sim_time(self, sim_time_s: float) -> None:
        """The bench's clock tells the model "now" (s) before a state change."""
        self._now_s = max(self._now_s, float(sim_time_s))

    def set_bus(self, volts: float) -> None:
        """The voltage actually at the board input (V, after the supply's limit); 0 = unpowered."""
        if not math.isfinite(volts):
            raise ValueError(f"bus voltage must be finite, got {volts!r}")
        self._v_bus = max(float(volts), 0.0)
        self._update()

    def set_pwm(self, enabled: bool, duty: float | None = None) -> None:
        """The board's PWM enable and duty (fraction 0..1; None keeps the present duty)."""
        if duty is not None:
            if not (0.0 <= duty <= 1.0) or not math.isfinite(duty):
                raise ValueError(f"duty must lie in 0..1, got {duty!r}")
            self._duty = float(duty)
        self._pwm = bool(enabled)
        self._update()

    def _update(self) -> None:
        self._op = solve_operating_point(self.params, self._v_bus, self._pwm, self._duty)
        self._heatsink.set_power(self._now_s, self._op.losses["heatsink"])

    # --- what the instruments read ---
    def bus_current(self, volts: float) -> float:
        """Average input current (A) at ``volts`` (V) in the present PWM state; non-decreasing
        in volts (the supply solves its CV/CC state with it)."""
        key = (float(volts), self._pwm, self._duty, self.params)
        amps = self._current_cache.get(key)
        if amps is None:
            amps = solve_operating_point(self.params, volts, self._pwm, self._duty).bus_current_a
            if len(self._current_cache) >= _CURRENT_CACHE_SIZE:
                self._current_cache.clear()
            self._current_cache[key] = amps
        return amps

    def losses(self) -> dict[str, float]:
        """Losses (W): "switching", "conduction", "gate_drive", "linear" (source follower),
        "heatsink" (what heats the heatsink: all but the gate drive, which the driver and the
        gate resistors dissipate) and "total"."""
        return dict(self._op.losses)

    def heatsink_temperature(self, sim_time_s: float) -> float:
        """Heatsink temperature (degC) at simulated time ``sim_time_s`` (s): the exact first-order
        response to the loss history; no sensor lag or noise."""
        self.set_sim_time(sim_time_s)
        return self._heatsink.temperature(self._now_s)

    def heatsink_final(self) -> float:
        """Where the heatsink settles at the present loss, ambient + P R_th (degC)."""
        return self._heatsink.final_c()

    def waveform(self, net: str, t0: float, dt: float, n: int) -> np.ndarray:
        """True analogue volts (float64) at ``net`` at times t0 + k dt (s), k = 0..n-1, with
        t = 0 at a turn-on command edge of the PWM. Periodic in steady state."""
        if net not in NETS:
            raise ValueError(f"unknown net {net!r} (known: {', '.join(NETS)})")
        if not (dt > 0.0 and math.isfinite(dt) and math.isfinite(t0)):
            raise ValueError("dt must be a positive finite number of seconds and t0 finite")
        n = int(n)
        if n < 0:
            raise ValueError(f"n must be >= 0, got {n}")
        fn = self._net_function(net)
        if isinstance(fn, float):
            return np.full(n, fn)
        return _sample_periodic(fn, self.params.period, t0, dt, n)

    # --- per-period evaluation ---
    def _net_function(self, net: str) -> Callable[[np.ndarray], np.ndarray] | float:
        """The net as a function of phase (s in [0, T)), or a constant (V)."""
        op, p = self._op, self.params
        if op.v_bus <= 0.0:
            return 0.0
        if op.mode == "idle":
            return {
                "gate": 0.0,
                "switch": 0.0,
                "vgs": 0.0,
                "vbs": op.vbs_idle,
                "bus": op.v_bus,
                "vdrv": op.vdrv,
                "logic": op.logic,
            }[net]
        period = p.period
        bus_x, bus_y = op.bus_knots

        def bus_ripple(ph: np.ndarray) -> np.ndarray:
            return np.interp(ph, bus_x, bus_y)

        def vdrv(ph: np.ndarray) -> np.ndarray:
            out = ripple(ph, period, p.vdrv_ripple_pp, self._phases[0])
            out += op.vdrv + p.vdrv_bus_coupling * bus_ripple(ph)
            if op.mode == "switching" and op.recharge_charge > 0.0:
                # The bootstrap recharge pulse through the rail's impedance (zero mean).
                g = op.gate
                i = np.flatnonzero(ph >= op.t_recharge)
                pulse = (op.v_charge - g.v_end) / (op.tau_recharge / g.capacitance)
                out[i] -= (
                    p.vdrv_rail_impedance
                    * pulse
                    * np.exp(-(ph[i] - op.t_recharge) / op.tau_recharge)
                )
                out += p.vdrv_rail_impedance * op.recharge_charge / period
            return out

        if net == "bus":
            return lambda ph: op.v_bus + bus_ripple(ph)
        if net == "vdrv":
            return vdrv
        if net == "logic":
            return lambda ph: (
                op.logic
                + ripple(ph, period, p.logic_ripple_pp, self._phases[1], harmonic=2)
                + 0.01 * (vdrv(ph) - op.vdrv)
            )
        if op.mode == "follower":
            return _follower_net(op, net, bus_ripple)
        g, sw = op.gate, op.switch
        if net == "vgs":
            return lambda ph: vgs_wave(g, ph)
        if net == "vbs":
            return lambda ph: vbs_wave(g, ph, op.v_charge, op.t_recharge, op.tau_recharge)
        if net == "switch":
            return lambda ph: switch_wave(sw, ph, bus_ripple(ph))
        # gate to ground = source + Vgs
        return lambda ph: switch_wave(sw, ph, bus_ripple(ph)) + vgs_wave(g, ph)


def _follower_net(
    op: OperatingPoint, net: str, bus_ripple: Callable[[np.ndarray], np.ndarray]
) -> Callable[[np.ndarray], np.ndarray]:
    """Nets of the source follower: the gate RC to the bus, the output k (V_gate - V_th)."""
    fp = op.follower

    def gate(ph: np.ndarray) -> np.ndarray:
        on = ph < fp.t_on
        g = np.where(
            on,
            -np.expm1(-ph / fp.tau_on) * fp.v_gate_high,
            fp.v_gate_at_off * np.exp(-np.maximum(ph - fp.t_on, 0.0) / fp.tau_off),
        )
        g += (g * (1.0 / fp.v_gate_high)) * bus_ripple(ph)
        return g

    def source(g: np.ndarray) -> np.ndarray:
        return fp.gain * np.maximum(g - fp.v_threshold, 0.0)

    if net == "gate":
        return gate
    if net == "switch":
        return lambda ph: source(gate(ph))
    if net == "vgs":

        def vgs(ph: np.ndarray) -> np.ndarray:
            g = gate(ph)
            return g - source(g)

        return vgs
    # vbs: the driver's floating supply tied to the bus: VB - VS = bus - source
    return lambda ph: op.v_bus + bus_ripple(ph) - source(gate(ph))


def _sample_periodic(
    fn: Callable[[np.ndarray], np.ndarray], period: float, t0: float, dt: float, n: int
) -> np.ndarray:
    """fn on the phases of t0 + k dt; evaluates one repeat of the sample grid and tiles it when
    the grid repeats within ``n`` samples (T / dt = p / q with q small and drift below dt/1000)."""
    if n == 0:
        return np.empty(0)
    ratio = Fraction(period / dt).limit_denominator(_MAX_PERIODS_PER_REPEAT)
    p_samples, q_periods = ratio.numerator, ratio.denominator
    if 0 < p_samples < n and n * abs(dt - q_periods * period / p_samples) < 1e-3 * dt:
        ph = np.mod(t0 + dt * np.arange(p_samples), period)
        return np.resize(fn(ph), n)
    # No short repeat: evaluate every sample, in cache-sized chunks (the piecewise formulas make
    # several passes over their input; small chunks keep those passes in cache).
    out = np.empty(n)
    for start in range(0, n, _CHUNK):
        stop = min(start + _CHUNK, n)
        ph = np.mod(t0 + dt * np.arange(start, stop, dtype=np.float64), period)
        out[start:stop] = fn(ph)
    return out
