"""The bench supply driver: setpoints, protection, measurements, regulation state.

Switching the output is deliberately not public here: ``bringup.instruments.safety`` is the
one owner of output ON/OFF (it sets and reads back the protection first and turns the output
off on every way out). ``output_is_on`` only reads the state.
"""

from __future__ import annotations

import enum

from bringup.errors import InputError
from bringup.instruments import faults
from bringup.instruments.visa import InstrumentSession


class Regulation(enum.Enum):
    """What the output is doing: off, constant voltage, constant current, or tripped by OVP."""

    OFF = "off"
    CONSTANT_VOLTAGE = "CV"
    CONSTANT_CURRENT = "CC"
    OVP_TRIPPED = "OVP tripped"


class Supply:
    """A single-output DC supply reached through ``session``."""

    def __init__(self, session: InstrumentSession):
        self.session = session
        self.profile = session.profile

    def _bool(self, operation: str) -> bool:
        reply = self.session.ask(operation)
        value = reply.strip().upper()
        if value in ("1", "ON", "+1"):
            return True
        if value in ("0", "OFF", "+0"):
            return False
        raise faults.GarbageReply(
            self.session.role,
            self.profile.command(operation),
            f"expected 1 or 0, got {reply[:40]!r}",
        )

    # -- setpoints -----------------------------------------------------------------------
    def set_voltage(self, volts: float) -> None:
        """Voltage setpoint, volts (takes effect at once if the output is on)."""
        if volts < 0:
            raise InputError(f"supply voltage must be >= 0 V, not {volts!r}")
        self.session.configure("set_voltage", volts=float(volts))

    def voltage_setpoint(self) -> float:
        """The voltage setpoint (not a measurement), volts."""
        return self.session.ask_number("voltage_setpoint")

    def set_current_limit(self, amps: float) -> None:
        """Current limit, amperes."""
        if amps <= 0:
            raise InputError(f"supply current limit must be above 0 A, not {amps!r}")
        self.session.configure("set_current_limit", amps=float(amps))

    def current_limit(self) -> float:
        """The current limit setting, amperes."""
        return self.session.ask_number("current_limit")

    # -- protection ----------------------------------------------------------------------
    def set_ovp(self, volts: float) -> None:
        """Over-voltage protection level, volts."""
        if volts <= 0:
            raise InputError(f"supply OVP level must be above 0 V, not {volts!r}")
        self.session.configure("set_ovp", volts=float(volts))

    def ovp_level(self) -> float:
        """The over-voltage protection level, volts."""
        return self.session.ask_number("ovp_level")

    def ovp_tripped(self) -> bool:
        """Whether the over-voltage protection has tripped (and latched the output off)."""
        return self._bool("ovp_tripped")

    def clear_ovp_trip(self) -> None:
        """Reset a tripped over-voltage protection (the output stays off)."""
        self.session.configure("ovp_clear")

    # -- state and measurements ----------------------------------------------------------
    def output_is_on(self) -> bool:
        """Whether the output is on (read from the instrument)."""
        return self._bool("output_state")

    def measure_voltage(self) -> float:
        """Measured output voltage, volts."""
        return self.session.ask_number("measure_voltage")

    def measure_current(self) -> float:
        """Measured output current, amperes."""
        return self.session.ask_number("measure_current")

    def regulation(self) -> Regulation:
        """Regulation state from the questionable-status condition bits of the profile."""
        command = self.profile.command("regulation_status")
        value = self.session.ask_number("regulation_status")
        if value != int(value) or value < 0:
            raise faults.GarbageReply(
                self.session.role, command, f"not a status register: {value!r}"
            )
        bits = int(value)
        if bits >> self.profile.status_bits["ovp_tripped_bit"] & 1:
            return Regulation.OVP_TRIPPED
        if not self.output_is_on():
            return Regulation.OFF
        if bits >> self.profile.status_bits["current_limit_bit"] & 1:
            return Regulation.CONSTANT_CURRENT
        return Regulation.CONSTANT_VOLTAGE

    # -- the safe-state owner's switch ---------------------------------------------------
    def _switch_output(self, on: bool) -> str:
        """Send output ON/OFF and check the error queue. Only ``safety`` calls this."""
        return self.session.configure("output", state=self.profile.word("on" if on else "off"))
