"""Two more simulated temperature meters over the same thermocouple on the switch's heatsink.

Both reuse ``thermometer.Thermometer``'s sensor (the junction's first-order lag and noise) and
its DC-voltage input; what they add is the physics of a thermocouple reading that a profile
must get right, and a different way of being spoken to:

- A thermocouple makes a voltage from the difference between its hot junction and the cold
  one at the meter's terminals (at the board's ambient temperature here). With the meter's
  internal reference junction (``INTernal``) the reading is the hot junction's temperature;
  with a fixed reference (``FIXed``, at ``RJUNction`` degC, 0 after ``*RST``) it is off by
  the difference between the terminals and that value. The heatsink's thermocouple is type K:
  configured as another type, the meter converts its voltage with the wrong sensitivity.
  Sensitivities near room temperature, microvolts per kelvin [memory, rounded]: B 0.4,
  E 60.9, J 51.7, K 40.6, N 26.1, R 5.9, S 5.9, T 40.7.
- ``dmm`` (``NULLPOINT,SIMDMM-6``): a bench DMM with a thermocouple function:
  ``CONFigure:TEMPerature TC,<type>``, ``[SENSe:]TEMPerature:TRANsducer:TCouple:RJUNction:TYPE
  INTernal|FIXed`` (FIXed after ``*RST``), ``UNIT:TEMPerature C|F|K``, ``READ?``, ``FETCh?``,
  ``MEASure:TEMPerature? [TC[,<type>]]``, ``MEASure:VOLTage[:DC]?``.
- ``logger`` (``NULLPOINT,SIMLOG-20``): a data-acquisition unit with a 20-channel thermocouple
  multiplexer, channels 101-120 addressed by channel lists ``(@103)``; the heatsink's
  thermocouple is on 103, the others hang in the air at ambient. ``CONFigure:TEMPerature
  TC,<type>,(@list)``, ``...:RJUNction:TYPE INTernal|FIXed,(@list)``, ``UNIT:TEMPerature
  C|F|K,(@list)``, ``FORMat:READing:UNIT ON|OFF`` (readings followed by their unit, ``+2.5E+01
  C``), ``MEASure:TEMPerature? TC,<type>,(@list)``, ``MEASure:VOLTage[:DC]? (@list)`` (the
  leads' net on any channel).
"""

from __future__ import annotations

from dataclasses import dataclass

from sim_instruments.clock import SharedBoard
from sim_instruments.faults import OVERRANGE, FaultInjector
from sim_instruments.scpi import (
    CommandTree,
    ScpiError,
    Session,
    format_nr3,
    no_params,
    one_param,
    parse_bool,
    parse_choice,
    parse_number,
)
from sim_instruments.thermometer import TEMP_NOISE_C, Thermometer

__all__ = ["DmmThermometer", "LoggerThermometer", "SEEBECK_UV_PER_K", "HEATSINK_CHANNEL"]

SEEBECK_UV_PER_K = {
    "B": 0.4,
    "E": 60.9,
    "J": 51.7,
    "K": 40.6,
    "N": 26.1,
    "R": 5.9,
    "S": 5.9,
    "T": 40.7,
}
FITTED_TYPE = "K"  # the thermocouple clamped to the heatsink
HEATSINK_CHANNEL = 103
LOGGER_CHANNELS = range(101, 121)


@dataclass
class InputSetup:
    """One thermocouple input's configuration."""

    tc_type: str = "J"  # a meter's usual default type after reset, not the fitted one
    internal_reference: bool = False
    fixed_reference_c: float = 0.0
    unit: str = "C"


def _in_unit(celsius: float, unit: str) -> float:
    if unit == "K":
        return celsius + 273.15
    if unit == "F":
        return celsius * 9.0 / 5.0 + 32.0
    return celsius


