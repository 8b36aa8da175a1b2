"""The physical model of a simulated half-bridge board: a synchronous buck with a bootstrap gate
driver (dead time between its two outputs), an inductor and an electronic load drawing a constant
current, as the simulated instruments see it.

``HalfBridgeModel(design, scenario, seed)`` has the interface of ``sim_instruments.model.
StageModel`` (the bench builds one or the other from the board's [design] table:
``build_model``) and these nets (DEVELOPERS.md, "Nets"): ``gate`` (high-side gate to ground),
``switch``, ``vgs`` (the high side's gate-source, floating), ``vbs``, ``bus``, ``vdrv``,
``logic``, ``vgs_low`` (the low side's gate-source, referred to ground) and ``i_switch`` (the
high side's drain current in amperes: what the bus's decoupling supplies, shoot-through
included). The physics of one frame is in ``half_bridge_frame``; the rails are the high-side
board's (``rails``), the heatsink is shared by both switches (``thermal``).

Losses, from the frame's noiseless waveforms on a fine grid: the high side's v_DS i_D (its
conduction and its switching), the low side's conduction and its body diode's V_F I during the
dead times (P_diode ~ V_F I 2 t_dead f_sw, REFERENCES §12), the shoot-through V_bus i_shoot;
gate drive Q_g V_drv f_sw per switch (REFERENCES §4) heats the driver, not the heatsink.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

import numpy as np

from sim_instruments import half_bridge_frame as hbf
from sim_instruments.half_bridge_params import HalfBridgeParameters, is_half_bridge
from sim_instruments.half_bridge_scenarios import HALF_BRIDGE_SCENARIOS
from sim_instruments.model import StageModel, _sample_periodic
from sim_instruments.operating_point import _board_current, solve_operating_point
from sim_instruments.rails import bus_ripple_knots, gate_drive_rail, logic_rail, ripple
from sim_instruments.thermal import FirstOrderHeatsink

__all__ = ["HalfBridgeModel", "HALF_BRIDGE_NETS", "build_model", "HalfBridgePoint"]

HALF_BRIDGE_NETS = ("gate", "switch", "vgs", "vbs", "bus", "vdrv", "logic", "vgs_low", "i_switch")
_CURRENT_CACHE_SIZE = 512
# Grid of the loss integrals: samples per period, and at most this many per frame.
_LOSS_SAMPLES = 10_000
_LOSS_MAX = 120_000


def build_model(design: Mapping[str, float], scenario: str = "healthy", seed: int = 0):
    """The model of the board ``design`` describes: a half-bridge when its [design] has the
    half-bridge keys (``is_half_bridge``), else the high-side stage."""
    if is_half_bridge(design):
        return HalfBridgeModel(design, scenario, seed)
    return StageModel(design, scenario, seed)


@dataclass(frozen=True)
class HalfBridgePoint:
    """The half-bridge's steady state at one setting."""

    mode: str  # "switching" or "idle"
    v_bus: float
    duty: float
    vdrv: float
    logic: float
    vbs_idle: float
    frame: hbf.Frame | None = None
    bus_knots: tuple[np.ndarray, np.ndarray] = field(default=(np.zeros(2), np.zeros(2)))
    losses: dict[str, float] = field(default_factory=dict)
    bus_current_a: float = 0.0


def _losses(hp: HalfBridgeParameters, f: hbf.Frame, v_bus: float, vdrv: float) -> dict:
    """Losses (W) from the frame's waveforms without ringing, on a midpoint grid."""
    n = min(_LOSS_SAMPLES * f.k, _LOSS_MAX)
    ph = (np.arange(n) + 0.5) * (f.length / n)
    sw = hbf.switch(f, ph, None, ringing=False)
    i_hs = hbf.i_switch(f, ph, shoot=False)
    shoot = hbf.i_shoot(f, ph)
    i_ls = np.maximum(hbf._inductor(f, np.mod(ph, f.period)) - i_hs, 0.0)
    diode = np.isclose(sw, -f.v_f)
    hs_conduction = float(np.mean(i_hs**2)) * f.rds_on
    hs_total = float(np.mean((v_bus - sw) * i_hs))
    body_diode = float(np.mean(np.where(diode, f.v_f * i_ls, 0.0)))
    ls_conduction = float(np.mean(np.where(diode, 0.0, np.maximum(-sw, 0.0) * i_ls)))
    p_shoot = v_bus * float(np.mean(shoot))
    pulses = float(np.mean(f.on))
    b = hp.base
    p_gate = pulses * (b.mosfet_gate_charge + b.level_shift_charge) + b.mosfet_gate_charge
    p_gate *= vdrv * b.switching_frequency
    switching = max(hs_total - hs_conduction, 0.0)
    heat = hs_total + body_diode + ls_conduction + p_shoot
    return {
        "switching": switching,
        "conduction": hs_conduction + ls_conduction,
        "body_diode": body_diode,
        "shoot_through": p_shoot,
        "gate_drive": p_gate,
        "linear": 0.0,
        "heatsink": heat,
        "total": heat + p_gate,
        "hs_input_current": float(np.mean(i_hs + shoot)),
    }


