"""From a step's measurements back to the parts: which component the numbers say is wrong.

A failed step (or a metric far from its prediction) is turned into ranked causes. Each cause
names the part (a ``[design]`` key where there is one), the effective value the measurement
implies beside the design's, the evidence (numbers with units) and the next check to make at
the bench, in plain words. Pure: plain floats and dicts in (SI units, temperatures in degC),
a ``Diagnosis`` out; no I/O.

The inferences invert the design equations of ``bringup.analysis.design``; each function
below names its source. The half-bridge rules (dead time, bootstrap refresh, switch node,
switching energy) read the dead-time setting back through the design's gate delays to
threshold, the recharge path's R from the measured time constant (tau = R C), the bootstrap
capacitor from the droop per period (C = Q/dV), the loop inductance from the ring
(L = 1/((2 pi f)^2 C)) and the crossover time from the switching energy (E = 1/2 V I t_c). They are first-order models: an effective value says how the circuit
*behaves*, and the check says how to confirm it with the power off.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import asdict, dataclass, field

from bringup.analysis.quantities import format_quantity as _q
from bringup.errors import InputError

__all__ = [
    "Cause",
    "Diagnosis",
    "diagnose",
    "effective_capacitance",
    "drain_current",
    "capacitance_from_step",
    "gate_loop_resistance",
    "thermal_resistance",
    "dissipation",
    "source_impedance",
    "is_source_follower",
]


# ------------------------------------------------------------------------------ formulas
def effective_capacitance(current_a: float, rate_v_per_s: float) -> float:
    """Capacitance (F) that a current ``current_a`` (A) discharges at ``rate_v_per_s`` (V/s):
    C = I / (dV/dt).

    The charge balance of the bootstrap capacitor over the on-time, dV = I * t_on / C (TI
    SLUA887, "Bootstrap Circuitry Selection for Half-Bridge Configurations"; International
    Rectifier AN-978), solved for C. ``math.inf`` when the rate is not positive (no droop)."""
    if not rate_v_per_s > 0:
        return math.inf
    return float(current_a) / float(rate_v_per_s)


def drain_current(c_f: float, rate_v_per_s: float) -> float:
    """Current (A) drawn from a capacitor ``c_f`` (F) sagging at ``rate_v_per_s`` (V/s):
    I = C * dV/dt (the same charge balance as ``effective_capacitance``, solved for I)."""
    return float(c_f) * max(float(rate_v_per_s), 0.0)


def capacitance_from_step(charge_c: float, step_v: float) -> float:
    """Capacitance (F) that loses ``step_v`` (V) when it hands ``charge_c`` (C) to the gate:
    C = Q_G / dV.

    Charge sharing at turn-on, dV_BOOT = Q_G / C_BOOT (TI SLUA887; the gate charge taken from
    the bootstrap capacitor). A step that also holds other losses (an incomplete recharge)
    makes this a lower bound on C. ``math.inf`` when the step is not positive."""
    if not step_v > 0:
        return math.inf
    return float(charge_c) / float(step_v)


def gate_loop_resistance(transition_s: float, charge_c: float, drive_v: float) -> float:
    """Gate-loop resistance (ohm) that moves ``charge_c`` (C) in ``transition_s`` (s) with
    ``drive_v`` (V) across it: R = t * V / Q.

    TI SLUA618 (L. Balogh, "Fundamentals of MOSFET and IGBT Gate Driver Circuits"): on the
    Miller plateau the gate current is (V_DRV - V_pl) / R_on at turn-on and V_pl / R_off at
    turn-off, and the drain-source voltage swings while Q_gd flows, t = Q_gd * R / V; solved
    for R. With the whole gate charge Q_G and a 10-90 % gate rise the same form gives a
    coarser estimate (the gate voltage is not constant outside the plateau)."""
    if not (charge_c > 0 and drive_v > 0):
        raise ValueError("charge and drive voltage must be > 0")
    return float(transition_s) * float(drive_v) / float(charge_c)


def thermal_resistance(final_c: float, ambient_c: float, power_w: float) -> float:
    """Thermal resistance (K/W) from a settled temperature: R_th = (T_final - T_amb) / P.

    T = T_A + P * theta (JEDEC JESD51 definitions, as used in TI datasheets' thermal
    sections), solved for theta."""
    if not power_w > 0:
        raise ValueError("power must be > 0")
    return (float(final_c) - float(ambient_c)) / float(power_w)


def dissipation(final_c: float, ambient_c: float, r_th_k_per_w: float) -> float:
    """Loss (W) that heats a path of ``r_th_k_per_w`` to ``final_c``: P = (T_final - T_amb) /
    R_th (the same relation as ``thermal_resistance``, solved for P)."""
    if not r_th_k_per_w > 0:
        raise ValueError("thermal resistance must be > 0")
    return (float(final_c) - float(ambient_c)) / float(r_th_k_per_w)


def source_impedance(v_light: float, v_heavy: float, i_light: float, i_heavy: float) -> float:
    """Source resistance (ohm) of a rail from two loads: R = -dV/dI = (V1 - V2) / (I2 - I1).

    Thevenin's model of the rail (any circuit-theory text): the rail sags by R for each
    ampere more it feeds."""
    di = float(i_heavy) - float(i_light)
    if di == 0:
        raise ValueError("the two load currents must differ")
    return (float(v_light) - float(v_heavy)) / di


def is_source_follower(
    vgs_on_v: float, switch_drop_v: float | None, threshold_v: float, plateau_v: float
) -> bool:
    """True when the on-state looks like a source follower: Vgs no more than 1.5 V above the
    Miller plateau (between threshold and plateau the channel only just carries the load),
    and, when the switch node was measured, the output stuck at least a threshold below the
    bus.

    A MOSFET whose gate is driven only up to its drain voltage cannot be fully enhanced: its
    source settles where Vgs carries the load current, V_th + I_D / g_fs, i.e. at the plateau
    (TI SLUA618: V_pl = V_th + I_D / g_fs). The 1.5 V and one-threshold margins are common
    practice, not a published value."""
    if vgs_on_v > plateau_v + 1.5:
        return False
    return switch_drop_v is None or switch_drop_v >= threshold_v


# ------------------------------------------------------------------------------ results
@dataclass(frozen=True)
class Cause:
    """One likely cause: the ``part`` (a ``[design]`` key where there is one, else a named
    part such as ``bootstrap_supply`` or ``vdrv_supply``), ``title`` in plain words, a
    ``weight`` for ranking (higher first), the ``evidence`` (one line each, numbers with
    units), the ``check`` to make at the bench, and ``inferred`` effective values (SI)."""

    part: str
    title: str
    weight: float
    evidence: tuple[str, ...]
    check: str
    inferred: dict[str, float] = field(default_factory=dict)


@dataclass(frozen=True)
class Diagnosis:
    """Ranked causes of a step's failure (first = most likely) and ``notes`` that hold for
    all of them (e.g. "Vgs already starts below the floor")."""

    analysis: str
    causes: tuple[Cause, ...]
    notes: tuple[str, ...] = ()

    @property
    def summary(self) -> str:
        """One line: the first cause's title (or the first note)."""
        if self.causes:
            return f"most likely: {self.causes[0].title}"
        return self.notes[0] if self.notes else "no diagnosis"

    def lines(self) -> list[str]:
        """Plain-text lines: notes, then each cause with its evidence and its check."""
        out = [f"diagnosis: {n}" for n in self.notes]
        for k, c in enumerate(self.causes, 1):
            out.append(f"cause {k}: {c.title}")
            out.extend(f"    {e}" for e in c.evidence)
            out.append(f"    check: {c.check}")
        return out

    def to_dict(self) -> dict:
        """JSON-ready: {"analysis", "summary", "notes", "causes": [...]}."""
        return {"analysis": self.analysis, "summary": self.summary, "notes": list(self.notes),
                "causes": [asdict(c) for c in self.causes]}  # fmt: skip