class _ThermocoupleMeter(Thermometer):
    """The shared physics: a type K junction at ``hot_c`` read through ``setup``."""

    def __init__(self, serial: str, board: SharedBoard, faults: FaultInjector, seed: int) -> None:
        super().__init__(serial, board, faults, seed)

    @property
    def terminals_c(self) -> float:
        """The cold junction: the meter's terminals, at the board's ambient temperature."""
        return float(self.board.model.params.ambient_temperature)

    def reading(self, hot_c: float, setup: InputSetup) -> float:
        """What the meter shows for a junction at ``hot_c`` degC, in ``setup.unit``."""
        emf_uv = SEEBECK_UV_PER_K[FITTED_TYPE] * (hot_c - self.terminals_c)
        reference = self.terminals_c if setup.internal_reference else setup.fixed_reference_c
        shown = reference + emf_uv / SEEBECK_UV_PER_K[setup.tc_type]
        return _in_unit(shown + TEMP_NOISE_C * self._rng.standard_normal(), setup.unit)


def _tc_params(params: list[str]) -> str | None:
    """``TC[,<type>]`` -> the type (None if not given)."""
    if not params:
        return None
    if parse_choice(params[0], ["TCouple"]) != "TC":
        raise ScpiError(-224, "only thermocouples (TC) are simulated")
    if len(params) > 2:
        raise ScpiError(-108)
    return parse_choice(params[1], list(SEEBECK_UV_PER_K)) if len(params) == 2 else None


class DmmThermometer(_ThermocoupleMeter):
    """A bench DMM with a thermocouple function (see the module doc)."""

    model_name = "SIMDMM-6"

    def reset(self) -> None:
        super().reset()
        self.setup = InputSetup()
        self.last_value: float | None = None

    def _measure(self) -> str:
        if self.faults.overrange:
            return format_nr3(OVERRANGE)
        self.last_value = self.reading(self.sensor_temperature(), self.setup)
        return format_nr3(self.last_value)

    def build_commands(self, tree: CommandTree) -> None:
        def configure(s: Session, params: list[str], n: list[int]) -> None:
            tc_type = _tc_params(params)
            if tc_type is not None:
                self.setup.tc_type = tc_type

        def measure(s, params, n):
            configure(s, params, n)
            return self._measure()

        def read(s, params, n):
            no_params(params)
            return self._measure()

        def fetch(s, params, n):
            no_params(params)
            if self.last_value is None:
                raise ScpiError(-230, "no reading yet")
            return format_nr3(self.last_value)

        def tc_type(s, params, n):
            self.setup.tc_type = parse_choice(one_param(params), list(SEEBECK_UV_PER_K))

        def rj_type(s, params, n):
            choice = parse_choice(one_param(params), ["INTernal", "FIXed"])
            self.setup.internal_reference = choice == "INT"

        def rj_value(s, params, n):
            self.setup.fixed_reference_c = parse_number(one_param(params), -20.0, 80.0)

        def unit(s, params, n):
            self.setup.unit = parse_choice(one_param(params), ["C", "CEL", "F", "FAR", "K"])[:1]

        def measure_voltage(s, params, n):
            no_params(params)
            if self.faults.overrange:
                return format_nr3(OVERRANGE)
            return format_nr3(self.dc_voltage())

        prefix = "[SENSe:]TEMPerature:TRANsducer:TCouple"
        tree.add("CONFigure:TEMPerature", set=configure)
        tree.add("CONFigure", query=lambda s, p, n: f'"TEMP TC,{self.setup.tc_type}"')
        tree.add(f"{prefix}:TYPE", set=tc_type, query=lambda s, p, n: self.setup.tc_type)
        tree.add(
            f"{prefix}:RJUNction:TYPE",
            set=rj_type,
            query=lambda s, p, n: "INT" if self.setup.internal_reference else "FIX",
        )
        tree.add(
            f"{prefix}:RJUNction",
            set=rj_value,
            query=lambda s, p, n: format_nr3(self.setup.fixed_reference_c),
        )
        tree.add("UNIT:TEMPerature", set=unit, query=lambda s, p, n: self.setup.unit)
        tree.add("MEASure:TEMPerature", query=measure)
        tree.add("READ", query=read)
        tree.add("FETCh", query=fetch)
        tree.add("MEASure:VOLTage[:DC]", query=measure_voltage)
        self.add_shared_commands(tree)


