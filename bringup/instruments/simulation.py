"""The simulated bench's ``SIMulation`` subsystem: the operator's hands on a simulated bench.

Only a bench file with ``[simulation] enabled = true`` gets one (``Bench.simulation``). The
runner uses it where a real bench needs the operator: move a probe, flip the board's PWM
switch, set the duty cycle, speed up the thermal clock. The subsystem is our own (it is not
part of any instrument's command set), so its commands are fixed here, not in a profile;
they go through the same sessions, locks and error checks as every other command. See
``sim_instruments/README.md``.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from bringup.errors import InputError
from bringup.instruments import faults
from bringup.instruments.bench import NETS

if TYPE_CHECKING:
    from bringup.instruments.bench import Bench
    from bringup.instruments.visa import InstrumentSession

FAULT_COMMANDS = {
    "drop": "SIM:FAUL:DROP ONCE",
    "garbage": "SIM:FAUL:GARB ONCE",
    "truncate": "SIM:FAUL:TRUN ONCE",
    "overrange": "SIM:FAUL:OVER ON",
}


class SimulationControl:
    """Drives the sim's own subsystem through the bench's sessions."""

    def __init__(self, bench: Bench):
        self._bench = bench
        self._scope = bench.sessions["scope"]
        self._meter = bench.sessions["thermometer"]

    @staticmethod
    def _set(session: InstrumentSession, command: str) -> None:
        with session.lock:
            session.write(command)
            session.check_errors(command)

    def scenario(self) -> str:
        """The name of the scenario the sim runs."""
        return self._scope.query("SIM:SCEN?").strip('"')

    def move_probe(self, channel: int, net: str) -> None:
        """Put scope channel ``channel``'s probe on ``net`` (and note it in the bench wiring)."""
        if net not in NETS:
            raise InputError(f"unknown net {net!r}: one of {', '.join(NETS)}")
        self._set(self._scope, f"SIM:PROB{int(channel)}:NET {net.upper()}")
        self._bench.note_probe_moved(int(channel), net)

    def probe_net(self, channel: int) -> str:
        """The net scope channel ``channel``'s probe sits on."""
        return self._scope.query(f"SIM:PROB{int(channel)}:NET?").strip().lower()

    def move_meter_leads(self, net: str) -> None:
        """Put the meter's voltage leads on ``net``."""
        if net not in NETS:
            raise InputError(f"unknown net {net!r}: one of {', '.join(NETS)}")
        self._set(self._meter, f"SIM:PROB1:NET {net.upper()}")

    def set_pwm(self, enabled: bool) -> None:
        """The board's PWM enable switch."""
        self._set(self._scope, f"SIM:PWM {'ON' if enabled else 'OFF'}")

    def pwm_enabled(self) -> bool:
        """Whether the board's PWM is enabled."""
        return self._scope.query("SIM:PWM?").strip() == "1"

    def set_duty(self, duty: float) -> None:
        """The board's duty cycle, 0..1."""
        if not 0.0 <= duty <= 1.0:
            raise InputError(f"duty cycle must be 0..1, not {duty!r}")
        self._set(self._scope, f"SIM:PWM:DUTY {duty:.6g}")

    def duty(self) -> float:
        """The board's duty cycle, 0..1."""
        return self._scope.query_number("SIM:PWM:DUTY?")

    def set_time_scale(self, scale: float) -> None:
        """Simulated seconds per real second for the thermal model."""
        self._set(self._scope, f"SIM:TIME:SCAL {scale:.6g}")

    def time_scale(self) -> float:
        """Simulated seconds per real second."""
        return self._scope.query_number("SIM:TIME:SCAL?")

    # -- fault injection (reliability tests and demonstrations) ----------------------------
    def inject_fault(self, role: str, kind: str, *, seconds: float = 0.0, code: int = -222) -> None:
        """Arm a sim fault on instrument ``role``: drop, garbage, truncate, overrange,
        delay (``seconds`` late, persistent until cleared) or error (``code`` queued)."""
        session = self._bench.sessions[role]
        if kind == "delay":
            command = f"SIM:FAUL:DEL {seconds:.6g}"
        elif kind == "error":
            command = f"SIM:FAUL:ERR {int(code)}"
        elif kind in FAULT_COMMANDS:
            command = FAULT_COMMANDS[kind]
        else:
            raise InputError(f"unknown sim fault {kind!r}")
        with session.lock:
            session.write(command)
            if kind in ("delay", "overrange"):
                # one-shot faults act on the next reply and an injected error would be read
                # back at once, so only the persistent ones are followed by an error check
                session.check_errors(command)

    def clear_faults(self, role: str) -> None:
        """Disarm every sim fault on instrument ``role``."""
        session = self._bench.sessions[role]
        try:
            self._set(session, "SIM:FAUL:CLE")
        except faults.InstrumentError:
            pass  # errors queued by an earlier fault are not a failure to clear
