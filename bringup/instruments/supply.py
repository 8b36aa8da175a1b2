"""The bench supply driver: setpoints, protection, measurements, regulation state.

One output of the supply feeds the board: on a multi-channel supply the bench file names it
(``[supply] channel``) and every operation addresses it the way the profile says, by a
``{channel}`` placeholder (a node suffix such as ``SOUR2:VOLT`` or an argument such as
``APPL CH2,...``) or by a ``select_channel`` command sent first (``INST:NSEL 2``), both under
the session's lock so no other exchange can slip in between the selection and the operation.

Switching the output is deliberately not public here: ``bringup.instruments.safety`` is the
one owner of output ON/OFF (it sets and reads back the protection first and turns the output
off on every way out). ``output_is_on`` only reads the state.
"""

from __future__ import annotations

import enum
from typing import Any

from bringup.errors import InputError
from bringup.instruments import faults
from bringup.instruments.visa import InstrumentSession

#: How far above the current limit an over-current protection with a level of its own is set
#: when the step names none: a backstop behind constant-current regulation (which holds the
#: current at the limit), as OVP is a backstop above the voltage setpoint. Common practice.
OCP_MARGIN = 1.1


class Regulation(enum.Enum):
    """What the output is doing: off, constant voltage, constant current, unregulated (neither
    loop in control), or tripped by a protection."""

    OFF = "off"
    CONSTANT_VOLTAGE = "CV"
    CONSTANT_CURRENT = "CC"
    UNREGULATED = "unregulated"
    OVP_TRIPPED = "OVP tripped"
    OCP_TRIPPED = "OCP tripped"


_MODES = {
    "cv": Regulation.CONSTANT_VOLTAGE,
    "cc": Regulation.CONSTANT_CURRENT,
    "unregulated": Regulation.UNREGULATED,
    "off": Regulation.OFF,
}


