"""The thermometer driver: a thermocouple meter, a DMM with a thermocouple input, or one input of
a multi-channel temperature logger, reading the switch's heatsink.

The bench file names the input (``[thermometer] channel``) and the thermocouple type
(``thermocouple``); templates may place them with ``{channel}`` and ``{tc_type}``. Where the
profile offers ``reference_junction``, the meter is told to compensate the cold junction with
its own internal reference before it reads (a thermocouple reads the difference between its
two junctions, so an unset reference is a wrong temperature, not a missing one).
"""

from __future__ import annotations

from typing import Any

from bringup.instruments.visa import InstrumentSession


class Thermometer:
    """A temperature meter reached through ``session``; readings in degrees Celsius."""

    def __init__(
        self, session: InstrumentSession, *, channel: int | str = 1, thermocouple: str = "K"
    ):
        self.session = session
        self.profile = session.profile
        self.channel = channel
        self.thermocouple = thermocouple
        channels = self.profile.channels
        self._channel_text = channels.text(channel) if channels else str(channel)
        self._channel_number = channels.number(channel) if channels else int(channel)

    def _fields(self, **fields: Any) -> dict[str, Any]:
        return {
            "channel": self._channel_text,
            "channel_number": self._channel_number,
            "tc_type": self.thermocouple,
            **fields,
        }

    def command_text(self, operation: str, **fields: Any) -> str:
        """The SCPI text of ``operation`` for this input (as the driver sends it)."""
        return self.profile.command(operation, **self._fields(**fields))

    def configure(self) -> None:
        """Select the thermocouple input and type, the internal reference junction where the
        profile sets it, and degrees Celsius."""
        self.session.configure("configure_sensor", **self._fields())
        if self.profile.has("reference_junction"):
            self.session.configure(
                "reference_junction",
                **self._fields(reference=self.profile.word("reference_internal")),
            )
        self.session.configure(
            "temperature_unit", **self._fields(unit=self.profile.word("unit_celsius"))
        )

    def read_temperature_c(self) -> float:
        """One temperature reading, degrees Celsius (``Overrange`` on an open thermocouple)."""
        return self.session.ask_number("read_temperature", **self._fields())

    def measure_dc_volts(self) -> float:
        """DC voltage between the meter's leads, volts."""
        return self.session.ask_number("measure_voltage", **self._fields())