def _rail_load(hp: HalfBridgeParameters) -> float:
    """The gate-drive rail's load while switching (A): the driver's idle current and both
    gates' charge and the driver's own each period."""
    b = hp.base
    return b.vdrv_idle_current + (2 * b.mosfet_gate_charge + b.driver_charge_per_cycle) / hp.period


def solve_half_bridge(
    hp: HalfBridgeParameters, v_bus: float, pwm: bool, duty: float
) -> HalfBridgePoint:
    """The steady state at bus ``v_bus`` (V) with the PWM ``pwm`` at ``duty`` (fraction)."""
    b = hp.base
    v_bus = max(float(v_bus), 0.0)
    if v_bus <= 0.0 or not pwm or duty <= 0.0:
        idle = solve_operating_point(b, v_bus, False, duty)
        return HalfBridgePoint("idle", v_bus, duty, idle.vdrv, idle.logic, idle.vbs_idle,
                               losses=dict(idle.losses), bus_current_a=idle.bus_current_a)  # fmt: skip
    load = _rail_load(hp)
    vdrv = gate_drive_rail(b, v_bus, load)
    frame = hbf.solve_frame(hp, v_bus, duty, vdrv)
    losses = _losses(hp, frame, v_bus, vdrv)
    i_in = _board_current(b, v_bus, vdrv, load) + losses.pop("hs_input_current")
    knots = bus_ripple_knots(b, hp.load_current, float(frame.t1[0]), float(frame.t4[0]))
    return HalfBridgePoint("switching", v_bus, duty, vdrv, logic_rail(b, vdrv),
                           vdrv - b.bootstrap_diode_drop, frame, knots, losses, i_in)  # fmt: skip