def _channel_list(params: list[str]) -> tuple[list[str], list[int]]:
    """Split ``[..., ](@101,103:105)`` (the list's commas were split as parameters) into the
    parameters before it and the channel numbers."""
    start = next((i for i, p in enumerate(params) if p.startswith("(@")), None)
    if start is None:
        raise ScpiError(-109, "a channel list (@<ch>) is needed")
    text = ",".join(params[start:])
    if not text.endswith(")"):
        raise ScpiError(-102, f"unterminated channel list {text!r}")
    channels: list[int] = []
    for item in text[2:-1].split(","):
        first, _, last = item.strip().partition(":")
        try:
            lo, hi = int(first), int(last or first)
        except ValueError:
            raise ScpiError(-224, f"bad channel list {text!r}") from None
        for ch in range(lo, hi + 1):
            if ch not in LOGGER_CHANNELS:
                raise ScpiError(-224, f"no channel {ch} (101-120)")
            channels.append(ch)
    return params[:start], channels


class LoggerThermometer(_ThermocoupleMeter):
    """A 20-channel thermocouple data-acquisition unit (see the module doc)."""

    model_name = "SIMLOG-20"

    def reset(self) -> None:
        super().reset()
        self.setups = {ch: InputSetup() for ch in LOGGER_CHANNELS}
        self.units_in_readings = False

    def _measure(self, channel: int) -> str:
        if self.faults.overrange:
            value = format_nr3(OVERRANGE)
        else:
            hot = self.sensor_temperature() if channel == HEATSINK_CHANNEL else self.terminals_c
            value = format_nr3(self.reading(hot, self.setups[channel]))
        if self.units_in_readings:
            value += " " + self.setups[channel].unit
        return value

    def build_commands(self, tree: CommandTree) -> None:
        def configure(s, params, n):
            before, channels = _channel_list(params)
            tc_type = _tc_params(before)
            for ch in channels:
                if tc_type is not None:
                    self.setups[ch].tc_type = tc_type
            return channels

        def measure(s, params, n):
            return ",".join(self._measure(ch) for ch in configure(s, params, n))

        def rj_type(s, params, n):
            before, channels = _channel_list(params)
            choice = parse_choice(one_param(before), ["INTernal", "FIXed"])
            for ch in channels:
                self.setups[ch].internal_reference = choice == "INT"

        def rj_type_query(s, params, n):
            _, channels = _channel_list(params)
            return ",".join("INT" if self.setups[c].internal_reference else "FIX" for c in channels)

        def unit(s, params, n):
            before, channels = _channel_list(params)
            choice = parse_choice(one_param(before), ["C", "CEL", "F", "FAR", "K"])[:1]
            for ch in channels:
                self.setups[ch].unit = choice

        def units_on(s, params, n):
            self.units_in_readings = parse_bool(one_param(params))

        def measure_voltage(s, params, n):
            _channel_list(params)
            if self.faults.overrange:
                return format_nr3(OVERRANGE)
            return format_nr3(self.dc_voltage()) + (" VDC" if self.units_in_readings else "")

        prefix = "[SENSe:]TEMPerature:TRANsducer:TCouple"
        tree.add("CONFigure:TEMPerature", set=lambda s, p, n: configure(s, p, n) and None)
        tree.add(f"{prefix}:RJUNction:TYPE", set=rj_type, query=rj_type_query)
        tree.add("UNIT:TEMPerature", set=unit)
        tree.add(
            "FORMat:READing:UNIT",
            set=units_on,
            query=lambda s, p, n: "1" if self.units_in_readings else "0",
        )
        tree.add("MEASure:TEMPerature", query=measure)
        tree.add("MEASure:VOLTage[:DC]", query=measure_voltage)
        self.add_shared_commands(tree)