# ------------------------------------------------------------------------------ rules
def _get(m: Mapping[str, float | None], key: str) -> float | None:
    v = m.get(key)
    return None if v is None or not math.isfinite(v) else float(v)


def _design_drain_current(d: Mapping[str, float], vgs_v: float) -> tuple[float, float]:
    """(I_total, I_without_pulldown) (A) the floating side draws while on, from the design:
    quiescent + diode and capacitor leakage + the gate-source pull-down at ``vgs_v``."""
    rest = (d.get("floating_quiescent_current", 0.0) + d.get("bootstrap_diode_leakage", 0.0)
            + d.get("bootstrap_cap_leakage", 0.0))  # fmt: skip
    pd = d.get("gate_source_pulldown")
    return rest + (vgs_v / pd if pd else 0.0), rest


def _start_notes(start: float, floor_v: float | None, charged: float, vdrv: float,
                 q_gate: float) -> list[str]:  # fmt: skip
    """Notes for a Vgs that already starts below the floor as the on-time begins."""
    notes: list[str] = []
    floor_txt = f"the {_q(floor_v, 'V')} floor" if floor_v is not None else "the floor"
    if floor_v is not None and start <= floor_v:
        notes.append(
            f"Vgs already starts at {_q(start, 'V')}, below {floor_txt}, as the on-time begins: "
            "no on-time is supported (the 0 s reading); the capacitor charges to about "
            f"{_q(charged, 'V')} ({_q(vdrv, 'V')} rail less the diode drop)"
        )
        if start < charged:
            # Charge sharing at turn-on (SLUA887, dV = Q_G / C): the step bounds C from below.
            notes.append(
                f"Vgs starts {_q(charged - start, 'V')} below that: the gate's "
                f"{_q(q_gate, 'C')} alone would take a {_q(capacitance_from_step(q_gate, charged - start), 'F')} "
                "capacitor down that far (dV = Q_G / C); a larger capacitor means it did not "
                "recharge fully in the off-time"
            )
    return notes


def _turn_on_bounds(earlier, start: float, charged: float,
                    q_gate: float) -> list[tuple[float, str]]:  # fmt: skip
    """Lower bounds on C (F) from the step at turn-on (charge sharing): the deficit below the
    charged level holds Q_G / C and possibly an incomplete recharge, so C >= Q_G / deficit."""
    bounds: list[tuple[float, str]] = []
    for key, what in (("vgs_on", "while on in the gate-overdrive step"),):
        v = _get(earlier, key)
        if v is not None and v < charged:
            bounds.append((capacitance_from_step(q_gate, charged - v), f"Vgs {_q(v, 'V')} {what}"))
    if start < charged:
        bounds.append((capacitance_from_step(q_gate, charged - start),
                       f"Vgs {_q(start, 'V')} at the start of this on-time"))  # fmt: skip
    return bounds


def _starts_low(start: float, charged: float, rate: float, rate_design: float,
                i_design: float, c_design: float) -> Cause:  # fmt: skip
    """The sag is as designed: the parts the rate depends on are fine, the level is not."""
    return Cause(
        "gate_drive_voltage",
        f"Vgs sags as designed but starts low ({_q(start, 'V')}): the gate-drive rail, the "
        "bootstrap diode's drop or an incomplete recharge",
        0.7,
        (f"Vgs sags at {_q(rate, 'V/s')}, the design's {_q(rate_design, 'V/s')} "
         f"(I / C = {_q(i_design, 'A')} / {_q(c_design, 'F')})",
         f"it starts {_q(charged - start, 'V')} below the {_q(charged, 'V')} the capacitor "
         "charges to"),
        "probe the gate-drive rail at the driver while switching, then VB to the switch "
        "node with a differential probe just before turn-on: it should reach the rail less "
        "one diode drop",
    )  # fmt: skip


def _small_capacitor(rate_txt: str, c_eff: float, c_design: float, i_design: float,
                     bound: tuple[float, str], q_gate: float, refuted: bool) -> Cause:  # fmt: skip
    """The sag read as a bootstrap capacitor smaller than designed (C = I / (dV/dt))."""
    c_min, c_min_from = bound
    return Cause(
        "bootstrap_capacitance",
        f"bootstrap capacitor smaller than designed: it behaves like {_q(c_eff, 'F')} against "
        f"the design's {_q(c_design, 'F')}",
        0.0,
        (rate_txt,
         f"C = I / (dV/dt) with the design's drain current {_q(i_design, 'A')} gives "
         f"{_q(c_eff, 'F')}",
         *((f"but the step at turn-on ({c_min_from}) needs C >= {_q(c_min, 'F')} "
            f"(C >= Q_G / dV with Q_G {_q(q_gate, 'C')})",) if refuted else ())),
        "read the bootstrap capacitor's marking and measure it out of circuit with an LCR meter "
        f"(design {_q(c_design, 'F')}); a ceramic's DC-bias derating at 12 V can halve it, so "
        "check its voltage rating and dielectric too",
        {"bootstrap_capacitance_f": c_eff},
    )  # fmt: skip


