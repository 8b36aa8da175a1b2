"""The simulated thermometer / DMM ``NULLPOINT,SIMTHERM-1``.

A type K thermocouple on the switch's heatsink reads the model's heatsink temperature through
the sensor's own first-order lag (time constant ``SENSOR_TAU_S`` simulated seconds; a bead
thermocouple clamped to a heatsink answers in seconds, common practice, no source) plus
reading noise. Its DC-voltage input reads the mean of the net its leads sit on over ten PWM
periods (an integrating DMM averages the switching ripple away).
"""

from __future__ import annotations

import math

import numpy as np

from sim_instruments.clock import SharedBoard, add_board_commands
from sim_instruments.faults import OVERRANGE, FaultInjector, add_fault_commands
from sim_instruments.scpi import (
    CommandTree,
    Instrument,
    ScpiError,
    format_nr3,
    no_params,
    one_param,
    parse_choice,
)

__all__ = ["Thermometer", "SENSOR_TAU_S", "NETS"]

SENSOR_TAU_S = 3.0  # simulated seconds, thermocouple lag
TEMP_NOISE_C = 0.05  # degC rms reading noise
DMM_NOISE_V = 0.5e-3  # volts rms reading noise
NETS = ("GATE", "SWITCH", "VGS", "VBS", "BUS", "VDRV", "LOGIC")


class Thermometer(Instrument):
    """Thermocouple thermometer with a DC-voltage input. ``lead_net`` is the DMM leads' net."""

    model_name = "SIMTHERM-1"

    def __init__(self, serial: str, board: SharedBoard, faults: FaultInjector, seed: int) -> None:
        self.board = board
        self._rng = np.random.default_rng([seed, 3])
        self._sensor_c: float | None = None
        self._sensor_t = 0.0
        self.lead_net = "bus"
        super().__init__(serial, board.lock, faults)
        self.reset()

    def reset(self) -> None:
        self.unit = "C"
        self.last_reading_c: float | None = None

    def sensor_temperature(self) -> float:
        """The thermocouple junction's temperature now, degC (lagged heatsink, no noise).

        First-order lag integrated at each reading against the heatsink temperature at that
        moment: exact for steps, and within the heatsink's change over one sensor time
        constant otherwise (the heatsink's own time constant is minutes).
        """
        with self.lock:
            t = self.board.clock.now()
            heatsink = self.board.heatsink_temperature()
            if self._sensor_c is None:
                self._sensor_c = heatsink
            else:
                alpha = 1.0 - math.exp(-max(t - self._sensor_t, 0.0) / SENSOR_TAU_S)
                self._sensor_c += alpha * (heatsink - self._sensor_c)
            self._sensor_t = t
            return self._sensor_c

    def settle_sensor_at(self, temp_c: float) -> None:
        """Test hook: put the thermocouple junction at ``temp_c`` degC at the present simulated
        time, as if it had settled there before the heatsink stepped; the next readings lag
        from it towards the heatsink (first order, ``SENSOR_TAU_S``)."""
        with self.lock:
            self._sensor_c = float(temp_c)
            self._sensor_t = self.board.clock.now()

    def _reading(self) -> str:
        if self.faults.overrange:
            return format_nr3(OVERRANGE)
        celsius = self.sensor_temperature() + TEMP_NOISE_C * self._rng.standard_normal()
        self.last_reading_c = celsius
        return self._format_temperature(celsius)

    def _format_temperature(self, celsius: float) -> str:
        return format_nr3(celsius + 273.15 if self.unit == "K" else celsius)

    def dc_voltage(self) -> float:
        """Mean of the lead net over ten PWM periods, volts, with reading noise."""
        with self.lock:
            period = self.board.period_s
            wave = self.board.model.waveform(self.lead_net, 0.0, period / 100.0, 1000)
            return float(np.mean(wave)) + DMM_NOISE_V * self._rng.standard_normal()

    def build_commands(self, tree: CommandTree) -> None:
        def configure(session, params, n):
            if len(params) > 2:
                raise ScpiError(-108)
            if params and parse_choice(params[0], ["TC"]) != "TC":
                raise ScpiError(-224)
            if len(params) == 2 and parse_choice(params[1], ["K"]) != "K":
                raise ScpiError(-224, "only type K is simulated")

        def unit(session, params, n):
            self.unit = parse_choice(one_param(params), ["C", "CEL", "K"])[:1]

        def fetch(session, params, n):
            no_params(params)
            if self.faults.overrange:
                return format_nr3(OVERRANGE)
            if self.last_reading_c is None:
                raise ScpiError(-230, "no reading yet: use READ? or MEASure:TEMPerature?")
            return self._format_temperature(self.last_reading_c)

        def read(session, params, n):
            no_params(params)
            return self._reading()

        def measure_temperature(session, params, n):
            configure(session, params, n)
            return self._reading()

        def measure_voltage(session, params, n):
            no_params(params)
            if self.faults.overrange:
                return format_nr3(OVERRANGE)
            return format_nr3(self.dc_voltage())

        tree.add("CONFigure:TEMPerature", set=configure)
        tree.add("CONFigure", query=lambda s, p, n: '"TEMP TC,K"')
        tree.add("UNIT:TEMPerature", set=unit, query=lambda s, p, n: self.unit)
        tree.add("MEASure:TEMPerature", query=measure_temperature)
        tree.add("READ", query=read)
        tree.add("FETCh", query=fetch)
        tree.add("MEASure:VOLTage[:DC]", query=measure_voltage)
        self.add_shared_commands(tree)

    def add_shared_commands(self, tree: CommandTree) -> None:
        """The ``SIMulation`` commands of every simulated meter: the leads, board, faults."""

        def probe_net(session, params, n):
            if n[0] != 1:
                raise ScpiError(-114, "the DMM has one pair of leads: PROBe1")
            self.lead_net = parse_choice(one_param(params), NETS).lower()

        tree.add(
            "SIMulation:PROBe<n>:NET", set=probe_net, query=lambda s, p, n: self.lead_net.upper()
        )
        add_board_commands(tree, self.board)
        add_fault_commands(tree, self.faults)
