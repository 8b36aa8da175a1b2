"""Fixtures of the instrument-layer tests.

``scripted_server``: a tiny real TCP server on 127.0.0.1 whose replies a test scripts byte by
byte (for block formats the simulated bench does not send, such as ``#0`` blocks, and for
exact fault timing); ``.received`` lists every command line it got, in order.

``short_timeouts``: cuts the timeouts of named operations of one session's profile to
``SHORT_TIMEOUT_MS``, for the calls that are expected to time out and nothing else::

    short_timeouts(bench.sessions["scope"], "measure_mean")   # only this operation waits 400 ms
    ...                                                        # the faulty call
    short_timeouts.restore()          # the profiles' own timeouts again (also at teardown)

With ``block_stall=True`` the profile default is cut too: it is how long a binary block may stop
flowing before it counts as cut short (and the timeout of bare queries and reconnects, so use it
only around the one block read). Everything that should succeed keeps the built-in profiles'
timeouts (2 s and more), so a loaded machine does not turn a slow reply into a failure.
"""

from __future__ import annotations

import dataclasses
import socket
import threading
from collections.abc import Callable, Iterator

import pytest

# A responder gets (command line, connection number) and returns the bytes to send, None for
# no reply, or a list of steps: bytes to send, "close" to drop the connection, "hang" to
# send nothing more until the client goes away.
Responder = Callable[[str, int], object]


class ScriptedServer:
    """Serves ``responder`` on a free loopback port, one thread per connection."""

    def __init__(self, responder: Responder):
        self.responder = responder
        self.listener = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        self.listener.bind(("127.0.0.1", 0))
        self.listener.listen(8)
        self.listener.settimeout(0.1)
        self.port = self.listener.getsockname()[1]
        self.connections = 0
        self.received: list[str] = []
        self._stop = threading.Event()
        self._threads: list[threading.Thread] = []
        self._conns: list[socket.socket] = []
        self._accept = threading.Thread(target=self._loop, daemon=True)
        self._accept.start()

    @property
    def resource(self) -> str:
        return f"TCPIP::127.0.0.1::{self.port}::SOCKET"

    def _loop(self) -> None:
        while not self._stop.is_set():
            try:
                conn, _ = self.listener.accept()
            except TimeoutError:
                continue
            except OSError:
                return
            self.connections += 1
            self._conns.append(conn)
            t = threading.Thread(target=self._serve, args=(conn, self.connections), daemon=True)
            self._threads.append(t)
            t.start()

    def _serve(self, conn: socket.socket, number: int) -> None:
        buf = bytearray()
        try:
            while not self._stop.is_set():
                data = conn.recv(65536)
                if not data:
                    return
                buf += data
                while b"\n" in buf:
                    line, _, rest = bytes(buf).partition(b"\n")
                    buf[:] = rest
                    text = line.decode()
                    self.received.append(text)
                    reply = self.responder(text, number)
                    steps = reply if isinstance(reply, list) else [reply]
                    for step in steps:
                        if step is None:
                            continue
                        if step == "close":
                            conn.close()
                            return
                        if step == "hang":
                            self._stop.wait()
                            return
                        conn.sendall(step)
        except OSError:
            return
        finally:
            conn.close()

    def stop(self) -> None:
        self._stop.set()
        self.listener.close()
        for conn in self._conns:
            try:
                conn.shutdown(socket.SHUT_RDWR)
            except OSError:
                pass
        for t in self._threads:
            t.join(2)
        self._accept.join(2)


@pytest.fixture
def scripted_server() -> Iterator[Callable[[Responder], ScriptedServer]]:
    servers: list[ScriptedServer] = []

    def start(responder: Responder) -> ScriptedServer:
        server = ScriptedServer(responder)
        servers.append(server)
        return server

    yield start
    for server in servers:
        server.stop()


#: The timeout (ms) of calls that are expected to time out; the faults they meet are far longer.
SHORT_TIMEOUT_MS = 400


class ShortTimeouts:
    """Swaps a session's profile for a copy with some timeouts cut; ``restore`` undoes it.

    The copy lists every operation's own timeout explicitly, so only the named operations (and,
    with ``block_stall``, the default) change. Drivers read operation timeouts through the
    session's profile, except the scope's waveform read, which keeps its long deadline: a cut
    block is then found by the stall (``block_stall=True``)."""

    ms = SHORT_TIMEOUT_MS

    def __init__(self) -> None:
        self._saved: list[tuple[object, object]] = []

    def __call__(self, session, *operations: str, block_stall: bool = False) -> None:
        ms = self.ms
        profile = session.profile
        unknown = set(operations) - set(profile.commands)
        assert not unknown, f"not operations of {profile.name}: {sorted(unknown)}"
        timeouts = {op: profile.timeout_ms(op) for op in profile.commands}
        timeouts.update({op: ms for op in operations})
        self._saved.append((session, profile))
        session.profile = dataclasses.replace(
            profile,
            default_timeout_ms=ms if block_stall else profile.default_timeout_ms,
            timeouts_ms=timeouts,
        )

    def restore(self) -> None:
        while self._saved:
            session, profile = self._saved.pop()
            session.profile = profile


@pytest.fixture
def short_timeouts() -> Iterator[ShortTimeouts]:
    cut = ShortTimeouts()
    yield cut
    cut.restore()