def _too_much_current(rate_txt: str, start: float, i_eff: float, i_rest: float, i_design: float,
                      c_design: float, c_eff: float, bound: tuple[float, str], d,
                      refuted: bool) -> Cause:  # fmt: skip
    """The sag read as extra current drawn from the capacitor (I = C dV/dt), as a resistance
    from gate to source."""
    c_min, c_min_from = bound
    extra = max(i_eff - i_rest, 0.0)
    r_eq = start / extra if extra > 0 else math.inf
    return Cause(
        "gate_source_pulldown",
        f"too much current drawn from the bootstrap capacitor: {_q(i_eff, 'A')} with the "
        f"design's {_q(c_design, 'F')} (design {_q(i_design, 'A')}), like {_q(r_eq, 'ohm')} "
        f"from gate to source (design pull-down {_q(d.get('gate_source_pulldown'), 'ohm')})",
        0.0,
        (rate_txt,
         f"I = C * dV/dt with the design's {_q(c_design, 'F')} gives {_q(i_eff, 'A')}",
         *((f"the step at turn-on ({c_min_from}) needs C >= {_q(c_min, 'F')}, so a "
            f"{_q(c_eff, 'F')} capacitor cannot explain the sag: the current is too large",)
           if refuted else ())),
        "with the board unpowered and the bootstrap capacitor discharged, measure the "
        "resistance from the high-side MOSFET's gate to its source (design: the "
        f"{_q(d.get('gate_source_pulldown'), 'ohm')} pull-down); a low reading is a wrong "
        "pull-down or a leaking gate, driver or bootstrap diode (lift one end to tell which)",
        {"drain_current_a": i_eff, "gate_source_resistance_ohm": r_eq},
    )  # fmt: skip


def _droop(m, d, earlier, floor_v) -> Diagnosis | None:
    start, droop, t_on = _get(m, "vgs_start"), _get(m, "vgs_droop"), _get(m, "on_time")
    if start is None or droop is None or not t_on:
        return None
    rate = droop / t_on
    c_design = d["bootstrap_capacitance"]
    i_design, i_rest = _design_drain_current(d, start)
    q_gate = d.get("mosfet_gate_charge", 0.0) + d.get("level_shift_charge", 0.0)
    vdrv = _get(earlier, "vdrv_level") or d["gate_drive_voltage"]
    charged = vdrv - d.get("bootstrap_diode_drop", 0.0)
    notes = _start_notes(start, floor_v, charged, vdrv, q_gate)
    bounds = _turn_on_bounds(earlier, start, charged, q_gate)
    if rate <= 0:
        return Diagnosis("droop", (), tuple(notes)) if notes else None
    c_eff = effective_capacitance(i_design, rate)
    i_eff = drain_current(c_design, rate)
    rate_design = i_design / c_design
    if rate <= _REFUTE * rate_design:
        low = _starts_low(start, charged, rate, rate_design, i_design, c_design)
        return Diagnosis("droop", (low,), tuple(notes))
    bound = max(bounds, default=(0.0, ""))
    # The capacitor alone is refuted when the turn-on step already needs clearly more C than the
    # sag allows with the design's current (by _REFUTE: a datasheet's typical Q_G and the
    # diode drop are good to some tens of %): then the current is the finding.
    refuted = bound[0] > _REFUTE * c_eff
    rate_txt = f"Vgs sags at {_q(rate, 'V/s')} ({_q(droop, 'V')} over {_q(t_on, 's')})"
    small_c = _small_capacitor(rate_txt, c_eff, c_design, i_design, bound, q_gate, refuted)
    leak = _too_much_current(rate_txt, start, i_eff, i_rest, i_design, c_design, c_eff, bound,
                             d, refuted)  # fmt: skip
    if refuted:
        causes = (_weighted(leak, 0.8), _weighted(small_c, 0.2))
    else:
        causes = (_weighted(small_c, 0.6), _weighted(leak, 0.4))
    return Diagnosis("droop", causes, tuple(notes))


#: How far (factor) the turn-on step's lower bound on C must exceed the C the sag implies with
#: the design's current before the small-capacitor reading is refuted (common practice: the
#: first-order charge balance and a datasheet's typical gate charge are good to tens of %).
_REFUTE = 1.5


def _weighted(c: Cause, w: float) -> Cause:
    return Cause(c.part, c.title, w, c.evidence, c.check, c.inferred)


