"""The simulated bench supply ``NULLPOINT,SIMSUPPLY-60``: one 0-60 V / 0-10 A output on the bus.

The output is solved against the board's load (``StageModel.bus_current``, amps drawn at a
given input voltage, non-decreasing in volts) as a constant-voltage / constant-current supply
(the usual rectangular output characteristic of a lab supply, common practice, no source):
in CV the output sits at the setpoint while the load draws no more than the current limit;
when it would draw more, the output folds back to the voltage at which the load draws exactly
the limit (CC), found by bisection. Over-voltage protection turns the output off and latches.
The output starts OFF, and ``*RST`` turns it OFF.
"""

from __future__ import annotations

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
    parse_bool,
    parse_number,
)

__all__ = ["Supply", "V_MAX", "I_MAX", "OVP_MAX"]

V_MAX = 60.0  # volts, highest setpoint
I_MAX = 10.0  # amps, highest current limit
OVP_MAX = 66.0  # volts, highest OVP level (and the *RST level)
V_NOISE = 0.5e-3  # volts rms of the voltage read-back
I_NOISE = 0.2e-3  # amps rms of the current read-back


class Supply(Instrument):
    """Bench supply on the board's bus. State (read by tests): ``output_on``, ``voltage_set``,
    ``current_limit``, ``ovp_level``, ``ovp_tripped``, ``in_cc``, ``out_v``, ``out_i``."""

    model_name = "SIMSUPPLY-60"

    def __init__(self, serial: str, board: SharedBoard, faults: FaultInjector, seed: int) -> None:
        self.board = board
        self._rng = np.random.default_rng([seed, 2])
        super().__init__(serial, board.lock, faults)
        self.reset()
        board.on_load_change(self.solve)

    def reset(self) -> None:
        with self.lock:
            self.voltage_set = 0.0
            self.current_limit = 1.0
            self.ovp_level = OVP_MAX
            self.output_on = False
            self.ovp_tripped = False
            self.solve()

    def turn_off(self) -> None:
        """Output OFF (the bench does this on every way out)."""
        with self.lock:
            self.output_on = False
            self.solve()

    def solve(self) -> None:
        """Find the output's operating point against the present load and apply it to the bus."""
        with self.lock:
            self.in_cc = False
            if self.output_on and self.voltage_set > self.ovp_level:
                self.ovp_tripped = True
                self.output_on = False
            if not self.output_on:
                self.out_v, self.out_i = 0.0, 0.0
                self.board.set_bus(0.0)
                return
            model = self.board.model
            v = self.voltage_set
            i = float(model.bus_current(v))
            if i > self.current_limit:
                lo, hi = 0.0, v  # bus_current(lo) <= limit < bus_current(hi)
                for _ in range(48):  # 2**-48 of the setpoint: far below the read-back noise
                    mid = 0.5 * (lo + hi)
                    if float(model.bus_current(mid)) > self.current_limit:
                        hi = mid
                    else:
                        lo = mid
                # In CC the output current is the limit. (A load that jumps across the limit,
                # e.g. a driver dropping out at its UVLO, has no steady point: a real supply
                # then hovers at that voltage with the current at the limit.)
                v, i = lo, self.current_limit
                self.in_cc = True
            self.out_v, self.out_i = v, i
            self.board.set_bus(v)

    def build_commands(self, tree: CommandTree) -> None:
        def setter(attr: str, high: float):
            def handler(session, params, n):
                setattr(self, attr, parse_number(one_param(params), 0.0, high))
                self.solve()

            return handler

        def getter(attr: str):
            def handler(session, params, n):
                no_params(params)
                return format_nr3(getattr(self, attr))

            return handler

        def output(session, params, n):
            on = parse_bool(one_param(params))
            if on and self.ovp_tripped:
                raise ScpiError(-221, "over-voltage protection tripped: clear it first")
            self.output_on = on
            self.solve()

        def ovp_clear(session, params, n):
            no_params(params)
            self.ovp_tripped = False
            self.solve()

        def measure(kind: str):
            def handler(session, params, n):
                no_params(params)
                if self.faults.overrange:
                    return format_nr3(OVERRANGE)
                self.solve()
                if kind == "V":
                    value = self.out_v + V_NOISE * self._rng.standard_normal()
                else:
                    value = (
                        (self.out_i + I_NOISE * self._rng.standard_normal())
                        if self.output_on
                        else 0.0
                    )
                return format_nr3(value)

            return handler

        def questionable(session, params, n):
            no_params(params)
            self.solve()
            return str((1 if self.ovp_tripped else 0) | (2 if self.in_cc else 0))

        tree.add(
            "[SOURce:]VOLTage[:LEVel][:IMMediate][:AMPLitude]",
            set=setter("voltage_set", V_MAX),
            query=getter("voltage_set"),
        )
        tree.add(
            "[SOURce:]CURRent[:LEVel][:IMMediate][:AMPLitude]",
            set=setter("current_limit", I_MAX),
            query=getter("current_limit"),
        )
        tree.add(
            "[SOURce:]VOLTage:PROTection[:LEVel]",
            set=setter("ovp_level", OVP_MAX),
            query=getter("ovp_level"),
        )
        tree.add(
            "[SOURce:]VOLTage:PROTection:TRIPped",
            query=lambda s, p, n: "1" if self.ovp_tripped else "0",
        )
        tree.add("[SOURce:]VOLTage:PROTection:CLEar", set=ovp_clear)
        tree.add("OUTPut[:STATe]", set=output, query=lambda s, p, n: "1" if self.output_on else "0")
        tree.add("MEASure[:SCALar]:VOLTage[:DC]", query=measure("V"))
        tree.add("MEASure[:SCALar]:CURRent[:DC]", query=measure("I"))
        tree.add("STATus:QUEStionable:CONDition", query=questionable)
        add_board_commands(tree, self.board)
        add_fault_commands(tree, self.faults)