class Supply:
    """One output of a DC supply reached through ``session``.

    ``channel`` is the output feeding the board (a number, or the instrument's name for it
    where the profile's ``[channels] names`` lists them); ``remote_sense`` says whether sense
    leads are wired to the board (``None``: the bench file does not say, nothing is set)."""

    def __init__(
        self,
        session: InstrumentSession,
        *,
        channel: int | str = 1,
        remote_sense: bool | None = None,
    ):
        self.session = session
        self.profile = session.profile
        self.channel = channel
        self.remote_sense = remote_sense
        channels = self.profile.channels
        self._channel_text = channels.text(channel) if channels else str(channel)
        self._channel_number = channels.number(channel) if channels else int(channel)

    def beside(self, session: InstrumentSession) -> Supply:
        """This supply's output reached through another ``session`` (a second connection to
        the same instrument): the same channel and sensing."""
        return Supply(session, channel=self.channel, remote_sense=self.remote_sense)

    # -- addressing the board's channel --------------------------------------------------
    def _fields(self, **fields: Any) -> dict[str, Any]:
        return {"channel": self._channel_text, "channel_number": self._channel_number, **fields}

    def _select(self) -> None:
        if self.profile.has("select_channel"):
            self.session.configure("select_channel", **self._fields())

    def command_text(self, operation: str, **fields: Any) -> str:
        """The SCPI text of ``operation`` for the board's channel (as the driver sends it)."""
        return self.profile.command(operation, **self._fields(**fields))

    def configure(self, operation: str, **fields: Any) -> str:
        """Send a channel-scoped command (selecting the channel first where the profile says
        so) and drain the error queue; returns the text sent."""
        with self.session.lock:
            self._select()
            return self.session.configure(operation, **self._fields(**fields))

    def ask_number(self, operation: str) -> float:
        """A channel-scoped numeric query."""
        with self.session.lock:
            self._select()
            return self.session.ask_number(operation, **self._fields())

    def ask_meaning(self, operation: str) -> Any:
        """A channel-scoped query answered in words, as the profile maps them."""
        with self.session.lock:
            self._select()
            return self.session.ask_meaning(operation, **self._fields())

    def _bool(self, operation: str) -> bool:
        meaning = self.ask_meaning(operation)
        if not isinstance(meaning, bool):  # the loader maps boolean queries to booleans only
            raise faults.GarbageReply(
                self.session.role, self.command_text(operation), f"not a yes/no: {meaning!r}"
            )
        return meaning

    # -- what the instrument offers --------------------------------------------------------
    @property
    def has_ocp(self) -> bool:
        """Whether the supply has an over-current protection (its trip state can be read)."""
        return self.profile.has("ocp_tripped")

    @property
    def has_ocp_level(self) -> bool:
        """Whether the over-current protection has a level of its own (else it trips at the
        current limit once enabled)."""
        return self.profile.has("set_ocp")

    @property
    def has_ovp_switch(self) -> bool:
        """Whether the over-voltage protection is switched on and off by a command (else it
        is always on)."""
        return self.profile.has("ovp_enable")

    @property
    def has_ocp_switch(self) -> bool:
        """Whether the over-current protection is switched on and off by a command."""
        return self.profile.has("ocp_enable")

    @property
    def has_sense(self) -> bool:
        """Whether remote sense can be switched by a command."""
        return self.profile.has("sense")

    # -- setpoints -----------------------------------------------------------------------
    def set_voltage(self, volts: float) -> None:
        """Voltage setpoint, volts (takes effect at once if the output is on). A supply that
        sets voltage and current only together keeps the current limit in force."""
        if volts < 0:
            raise InputError(f"supply voltage must be >= 0 V, not {volts!r}")
        if self.profile.has("set_voltage"):
            self.configure("set_voltage", volts=float(volts))
        else:
            self.configure("apply", volts=float(volts), amps=self.current_limit())

    def voltage_setpoint(self) -> float:
        """The voltage setpoint (not a measurement), volts."""
        return self.ask_number("voltage_setpoint")

    def set_current_limit(self, amps: float) -> None:
        """Current limit, amperes."""
        if amps <= 0:
            raise InputError(f"supply current limit must be above 0 A, not {amps!r}")
        if self.profile.has("set_current_limit"):
            self.configure("set_current_limit", amps=float(amps))
        else:
            self.configure("apply", volts=self.voltage_setpoint(), amps=float(amps))

    def current_limit(self) -> float:
        """The current limit setting, amperes."""
        return self.ask_number("current_limit")

    def set_levels(self, volts: float, amps: float) -> None:
        """Voltage setpoint (V) and current limit (A): in one command where the profile has
        one (``apply``), else the limit first, then the voltage."""
        if volts < 0:
            raise InputError(f"supply voltage must be >= 0 V, not {volts!r}")
        if amps <= 0:
            raise InputError(f"supply current limit must be above 0 A, not {amps!r}")
        if self.profile.has("apply"):
            self.configure("apply", volts=float(volts), amps=float(amps))
        else:
            self.set_current_limit(amps)
            self.set_voltage(volts)

    # -- protection ----------------------------------------------------------------------
    def set_ovp(self, volts: float) -> None:
        """Over-voltage protection level, volts."""
        if volts <= 0:
            raise InputError(f"supply OVP level must be above 0 V, not {volts!r}")
        self.configure("set_ovp", volts=float(volts))

    def ovp_level(self) -> float:
        """The over-voltage protection level, volts."""
        return self.ask_number("ovp_level")

    def ovp_tripped(self) -> bool:
        """Whether the over-voltage protection has tripped (and latched the output off)."""
        return self._bool("ovp_tripped")

    def clear_ovp_trip(self) -> None:
        """Reset a tripped over-voltage protection (the output stays off)."""
        self.configure("ovp_clear")

    def set_ocp(self, amps: float) -> None:
        """Over-current protection level, amperes (only where ``has_ocp_level``)."""
        if amps <= 0:
            raise InputError(f"supply OCP level must be above 0 A, not {amps!r}")
        self.configure("set_ocp", amps=float(amps))

    def ocp_level(self) -> float:
        """The over-current protection level, amperes."""
        return self.ask_number("ocp_level")

    def enable_ovp(self, on: bool) -> None:
        """Switch the over-voltage protection on or off (only where ``has_ovp_switch``)."""
        self.configure("ovp_enable", state=self.profile.word("on" if on else "off"))

    def ovp_enabled(self) -> bool:
        """Whether the over-voltage protection is on."""
        return self._bool("ovp_enabled")

    def enable_ocp(self, on: bool) -> None:
        """Switch the over-current protection on or off (only where ``has_ocp_switch``)."""
        self.configure("ocp_enable", state=self.profile.word("on" if on else "off"))

    def ocp_enabled(self) -> bool:
        """Whether the over-current protection is on."""
        return self._bool("ocp_enabled")

    def ocp_tripped(self) -> bool:
        """Whether the over-current protection has tripped (False where there is none)."""
        return self.has_ocp and self._bool("ocp_tripped")

    def clear_ocp_trip(self) -> None:
        """Reset a tripped over-current protection (the output stays off)."""
        self.configure("ocp_clear")

    def set_sense(self, remote: bool) -> None:
        """Remote (sense leads at the board) or local sensing (only where ``has_sense``)."""
        self.configure(
            "sense", sense=self.profile.word("sense_remote" if remote else "sense_local")
        )

    def sense_is_remote(self) -> bool:
        """Whether the output regulates at the sense leads (read back)."""
        return self.ask_meaning("sense_state") == "remote"

    # -- state and measurements ----------------------------------------------------------
    def output_is_on(self) -> bool:
        """Whether the output is on (read from the instrument)."""
        return self._bool("output_state")

    def measure_voltage(self) -> float:
        """Measured output voltage, volts."""
        return self.ask_number("measure_voltage")

    def measure_current(self) -> float:
        """Measured output current, amperes."""
        return self.ask_number("measure_current")

    def regulation(self) -> Regulation:
        """Regulation state: from the questionable-status condition bits of the profile, or
        from the mode the supply answers in words (``CV``/``CC``/``UR``); a tripped
        protection first."""
        if not self.profile.has("regulation_status"):
            if self.ovp_tripped():
                return Regulation.OVP_TRIPPED
            if self.ocp_tripped():
                return Regulation.OCP_TRIPPED
            if not self.output_is_on():
                return Regulation.OFF
            return _MODES[self.ask_meaning("regulation_mode")]
        command = self.command_text("regulation_status")
        value = self.ask_number("regulation_status")
        if value != int(value) or value < 0:
            raise faults.GarbageReply(
                self.session.role, command, f"not a status register: {value!r}"
            )
        bits = int(value)
        if bits >> self.profile.status_bits["ovp_tripped_bit"] & 1:
            return Regulation.OVP_TRIPPED
        if self.ocp_tripped():
            return Regulation.OCP_TRIPPED
        if not self.output_is_on():
            return Regulation.OFF
        if bits >> self.profile.status_bits["current_limit_bit"] & 1:
            return Regulation.CONSTANT_CURRENT
        return Regulation.CONSTANT_VOLTAGE

    # -- the safe-state owner's switch ---------------------------------------------------
    def _switch_output(self, on: bool) -> str:
        """Send output ON/OFF and check the error queue. Only ``safety`` calls this."""
        return self.configure("output", state=self.profile.word("on" if on else "off"))