def _overdrive(m, d, earlier) -> Diagnosis | None:
    vgs, drop = _get(m, "vgs_on"), _get(m, "switch_drop")
    if vgs is None:
        return None
    vth, vpl = d.get("mosfet_threshold", 0.0), d.get("mosfet_plateau", 0.0)
    vdrv = _get(earlier, "vdrv_level") or d["gate_drive_voltage"]
    charged = vdrv - d.get("bootstrap_diode_drop", 0.0)
    causes: list[Cause] = []
    if is_source_follower(vgs, drop, vth, vpl):
        ev = [f"Vgs while on {_q(vgs, 'V')} sits near the Miller plateau (design "
              f"{_q(vpl, 'V')}, threshold {_q(vth, 'V')}): the MOSFET is a source follower"]  # fmt: skip
        if drop is not None:
            ev.append(f"the switch node stays {_q(drop, 'V')} below the bus, about one Vgs: "
                      "the gate is not lifted above the bus")  # fmt: skip
        causes.append(Cause(
            "bootstrap_supply",
            "gate not lifted above the bus: the bootstrap capacitor or diode is missing, or the "
            "driver's floating supply (VB) is tied to the bus",
            0.9, tuple(ev),
            "power off: check the bootstrap capacitor is fitted between VB and the switch node "
            "and the bootstrap diode from the 12 V rail to VB is fitted the right way round; "
            f"powered, move a differential probe to VB-to-switch-node: about {_q(charged, 'V')} "
            "while switching, not 0",
        ))  # fmt: skip
        causes.append(Cause(
            "gate_drive_voltage", "the driver's supply too low to lift the gate", 0.1,
            (f"gate-drive rail {_q(vdrv, 'V')}",),
            "probe the driver's VCC pin against ground while switching",
        ))  # fmt: skip
    elif vgs < charged:
        q = d.get("mosfet_gate_charge", 0.0) + d.get("level_shift_charge", 0.0)
        c_eff = capacitance_from_step(q, charged - vgs)
        causes.append(Cause(
            "bootstrap_capacitance",
            f"bootstrap capacitor too small: the turn-on step makes it behave like "
            f"{_q(c_eff, 'F')} against the design's {_q(d['bootstrap_capacitance'], 'F')}",
            0.6,
            (f"Vgs while on {_q(vgs, 'V')}, {_q(charged - vgs, 'V')} below the "
             f"{_q(charged, 'V')} the capacitor charges to",
             f"C = Q_G / dV with Q_G {_q(q, 'C')} gives {_q(c_eff, 'F')}"),
            "read the bootstrap capacitor's marking and measure it out of circuit "
            f"(design {_q(d['bootstrap_capacitance'], 'F')})",
            {"bootstrap_capacitance_f": c_eff},
        ))  # fmt: skip
        causes.append(Cause(
            "gate_drive_voltage", "the gate-drive rail or the bootstrap diode's drop", 0.4,
            (f"gate-drive rail {_q(vdrv, 'V')}, diode drop (design) "
             f"{_q(d.get('bootstrap_diode_drop'), 'V')}",),
            "probe the 12 V rail at the driver and VB-to-switch-node with a differential probe "
            "while switching",
        ))  # fmt: skip
    else:
        causes.append(Cause(
            "gate_drive_voltage", "gate overdriven: the gate-drive rail is too high", 0.7,
            (f"Vgs while on {_q(vgs, 'V')}, above the {_q(charged, 'V')} the capacitor "
             "charges to",),
            "probe the 12 V rail at the driver's VCC pin; check its regulator's setting",
        ))  # fmt: skip
    return Diagnosis("gate-overdrive", tuple(causes))


def _edges(m, d, predicted) -> Diagnosis | None:
    rise, fall, vgs_rise = _get(m, "switch_rise"), _get(m, "switch_fall"), _get(m, "vgs_rise")
    try:
        v_drive = d["gate_drive_voltage"] - d.get("bootstrap_diode_drop", 0.0)
        vpl, qgd, qg = d["mosfet_plateau"], d["mosfet_qgd"], d["mosfet_gate_charge"]
        r_src, r_snk = d["driver_source_resistance"], d["driver_sink_resistance"]
        r_int, r_g = d.get("gate_resistance_internal", 0.0), d["gate_resistor"]
    except KeyError:
        return None
    ev: list[str] = []
    estimates: list[float] = []
    # The 10-90 % part of the drain-source ramp is 80 % of it (as the predictions take it).
    if rise is not None:
        r_on = gate_loop_resistance(rise / 0.8, qgd, v_drive - vpl)
        estimates.append(r_on - r_src - r_int)
        ev.append(f"switch rise {_q(rise, 's')}: turn-on gate loop {_q(r_on, 'ohm')} "
                  f"(R = t * (V_drv - V_pl) / Q_gd), so R_G about {_q(r_on - r_src - r_int, 'ohm')}")  # fmt: skip
    if fall is not None:
        r_off = gate_loop_resistance(fall / 0.8, qgd, vpl)
        estimates.append(r_off - r_snk - r_int)
        ev.append(f"switch fall {_q(fall, 's')}: turn-off gate loop {_q(r_off, 'ohm')} "
                  f"(R = t * V_pl / Q_gd), so R_G about {_q(r_off - r_snk - r_int, 'ohm')}")  # fmt: skip
    if vgs_rise is not None:
        r_vgs = gate_loop_resistance(vgs_rise, qg, v_drive - vpl)
        ev.append(f"Vgs rise {_q(vgs_rise, 's')} with Q_G {_q(qg, 'C')}: gate loop about "
                  f"{_q(r_vgs, 'ohm')} (coarse)")  # fmt: skip
    if not estimates:
        return None
    r_eff = sum(estimates) / len(estimates)
    # Three times the designed resistor: the first-order models are good to some tens of %.
    slow = r_eff > 3 * r_g
    gate = Cause(
        "gate_resistor",
        f"gate resistor larger than designed: the edges imply about {_q(r_eff, 'ohm')} "
        f"against the design's {_q(r_g, 'ohm')}",
        0.8 if slow else 0.3, tuple(ev),
        f"power off: measure the gate resistor in place and read its marking (design "
        f"{_q(r_g, 'ohm')}); then probe the driver's output pin to see it switch hard",
        {"gate_resistor_ohm": r_eff},
    )  # fmt: skip
    other = Cause(
        "switch_node_capacitance",
        "the switch node is loaded (extra capacitance, a snubber) or the probe is on the wrong "
        "net", 0.2 if slow else 0.5,
        tuple(f"{k} measured {_q(_get(m, k), 's')}, design {_q(predicted.get(k), 's')}"
              for k in ("switch_rise", "switch_fall", "vgs_rise") if _get(m, k) is not None),
        "check the probe's ground lead is short and on the switch node's return; look for a "
        "part fitted on the switch node that the design does not have",
    )  # fmt: skip
    causes = [gate, other] if slow else [other, gate]
    if len(estimates) == 2 and max(estimates) > 3 * max(min(estimates), r_g):
        # Only one edge slow: the gate resistor is in both paths, so the slow path's own part
        # (the driver's source or sink, a turn-off diode beside the resistor) comes first.
        on_slow = estimates[0] > estimates[1]
        which = "turn-on" if on_slow else "turn-off"
        part = "driver_source_resistance" if on_slow else "driver_sink_resistance"
        causes.insert(0, Cause(
            part,
            f"only the {which} is slow: the {which} path (the driver's "
            f"{'source' if on_slow else 'sink'} side, or a diode or resistor only in that path)",
            0.85, tuple(ev),
            f"probe the driver's output pin at {which} (a {which} slower there than at the "
            "gate points at the driver); check any diode across the gate resistor is fitted "
            "the right way round",
        ))  # fmt: skip
    return Diagnosis("edges", tuple(causes))


