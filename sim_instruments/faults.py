"""Fault injection for reliability tests: what a misbehaving LAN instrument does to a client.

Each instrument owns one ``FaultInjector``, reachable from Python (``bench.scope.faults``) and
from SCPI (``SIMulation:FAULt:...``). Faults act on what the server sends:

- ``delay``: replies come ``seconds`` late (beyond the client's timeout); persistent unless
  ``once=True``.
- ``drop``: the next reply is cut in the middle and the connection closed.
- ``garbage``: the next reply is replaced by bytes that are no valid response.
- ``truncate``: the next binary block stops after half its announced length (no terminator).
- ``overrange``: measurement queries answer the SCPI overrange value 9.9E37 (SCPI-99 vol. 1
  7.2.1.4 "9.91E37 NaN" neighbourhood; 9.9E37 is the customary overrange reply).
- ``error``: an error ``code`` is pushed into the queue of the next session that runs a command
  (from SCPI: into the asking session's queue at once).
"""

from __future__ import annotations

import socket
import threading
from collections.abc import Sequence
from dataclasses import dataclass

from sim_instruments.scpi import (
    Block,
    CommandTree,
    Reply,
    ScpiError,
    Session,
    one_param,
    parse_bool,
    parse_choice,
    parse_number,
)

__all__ = ["FaultInjector", "FAULT_KINDS", "OVERRANGE", "GARBAGE_REPLY"]

FAULT_KINDS = ("delay", "drop", "garbage", "truncate", "overrange", "error")
#: The value measurement queries answer while the overrange fault is on.
OVERRANGE = 9.9e37
#: What a garbled reply looks like: no number, no quotes, bytes outside ASCII, then the terminator.
GARBAGE_REPLY = b"\x8f#~\xfe?NUL:;;\x07\xc3(\n"


@dataclass
class _State:
    delay_s: float = 0.0
    delay_once: bool = False
    drop: bool = False
    garbage: bool = False
    truncate: bool = False
    overrange: bool = False


