"""Scenarios of the simulated board: each a named set of parameter changes imitating a real fault.

(The table of expected metric values per scenario is filled in below once measured.)
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