def _soak(m, d, earlier) -> Diagnosis | None:
    final = _get(m, "heatsink_final")
    if final is None:
        return None
    try:
        amb, r_th = d["ambient_temperature"], d["thermal_resistance"]
        i = d["bus_voltage"] / d["load_resistance"]
        duty, rds = d["duty_max"], d["mosfet_rds_on"]
    except KeyError:
        return None
    p_sw = _get(earlier, "switching_loss") or 0.0
    p_design = i * i * rds * duty + p_sw
    r_eff = thermal_resistance(final, amb, p_design) if p_design > 0 else math.inf
    p_eff = dissipation(final, amb, r_th)
    rds_eff = max(p_eff - p_sw, 0.0) / (i * i * duty)
    tau, tau_d = _get(m, "soak_time_constant"), d.get("thermal_time_constant")
    fet_ev = [f"heatsink settles at {_q(final, 'degC')} from {_q(amb, 'degC')} ambient: with "
              f"the design's {_q(r_th, 'K/W')} that is {_q(p_eff, 'W')} of loss (design "
              f"{_q(p_design, 'W')}), as if R_DS(on) were {_q(rds_eff, 'ohm')} "
              f"(design {_q(rds, 'ohm')}) at {_q(i, 'A')} and {duty:.0%} duty"]  # fmt: skip
    path_ev = [f"with the design's {_q(p_design, 'W')} of loss the heatsink behaves like "
               f"{_q(r_eff, 'K/W')} to ambient (design {_q(r_th, 'K/W')}); R_th = (T - T_a) / P"]  # fmt: skip
    fet_w, path_w = 0.5, 0.5
    drop = _get(earlier, "switch_drop")
    if drop is not None and drop > 0:
        rds_meas = drop / i
        fet_ev.append(f"the on-state drop {_q(drop, 'V')} at {_q(i, 'A')} reads R_DS(on) "
                      f"about {_q(rds_meas, 'ohm')} (gate-overdrive step)")  # fmt: skip
    if tau is not None and tau_d:
        # tau = R_th * C_th: a path with a larger R_th (same heatsink mass) heats more slowly.
        ratio = tau / tau_d
        if 0.7 <= ratio <= 1.4:
            fet_w, path_w = 0.6, 0.4
            fet_ev.append(f"the soak's time constant {_q(tau, 's')} matches the design's "
                          f"{_q(tau_d, 's')} (tau = R_th * C_th): the thermal path looks as "
                          "designed, so the extra heat comes from the switch")  # fmt: skip
        elif ratio > 1.4:
            fet_w, path_w = 0.4, 0.6
            path_ev.append(f"the soak's time constant {_q(tau, 's')} is longer than the "
                           f"design's {_q(tau_d, 's')}: a larger R_th (tau = R_th * C_th)")  # fmt: skip
    fet = Cause(
        "mosfet_rds_on",
        f"the switch dissipates more than designed ({_q(p_eff, 'W')} against "
        f"{_q(p_design, 'W')}): a MOSFET with a higher R_DS(on) than specified",
        fet_w, tuple(fet_ev),
        "read the MOSFET's marking against the bill of materials; with the PWM at a steady "
        "duty, probe drain to source at the MOSFET's pins while on and divide by the load "
        f"current (design {_q(rds * i, 'V')} at {_q(i, 'A')})",
        {"mosfet_loss_w": p_eff, "mosfet_rds_on_ohm": rds_eff},
    )  # fmt: skip
    path = Cause(
        "thermal_resistance",
        f"the thermal path to ambient is worse than designed: about {_q(r_eff, 'K/W')} "
        f"against {_q(r_th, 'K/W')}",
        path_w, tuple(path_ev),
        "check the heatsink is the designed one, screwed down, with its pad or compound; check "
        "the thermocouple sits on the heatsink next to the switch and nothing blocks the air",
        {"thermal_resistance_k_per_w": r_eff},
    )  # fmt: skip
    causes = sorted((fet, path), key=lambda c: -c.weight)
    return Diagnosis("soak", tuple(causes))


_RAIL_NAMES = {"vdrv": "gate-drive rail", "logic": "logic rail", "bus": "bus"}
_RAIL_DESIGN = {"vdrv": "gate_drive_voltage", "logic": "logic_voltage", "bus": "bus_voltage"}


def _rail_load_current(net: str, d: Mapping[str, float]) -> float | None:
    """Extra current (A) a rail feeds once the PWM runs: the bus the load (V/R at the duty);
    the gate-drive rail the gate and level-shift charge each period plus the floating side's
    quiescent current (TI TPS40200-Q1: average gate current Q_g * f_sw)."""
    try:
        if net == "bus":
            return d["bus_voltage"] / d["load_resistance"] * d["duty_max"]
        if net == "vdrv":
            q = d["mosfet_gate_charge"] + d.get("level_shift_charge", 0.0)
            return q * d["switching_frequency"] + d.get("floating_quiescent_current", 0.0)
    except KeyError:
        return None
    return None


def _rails(m, d, earlier, failed, loaded) -> Diagnosis | None:
    causes: list[Cause] = []
    for net, name in _RAIL_NAMES.items():
        level = _get(m, f"{net}_level")
        nominal = d.get(_RAIL_DESIGN[net])
        if level is None or nominal is None or f"{net}_level" not in failed:
            continue
        idle = _get(earlier, f"{net}_level")
        di = _rail_load_current(net, d)
        if loaded and idle is not None and idle > level and di:
            r = source_impedance(idle, level, 0.0, di)
            causes.append(Cause(
                f"{net}_supply",
                f"the {name} sags under load: its source behaves like {_q(r, 'ohm')}",
                0.8,
                (f"{_q(idle, 'V')} with the PWM off, {_q(level, 'V')} at full duty "
                 f"(design {_q(nominal, 'V')})",
                 f"the switching adds about {_q(di, 'A')} of load: R = dV / dI = "
                 f"{_q(r, 'ohm')}"),
                f"with the PWM running, probe the {name} at its regulator's output and at the "
                "load's pin: the drop shows where the resistance is; check the regulator (or "
                "dropping resistor and zener) is sized for the switching current",
                {f"{net}_source_resistance_ohm": r},
            ))  # fmt: skip
        else:
            causes.append(Cause(
                f"{net}_supply",
                f"the {name} is off its design value ({_q(level, 'V')} against "
                f"{_q(nominal, 'V')}) even {'under load' if loaded else 'unloaded'}",
                0.6 if not loaded else 0.5,
                (f"measured {_q(level, 'V')}, design {_q(nominal, 'V')}",),
                f"probe the {name} at its regulator's output with a meter; check the "
                "regulator's part and its feedback resistors against the design",
            ))  # fmt: skip
    return Diagnosis("rail-levels", tuple(causes)) if causes else None


