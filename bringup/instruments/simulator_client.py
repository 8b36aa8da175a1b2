"""The client of the simulated bench's ``SIMulation`` subsystem: the operator's hands on it.

Only a bench file with ``[simulation] enabled = true`` gets one (``Bench.simulation``). The
runner uses it where a real bench needs the operator: move a probe, flip the board's PWM
switch, set the duty cycle, speed up the thermal clock. The subsystem is our own (it is not
part of any instrument's command set), so its commands are fixed here, not in a profile;
they go through the same sessions, locks and error checks as every other command. See
``sim_instruments/README.md``.

It knows the bench only through what it is handed (two sessions, the net names and a
callback that notes a moved probe), so that the bench module can build it without a cycle.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING

from bringup.errors import InputError

if TYPE_CHECKING:
    from bringup.instruments.visa import InstrumentSession


_SIM_KINDS = {"single-ended": "SING", "differential": "DIFF", "current": "CURR"}


class SimulationControl:
    """Drives the sim's own subsystem through the scope's and the meter's sessions.

    ``nets`` are the net names a probe may sit on; ``on_probe_moved(channel, net)`` is told
    after a probe was moved (the bench keeps its wiring with it)."""

    def __init__(
        self,
        scope: InstrumentSession,
        meter: InstrumentSession,
        nets: Sequence[str],
        on_probe_moved: Callable[[int, str], None],
    ):
        self._scope = scope
        self._meter = meter
        self._nets = tuple(nets)
        self._on_probe_moved = on_probe_moved

    @staticmethod
    def _set(session: InstrumentSession, command: str) -> None:
        with session.lock:
            session.write(command)
            session.check_errors(command)

    def _net(self, net: str) -> str:
        if net not in self._nets:
            raise InputError(f"unknown net {net!r}: one of {', '.join(self._nets)}")
        return net

    def scenario(self) -> str:
        """The name of the scenario the sim runs."""
        return self._scope.query("SIM:SCEN?").strip('"')

    def move_probe(self, channel: int, net: str, kind: str | None = None) -> None:
        """Put scope channel ``channel``'s probe on ``net`` (and note it in the bench wiring);
        ``kind`` ("single-ended", "differential", "current") swaps in that kind of probe first
        when the channel has another."""
        if kind is not None:
            want = _SIM_KINDS[kind]
            if self._scope.query(f"SIM:PROB{int(channel)}:TYPE?").strip() != want:
                self._set(self._scope, f"SIM:PROB{int(channel)}:TYPE {want}")
        self._set(self._scope, f"SIM:PROB{int(channel)}:NET {self._net(net).upper()}")
        self._on_probe_moved(int(channel), net)

    def probe_net(self, channel: int) -> str:
        """The net scope channel ``channel``'s probe sits on."""
        return self._scope.query(f"SIM:PROB{int(channel)}:NET?").strip().lower()

    def move_meter_leads(self, net: str) -> None:
        """Put the meter's voltage leads on ``net``."""
        self._set(self._meter, f"SIM:PROB1:NET {self._net(net).upper()}")

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

    def advance_time(self, seconds: float) -> None:
        """Jump simulated time forward by ``seconds`` (the clock held at scale 0 is stepped)."""
        if not seconds >= 0:
            raise InputError(f"simulated time only moves forward, not by {seconds!r} s")
        self._set(self._scope, f"SIM:TIME:ADV {seconds:.9g}")
