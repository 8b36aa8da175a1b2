"""Scenarios of the simulated half-bridge (``half_bridge.HalfBridgeModel``): each a named set of
parameter changes imitating a real fault of a synchronous buck's phase leg. They are separate
from the high-side board's (``scenarios.SCENARIOS``): the board picks the model, the model its
scenarios.

Stages run in order and a failed stage stops the later ones, so a fault scenario passes every
stage before its own (by three guard bands) and fails its own;
``tests/unit/sim_model/test_half_bridge_scenarios.py`` checks it against the demo half-bridge's
targets (``checklists/demo-half-bridge.toml``).

Expected metric values, measured as the half-bridge checklist records them (headless run on
the simulated bench, seed 0; other seeds move them by a few codes). Bus 48 V, 8 A electronic
load, 100 kHz. Gates, dead time, switch node and switching energy at 50 % duty; rails loaded,
bootstrap refresh and thermal at the maximum duty 0.95 (low-side on-time 0.35 us). "-": the
stage is not run (an earlier one failed).

| metric (target)                      | healthy | shoot-through | long-dead-time | no-refresh | switch-node-spike |
|--------------------------------------|---------|---------------|----------------|------------|-------------------|
| ramp current, A (<= 0.1)             | 0.018   | 0.018         | 0.018          | 0.018      | 0.018             |
| vdrv mean unl./ld., V (11.4-12.6)    | 11.94/11.94 | 11.94/11.94 | 11.94/11.94  | 11.94/11.94 | 11.94/11.94      |
| low-side Vgs on, V (10.5-18)         | 12.03   | 12.03         | 12.03          | 12.03      | 12.03             |
| switch low while low side on, V      | -0.04   | -0.04         | -0.04          | -0.04      | -0.06             |
| high-side Vgs on, V (10-18)          | 11.18   | 11.18         | 11.18          | 10.97      | 11.18             |
| bus - switch high, V (<= 0.5)        | -0.09   | -0.09         | -0.09          | -0.09      | -0.08             |
| dead time HS off -> LS on, ns (20-150) | 51    | **-19**       | **571**        | 51         | 51                |
| dead time LS off -> HS on, ns (20-150) | 67    | **-3**        | **586**        | 67         | 67                |
| gate overlap, ns (<= 0)              | 0       | **19**        | 0              | 0          | 0                 |
| shoot-through spike, A               | -       | 8.1           | -              | -          | -                 |
| body-diode loss, W                   | 0.076   | 0             | 0.74           | 0.076      | 0.076             |
| VBS lowest - UVLO, V (>= 1)          | 2.54    | -             | -              | **-0.02**  | 2.54              |
| VBS lowest / after refresh, V        | 10.74/10.91 | -         | -              | 8.19/8.32  | 10.74/10.91       |
| shortest refreshing LS on-time, ns   | 55      | -             | -              | 418 (has 353) | 55             |
| switch node lowest, V (>= -8)        | -4.95   | -             | -              | -          | **-13.2**         |
| loop inductance, nH (<= 5)           | 2.03    | -             | -              | -          | **9.98**          |
| ring frequency, MHz / damping        | 102/0.18 | -            | -              | -          | 46/0.08           |
| switch node highest, V               | 52.9    | -             | -              | -          | 67.7              |
| E_on / E_off, uJ (<= 8)              | 2.85/4.60 | -           | -              | -          | -                 |
| switching power, W (<= 1.5; pred. 0.56) | 0.74 | -            | -              | -          | -                 |
| heatsink final, degC (<= 70)         | 49.6    | -             | -              | -          | -                 |

Bold: the stage the scenario fails. Model losses at 50 % duty, healthy: switching 0.76 W,
conduction 0.38 W, body diode 0.077 W, gate drive 0.10 W; shoot-through adds 0.56 W of
V_bus i_shoot; the long dead time makes the body diode 0.74 W. At the maximum duty the long dead
time leaves no low-side on-time at all (0.5 us off-time, two 0.6 us dead times): nothing
refreshes the bootstrap and the high side stays off (the dead-time stage, run before, catches
the setting first). No-refresh at the maximum duty: the high side skips pulses (a frame of 14
periods), VBS bottoms at the falling UVLO and the body diode carries the skipped periods' current.
"""

from __future__ import annotations

from collections.abc import Mapping

from sim_instruments.scenarios import Scenario, _scenarios

__all__ = ["HALF_BRIDGE_SCENARIOS"]

HALF_BRIDGE_SCENARIOS: Mapping[str, Scenario] = _scenarios(
    Scenario(
        "healthy",
        "The phase leg as designed: every stage passes with margin.",
        None,
    ),
    Scenario(
        "shoot-through",
        "The driver's dead-time resistor was fitted for 10 ns where 80 ns was meant: the low "
        "side turns on while the high side is still on its turn-off plateau, both conduct at "
        "once and the bus's decoupling dumps a current spike through them at every edge.",
        "dead-time",
        {"dead_time": 10e-9},
    ),
    Scenario(
        "long-dead-time",
        "A dead time of 600 ns where 80 ns was meant: no overlap, but the body diode carries "
        "the load current for most of a microsecond per period and heats the switches.",
        "dead-time",
        {"dead_time": 600e-9},
    ),
    Scenario(
        "no-refresh",
        "A 33 ohm bootstrap resistor where 3.3 ohm was meant: at 50 % duty the long low-side "
        "on-time still refreshes the capacitor, but at the maximum duty the 0.34 us low-side "
        "on-time is a small share of the 7.5 us time constant, the capacitor runs down to the "
        "driver's UVLO and the high side skips pulses.",
        "bootstrap-refresh",
        {"bootstrap_resistor": 33.0},
    ),
    Scenario(
        "switch-node-spike",
        "A long loop between the bus capacitor and the two switches (10 nH where 2 nH was "
        "meant): the switch node rings at half the frequency, less damped, and swings far below ground "
        "at every turn-off, beyond what the driver's switch pin is rated for.",
        "switch-node",
        {"stray_inductance": 10e-9},
    ),
)