# ------------------------------------------------------------------------------ half-bridge
# Metric ids are the catalogue's (bringup/checklist/catalogue.py); design keys the board's
# [design]. Each rule returns None when the keys it needs are missing (never a guess).
def _gate_delays(d: Mapping[str, float]) -> tuple[float, float]:
    """(turn-on delay to threshold, turn-off delay to threshold) (s) of the design's gate loop:
    ``design.gate_delay_on``/``gate_delay_off`` (TI SLUA618's gate-charge picture)."""
    from bringup.analysis.design import gate_delay_off, gate_delay_on

    r_int, r_g = d.get("gate_resistance_internal", 0.0), d["gate_resistor"]
    v_drv = d["gate_drive_voltage"] - d.get("bootstrap_diode_drop", 0.0)
    on = gate_delay_on(v_drv, d["mosfet_threshold"], d["driver_source_resistance"] + r_g + r_int,
                       d["mosfet_ciss"])  # fmt: skip
    off = gate_delay_off(v_drv, d["mosfet_plateau"], d["mosfet_threshold"], d["mosfet_qgd"],
                         d["driver_sink_resistance"] + r_g + r_int, d["mosfet_ciss"])  # fmt: skip
    return on, off


def _dead_time_setting(dead_s: float, on_s: float, off_s: float) -> float:
    """The dead-time setting (s) a dead time measured at threshold implies with the design's
    gate delays: measured = setting + turn-on delay - turn-off delay, solved for the setting."""
    return dead_s + off_s - on_s


def _dead_time(m, d, failed) -> Diagnosis | None:
    from bringup.analysis.design import body_diode_loss

    hl, lh = _get(m, "dead_time_high_to_low"), _get(m, "dead_time_low_to_high")
    overlap = _get(m, "gate_overlap") or 0.0
    measured = [(w, v) for w, v in (("high-to-low", hl), ("low-to-high", lh)) if v is not None]
    if not measured:
        return None
    setting = d["dead_time"]
    t_on, t_off = _gate_delays(d)
    at_thr = setting + t_on - t_off  # the design's dead time seen at the threshold
    worst_w, worst = min(measured, key=lambda x: x[1])
    if overlap > 0 or worst < 0:
        return _overlap(worst_w, min(worst, -overlap), setting, t_on, t_off, at_thr,
                        _get(m, "shoot_through_current"))  # fmt: skip
    longest_w, longest = max(measured, key=lambda x: x[1])
    if longest <= 1.5 * max(at_thr, 0.0) and not {"dead_time_high_to_low", "dead_time_low_to_high",
                                                   "body_diode_loss"} & set(failed):  # fmt: skip
        return None
    eff = _dead_time_setting(longest, t_on, t_off)
    total = sum(v for _, v in measured) * (2 / len(measured))
    p = body_diode_loss(d.get("body_diode_drop", 0.8), d.get("load_current", 0.0), total,
                        d["switching_frequency"])  # fmt: skip
    p_design = body_diode_loss(d.get("body_diode_drop", 0.8), d.get("load_current", 0.0),
                               2 * max(at_thr, 0.0), d["switching_frequency"])  # fmt: skip
    ev = (f"dead time {longest_w} {_q(longest, 's')} at threshold; the design's {_q(setting, 's')} "
          f"setting gives {_q(at_thr, 's')} there (turn-on delay {_q(t_on, 's')}, turn-off "
          f"{_q(t_off, 's')} to threshold)",
          f"the body diodes conduct for the dead times: V_F I (t_1 + t_2) f_sw = {_q(p, 'W')} "
          f"(design {_q(p_design, 'W')})")  # fmt: skip
    return Diagnosis("dead-time", (
        Cause("dead_time", f"dead time set too long: it behaves like a {_q(eff, 's')} setting "
              f"against the design's {_q(setting, 's')} (the dead-time resistor too large)", 0.6, ev,
              "power off: measure the driver's dead-time resistor against its datasheet's "
              "dead-time curve; check the dead time programmed in the PWM controller",
              {"dead_time_setting_s": eff, "body_diode_loss_w": p}),
        Cause("gate_resistor", "the gate turning on is slow (gate resistor or the driver's "
              "source side), which stretches the dead time at threshold", 0.4, ev,
              "probe the gate that turns on: its rise to threshold should take about "
              f"{_q(t_on, 's')}", {}),
    ))  # fmt: skip


def _overlap(which, dead, setting, t_on, t_off, at_thr, spike) -> Diagnosis:
    """Shoot-through: the dead time's sign says the gates overlapped at ``which``."""
    eff = _dead_time_setting(dead, t_on, t_off)
    off_side = "high" if which == "high-to-low" else "low"
    ev = [f"the gates overlap by {_q(-dead, 's')} at the {which} commutation (both above "
          f"threshold: shoot-through)",
          f"the design's {_q(setting, 's')} setting should leave {_q(at_thr, 's')} at threshold "
          f"(turn-on delay {_q(t_on, 's')}, turn-off delay {_q(t_off, 's')})"]  # fmt: skip
    if spike is not None:
        ev.append(f"a {_q(spike, 'A')} current spike goes with it")
    small = eff < 0.5 * setting
    return Diagnosis("dead-time", tuple(sorted((
        Cause("dead_time", f"dead time set too short: it behaves like a {_q(eff, 's')} setting "
              f"against the design's {_q(setting, 's')} (the dead-time resistor too small)",
              0.7 if small else 0.4, tuple(ev),
              "power off: measure the driver's dead-time resistor against its datasheet's "
              "dead-time curve; check the dead time programmed in the PWM controller",
              {"dead_time_setting_s": eff}),
        Cause("driver_sink_resistance", f"the {off_side}-side gate turns off too slowly (gate "
              "resistor, the driver's sink side, a missing turn-off diode)",
              0.3 if small else 0.6, tuple(ev),
              f"probe the {off_side}-side gate at turn-off: from the plateau to threshold it "
              f"should take about {_q(t_off, 's')}; a slower fall points at the gate path", {}),
    ), key=lambda c: -c.weight)), ("stop switching at full bus until this is fixed: "
                                   "shoot-through heats both switches",))  # fmt: skip


