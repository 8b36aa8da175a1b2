"""The thermometer driver: a thermocouple meter (or DMM) reading the switch's heatsink."""

from __future__ import annotations

from bringup.instruments.visa import InstrumentSession


class Thermometer:
    """A temperature meter reached through ``session``; readings in degrees Celsius."""

    def __init__(self, session: InstrumentSession):
        self.session = session
        self.profile = session.profile

    def configure(self) -> None:
        """Select the profile's sensor (thermocouple type) and degrees Celsius."""
        self.session.configure("configure_sensor")
        self.session.configure("temperature_unit", unit=self.profile.word("unit_celsius"))

    def read_temperature_c(self) -> float:
        """One temperature reading, degrees Celsius (``Overrange`` on an open thermocouple)."""
        return self.session.ask_number("read_temperature")

    def measure_dc_volts(self) -> float:
        """DC voltage between the meter's leads, volts."""
        return self.session.ask_number("measure_voltage")
