"""The session layer: one PyVISA connection per instrument, its lock, and its faults.

- One ``pyvisa.ResourceManager("@py")`` per process (``resource_manager()``), kept open for
  the life of the process (each session closes its own resource).
- Resources are opened by their explicit resource string with the profile's read and write
  termination and timeouts in milliseconds. Resource listing (which broadcasts on the LAN)
  lives only in ``discover_resources`` and runs only when a user asks for it.
- A lock per instrument: PyVISA is not safe for concurrent queries on one resource.
- Replies are read through a wire (``bringup.instruments.wire``); binary blocks are read
  header first, then exactly the announced bytes in large pieces, then the terminator, so the
  next reply is never shifted by a stray newline.
- After each configuration step the error queue (``SYSTem:ERRor?``) is read until empty.
- Queries that are safe to repeat are retried once after a reconnect when the reply timed out
  or the connection dropped; commands that change state are never sent twice.
"""

from __future__ import annotations

import re
import threading
import time
from collections.abc import Callable
from typing import Any

import numpy as np

from bringup.analysis.verdict import SCPI_OVERRANGE as SCPI_NO_VALUE  # SCPI-99 +INF
from bringup.instruments import faults
from bringup.instruments.profiles import REPLY_MEANINGS, Profile
from bringup.instruments.scpi_log import ScpiLog, process_log
from bringup.instruments.wire import (
    BlockSyntax,
    ResourceWire,
    SocketWire,
    WireClosed,
    WireTimeout,
    read_block,
)

_RM: Any = None
_RM_LOCK = threading.Lock()
MAX_ERRORS_DRAINED = 64


def resource_manager() -> Any:
    """The process's one ``pyvisa.ResourceManager("@py")`` (pyvisa-py backend)."""
    global _RM
    with _RM_LOCK:
        if _RM is None:
            import pyvisa

            _RM = pyvisa.ResourceManager("@py")
        return _RM


def discover_resources() -> tuple[str, ...]:
    """VISA resource listing. It sends broadcast traffic beyond this machine: call it only
    when a user explicitly asks (``bringup instruments --discover``), never in tests or CI."""
    return tuple(resource_manager().list_resources())


def _decode(role: str, command: str, raw: bytes) -> str:
    try:
        return raw.decode("ascii").strip()
    except UnicodeDecodeError:
        raise faults.GarbageReply(role, command, f"not text: {raw[:40]!r}") from None