def _design_refresh(d) -> tuple[float, float, float, float]:
    """(tau s, V_f V, droop per period V, low-side on-time at max duty s) of the design:
    tau = (R_BOOT + R_DS(on)) C (REFERENCES §3), droop = (Q_G + Q_LS + I t_on,max)/C (SLUA887),
    on-time (1 - D_max)/f_sw less both dead times."""
    c = d["bootstrap_capacitance"]
    tau = (d["bootstrap_resistor"] + d.get("mosfet_rds_on", 0.0)) * c
    vf = d["gate_drive_voltage"] - d.get("bootstrap_diode_drop", 0.0)
    i_rest, _ = _design_drain_current(d, vf)
    f = d["switching_frequency"]
    q = d.get("mosfet_gate_charge", 0.0) + d.get("level_shift_charge", 0.0)
    droop = (q + i_rest * d["duty_max"] / f) / c
    return tau, vf, droop, (1.0 - d["duty_max"]) / f - 2.0 * d.get("dead_time", 0.0)


def _refresh(m, d) -> Diagnosis | None:
    from bringup.analysis.design import shortest_refresh_time

    margin, need = _get(m, "vbs_uvlo_margin"), _get(m, "refresh_on_time_min")
    if margin is None and need is None:
        return None
    tau_d, vf_d, droop_d, on_d = _design_refresh(d)
    uvlo = d["driver_uvlo_falling"]
    need_d = shortest_refresh_time(tau_d, vf_d, droop_d, uvlo)
    on = _get(m, "refresh_on_time") or on_d
    tau, droop = _get(m, "refresh_tau"), _get(m, "refresh_droop")
    need_txt = "no on-time" if math.isinf(need_d) else _q(need_d, "s")
    ev = [f"low-side on-time at the largest duty {_q(on, 's')}; the design needs {need_txt} "
          f"(tau {_q(tau_d, 's')}, droop {_q(droop_d, 'V')} per period, UVLO {_q(uvlo, 'V')})"]  # fmt: skip
    if margin is not None:
        ev.append(f"VB - VS falls to {_q(margin, 'V')} from the UVLO at its lowest")
    if need is not None:
        ev.append(f"from the measured recharge it needs {_q(need, 's')} of low-side on-time")
    causes = [Cause("duty_max", "the largest duty leaves the low side on too briefly to "
                    "refresh the bootstrap", 0.6 if on < (need or need_d) else 0.3, tuple(ev),
                    "lower the controller's maximum duty (or add a minimum low-side on-time) "
                    "and repeat the step", {"low_side_on_time_s": on})]  # fmt: skip
    c = d["bootstrap_capacitance"]
    if tau is not None:
        r_eff = tau / c - d.get("mosfet_rds_on", 0.0)
        slow = tau > 1.5 * tau_d
        causes.append(Cause("bootstrap_resistor", f"the recharge path is too resistive: it "
                            f"behaves like {_q(r_eff, 'ohm')} (design {_q(d['bootstrap_resistor'], 'ohm')})",
                            0.7 if slow else 0.2,
                            (f"recharge time constant {_q(tau, 's')} against the design's "
                             f"{_q(tau_d, 's')} (tau = R C)",),
                            "power off: measure the bootstrap resistor and the diode's forward "
                            "drop at a few mA; check the diode part (a slow or high-drop one)",
                            {"bootstrap_resistance_ohm": r_eff}))  # fmt: skip
    if droop is not None:
        q_period = droop_d * c
        c_eff = q_period / droop if droop > 0 else math.inf
        causes.append(Cause("bootstrap_capacitance", f"the bootstrap capacitor is too small: it "
                            f"behaves like {_q(c_eff, 'F')} (design {_q(c, 'F')})",
                            0.6 if droop > 1.5 * droop_d else 0.15,
                            (f"droop {_q(droop, 'V')} per period against the design's "
                             f"{_q(droop_d, 'V')} (C = Q / dV)",),
                            "read the capacitor's marking and measure it out of circuit; check "
                            "its DC-bias derating at the gate-drive voltage",
                            {"bootstrap_capacitance_f": c_eff}))  # fmt: skip
    return Diagnosis("bootstrap-refresh", tuple(sorted(causes, key=lambda x: -x.weight)))


def _switch_node(m, d) -> Diagnosis | None:
    from bringup.analysis.design import lc_excursion

    low, margin = _get(m, "switch_min"), _get(m, "switch_negative_margin")
    f, zeta, l_meas = _get(m, "ring_frequency"), _get(m, "ring_damping"), _get(m, "loop_inductance")
    if low is None and margin is None and f is None:
        return None
    c, l_design = d["switch_node_capacitance"], d["stray_inductance"]
    if l_meas is None and f is not None:
        l_meas = 1.0 / ((2 * math.pi * f) ** 2 * c)  # L = 1/((2 pi f)^2 C), REFERENCES §12
    i = d.get("load_current", 0.0)
    ev = []
    if low is not None:
        rating = d.get("driver_negative_swing")
        rated = f" (driver rated to {_q(-abs(rating), 'V')})" if rating else ""
        ev.append(f"the switch node reaches {_q(low, 'V')}{rated}")
    weight_l = 0.4
    if l_meas is not None:
        ev.append(f"the ring implies {_q(l_meas, 'H')} of loop inductance with the switch node's "
                  f"{_q(c, 'F')} (design {_q(l_design, 'H')}); I sqrt(L/C) = "
                  f"{_q(lc_excursion(i, l_meas, c), 'V')} at {_q(i, 'A')}")  # fmt: skip
        weight_l = 0.7 if l_meas > 1.5 * l_design else 0.35
    causes = [Cause("stray_inductance", "too much loop inductance in the layout (the "
                    "high-side drain to the low-side source through the bus capacitor)",
                    weight_l, tuple(ev),
                    "check the ceramic bus capacitor sits next to the phase leg with short, wide "
                    "return paths; probe with the tip-and-barrel method so the probe's own "
                    "ground lead does not ring", {} if l_meas is None else {"loop_inductance_h": l_meas})]  # fmt: skip
    if zeta is not None:
        causes.append(Cause("snubber", f"too little damping: the ring decays with zeta "
                            f"{zeta:.3g} (a snubber missing or wrong)", 0.5 if zeta < 0.1 else 0.15,
                            (f"damping ratio {zeta:.3g} from the ring's decay",),
                            "fit an RC snubber across the low-side switch (C a few times the "
                            "switch node's, R near sqrt(L/C), common practice) and repeat"))  # fmt: skip
    causes.append(Cause("body_diode", "a slow body diode: its reverse recovery adds to the "
                        "spike at the low side's turn-off", 0.2, tuple(ev),
                        "check the MOSFET part's reverse-recovery charge; a Schottky across the "
                        "low side, or a slower high-side turn-on, shows whether it is the cause"))  # fmt: skip
    return Diagnosis("switch-node", tuple(sorted(causes, key=lambda x: -x.weight)))


