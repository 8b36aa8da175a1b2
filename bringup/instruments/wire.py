"""Reading replies off an instrument connection: text lines and IEEE 488.2 binary blocks.

Two ways to read, chosen per connection by ``bringup.instruments.visa``:

- ``SocketWire`` reads straight from the TCP socket under a pyvisa-py SOCKET session (and its
  pending buffer, so nothing PyVISA already received is lost). pyvisa-py receives 4 KiB at a
  time and scans each piece for the termination character, which limits a binary block to
  tens of MB/s; here the block is received in large pieces into one preallocated buffer. It
  also sees a closed connection at once instead of waiting for the timeout.
- ``ResourceWire`` uses only the public PyVISA resource API (``read``, ``read_bytes``) and
  works with any VISA backend.

IEEE 488.2 section 8.7.9/8.7.10: a definite-length block is ``#`` + one digit n + n digits of
byte count + the bytes; an indefinite block is ``#0`` + bytes ended by the terminator (on a
raw socket there is no END line, so the block ends at a terminator followed by silence).
Both wires raise ``WireTimeout`` / ``WireClosed`` (with how many bytes had arrived) and leave
turning them into faults to the session.
"""

from __future__ import annotations

import select
import socket
import time
from typing import Any

import numpy as np

# An indefinite block ends at a terminator after which nothing arrives for this long (s).
INDEFINITE_QUIET_S = 0.05


class WireTimeout(Exception):
    """Nothing (or not enough) arrived before the deadline; ``received`` bytes had come."""

    def __init__(self, received: int = 0):
        super().__init__(received)
        self.received = received
        self.expected: int | None = None  # bytes a block header announced, if any


class WireClosed(Exception):
    """The peer closed the connection; ``received`` bytes of the reply had come."""

    def __init__(self, received: int = 0):
        super().__init__(received)
        self.received = received
        self.expected: int | None = None  # bytes a block header announced, if any


class BlockSyntax(Exception):
    """The reply does not start like a block (``#`` and digits); ``head`` is what came."""

    def __init__(self, head: bytes):
        super().__init__(head)
        self.head = head


class SocketWire:
    """Direct reads on the socket under a pyvisa-py ``TCPIPSocketSession``.

    ``session`` is the backend session object (``rm.visalib.sessions[resource.session]``);
    its ``_pending_buffer`` (bytes received by PyVISA but not yet consumed) is read first and
    whatever this wire receives beyond a reply is put back there.
    """

    def __init__(self, session: Any, chunk_bytes: int = 1 << 20):
        self._session = session
        self.chunk_bytes = chunk_bytes

    @staticmethod
    def fits(session: Any) -> bool:
        """Whether ``session`` has the socket and pending buffer this wire relies on."""
        return isinstance(getattr(session, "interface", None), socket.socket) and isinstance(
            getattr(session, "_pending_buffer", None), bytearray
        )

    @property
    def _sock(self) -> socket.socket:
        return self._session.interface

    @property
    def _pending(self) -> bytearray:
        return self._session._pending_buffer

    def no_delay(self) -> None:
        """Send small commands at once (TCP_NODELAY): otherwise a command followed by its
        error query waits for the delayed ACK of the first, tens of ms per step."""
        self._sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)

    def send(self, data: bytes) -> None:
        """Send ``data`` as it is (a command and its termination) straight on the socket:
        pyvisa-py's write path costs tens of microseconds a line, which a paged read pays
        once per page."""
        self._sock.sendall(data)

    def connect_error(self) -> int:
        """The socket's pending error (``SO_ERROR``): non-zero when the connect was refused."""
        return self._sock.getsockopt(socket.SOL_SOCKET, socket.SO_ERROR)

    def _wait(self, deadline: float, received: int) -> None:
        remaining = deadline - time.monotonic()
        if remaining <= 0:
            raise WireTimeout(received)
        ready, _, _ = select.select([self._sock], [], [], remaining)
        if not ready:
            raise WireTimeout(received)

    def _recv(self, size: int, deadline: float, received: int) -> bytes:
        self._wait(deadline, received)
        try:
            data = self._sock.recv(size)
        except OSError:
            raise WireClosed(received) from None
        if not data:
            raise WireClosed(received)
        return data

    def read_line(self, term: bytes, deadline: float) -> bytes:
        """One reply up to ``term`` (terminator removed); ``deadline`` from ``time.monotonic``."""
        buf = self._pending
        start = 0
        while True:
            index = buf.find(term, start)
            if index >= 0:
                line = bytes(buf[:index])
                del buf[: index + len(term)]
                return line
            start = max(len(buf) - len(term) + 1, 0)
            buf.extend(self._recv(65536, deadline, len(buf)))

    def read_exact(self, count: int, deadline: float) -> bytes:
        """Exactly ``count`` bytes (for block headers: a few bytes)."""
        buf = self._pending
        while len(buf) < count:
            buf.extend(self._recv(max(count - len(buf), 4096), deadline, len(buf)))
        out = bytes(buf[:count])
        del buf[:count]
        return out

    def read_into(self, out: np.ndarray, deadline: float, stall_s: float | None = None) -> None:
        """Fill the uint8 array ``out`` completely: pending bytes first, then large receives.

        ``stall_s``: a block that stops flowing for that many seconds is cut short (times out
        with what arrived) even if the overall ``deadline`` is later."""
        view = memoryview(out).cast("B")
        total = len(view)
        buf = self._pending
        have = min(len(buf), total)
        view[:have] = buf[:have]
        del buf[:have]
        sock = self._sock
        while have < total:
            limit = deadline if stall_s is None else min(deadline, time.monotonic() + stall_s)
            self._wait(limit, have)
            try:
                got = sock.recv_into(view[have:], min(self.chunk_bytes, total - have))
            except OSError:
                raise WireClosed(have) from None
            if got == 0:
                raise WireClosed(have)
            have += got

    def read_indefinite(self, term: bytes, itemsize: int, deadline: float) -> bytes:
        """An indefinite-length block body: up to a terminator that ends a whole number of
        items and is followed by ``INDEFINITE_QUIET_S`` of silence (0x0A bytes inside binary
        data are therefore kept)."""
        buf = self._pending
        while True:
            if buf.endswith(term) and (len(buf) - len(term)) % itemsize == 0:
                quiet = min(time.monotonic() + INDEFINITE_QUIET_S, deadline)
                ready, _, _ = select.select([self._sock], [], [], max(quiet - time.monotonic(), 0))
                if not ready:
                    body = bytes(buf[: -len(term)])
                    buf.clear()
                    return body
            buf.extend(self._recv(self.chunk_bytes, deadline, len(buf)))


