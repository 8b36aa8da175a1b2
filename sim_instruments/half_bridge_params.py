"""The parameters of the simulated half-bridge: a synchronous buck whose two switches are the same
MOSFET type, driven by one bootstrap gate driver with dead time, feeding an electronic load.

A board is a half-bridge when its ``[design]`` table holds every key of ``HALF_BRIDGE_KEYS``
(``is_half_bridge``); the rest of its design values are those of the high-side board
(``sim_instruments.stage_params``), read the same way and shared with it (rails, gate path,
MOSFET, bootstrap, thermal). Every field is in SI units (V, A, ohm, F, H, s); the driver's
negative rating is a magnitude (how far below ground its switch pin may go).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, fields, replace

from sim_instruments.stage_params import StageParameters

__all__ = ["HalfBridgeParameters", "HALF_BRIDGE_KEYS", "is_half_bridge"]

#: The [design] keys only a half-bridge board has (all of them, or none).
HALF_BRIDGE_KEYS = (
    "load_current",
    "dead_time",
    "body_diode_drop",
    "bootstrap_resistor",
    "driver_uvlo_rising",
    "driver_negative_swing",
)


def is_half_bridge(design: Mapping[str, float]) -> bool:
    """True when ``design`` describes a half-bridge (it has every ``HALF_BRIDGE_KEYS`` key)."""
    return all(key in design for key in HALF_BRIDGE_KEYS)


@dataclass(frozen=True)
class HalfBridgeParameters:
    """The shared stage values (``base``) and the half-bridge's own, SI units."""

    base: StageParameters
    # --- from the board file's [design] table ---
    load_current: float  # the electronic load's constant current, A (the inductor's mean)
    dead_time: float  # the driver's dead-time setting at each edge (command to command), s
    body_diode_drop: float  # the MOSFET's body diode forward drop at the load current, V
    bootstrap_resistor: float  # series resistor of the bootstrap charge path, ohm
    driver_uvlo_rising: float  # floating supply's rising UVLO (the output comes back on), V
    driver_negative_swing: float  # how far below ground the switch pin may go (rating), V
    # --- the model's own board details (scenarios may change them) ---
    #: Dynamic resistance of the bootstrap diode, ohm (adds to the charge path).
    bootstrap_diode_resistance: float = 1.0
    #: Resistance of the commutation loop (capacitor ESR, R_DS(on), traces), ohm: it damps
    #: the loop inductance's ringing with the node capacitance, zeta = R/2 sqrt(C/L).
    loop_resistance: float = 0.45
    #: Shortest off pulse the PWM controller makes, s.
    min_off_time: float = 200e-9

    @classmethod
    def from_design(
        cls, design: Mapping[str, float], **changes: float | bool
    ) -> HalfBridgeParameters:
        """Build from the board's [design] values (SI floats) and apply ``changes``: a change
        names a field of this class or of ``StageParameters``. ``KeyError`` names the first
        missing key, ``TypeError`` an unknown change."""
        missing = [key for key in HALF_BRIDGE_KEYS if key not in design]
        if missing:
            raise KeyError(f"the [design] table lacks {missing[0]!r}")
        own = {f.name for f in fields(cls)} - {"base"}
        base_changes = {k: v for k, v in changes.items() if k not in own}
        own_changes = {k: v for k, v in changes.items() if k in own}
        base = StageParameters.from_design(design, **base_changes)
        hp = cls(base, **{key: float(design[key]) for key in HALF_BRIDGE_KEYS})
        return replace(hp, **own_changes) if own_changes else hp

    @property
    def period(self) -> float:
        """Switching period, s."""
        return self.base.period

    @property
    def transconductance(self) -> float:
        """g_fs from the plateau relation V_pl = V_th + I_D / g_fs at the load current, S
        ([read: TI SLUA618, plateau voltage])."""
        b = self.base
        return self.load_current / (b.mosfet_plateau - b.mosfet_threshold)

    @property
    def loop_damping(self) -> float:
        """Damping ratio of the switch node's ringing, zeta = R/2 sqrt(C/L) (series RLC,
        common practice)."""
        b = self.base
        return (
            0.5 * self.loop_resistance * math.sqrt(b.switch_node_capacitance / b.stray_inductance)
        )

    @property
    def bootstrap_tau(self) -> float:
        """Refresh time constant (R_boot + R_diode + R_DS(on),LS) C_boot, s (REFERENCES §3)."""
        b = self.base
        r = self.bootstrap_resistor + self.bootstrap_diode_resistance + b.mosfet_rds_on
        return r * b.bootstrap_capacitance