class FaultInjector:
    """Faults armed on one instrument. Thread-safe; every method may be called from tests."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._state = _State()
        self._errors: list[int] = []

    def inject(
        self,
        kind: str,
        *,
        seconds: float | None = None,
        code: int | None = None,
        once: bool | None = None,
    ) -> None:
        """Arm a fault: ``inject("delay", seconds=2.0)``, ``inject("drop")``,
        ``inject("error", code=-222)``, ``inject("overrange")``. See the module doc."""
        with self._lock:
            st = self._state
            if kind == "delay":
                if seconds is None or seconds < 0:
                    raise ValueError("delay needs seconds >= 0")
                st.delay_s, st.delay_once = float(seconds), bool(once)
            elif kind == "drop":
                st.drop = True
            elif kind == "garbage":
                st.garbage = True
            elif kind == "truncate":
                st.truncate = True
            elif kind == "overrange":
                st.overrange = True if once is None else not once
            elif kind == "error":
                if code is None or code == 0:
                    raise ValueError("error needs a non-zero code")
                self._errors.append(int(code))
            else:
                raise ValueError(f"unknown fault {kind!r}; known: {', '.join(FAULT_KINDS)}")

    def remove(self, kind: str) -> None:
        """Disarm one kind of fault."""
        with self._lock:
            if kind == "error":
                self._errors.clear()
            elif kind == "delay":
                self._state.delay_s = 0.0
            elif kind in FAULT_KINDS:
                setattr(self._state, kind, False)
            else:
                raise ValueError(f"unknown fault {kind!r}")

    def clear(self) -> None:
        """Disarm every fault."""
        with self._lock:
            self._state = _State()
            self._errors.clear()

    @property
    def overrange(self) -> bool:
        """True while measurements must answer 9.9E37."""
        return self._state.overrange

    def active(self) -> list[str]:
        """Names of the armed faults (for ``SIMulation:FAULt?`` and tests)."""
        with self._lock:
            st = self._state
            names = [k for k in ("drop", "garbage", "truncate", "overrange") if getattr(st, k)]
            if st.delay_s > 0:
                names.insert(0, "delay")
            if self._errors:
                names.append("error")
            return names

    def deliver_pending_errors(self, session: Session) -> None:
        """Push errors armed from Python into the session about to run a command."""
        with self._lock:
            codes, self._errors = self._errors, []
        for code in codes:
            session.push_error(code, "injected")

    def _take(self, has_block: bool) -> _State:
        """The faults that apply to this reply; one-shot faults are consumed."""
        with self._lock:
            st = self._state
            now = _State(st.delay_s, st.delay_once, st.drop, st.garbage, False, st.overrange)
            if st.delay_once:
                st.delay_s, st.delay_once = 0.0, False
            st.drop = st.garbage = False
            if has_block and st.truncate:
                now.truncate, st.truncate = True, False
            return now

    def send_reply(
        self, sock: socket.socket, replies: Sequence[Reply], stop: threading.Event
    ) -> bool:
        """Send the replies of one program message (joined by ``;``, ended by ``\\n``).

        Binary payloads go out as buffers, never copied or looped over in Python.
        Returns False when the connection must be closed (a drop, or the server stopping).
        """
        has_block = any(isinstance(r, Block) for r in replies)
        st = self._take(has_block)
        if st.delay_s > 0 and stop.wait(st.delay_s):
            return False
        if st.garbage:
            sock.sendall(GARBAGE_REPLY)
            return True
        parts: list[bytes | memoryview] = []
        for i, reply in enumerate(replies):
            if i:
                parts.append(b";")
            if isinstance(reply, Block):
                parts.append(reply.header())
                if st.truncate:
                    view = memoryview(reply.payload).cast("B")
                    parts.append(view[: view.nbytes // 2])
                    _send_parts(sock, parts)
                    return True
                parts.append(memoryview(reply.payload).cast("B"))
            elif isinstance(reply, bytes):
                parts.append(reply)
            else:
                parts.append(reply.encode("ascii", "replace"))
        parts.append(b"\n")
        if st.drop:
            total = b"".join(bytes(p) for p in parts)
            sock.sendall(total[: max(1, len(total) // 2)])
            return False
        _send_parts(sock, parts)
        return True


def _send_parts(sock: socket.socket, parts: list[bytes | memoryview]) -> None:
    """Small parts are joined into one write; large buffers are sent as they are."""
    small: list[bytes] = []
    for part in parts:
        if len(part) < 65536:
            small.append(bytes(part))
            continue
        if small:
            sock.sendall(b"".join(small))
            small = []
        sock.sendall(part)
    if small:
        sock.sendall(b"".join(small))


def add_fault_commands(tree: CommandTree, faults: FaultInjector) -> None:
    """The ``SIMulation:FAULt`` commands (see ``sim_instruments/README.md``)."""

    def once_param(params: list[str]) -> None:
        parse_choice(one_param(params), ["ONCE"])

    def delay(session, params, n):
        if not params or len(params) > 2:
            raise ScpiError(-109 if not params else -108)
        seconds = parse_number(params[0], 0.0, 3600.0)
        once = len(params) == 2 and parse_choice(params[1], ["ONCE"]) == "ONCE"
        faults.inject("delay", seconds=seconds, once=once)

    def simple(kind: str):
        def handler(session, params, n):
            once_param(params)
            faults.inject(kind)

        return handler

    def overrange(session, params, n):
        if parse_bool(one_param(params)):
            faults.inject("overrange")
        else:
            faults.remove("overrange")

    def error(session, params, n):
        code = int(parse_number(one_param(params), -999, 32767))
        if code == 0:
            raise ScpiError(-224, "0 is not an error")
        session.push_error(code, "injected")

    tree.add("SIMulation:FAULt:DELay", set=delay)
    tree.add("SIMulation:FAULt:DROP", set=simple("drop"))
    tree.add("SIMulation:FAULt:GARBage", set=simple("garbage"))
    tree.add("SIMulation:FAULt:TRUNcate", set=simple("truncate"))
    tree.add(
        "SIMulation:FAULt:OVERrange",
        set=overrange,
        query=lambda s, p, n: "1" if faults.overrange else "0",
    )
    tree.add("SIMulation:FAULt:ERRor", set=error)
    tree.add("SIMulation:FAULt:CLEar", set=lambda s, p, n: faults.clear())
    tree.add(
        "SIMulation:FAULt[:ACTive]",
        query=lambda s, p, n: '"' + ",".join(faults.active()) + '"',
    )