class ResourceWire:
    """Reads through the public PyVISA resource API only (any backend).

    ``resource`` is a ``pyvisa.resources.MessageBasedResource`` opened with the profile's
    read termination; binary reads switch the termination character off for their length.
    """

    def __init__(self, resource: Any, chunk_bytes: int = 1 << 20):
        self._res = resource
        self.chunk_bytes = chunk_bytes

    def _run(self, deadline: float, call: Any) -> Any:
        import pyvisa

        remaining_ms = int((deadline - time.monotonic()) * 1000)
        if remaining_ms <= 0:
            raise WireTimeout(0)
        self._res.timeout = remaining_ms
        try:
            return call()
        except pyvisa.errors.VisaIOError as exc:
            if exc.error_code == pyvisa.constants.StatusCode.error_timeout:
                raise WireTimeout(0) from None
            raise WireClosed(0) from None
        except OSError:
            raise WireClosed(0) from None

    def read_line(self, term: bytes, deadline: float) -> bytes:
        return self._run(deadline, lambda: self._res.read_raw()).rstrip(term)

    def read_exact(self, count: int, deadline: float) -> bytes:
        return self._binary(deadline, lambda: self._res.read_bytes(count))

    def _binary(self, deadline: float, call: Any) -> Any:
        saved = self._res.read_termination
        self._res.read_termination = None
        try:
            return self._run(deadline, call)
        finally:
            self._res.read_termination = saved

    def read_into(self, out: np.ndarray, deadline: float, stall_s: float | None = None) -> None:
        data = self._binary(deadline, lambda: self._res.read_bytes(len(out), self.chunk_bytes))
        if len(data) < len(out):
            raise WireClosed(len(data))
        out[:] = np.frombuffer(data, dtype=np.uint8)

    def read_indefinite(self, term: bytes, itemsize: int, deadline: float) -> bytes:
        # VISA marks the end of a message with END; the backend stops there.
        return self._binary(deadline, lambda: self._res.read_raw()).removesuffix(term)


def read_block(
    wire: SocketWire | ResourceWire,
    term: bytes,
    itemsize: int,
    deadline: float,
    stall_s: float | None = None,
    into: np.ndarray | None = None,
    skip_header: bool = False,
) -> np.ndarray:
    """The body of one block reply as a uint8 array, with the terminator after it consumed.

    ``skip_header``: the instrument may echo a response header before the block; skip it.

    ``into``: a uint8 array to receive the body when it is exactly that long (a page of a
    larger record, read in place); a body of another length gets a new array.

    Leading whitespace before ``#`` is skipped (IEEE 488.2 allows it in responses). A block
    whose terminator is missing after the announced bytes raises ``BlockSyntax`` so that the
    caller resynchronises rather than reading a shifted reply next time.
    """
    first = wire.read_exact(1, deadline)
    while first in (b" ", b"\t", b"\r"):
        first = wire.read_exact(1, deadline)
    if skip_header and (first in (b":", b"*") or first.isalpha()):
        # an echoed response header (``:CURVE #...``, IEEE 488.2 8.7.1), up to its space
        head = first
        while first != b" " and len(head) < 64:
            first = wire.read_exact(1, deadline)
            head += first
        while first == b" ":
            first = wire.read_exact(1, deadline)
    if first != b"#":
        raise BlockSyntax(first)
    digit = wire.read_exact(1, deadline)
    if not digit.isdigit():
        raise BlockSyntax(first + digit)
    digits = int(digit)
    if digits == 0:
        body = bytearray(wire.read_indefinite(term, itemsize, deadline))
        return np.frombuffer(body, dtype=np.uint8)  # writable: callers may swap in place
    count_text = wire.read_exact(digits, deadline)
    if not count_text.isdigit():
        raise BlockSyntax(first + digit + count_text)
    count = int(count_text)
    out = into if into is not None and len(into) == count else np.empty(count, dtype=np.uint8)
    try:
        wire.read_into(out, deadline, stall_s)
    except (WireTimeout, WireClosed) as exc:
        exc.expected = len(out)
        raise
    tail = wire.read_exact(len(term), deadline)
    if tail != term:
        raise BlockSyntax(b"<block of " + count_text + b" bytes then " + repr(tail).encode() + b">")
    return out