class InstrumentSession:
    """One instrument's connection. ``role`` names it in faults (``scope``, ``supply``...).

    ``fast_reads`` picks the direct socket wire when the backend session allows it (pyvisa-py
    SOCKET resources); otherwise, or with ``fast_reads=False``, the public resource API.
    """

    def __init__(self, role: str, resource: str, profile: Profile, *, fast_reads: bool = True):
        self.role = role
        self.resource_name = resource
        self.profile = profile
        self.fast_reads = fast_reads
        self.reconnects = 0  # how many times the connection was re-opened after a fault
        self.retries = 0  # how many safe queries were sent a second time
        #: Faults that a retry or a switch-off got past, one line each, oldest first: the
        #: caller takes them (``take_absorbed``) to log with what it was doing.
        self.absorbed: list[str] = []
        self._lock = threading.RLock()
        self._resource: Any = None
        self._wire: SocketWire | ResourceWire | None = None
        self._broken = False
        self._term = profile.read_termination.encode("ascii")
        self._fault_listeners: list[Callable[[faults.InstrumentFault], None]] = []
        self.closed = True
        # every line sent and received, when set (``--scpi-log``: the process's log)
        self.scpi_log: ScpiLog | None = process_log()

    @property
    def lock(self) -> threading.RLock:
        """The instrument's lock: hold it to run several exchanges without interleaving."""
        return self._lock

    # -- connection ----------------------------------------------------------------------
    def open(self) -> None:
        """Open the resource (no traffic yet); a refused connection is ``ConnectionLost``."""
        with self._lock:
            self._open()
            self.closed = False

    def _open(self) -> None:
        rm = resource_manager()
        p = self.profile
        try:
            res = rm.open_resource(
                self.resource_name,
                read_termination=p.read_termination,
                write_termination=p.write_termination,
                timeout=p.default_timeout_ms,
                open_timeout=p.default_timeout_ms,
            )
        except Exception as exc:  # the backends raise plain Exception for refused connects
            raise faults.ConnectionLost(
                self.role, None, f"cannot open {self.resource_name}: {exc}"
            ) from None
        chunk = p.block.chunk_bytes if p.block else 1 << 20
        backend = getattr(rm.visalib, "sessions", {}).get(res.session)
        if self.fast_reads and SocketWire.fits(backend):
            wire: SocketWire | ResourceWire = SocketWire(backend, chunk)
            if wire.connect_error():
                res.close()
                raise faults.ConnectionLost(
                    self.role, None, f"cannot open {self.resource_name}: connection refused"
                )
            wire.no_delay()
        else:
            wire = ResourceWire(res, chunk)
            try:  # the VISA way to ask for TCP_NODELAY; backends without it just refuse
                from pyvisa import constants

                res.set_visa_attribute(constants.ResourceAttribute.tcpip_nodelay, True)
            except Exception:  # not a TCP resource, or the backend does not offer it
                pass
        self._resource, self._wire, self._broken = res, wire, False

    def _drop(self) -> None:
        if self._resource is not None:
            try:
                self._resource.close()
            except Exception:  # closing a dead connection may fail; it is gone either way
                pass
        self._resource = None
        self._wire = None

    def reconnect(self) -> None:
        """Close and re-open the connection (discards any late or partial reply)."""
        with self._lock:
            self._drop()
            self._open()
            self.reconnects += 1

    def mark_out_of_sync(self) -> None:
        """Reconnect before the next exchange (an exchange may have been cut off midway)."""
        self._broken = True

    def close(self) -> None:
        """Close the connection; safe to call twice."""
        with self._lock:
            self._drop()
            self.closed = True

    def take_absorbed(self) -> list[str]:
        """The absorbed faults noted since the last call (see ``absorbed``), and forget them."""
        taken, self.absorbed = self.absorbed, []
        return taken

    def add_fault_listener(self, listener: Callable[[faults.InstrumentFault], None]) -> None:
        """Call ``listener(fault)`` whenever this instrument times out or its connection is
        lost for good (after any retry). The safe-state owner uses it to switch off."""
        self._fault_listeners.append(listener)

    def remove_fault_listener(self, listener: Callable[[faults.InstrumentFault], None]) -> None:
        if listener in self._fault_listeners:
            self._fault_listeners.remove(listener)

    def _ready(self) -> SocketWire | ResourceWire:
        if self.closed:
            raise faults.ConnectionLost(self.role, None, "session is closed")
        if self._broken or self._wire is None:
            self.reconnect()
        assert self._wire is not None
        return self._wire

    # -- exchanges -----------------------------------------------------------------------
    def _write(self, command: str) -> None:
        if self.scpi_log is not None:
            self.scpi_log.sent(self.role, command)
        try:
            if isinstance(self._wire, SocketWire):
                self._wire.send((command + self.profile.write_termination).encode("ascii"))
            else:
                self._resource.write(command)
        except Exception as exc:  # OSError from the socket, VisaIOError from the backend
            self._broken = True
            raise faults.ConnectionLost(self.role, command, f"cannot send: {exc}") from None

    def _exchange(
        self,
        command: str,
        timeout_ms: int,
        read: Callable[[Any, float], Any],
        repeatable: bool,
        send: bool = True,
    ) -> Any:
        with self._lock:
            attempts = 2 if repeatable and send else 1
            for attempt in range(attempts):
                try:
                    wire = self._ready()
                    if send:
                        self._write(command)
                    return read(wire, time.monotonic() + timeout_ms / 1000)
                except (WireTimeout, WireClosed, faults.ConnectionLost) as exc:
                    self._broken = True
                    fault = self._transport_fault(command, exc, timeout_ms)
                    if self.scpi_log is not None:
                        self.scpi_log.note(self.role, fault.detail)
                    if isinstance(fault, faults.TruncatedBlock) or attempt + 1 == attempts:
                        if not isinstance(fault, faults.TruncatedBlock):
                            self._tell(fault)
                        raise fault from None
                    self.retries += 1
                    self.absorbed.append(f"{fault}; sent again after reconnecting")
                except BlockSyntax as exc:
                    self._broken = True
                    raise faults.GarbageReply(
                        self.role, command, f"expected a #-block, got {exc.head[:40]!r}"
                    ) from None
        raise AssertionError("unreachable")

    def _transport_fault(
        self, command: str, exc: Exception, timeout_ms: int
    ) -> faults.InstrumentFault:
        if isinstance(exc, faults.InstrumentFault):
            return exc
        expected = getattr(exc, "expected", None)
        received = getattr(exc, "received", 0)
        if expected is not None and isinstance(exc, WireTimeout):
            return faults.TruncatedBlock(
                self.role,
                command,
                f"{received} of {expected} announced bytes arrived, then nothing",
            )
        if isinstance(exc, WireClosed):
            part = f" after {received} of {expected} block bytes" if expected is not None else ""
            return faults.ConnectionLost(
                self.role, command, f"the instrument closed the connection{part}"
            )
        if received:
            return faults.InstrumentTimeout(
                self.role,
                command,
                f"{received} bytes of a reply, then nothing within {timeout_ms} ms",
            )
        return faults.InstrumentTimeout(self.role, command, f"nothing within {timeout_ms} ms")

    def _tell(self, fault: faults.InstrumentFault) -> None:
        for listener in list(self._fault_listeners):
            try:
                listener(fault)
            except Exception:  # a listener must not hide the fault it was told about
                pass

    def write(self, command: str) -> None:
        """Send a command that changes state. Never retried: it may have taken effect."""
        with self._lock:
            try:
                self._ready()
                self._write(command)
            except faults.ConnectionLost as fault:
                self._tell(fault)
                raise

    def query(self, command: str, *, timeout_ms: int | None = None, repeatable: bool = True) -> str:
        """Send ``command`` and return its one-line reply as text (terminator removed)."""
        ms = timeout_ms or self.profile.default_timeout_ms
        raw = self._exchange(command, ms, lambda w, d: w.read_line(self._term, d), repeatable)
        text = _decode(self.role, command, raw)
        if self.scpi_log is not None:
            self.scpi_log.received(self.role, text)
        return text

    def query_number(
        self, command: str, *, timeout_ms: int | None = None, repeatable: bool = True
    ) -> float:
        """A numeric reply as float; 9.9E37-class answers raise ``Overrange``."""
        text = self.query(command, timeout_ms=timeout_ms, repeatable=repeatable)
        return self._number(command, text, text)

    def _number(self, command: str, text: str, reply: str, operation: str | None = None) -> float:
        try:
            value = float(text)
        except ValueError:
            if operation is None:
                raise faults.GarbageReply(
                    self.role, command, f"not a number: {reply[:40]!r}"
                ) from None
            raise self.not_described(command, f"commands.{operation}", reply, "a number") from None
        if abs(value) >= SCPI_NO_VALUE * 0.999 or value != value:
            raise faults.Overrange(self.role, command, f"answered {reply!r}")
        return value

    def not_described(
        self, command: str, key: str, reply: str, expected: str
    ) -> faults.ReplyNotDescribed:
        """The one-line fault for a reply ``key`` of the profile cannot describe."""
        return faults.ReplyNotDescribed(
            self.role,
            command,
            f"profile {self.profile.path} key {key}: reply {reply[:60]!r} is not {expected}",
        )

    def query_block(
        self,
        command: str,
        dtype: str,
        *,
        timeout_ms: int | None = None,
        into: np.ndarray | None = None,
        send: bool = True,
    ) -> np.ndarray:
        """A binary block reply as a native-byte-order numpy array of ``dtype`` (``>i2``...).

        ``into``: a contiguous native array (a page of a larger record) to receive the codes
        without a copy when the block holds exactly that many; otherwise a new array is
        returned (the caller compares sizes). Safe to repeat (the instrument keeps its last
        record), so retried once after a reconnect if nothing arrived in time or the
        connection dropped. ``send=False``: the query was already sent (a pipelined page);
        only its reply is read, and never retried.
        """
        ms = timeout_ms or self.profile.default_timeout_ms
        kind = np.dtype(dtype)
        # a block that stops flowing for the default timeout is cut short, whatever its total
        stall_s = self.profile.default_timeout_ms / 1000
        target = into.view(np.uint8) if into is not None else None

        def read(wire: Any, deadline: float) -> np.ndarray:
            return read_block(
                wire,
                self._term,
                kind.itemsize,
                deadline,
                stall_s,
                target,
                skip_header=self.profile.echoes_headers,
            )

        raw = self._exchange(command, ms, read, True, send)
        if self.scpi_log is not None:
            self.scpi_log.received(self.role, f"<binary block of {raw.size} bytes>")
        if raw.size % kind.itemsize:
            raise faults.GarbageReply(
                self.role,
                command,
                f"block of {raw.size} bytes is not whole {kind.itemsize}-byte codes",
            )
        codes = raw.view(kind)
        if not kind.isnative:
            # the buffer is ours alone: swap in place, then call it native
            codes = codes.byteswap(inplace=True).view(kind.newbyteorder("="))
        return codes

    # -- profile operations --------------------------------------------------------------
    def command_text(self, operation: str, **fields: Any) -> str:
        return self.profile.command(operation, **fields)

    def _lead_in(self, operation: str, **fields: Any) -> tuple[str, str]:
        """Send the command lines before a query operation's last line (each checked for
        errors); returns the query line and the text that names the whole operation."""
        *before, last = self.profile.lines(operation, **fields)
        for line in before:
            self.write(line)
            self.check_errors(line)
        return last, self.profile.command(operation, **fields)

    def ask(self, operation: str, *, repeatable: bool = True, **fields: Any) -> str:
        """Run a query operation of the profile and return its reply text (an echoed header
        removed when the profile says the instrument echoes them)."""
        with self._lock:
            line, _ = self._lead_in(operation, **fields)
            text = self.query(
                line, timeout_ms=self.profile.timeout_ms(operation), repeatable=repeatable
            )
        return strip_header(text) if self.profile.echoes_headers else text

    def ask_number(self, operation: str, *, repeatable: bool = True, **fields: Any) -> float:
        """Run a numeric query operation of the profile (``Overrange`` on 9.9E37). An echoed
        header, or a header or unit the profile's ``[numbers]`` declares, is stripped;
        anything else around the number is a ``ReplyNotDescribed`` naming the profile file,
        key and reply."""
        command = self.command_text(operation, **fields)
        reply = self.ask(operation, repeatable=repeatable, **fields)
        text = self.profile.numbers.number_text(reply)
        return self._number(command, text if text is not None else reply, reply, operation)

    def ask_meaning(self, operation: str, *, repeatable: bool = True, **fields: Any) -> Any:
        """Run a query answered in words and return what the word means by the profile
        (``True``/``False``, ``"cv"``...); a word it does not map is ``ReplyNotDescribed``."""
        command = self.command_text(operation, **fields)
        reply = self.ask(operation, repeatable=repeatable, **fields)
        meaning = self.profile.reply_meaning(operation, reply)
        if meaning is None:
            known = list(self.profile.replies.get(operation, {}))
            if REPLY_MEANINGS.get(self.profile.kind, {}).get(operation) is bool:
                known += ["1", "0", "ON", "OFF"]
            raise self.not_described(
                command, f"replies.{operation}", reply, f"one of {', '.join(known)}"
            )
        return meaning

    def configure(self, operation: str, **fields: Any) -> str:
        """Send a configuration command (each line of a sequence), draining the error report
        after each line; returns the text sent."""
        # a step with its own timeout (an acquisition, say) may hold up the error query's reply
        wait_ms = max(self.profile.timeout_ms(operation), self.profile.timeout_ms("error_query"))
        with self._lock:
            for line in self.profile.lines(operation, **fields):
                self.write(line)
                self.check_errors(line, timeout_ms=wait_ms)
        return self.command_text(operation, **fields)

    def check_errors(self, after: str | None, *, timeout_ms: int | None = None) -> None:
        """Read the instrument's error report and raise ``InstrumentError`` naming the command
        ``after`` which it followed.

        ``[errors] style = "queue"``: ``SYSTem:ERRor?`` until it answers code 0 (the first
        entry reported, the rest counted). ``"event_register"``: the event status register
        (``*ESR?``, IEEE 488.2 11.5.1); any bit of the profile's mask set is an error, told
        by the ``error_detail?`` query when the profile has one."""
        ms = timeout_ms or self.profile.timeout_ms("error_query")
        if self.profile.error_style == "event_register":
            self._check_event_register(after, ms)
            return
        query = self.command_text("error_query")
        found: list[tuple[int, str]] = []
        with self._lock:
            for _ in range(MAX_ERRORS_DRAINED):
                # Not repeatable: each read removes the entry it reports.
                reply = self._error_reply(query, after, ms)
                code_text, _, message = reply.partition(",")
                try:
                    code = int(float(code_text.strip().lstrip("+")))
                except ValueError:
                    raise faults.GarbageReply(
                        self.role, query, f"not an error-queue entry: {reply[:40]!r}"
                    ) from None
                if code == 0:
                    break
                found.append((code, message.strip().strip('"')))
        if found:
            code, text = found[0]
            more = f" (and {len(found) - 1} more)" if len(found) > 1 else ""
            raise faults.InstrumentError(self.role, after, code, text + more)

    def _error_reply(self, query: str, after: str | None, ms: int) -> str:
        try:
            reply = self.query(query, timeout_ms=ms, repeatable=False)
        except faults.InstrumentFault as exc:
            # name the configuration step too, not only the error query
            sent = f"{after}; {query}" if after else query
            raise type(exc)(exc.instrument, sent, exc.detail) from None
        return strip_header(reply) if self.profile.echoes_headers else reply

    def _check_event_register(self, after: str | None, ms: int) -> None:
        query = self.command_text("error_query")
        with self._lock:
            reply = self._error_reply(query, after, ms)
            try:
                register = int(float(reply.strip().lstrip("+")))
            except ValueError:
                raise faults.GarbageReply(
                    self.role, query, f"not an event status register: {reply[:40]!r}"
                ) from None
            flagged = register & self.profile.error_mask
            if not flagged:
                return
            detail = f"event status register {register} (error bits {flagged})"
            if self.profile.has("error_detail"):
                try:
                    detail = self.ask("error_detail", repeatable=False) or detail
                except faults.InstrumentFault:
                    pass  # the register already says there was an error
        raise faults.InstrumentError(self.role, after, register, detail)

    def identify(self) -> str:
        """``*IDN?`` of the instrument, checked against the profile's identity pattern."""
        command = self.command_text("identify")
        # never header-stripped: an identity may hold a space ("MAKER NAME,MODEL,...")
        identity = self.query(command, timeout_ms=self.profile.timeout_ms("identify"))
        if not self.profile.matches(identity):
            raise faults.UnexpectedIdentity(
                self.role,
                command,
                f"{identity[:72]!r} does not match profile {self.profile.name!r} "
                f"(pattern {self.profile.identity.pattern!r})",
            )
        return identity


_HEADER = re.compile(r"^:?[A-Za-z*][A-Za-z0-9_*]*(?::[A-Za-z*][A-Za-z0-9_*]*)*\s+(\S.*)$", re.S)


def strip_header(text: str) -> str:
    """A reply without the header an instrument echoes before it (``:CH1:SCALE 1.0E0`` ->
    ``1.0E0``; IEEE 488.2 8.7.1 response headers). Text without one is returned as it is."""
    match = _HEADER.match(text.strip())
    return match.group(1).strip() if match else text
