"""Simulated time, and the one board every simulated instrument sees.

``SimClock`` maps wall time to simulated time with a speed-up factor (``SIMulation:TIME:SCALe``,
default 600: a 20-minute thermal soak passes in 2 s of wall time). ``SharedBoard`` holds the
physical model (``sim_instruments.model.StageModel``) behind the bench's lock and stamps every
state change with the simulated time, as the model's interface asks.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable, Mapping
from typing import Any

from sim_instruments.scpi import CommandTree, ScpiError, format_nr3, one_param, parse_bool
from sim_instruments.scpi import parse_number as _number

__all__ = ["SimClock", "SharedBoard", "add_board_commands", "MAX_TIME_SCALE"]

#: Largest speed-up accepted (simulated seconds per wall second).
MAX_TIME_SCALE = 1e6


class SimClock:
    """Simulated seconds since the bench started, running ``scale`` times faster than wall time."""

    def __init__(self, scale: float = 600.0) -> None:
        self._lock = threading.Lock()
        self._scale = float(scale)
        self._wall0 = time.monotonic()
        self._sim0 = 0.0

    @property
    def scale(self) -> float:
        """Simulated seconds per wall-clock second."""
        return self._scale

    def now(self) -> float:
        """Simulated time, seconds (non-decreasing)."""
        with self._lock:
            return self._sim0 + (time.monotonic() - self._wall0) * self._scale

    def set_scale(self, scale: float) -> None:
        """Change the speed-up without a jump in simulated time."""
        if not 0 <= scale <= MAX_TIME_SCALE:
            raise ValueError(f"time scale {scale} outside 0 to {MAX_TIME_SCALE:g}")
        with self._lock:
            wall = time.monotonic()
            self._sim0 += (wall - self._wall0) * self._scale
            self._wall0 = wall
            self._scale = float(scale)

    def advance(self, seconds: float) -> None:
        """Jump simulated time forward (tests: a soak without waiting)."""
        if seconds < 0:
            raise ValueError("simulated time only moves forward")
        with self._lock:
            self._sim0 += seconds


class SharedBoard:
    """The board under test, shared by the three instruments.

    ``model`` is the ``StageModel``; ``lock`` is the bench's lock (every instrument's handlers
    run under it). ``bus_v`` is the voltage the supply puts on the board's input, volts;
    ``pwm_enabled``/``duty`` the board's PWM switch and duty cycle (fraction).
    """

    def __init__(
        self, model: Any, design: Mapping[str, float], clock: SimClock, lock: threading.RLock
    ) -> None:
        self.model = model
        self.design = dict(design)
        self.clock = clock
        self.lock = lock
        self.bus_v = 0.0
        self.pwm_enabled = False
        self.duty = 0.5
        self._load_listeners: list[Callable[[], None]] = []
        with lock:
            model.set_sim_time(clock.now())
            model.set_bus(0.0)
            model.set_pwm(False, self.duty)

    @property
    def scenario(self) -> str:
        return str(self.model.scenario)

    @property
    def period_s(self) -> float:
        """PWM period, seconds."""
        return 1.0 / float(self.design.get("switching_frequency", 25e3))

    def on_load_change(self, callback: Callable[[], None]) -> None:
        """Call ``callback`` (under the lock) whenever the board's load changes (PWM state)."""
        self._load_listeners.append(callback)

    def set_bus(self, volts: float) -> None:
        """The voltage at the board's input, volts (0 = unpowered)."""
        with self.lock:
            if volts == self.bus_v:
                return
            self.model.set_sim_time(self.clock.now())
            self.model.set_bus(float(volts))
            self.bus_v = float(volts)

    def set_pwm(self, enabled: bool | None = None, duty: float | None = None) -> None:
        """The board's PWM enable and/or duty (fraction); the supply re-solves its output."""
        with self.lock:
            if enabled is not None:
                self.pwm_enabled = bool(enabled)
            if duty is not None:
                self.duty = float(duty)
            self.model.set_sim_time(self.clock.now())
            self.model.set_pwm(self.pwm_enabled, self.duty)
            for callback in self._load_listeners:
                callback()

    def heatsink_temperature(self) -> float:
        """The heatsink's true temperature now, degC."""
        with self.lock:
            return float(self.model.heatsink_temperature(self.clock.now()))


def add_board_commands(tree: CommandTree, board: SharedBoard) -> None:
    """The ``SIMulation`` commands every instrument shares: scenario, PWM, time."""

    def pwm_state(session, params, n):
        board.set_pwm(enabled=parse_bool(one_param(params)))

    def pwm_duty(session, params, n):
        board.set_pwm(duty=_number(one_param(params), 0.0, 1.0))

    def time_scale(session, params, n):
        try:
            board.clock.set_scale(_number(one_param(params), 0.0, MAX_TIME_SCALE))
        except ValueError as exc:
            raise ScpiError(-222, str(exc)) from None

    tree.add("SIMulation:SCENario", query=lambda s, p, n: f'"{board.scenario}"')
    tree.add(
        "SIMulation:PWM[:STATe]",
        set=pwm_state,
        query=lambda s, p, n: "1" if board.pwm_enabled else "0",
    )
    tree.add("SIMulation:PWM:DUTY", set=pwm_duty, query=lambda s, p, n: format_nr3(board.duty))
    tree.add(
        "SIMulation:TIME:SCALe", set=time_scale, query=lambda s, p, n: format_nr3(board.clock.scale)
    )
    tree.add("SIMulation:TIME[:NOW]", query=lambda s, p, n: format_nr3(board.clock.now()))

    def time_advance(session, params, n):
        board.clock.advance(_number(one_param(params), 0.0, MAX_TIME_SCALE))

    tree.add("SIMulation:TIME:ADVance", set=time_advance)