class HalfBridgeModel:
    """The simulated half-bridge. Not thread-safe: the bench serialises calls (one lock)."""

    nets = HALF_BRIDGE_NETS

    def __init__(
        self, design: Mapping[str, float], scenario: str = "healthy", seed: int = 0
    ) -> None:
        """``design``: the board file's [design] values parsed to SI floats (keys as in
        checklists/demo-half-bridge.toml). The scenario's changes
        (``HALF_BRIDGE_SCENARIOS[scenario].changes``) are applied here."""
        if scenario not in HALF_BRIDGE_SCENARIOS:
            known = ", ".join(sorted(HALF_BRIDGE_SCENARIOS))
            raise ValueError(f"unknown half-bridge scenario {scenario!r} (known: {known})")
        self._scenario = scenario
        self.hb = HalfBridgeParameters.from_design(
            design, **HALF_BRIDGE_SCENARIOS[scenario].changes
        )
        self.params = self.hb.base
        rng = np.random.default_rng(seed)
        self._phases = rng.uniform(0.0, 2.0 * np.pi, size=2)
        self._v_bus, self._pwm, self._duty, self._now_s = 0.0, False, 0.5, 0.0
        p = self.params
        self._heatsink = FirstOrderHeatsink(
            p.ambient_temperature, p.thermal_resistance, p.thermal_time_constant
        )
        self._op = solve_half_bridge(self.hb, 0.0, False, self._duty)
        self._current_cache: dict[tuple, float] = {}

    @property
    def scenario(self) -> str:
        """The scenario's name (read-only)."""
        return self._scenario

    @property
    def operating_point(self) -> HalfBridgePoint:
        """The present steady state."""
        return self._op

    @property
    def duty(self) -> float:
        return self._duty

    @property
    def pwm_enabled(self) -> bool:
        return self._pwm

    def set_sim_time(self, sim_time_s: float) -> None:
        """The bench's clock tells the model "now" (s) before a state change."""
        self._now_s = max(self._now_s, float(sim_time_s))

    def set_bus(self, volts: float) -> None:
        """The voltage at the board input (V); 0 = unpowered."""
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
        self._op = self._solve(self._v_bus)
        self._heatsink.set_power(self._now_s, self._op.losses["heatsink"])

    def _solve(self, volts: float) -> HalfBridgePoint:
        return solve_half_bridge(self.hb, volts, self._pwm, self._duty)

    def bus_current(self, volts: float) -> float:
        """Average input current (A) at ``volts`` (V) in the present PWM state; non-decreasing
        in volts (the supply solves its CV/CC state with it).

        The phase leg's share is solved once per PWM setting at the design's bus voltage and
        scaled in proportion below it (held above it): an electronic load at constant current
        draws less than proportionally from a higher bus, and a supply's current-limit search
        only needs the curve to rise; the board's own share is exact at every voltage."""
        volts = max(float(volts), 0.0)
        if not self._pwm or volts <= 0.0:
            return solve_half_bridge(self.hb, volts, False, self._duty).bus_current_a
        key = (self._pwm, self._duty)
        ref = self._current_cache.get(key)
        if ref is None:
            v_ref = self.params.bus_voltage
            point = self._solve(v_ref)
            ref = point.bus_current_a - self._board_share(v_ref)
            if len(self._current_cache) >= _CURRENT_CACHE_SIZE:
                self._current_cache.clear()
            self._current_cache[key] = ref
        v_ref = self.params.bus_voltage
        return self._board_share(volts) + max(ref, 0.0) * min(volts / v_ref, 1.0)

    def _board_share(self, volts: float) -> float:
        """The board's own input current (A) at ``volts`` with the PWM running: regulators and
        the gate-drive rail's load (``operating_point._board_current``)."""
        b = self.params
        load = _rail_load(self.hb)
        return _board_current(b, volts, gate_drive_rail(b, volts, load), load)

    def losses(self) -> dict[str, float]:
        """Losses (W): "switching", "conduction", "body_diode", "shoot_through", "gate_drive",
        "linear" (0), "heatsink" (all but the gate drive) and "total"."""
        return dict(self._op.losses)

    def heatsink_temperature(self, sim_time_s: float) -> float:
        """Heatsink temperature (degC) at simulated time ``sim_time_s`` (s)."""
        self.set_sim_time(sim_time_s)
        return self._heatsink.temperature(self._now_s)

    def heatsink_final(self) -> float:
        """Where the heatsink settles at the present loss (degC)."""
        return self._heatsink.final_c()

    def waveform(self, net: str, t0: float, dt: float, n: int) -> np.ndarray:
        """True analogue values (V; A for ``i_switch``) at ``net`` at t0 + k dt (s), t = 0 at a
        high-side turn-on command."""
        if net not in HALF_BRIDGE_NETS:
            raise ValueError(f"unknown net {net!r} (known: {', '.join(HALF_BRIDGE_NETS)})")
        if not (dt > 0.0 and math.isfinite(dt) and math.isfinite(t0)):
            raise ValueError("dt must be a positive finite number of seconds and t0 finite")
        n = int(n)
        if n < 0:
            raise ValueError(f"n must be >= 0, got {n}")
        fn = self._net_function(net)
        if isinstance(fn, float):
            return np.full(n, fn)
        return _sample_periodic(fn, self._op.frame.length, t0, dt, n)

    def _net_function(self, net: str) -> Callable[[np.ndarray], np.ndarray] | float:
        op, p = self._op, self.params
        if op.v_bus <= 0.0:
            return 0.0
        if op.mode == "idle" or op.frame is None:
            rails = {"vbs": op.vbs_idle, "bus": op.v_bus, "vdrv": op.vdrv, "logic": op.logic}
            return float(rails.get(net, 0.0))
        f = op.frame
        bus_x, bus_y = op.bus_knots

        def bus_ripple(ph: np.ndarray) -> np.ndarray:
            return np.interp(np.mod(ph, f.period), bus_x, bus_y)

        def vdrv(ph: np.ndarray) -> np.ndarray:
            out = ripple(ph, f.period, p.vdrv_ripple_pp, self._phases[0])
            return out + op.vdrv + p.vdrv_bus_coupling * bus_ripple(ph)

        table: dict[str, Callable[[np.ndarray], np.ndarray]] = {
            "bus": lambda ph: op.v_bus + bus_ripple(ph),
            "vdrv": vdrv,
            "logic": lambda ph: (
                op.logic
                + ripple(ph, f.period, p.logic_ripple_pp, self._phases[1], harmonic=2)
                + 0.01 * (vdrv(ph) - op.vdrv)
            ),
            "vgs": lambda ph: hbf.hs_vgs(f, ph),
            "vgs_low": lambda ph: hbf.ls_vgs(f, ph),
            "vbs": lambda ph: hbf.vbs(f, ph),
            "switch": lambda ph: hbf.switch(f, ph, bus_ripple(ph)),
            "gate": lambda ph: hbf.switch(f, ph, bus_ripple(ph)) + hbf.hs_vgs(f, ph),
            "i_switch": lambda ph: hbf.i_switch(f, ph),
        }
        return table[net]
