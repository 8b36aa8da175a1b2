"""The signals that end a process, turned into a safe way out for a command that can energise.

``SignalGuard`` (a context manager, main thread only) catches every terminating signal the
platform delivers (``bringup.instruments.safety.TERMINATING_SIGNALS``: SIGHUP when the terminal
closes or an SSH link drops, SIGINT, SIGQUIT, SIGTERM, SIGPIPE) except those the process
ignores (``nohup``). On the first one it calls ``on_signal(stop)`` at once (switch the supply
off: no waiting for the step to notice), then raises ``SignalStop`` so the command unwinds,
logs the interrupted attempt and an abort event naming the signal, and exits with status
128 + the signal's number (130 for SIGINT), as a shell reports a process ended by it. A second
signal while unwinding only switches off again: the clean-up is not cut short.
"""

from __future__ import annotations

import signal
import threading
from collections.abc import Callable
from types import FrameType
from typing import Any

__all__ = ["SignalGuard", "SignalStop", "WHY"]

#: What each signal usually means at a bench, for the abort event and the one-line message.
WHY = {
    "SIGHUP": "the terminal was closed or its link was lost",
    "SIGINT": "interrupted (Ctrl+C)",
    "SIGQUIT": "quit from the keyboard (Ctrl+\\)",
    "SIGTERM": "asked to terminate",
    "SIGPIPE": "the output pipe was closed",
}


class SignalStop(BaseException):
    """A terminating signal arrived: unwind (a ``BaseException``, like ``KeyboardInterrupt``,
    so that nothing that handles ordinary errors swallows it)."""

    def __init__(self, signum: int) -> None:
        self.signum = signum
        self.name = signal.Signals(signum).name
        super().__init__(f"{self.name}: {WHY.get(self.name, 'signal received')}")

    @property
    def reason(self) -> str:
        """One line for the log: the signal's name and what it usually means."""
        return str(self)

    @property
    def exit_status(self) -> int:
        """128 + the signal's number: what a shell reports for a process ended by it."""
        return 128 + self.signum


class SignalGuard:
    """``with SignalGuard(on_signal): ...``: see the module doc. ``raise_stop=False`` only calls
    ``on_signal`` (for an event loop that leaves by its own means)."""

    def __init__(self, on_signal: Callable[[SignalStop], Any], *, raise_stop: bool = True):
        self.on_signal = on_signal
        self.raise_stop = raise_stop
        #: the first signal received, if any
        self.received: SignalStop | None = None
        self._saved: dict[int, Any] = {}

    def __enter__(self) -> SignalGuard:
        from bringup.instruments.safety import TERMINATING_SIGNALS

        if threading.current_thread() is not threading.main_thread():
            return self  # handlers can only be set from the main thread
        for signum in TERMINATING_SIGNALS:
            if signal.getsignal(signum) is signal.SIG_IGN:
                continue  # ignored by this process (nohup, Python's SIGPIPE): it ends nothing
            self._saved[signum] = signal.signal(signum, self._handle)
        return self

    def __exit__(self, *exc: object) -> None:
        for signum, previous in self._saved.items():
            signal.signal(signum, previous if previous is not None else signal.SIG_DFL)
        self._saved.clear()

    def _handle(self, signum: int, frame: FrameType | None) -> None:
        stop = SignalStop(signum)
        first = self.received is None
        if first:
            self.received = stop
        try:
            self.on_signal(stop)
        except Exception:  # noqa: BLE001 - the signal must still end the process
            pass
        if first and self.raise_stop:
            raise stop
