"""Scenarios of the simulated board: each a named set of parameter changes imitating a real fault.

Stages run in order and a failed stage stops the later ones, so a fault scenario passes every
stage before its own (by three guard bands) and fails its own (by three guard bands);
``tests/unit/sim_model/test_scenario_plan.py`` checks it against the demo board's targets.

Expected metric values, measured as the standard checklist records them: the model's waveform
through a 350 MHz front end with 0.15 % FS noise and 8 bits (ranges of the checklist), then
``bringup.analysis`` (IEEE 181 state levels and edges, least-squares droop, rail mean and p-p).
Bus 24 V. Rails: PWM off ("unl.") and at duty 0.95 ("ld.", on-time 38 us), 200 us records.
Gate overdrive and edges: duty 0.50 (on-time 20 us), 100 us at 1 ns. Droop: duty 0.95 (38 us),
80 us at 0.8 ns. Heatsink: final value at duty 0.95. "-": not measurable (no on-pulse).

| metric (target)                 | healthy | sagging-rail | no-overdrive | slow-gate | weak-bootstrap | hot-switch |
|---------------------------------|---------|--------------|--------------|-----------|----------------|------------|
| ramp current, A (<= 0.1)        | 0.016   | 0.019        | 0.016        | 0.016     | 0.016          | 0.016      |
| vdrv mean unl./ld., V (11.4-12.6) | 12.0/12.0 | 12.0/**10.9** | 12.0/12.0 | 12.0/12.0 | 12.0/12.0      | 12.0/12.0  |
| vdrv p-p ld., V (<= 0.3)        | 0.08    | 0.13         | 0.08         | 0.06      | 0.13           | 0.08       |
| logic mean, V (3.2-3.4)         | 3.30    | 3.30         | 3.30         | 3.30      | 3.30           | 3.30       |
| logic p-p ld., V (<= 0.1)       | 0.023   | 0.023        | 0.023        | 0.016     | 0.023          | 0.023      |
| Vgs on, V (10.5-18)             | 11.35   | 10.37        | **4.26**     | 11.25     | 11.18          | 11.35      |
| bus - switch high, V (<= 0.5)   | 0.06    | 0.06         | **4.29**     | 0.06      | 0.06           | 0.17       |
| switch rise 10-90, ns (<= 200)  | 27      | 31           | 85           | **1676**  | 27             | 27         |
| switch fall 90-10, ns (<= 200)  | 32      | 32           | 48           | **2378**  | 32             | 32         |
| Vgs rise 10-90, ns (<= 500)     | 146     | 153          | 54           | **8490**  | 141            | 146        |
| switch overshoot, % (<= 40)     | 9.2     | 8.4          | 1.9          | 1.0       | 9.2            | 8.8        |
| switch lowest, V (>= -5)        | -2.6    | -2.6         | -0.2         | -1.0      | -2.6           | -2.6       |
| switching loss, W (<= 0.5)      | 0.11    | 0.11         | 0.16         | **7.3**   | 0.11           | 0.10       |
| Vgs droop over 38 us, V (<= 0.3)| 0.009   | 0.011        | 0.001        | -         | **0.49**       | 0.009      |
| Vgs at end, V (>= 10.5)         | 11.18   | 10.09        | 4.28         | -         | **9.91**       | 11.18      |
| on-time supported, us (>= 76)   | 3100    | -            | -            | -         | **below floor**| 3100       |
| VBS end - UVLO, V (>= 1)        | 3.0     | 1.9          | 5.7          | -         | 2.0            | 3.0        |
| heatsink final, degC (<= 70)    | 37.5    | 37.9         | 632          | 25 (idle) | 37.8           | **84.4**   |

Bold: the stage the scenario fails. Model losses at 0.5 duty, healthy: switching 0.144 W (the
full Q_gd transitions; the checklist's 10-90 estimate reads 0.11 W), conduction 0.143 W, gate
drive 0.015 W. Slow-gate at 0.95 duty: the turn-off (about 6 us) outlasts the 2 us off-time, the
bootstrap never recharges and the driver stays in UVLO: the model shows it idle (no hiccup cycle).
Why weak-bootstrap bleeds through a pull-down as well: a capacitor small enough to droop 0.45 V
over 38 us from the board's 0.27 mA alone (about 20 nF) would lose Q_G/C = 2 V at turn-on and
fail the gate-overdrive stage first; the droop stage can only fail alone when the discharge
current is large and C moderate.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType

__all__ = ["Scenario", "SCENARIOS"]


@dataclass(frozen=True)
class Scenario:
    """A named set of changes to ``StageParameters`` fields, and the fault it imitates."""

    name: str
    doc: str
    fails: str | None  # the checklist stage it must fail (None: passes every stage)
    changes: Mapping[str, float | bool] = field(default_factory=dict)


def _scenarios(*items: Scenario) -> Mapping[str, Scenario]:
    return MappingProxyType({s.name: s for s in items})


SCENARIOS: Mapping[str, Scenario] = _scenarios(
    Scenario(
        "healthy",
        "The board as designed: every stage passes with margin.",
        None,
    ),
    Scenario(
        "sagging-rail",
        "The 12 V gate-drive rail is a zener shunt regulator fed through a dropping resistor sized "
        "for the idle load: unloaded it regulates, but once the driver switches the extra "
        "milliamps pull it down the resistor to about 10.8 V.",
        "power-rails",
        {"vdrv_feed_resistance": 1.4e3, "vdrv_ripple_pp": 0.05, "vdrv_rail_impedance": 1.5},
    ),
    Scenario(
        "no-overdrive",
        "The bootstrap is missing (capacitor not fitted, the driver's floating supply strapped to "
        "the bus): the gate is driven only up to the bus, so the MOSFET is a source follower with a "
        "small Vgs, its output a threshold and more below the bus, and it runs hot.",
        "gate-overdrive",
        {"gate_drive_to_bus": True},
    ),
    Scenario(
        "slow-gate",
        "A 1 kohm gate resistor fitted where 10 ohm was meant: microsecond edges and watts of "
        "switching loss at 25 kHz; Vgs still reaches its full level at 50 % duty.",
        "edge-speed",
        {"gate_resistor": 1.0e3},
    ),
    Scenario(
        "weak-bootstrap",
        "A 470 nF bootstrap capacitor where 1 uF was meant, and a 1.8 kohm gate-source pull-down "
        "where 100 kohm was meant bleeding it: Vgs droops over a long on-time.",
        "droop-max-on-time",
        {"bootstrap_capacitance": 680e-9, "gate_source_pulldown": 1.2e3},
    ),
    Scenario(
        "hot-switch",
        "A substitute MOSFET in a smaller package: R_DS(on) 30 mohm instead of 8 mohm and a "
        "higher thermal resistance to ambient (50 K/W instead of 30 K/W): at 95 % duty the "
        "conduction loss drives the heatsink past its limit.",
        "thermal",
        {"mosfet_rds_on": 25e-3, "thermal_resistance": 60.0},
    ),
)
