"""The parameters of the simulated high-side stage: the board's [design] values plus the few
parasitics and rail details a board file does not state.

``StageParameters.from_design(design, **changes)`` takes the board file's ``[design]`` table
parsed to SI floats (keys as in ``checklists/demo-board.toml``; temperatures in degC, duty as a
fraction) and applies a scenario's changes. Every field is in SI units (V, A, ohm, F, H, C, s,
Hz, K/W) except temperatures (degC).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import MISSING, dataclass, fields, replace

__all__ = ["StageParameters", "DESIGN_KEYS"]


@dataclass(frozen=True)
class StageParameters:
    """Everything the model needs, in SI units (temperatures in degC)."""

    # --- from the board file's [design] table ---
    bus_voltage: float
    gate_drive_voltage: float
    logic_voltage: float
    switching_frequency: float
    duty_min: float
    duty_max: float
    on_time_max: float
    bootstrap_capacitance: float
    bootstrap_diode_drop: float
    bootstrap_diode_leakage: float
    bootstrap_cap_leakage: float
    floating_quiescent_current: float
    level_shift_charge: float
    gate_source_pulldown: float
    driver_uvlo_falling: float
    driver_source_resistance: float
    driver_sink_resistance: float
    gate_resistor: float
    gate_resistance_internal: float
    mosfet_gate_charge: float
    mosfet_qgs: float
    mosfet_qgd: float
    mosfet_threshold: float
    mosfet_plateau: float
    mosfet_ciss: float
    mosfet_rds_on: float
    mosfet_rds_on_vgs: float
    mosfet_vgs_max: float
    load_resistance: float
    load_inductance: float
    stray_inductance: float
    switch_node_capacitance: float
    ambient_temperature: float
    thermal_resistance: float
    thermal_time_constant: float
    temperature_limit: float

    # --- the model's own board details (not in the board file; scenarios may change them) ---
    #: Gate charge Qg is specified at this Vgs (the usual datasheet test condition), V.
    gate_charge_test_voltage: float = 10.0
    #: Series resistance of the bootstrap charge path besides the load (diode, trace), ohm.
    bootstrap_path_resistance: float = 2.0
    #: Forward drop of the freewheeling diode that carries the load inductor's current, V.
    freewheel_diode_drop: float = 0.7
    #: Damping ratio of the switch node's stray L / node C resonance (loop resistance), 1.
    switch_node_damping: float = 0.2
    #: Bulk capacitance and ESR on the bus at the board, F and ohm: the bus ripple.
    bus_capacitance: float = 1.0e-3
    bus_capacitor_esr: float = 5.0e-3
    #: The gate-drive rail: regulator dropout (V), output resistance (ohm), feed resistance
    #: (ohm; 0 = a proper regulator, > 0 = fed through a dropping resistor from the bus).
    vdrv_dropout: float = 1.5
    vdrv_output_resistance: float = 0.2
    vdrv_feed_resistance: float = 0.0
    #: Load on the gate-drive rail: idle (driver + logic regulator, A) and the driver's own
    #: charge per switching cycle besides the gate's (C).
    vdrv_idle_current: float = 6.0e-3
    driver_charge_per_cycle: float = 80e-9
    #: Ripple on the gate-drive rail at the switching frequency (regulator, V p-p), the share of
    #: the bus ripple it passes (1 / PSRR) and the impedance the bootstrap recharge pulse sees (ohm).
    vdrv_ripple_pp: float = 0.03
    vdrv_bus_coupling: float = 0.01
    vdrv_rail_impedance: float = 0.25
    #: The logic regulator: dropout below the gate-drive rail (V), ripple (V p-p).
    logic_dropout: float = 0.4
    logic_ripple_pp: float = 0.015
    #: Board current with the PWM off: bleeder (ohm) and regulators' quiescent current (A).
    bleeder_resistance: float = 10e3
    regulator_quiescent_current: float = 8e-3
    #: A short across the input (ohm; inf = none): the large current of a faulty board.
    input_short_resistance: float = math.inf
    #: True when the gate is driven only up to the bus (no bootstrap lift): a source follower.
    gate_drive_to_bus: bool = False

    @classmethod
    def from_design(cls, design: Mapping[str, float], **changes: float | bool) -> StageParameters:
        """Build from the board's [design] values (SI floats) and apply ``changes``.

        Raises ``KeyError`` naming the first missing [design] key and ``TypeError`` for an
        unknown change.
        """
        missing = [key for key in DESIGN_KEYS if key not in design]
        if missing:
            raise KeyError(f"the [design] table lacks {missing[0]!r}")
        base = cls(**{key: float(design[key]) for key in DESIGN_KEYS})
        return replace(base, **changes) if changes else base

    @property
    def period(self) -> float:
        """Switching period, s."""
        return 1.0 / self.switching_frequency

    @property
    def gate_on_resistance(self) -> float:
        """Driver source + external + internal gate resistance, ohm (the turn-on path)."""
        return self.driver_source_resistance + self.gate_resistor + self.gate_resistance_internal

    @property
    def gate_off_resistance(self) -> float:
        """Driver sink + external + internal gate resistance, ohm (the turn-off path)."""
        return self.driver_sink_resistance + self.gate_resistor + self.gate_resistance_internal

    @property
    def design_current(self) -> float:
        """The load current at the design bus voltage, A (the plateau is rated at it)."""
        return self.bus_voltage / (self.load_resistance + self.mosfet_rds_on)

    @property
    def transconductance(self) -> float:
        """g_fs from the plateau relation V_pl = V_th + I_D/g_fs at the design current, S.

        [read: TI SLUA618, plateau voltage]; the linear transfer curve the source follower uses.
        """
        return self.design_current / (self.mosfet_plateau - self.mosfet_threshold)

    @property
    def floating_leakage(self) -> float:
        """Floating-side current besides the gate pull-down: quiescent + diode + capacitor, A."""
        return (
            self.floating_quiescent_current
            + self.bootstrap_diode_leakage
            + self.bootstrap_cap_leakage
        )

    @property
    def ciss_to_plateau_charge(self) -> float:
        """Charge Ciss takes up to the plateau, C."""
        return self.mosfet_ciss * self.mosfet_plateau

    @property
    def gate_capacitance_above_plateau(self) -> float:
        """Incremental gate capacitance above the plateau, F: the charge Qg left after the
        plateau, spread over the rise from V_pl to the Qg test voltage."""
        rest = self.mosfet_gate_charge - self.ciss_to_plateau_charge - self.mosfet_qgd
        return max(rest, 0.0) / (self.gate_charge_test_voltage - self.mosfet_plateau)


#: The [design] keys the model reads (all of them required).
DESIGN_KEYS: tuple[str, ...] = tuple(
    f.name for f in fields(StageParameters) if f.default is MISSING
)
