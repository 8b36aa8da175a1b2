"""Multi-channel simulated supplies: two more dialects over the same physical model.

One output of each feeds the board's bus (solved against ``StageModel.bus_current`` exactly as
``supply.Supply`` does: CV at the setpoint, folding back to CC at the limit); the others are
open circuit. Each output has over-voltage protection, over-current protection with a level
and an on/off switch, and a sense selection. The dialects differ only in how they are spoken:

- ``triple`` (``NULLPOINT,SIMTRIPLE-3``): the channel as an argument (``APPLy CH2,24,1``,
  ``OUTPut CH2,ON``, ``MEASure:CURRent? CH2``) or a node suffix (``SOURce2:VOLTage?``);
  protection states answered ``YES``/``NO``, output state ``ON``/``OFF``, the regulation mode
  ``CV``/``CC``/``UR``. Output 2 feeds the board.
- ``select`` (``NULLPOINT,SIMQUAD-4``): the channel selected first (``INSTrument:NSELect 3``
  or ``INSTrument OUT3``), then plain commands act on it; combined ``APPLy <V>,<A>``; states
  answered ``1``/``0``; regulation in ``STATus:QUEStionable:INSTrument:ISUMmary<n>:CONDition?``
  (bit 0 CC, bit 1 CV, bit 2 OVP tripped, bit 3 OCP tripped). Output 3 feeds the board.

Both keep the common commands and the ``SIMulation`` subsystem of every simulated instrument.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from sim_instruments.clock import SharedBoard, add_board_commands
from sim_instruments.faults import OVERRANGE, FaultInjector, add_fault_commands
from sim_instruments.scpi import (
    CommandTree,
    Handler,
    Instrument,
    ScpiError,
    Session,
    format_nr3,
    no_params,
    one_param,
    parse_bool,
    parse_choice,
    parse_number,
)

__all__ = ["Output", "MultiSupply", "TripleSupply", "SelectSupply"]

V_NOISE = 0.5e-3  # volts rms of the voltage read-back (as supply.Supply)
I_NOISE = 0.2e-3  # amps rms of the current read-back


class Output:
    """One output: setpoints, protections, and its operating point against ``load`` (amps
    drawn at a voltage, non-decreasing), ``None`` for an open circuit."""

    def __init__(
        self,
        number: int,
        v_max: float,
        i_max: float,
        load: Callable[[float], float] | None,
        on_bus: Callable[[float], None] | None = None,
    ) -> None:
        self.number = number
        self.v_max, self.i_max = v_max, i_max
        self.ovp_max, self.ocp_max = 1.1 * v_max, 1.1 * i_max
        self._load = load
        self._on_bus = on_bus
        self.reset()

    def reset(self) -> None:
        self.voltage_set = 0.0
        self.current_limit = 1.0
        self.ovp_level = self.ovp_max
        self.ovp_on = True
        self.ocp_level = self.ocp_max
        self.ocp_on = False
        self.sense_remote = False
        self.output_on = False
        self.ovp_tripped = False
        self.ocp_tripped = False
        self.solve()

    def solve(self) -> None:
        """The operating point; a protection that trips latches the output off."""
        self.in_cc = False
        if self.output_on and self.ovp_on and self.voltage_set > self.ovp_level:
            self.ovp_tripped, self.output_on = True, False
        if not self.output_on:
            self.out_v, self.out_i = 0.0, 0.0
            if self._on_bus:
                self._on_bus(0.0)
            return
        v = self.voltage_set
        i = float(self._load(v)) if self._load else 0.0
        if i > self.current_limit:
            assert self._load is not None
            lo, hi = 0.0, v  # bisection as in supply.Supply.solve
            for _ in range(48):
                mid = 0.5 * (lo + hi)
                if float(self._load(mid)) > self.current_limit:
                    hi = mid
                else:
                    lo = mid
            v, i = lo, self.current_limit
            self.in_cc = True
        if self.ocp_on and i > self.ocp_level:
            self.ocp_tripped, self.output_on = True, False
            self.solve()
            return
        self.out_v, self.out_i = v, i
        if self._on_bus:
            self._on_bus(v)

    def turn_on(self, on: bool) -> None:
        if on and (self.ovp_tripped or self.ocp_tripped):
            raise ScpiError(-221, "a protection tripped: clear it first")
        self.output_on = on
        self.solve()

    def mode(self) -> str:
        """``CV``, ``CC`` or ``UR`` (off or tripped: unregulated)."""
        if not self.output_on:
            return "UR"
        return "CC" if self.in_cc else "CV"


class MultiSupply(Instrument):
    """Base of the multi-channel supplies: ``outputs`` by number, ``board_output`` feeds the
    board. ``output_on``, ``voltage_set``, ``current_limit``, ``ovp_level`` read the board's
    output (as on ``supply.Supply``, for tests)."""

    ratings: tuple[tuple[float, float], ...] = ()
    board_output = 1

    def __init__(self, serial: str, board: SharedBoard, faults: FaultInjector, seed: int) -> None:
        self.board = board
        self._rng = np.random.default_rng([seed, 2])
        self.outputs: dict[int, Output] = {}
        for k, (v_max, i_max) in enumerate(self.ratings, start=1):
            feeds = k == self.board_output
            self.outputs[k] = Output(
                k,
                v_max,
                i_max,
                (lambda v: float(board.model.bus_current(v))) if feeds else None,
                board.set_bus if feeds else None,
            )
        super().__init__(serial, board.lock, faults)
        self.reset()
        board.on_load_change(self.solve)

    @property
    def fed(self) -> Output:
        return self.outputs[self.board_output]

    output_on = property(lambda self: self.fed.output_on)
    voltage_set = property(lambda self: self.fed.voltage_set)
    current_limit = property(lambda self: self.fed.current_limit)
    ovp_level = property(lambda self: self.fed.ovp_level)
    ocp_level = property(lambda self: self.fed.ocp_level)

    def reset(self) -> None:
        with self.lock:
            for out in self.outputs.values():
                out.reset()

    def solve(self) -> None:
        with self.lock:
            self.fed.solve()

    def turn_off(self) -> None:
        """Every output OFF (the bench does this on every way out)."""
        with self.lock:
            for out in self.outputs.values():
                out.output_on = False
                out.solve()

    def output(self, number: int) -> Output:
        if number not in self.outputs:
            raise ScpiError(-114, f"no output {number} (1-{len(self.outputs)})")
        return self.outputs[number]

    def measured(self, out: Output, kind: str) -> str:
        if self.faults.overrange:
            return format_nr3(OVERRANGE)
        out.solve()
        if kind == "V":
            return format_nr3(out.out_v + V_NOISE * self._rng.standard_normal())
        if not out.output_on:
            return format_nr3(0.0)
        return format_nr3(out.out_i + I_NOISE * self._rng.standard_normal())

    def set_level(self, out: Output, attr: str, text: str) -> None:
        high = {
            "voltage_set": out.v_max,
            "current_limit": out.i_max,
            "ovp_level": out.ovp_max,
            "ocp_level": out.ocp_max,
        }[attr]
        setattr(out, attr, parse_number(text, 0.0, high))
        out.solve()

    def add_sim_commands(self, tree: CommandTree) -> None:
        add_board_commands(tree, self.board)
        add_fault_commands(tree, self.faults)


def _channel_word(text: str, count: int) -> int:
    """``CH2`` -> 2 (the channel as an argument)."""
    word = text.strip().upper()
    if not word.startswith("CH") or not word[2:].isdigit():
        raise ScpiError(-224, f"expected CH1..CH{count}, got {text.strip()!r}")
    number = int(word[2:])
    if not 1 <= number <= count:
        raise ScpiError(-224, f"no channel {text.strip()!r} (CH1..CH{count})")
    return number


class TripleSupply(MultiSupply):
    """Three outputs, the channel as an argument; replies in words (see the module doc)."""

    model_name = "SIMTRIPLE-3"
    ratings = ((6.0, 5.0), (60.0, 10.0), (30.0, 2.0))
    board_output = 2

    # -- parameters: the channel first (CH<n>), then the values --------------------------
    def _channel_and(self, params: list[str], n_values: int) -> tuple[Output, list[str]]:
        if len(params) != 1 + n_values:
            raise ScpiError(-109 if len(params) < 1 + n_values else -108)
        return self.output(_channel_word(params[0], len(self.ratings))), params[1:]

    def _queried(self, params: list[str]) -> Output:
        return self._channel_and(params, 0)[0]

    # -- handler factories ---------------------------------------------------------------
    def _level(self, attr: str) -> tuple[Handler, Handler]:
        def setter(s: Session, params: list[str], n: list[int]) -> None:
            out, (value,) = self._channel_and(params, 1)
            self.set_level(out, attr, value)

        def getter(s: Session, params: list[str], n: list[int]) -> str:
            return format_nr3(getattr(self._queried(params), attr))

        return setter, getter

    def _suffixed(self, attr: str) -> tuple[Handler, Handler]:
        def setter(s: Session, params: list[str], n: list[int]) -> None:
            self.set_level(self.output(n[0]), attr, one_param(params))

        def getter(s: Session, params: list[str], n: list[int]) -> str:
            no_params(params)
            return format_nr3(getattr(self.output(n[0]), attr))

        return setter, getter

    def _switch(self, attr: str) -> tuple[Handler, Handler]:
        def setter(s: Session, params: list[str], n: list[int]) -> None:
            out, (value,) = self._channel_and(params, 1)
            if attr == "output_on":
                out.turn_on(parse_bool(value))
            else:
                setattr(out, attr, parse_bool(value))
                out.solve()

        def getter(s: Session, params: list[str], n: list[int]) -> str:
            return "ON" if getattr(self._queried(params), attr) else "OFF"

        return setter, getter

    def _question(self, attr: str) -> Handler:
        return lambda s, params, n: "YES" if getattr(self._queried(params), attr) else "NO"

    def _clear(self, attr: str) -> Handler:
        def handler(s: Session, params: list[str], n: list[int]) -> None:
            out = self._queried(params)
            setattr(out, attr, False)
            out.solve()

        return handler

    def _apply_set(self, s: Session, params: list[str], n: list[int]) -> None:
        out, (volts, amps) = self._channel_and(params, 2)
        self.set_level(out, "voltage_set", volts)
        self.set_level(out, "current_limit", amps)

    def _apply_query(self, s: Session, params: list[str], n: list[int]) -> str:
        out = self._queried(params)
        rating = f"CH{out.number}:{out.v_max:g}V/{out.i_max:g}A"
        return f"{rating},{out.voltage_set:.3f},{out.current_limit:.4f}"

    def build_commands(self, tree: CommandTree) -> None:
        tree.add("APPLy", set=self._apply_set, query=self._apply_query)
        for node, attr in (("VOLTage", "voltage_set"), ("CURRent", "current_limit")):
            setter, getter = self._suffixed(attr)
            tree.add(
                f"[SOURce<n>:]{node}[:LEVel][:IMMediate][:AMPLitude]", set=setter, query=getter
            )
        setter, getter = self._switch("output_on")
        tree.add("OUTPut[:STATe]", set=setter, query=getter)
        for prot, level_attr, on_attr, trip_attr in (
            ("OVP", "ovp_level", "ovp_on", "ovp_tripped"),
            ("OCP", "ocp_level", "ocp_on", "ocp_tripped"),
        ):
            setter, getter = self._level(level_attr)
            tree.add(f"OUTPut:{prot}:VALue", set=setter, query=getter)
            setter, getter = self._switch(on_attr)
            tree.add(f"OUTPut:{prot}[:STATe]", set=setter, query=getter)
            tree.add(f"OUTPut:{prot}:QUEStion", query=self._question(trip_attr))
            tree.add(f"OUTPut:{prot}:CLEar", set=self._clear(trip_attr))
        tree.add("OUTPut:MODE", query=lambda s, params, n: self._queried(params).mode())
        tree.add(
            "MEASure[:VOLTage][:DC]",
            query=lambda s, params, n: self.measured(self._queried(params), "V"),
        )
        tree.add(
            "MEASure:CURRent[:DC]",
            query=lambda s, params, n: self.measured(self._queried(params), "I"),
        )
        self.add_sim_commands(tree)


class SelectSupply(MultiSupply):
    """Four outputs, one selected at a time; replies as numbers (see the module doc).

    The selection belongs to the instrument (as on a real front panel), not to a connection."""

    model_name = "SIMQUAD-4"
    ratings = ((32.0, 5.0), (32.0, 5.0), (60.0, 10.0), (6.0, 5.0))
    board_output = 3

    def reset(self) -> None:
        super().reset()
        self.selected = 1

    @property
    def sel(self) -> Output:
        return self.outputs[self.selected]

    # -- handler factories and handlers ---------------------------------------------------
    def _level(self, attr: str) -> tuple[Handler, Handler]:
        def setter(s: Session, params: list[str], n: list[int]) -> None:
            self.set_level(self.sel, attr, one_param(params))

        def getter(s: Session, params: list[str], n: list[int]) -> str:
            no_params(params)
            return format_nr3(getattr(self.sel, attr))

        return setter, getter

    def _flag(self, attr: str) -> tuple[Handler, Handler]:
        def setter(s: Session, params: list[str], n: list[int]) -> None:
            value = parse_bool(one_param(params))
            if attr == "output_on":
                self.sel.turn_on(value)
            else:
                setattr(self.sel, attr, value)
                self.sel.solve()

        def getter(s: Session, params: list[str], n: list[int]) -> str:
            no_params(params)
            return "1" if getattr(self.sel, attr) else "0"

        return setter, getter

    def _clear(self, attr: str) -> Handler:
        def handler(s: Session, params: list[str], n: list[int]) -> None:
            no_params(params)
            setattr(self.sel, attr, False)
            self.sel.solve()

        return handler

    def _select_name(self, s: Session, params: list[str], n: list[int]) -> None:
        names = [f"OUTput{k}" for k in range(1, len(self.ratings) + 1)]
        self.selected = int(parse_choice(one_param(params), names)[3:])

    def _select_number(self, s: Session, params: list[str], n: list[int]) -> None:
        self.selected = int(parse_number(one_param(params), 1, len(self.ratings)))

    def _apply_set(self, s: Session, params: list[str], n: list[int]) -> None:
        if len(params) != 2:
            raise ScpiError(-109 if len(params) < 2 else -108)
        self.set_level(self.sel, "voltage_set", params[0])
        self.set_level(self.sel, "current_limit", params[1])

    def _sense(self, s: Session, params: list[str], n: list[int]) -> None:
        choice = parse_choice(one_param(params), ["INTernal", "EXTernal"])
        self.sel.sense_remote = choice == "EXT"

    def _summary(self, s: Session, params: list[str], n: list[int]) -> str:
        no_params(params)
        out = self.output(n[0])
        out.solve()
        bits = (1 if out.in_cc else 0) | (2 if out.output_on and not out.in_cc else 0)
        return str(bits | (4 if out.ovp_tripped else 0) | (8 if out.ocp_tripped else 0))

    def build_commands(self, tree: CommandTree) -> None:
        tree.add(
            "INSTrument[:SELect]",
            set=self._select_name,
            query=lambda s, p, n: f"OUT{self.selected}",
        )
        tree.add(
            "INSTrument:NSELect", set=self._select_number, query=lambda s, p, n: str(self.selected)
        )
        tree.add(
            "APPLy",
            set=self._apply_set,
            query=lambda s, p, n: f'"{self.sel.voltage_set:.3f},{self.sel.current_limit:.4f}"',
        )
        for pattern, attr in (
            ("[SOURce:]VOLTage[:LEVel][:IMMediate][:AMPLitude]", "voltage_set"),
            ("[SOURce:]CURRent[:LEVel][:IMMediate][:AMPLitude]", "current_limit"),
            ("[SOURce:]VOLTage:PROTection[:LEVel]", "ovp_level"),
            ("[SOURce:]CURRent:PROTection[:LEVel]", "ocp_level"),
        ):
            setter, getter = self._level(attr)
            tree.add(pattern, set=setter, query=getter)
        setter, getter = self._flag("ocp_on")
        tree.add("[SOURce:]CURRent:PROTection:STATe", set=setter, query=getter)
        for node, attr in (("VOLTage", "ovp_tripped"), ("CURRent", "ocp_tripped")):
            tree.add(f"[SOURce:]{node}:PROTection:TRIPped", query=self._flag(attr)[1])
            tree.add(f"[SOURce:]{node}:PROTection:CLEar", set=self._clear(attr))
        tree.add(
            "[SOURce:]VOLTage:SENSe[:SOURce]",
            set=self._sense,
            query=lambda s, p, n: "EXT" if self.sel.sense_remote else "INT",
        )
        setter, getter = self._flag("output_on")
        tree.add("OUTPut[:STATe]", set=setter, query=getter)
        tree.add(
            "MEASure[:SCALar]:VOLTage[:DC]", query=lambda s, p, n: self.measured(self.sel, "V")
        )
        tree.add(
            "MEASure[:SCALar]:CURRent[:DC]", query=lambda s, p, n: self.measured(self.sel, "I")
        )
        tree.add("STATus:QUEStionable:INSTrument:ISUMmary<n>:CONDition", query=self._summary)
        self.add_sim_commands(tree)