def _switching_energy(m, d) -> Diagnosis | None:
    e_on, e_off = _get(m, "switching_energy_on"), _get(m, "switching_energy_off")
    p, p_pred = _get(m, "switching_power"), _get(m, "switching_power_predicted")
    if e_on is None and e_off is None:
        return None
    if (e_on is not None and e_on < 0) or (e_off is not None and e_off < 0):
        return Diagnosis("switching-energy", (Cause(
            "current_probe_deskew", "a negative switching energy: the current and voltage "
            "channels are skewed (or a probe reversed)", 0.9,
            (f"E_on {_q(e_on, 'J')}, E_off {_q(e_off, 'J')}",),
            "measure the deskew again on a resistive step and put it in the bench file; check "
            "the current probe's arrow points along the drain current"),))  # fmt: skip
    v, i = d["bus_voltage"], d.get("load_current", 0.0)
    ev = [f"E_on {_q(e_on, 'J')}, E_off {_q(e_off, 'J')}"]
    t_c = None
    if e_on is not None and e_off is not None and v * i > 0:
        # Linear clamped crossover: E = 1/2 V I t_c (Mohan et al., ch. 2 [memory]).
        t_c = 2.0 * (e_on + e_off) / (v * i)
        ev.append(f"as a linear crossover that is {_q(t_c, 's')} of switching per period "
                  "(E = 1/2 V I t_c)")  # fmt: skip
    if p is not None and p_pred is not None:
        ev.append(f"switching loss {_q(p, 'W')} against the predicted {_q(p_pred, 'W')}")
    ratio = (e_on / e_off) if e_on and e_off else 1.0
    causes = [
        Cause("gate_resistor", "slow edges: the gate loop (gate resistor, the driver) "
              "switches the MOSFET slower than designed", 0.5, tuple(ev),
              "compare the switch-node edges with the design's (edge-speed step); measure the "
              "gate resistor", {} if t_c is None else {"crossover_time_s": t_c}),
        Cause("body_diode", "the opposite switch's body-diode reverse recovery adds to the "
              "turn-on", 0.6 if ratio > 2.0 else 0.2,
              (*ev, f"E_on / E_off = {ratio:.3g}"),
              "look at the current's turn-on spike above the load current: its area is the "
              "diode's recovered charge; a faster-recovery part or a slower turn-on cuts it"),
    ]  # fmt: skip
    return Diagnosis("switching-energy", tuple(sorted(causes, key=lambda x: -x.weight)))


def diagnose(
    analysis: str,
    measured: Mapping[str, float | None],
    design: Mapping[str, float],
    *,
    failed: tuple[str, ...] | frozenset[str] = (),
    predicted: Mapping[str, float] | None = None,
    earlier: Mapping[str, float | None] | None = None,
    floor_v: float | None = None,
    loaded: bool = False,
) -> Diagnosis | None:
    """Ranked causes for a step of ``analysis`` (the catalogue's analysis names).

    Half-bridge stages (metric ids of the catalogue): "dead-time" (``dead_time_high_to_low``,
    ``dead_time_low_to_high``, ``gate_overlap``, ``shoot_through_current``),
    "bootstrap-refresh" (``vbs_uvlo_margin``, ``refresh_on_time_min``; optional
    ``refresh_on_time`` the low-side on-time measured, ``refresh_tau``, ``refresh_droop``),
    "switch-node" (``switch_min``, ``switch_negative_margin``, ``ring_frequency``,
    ``ring_damping``, ``loop_inductance``) and "switching-energy" (``switching_energy_on``,
    ``switching_energy_off``, ``switching_power``, ``switching_power_predicted``).

    ``measured``: the step's metrics (SI, degC); ``design``: the board's ``[design]`` values;
    ``failed``: the metrics that failed or disagreed with their prediction; ``predicted``: the
    design's predictions of the metrics; ``earlier``: the latest values of other steps' metrics
    this session (the rail unloaded, Vgs at 50 % duty, the switching loss, the on-state drop),
    used as extra evidence; ``floor_v``: the Vgs floor of the droop step; ``loaded``: the PWM
    ran during the step. None when no rule applies."""
    earlier = earlier or {}
    predicted = predicted or {}
    try:
        if analysis == "droop":
            return _droop(measured, design, earlier, floor_v)
        if analysis == "gate-overdrive":
            return _overdrive(measured, design, earlier)
        if analysis == "edges":
            return _edges(measured, design, predicted)
        if analysis == "soak":
            return _soak(measured, design, earlier)
        if analysis == "rail-levels":
            return _rails(measured, design, earlier, frozenset(failed), loaded)
        if analysis == "dead-time":
            return _dead_time(measured, design, frozenset(failed))
        if analysis == "bootstrap-refresh":
            return _refresh(measured, design)
        if analysis == "switch-node":
            return _switch_node(measured, design)
        if analysis == "switching-energy":
            return _switching_energy(measured, design)
    except (KeyError, ValueError, ZeroDivisionError, InputError):
        return None  # a design the rules cannot use gives no diagnosis, never a wrong one
    return None
