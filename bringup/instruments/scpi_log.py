"""The SCPI log (``--scpi-log FILE``): every line sent to and received from each instrument,
with a UTC timestamp, so that a user writing a profile can see the whole exchange.

One line per message: ``2026-12-04T15:50:01.123456Z scope > *IDN?`` for a line sent,
``... scope < NULLPOINT,...`` for a reply. Binary blocks are summarised by their length, long
text replies (an ASCII waveform) by their first characters and length; control characters
are shown escaped so the file stays one message per line.
"""

from __future__ import annotations

import datetime as dt
import threading
from pathlib import Path
from typing import TextIO

from bringup.errors import InputError

#: Text replies longer than this (characters) are cut, with their length said.
LONGEST_SHOWN = 2000


def _printable(text: str) -> str:
    if len(text) > LONGEST_SHOWN:
        text = f"{text[:80]}... ({len(text)} characters)"
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in text)


class ScpiLog:
    """An append-only log file shared by every session of a bench (thread-safe)."""

    def __init__(self, path: Path | str):
        self.path = Path(path)
        try:
            self._file: TextIO = open(self.path, "a", encoding="utf-8", buffering=1)  # noqa: SIM115
        except OSError as exc:
            raise InputError(
                f"--scpi-log {self.path}: cannot write: {exc.strerror or exc}"
            ) from None
        self._lock = threading.Lock()

    def _line(self, role: str, arrow: str, text: str) -> None:
        stamp = dt.datetime.now(dt.UTC).isoformat(timespec="microseconds").replace("+00:00", "Z")
        with self._lock:
            if not self._file.closed:
                self._file.write(f"{stamp} {role} {arrow} {_printable(text)}\n")

    def sent(self, role: str, line: str) -> None:
        """A line sent to instrument ``role``."""
        self._line(role, ">", line)

    def received(self, role: str, text: str) -> None:
        """A reply from instrument ``role`` (text, or a summary of a block)."""
        self._line(role, "<", text)

    def note(self, role: str, text: str) -> None:
        """Something that happened on the connection (a fault, a reconnect)."""
        self._line(role, "!", text)

    def close(self) -> None:
        with self._lock:
            self._file.close()


# One log per process (``--scpi-log FILE``): every session opened while it is set writes to it,
# whichever command or layer opens the bench.
_PROCESS_LOG: ScpiLog | None = None


def use_process_log(path: Path | str) -> ScpiLog:
    """Log every instrument session of this process to ``path`` (appended); closed at exit.
    ``InputError`` naming ``--scpi-log`` when the file cannot be written."""
    import atexit

    global _PROCESS_LOG
    if _PROCESS_LOG is not None:
        _PROCESS_LOG.close()
    _PROCESS_LOG = ScpiLog(path)
    atexit.register(_PROCESS_LOG.close)
    return _PROCESS_LOG


def process_log() -> ScpiLog | None:
    """The process's SCPI log, if ``use_process_log`` was called."""
    return _PROCESS_LOG
