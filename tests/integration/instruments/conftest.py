"""Fixtures of the instrument-layer tests.

``scripted_server``: a tiny real TCP server on 127.0.0.1 whose replies a test scripts byte by
byte (for block formats the simulated bench does not send, such as ``#0`` blocks, and for
exact fault timing). ``fast_profiles``: a user profile folder with copies of the built-in
profiles whose timeouts are short, so fault tests do not wait for the bench defaults.
"""

from __future__ import annotations

import re
import socket
import threading
from collections.abc import Callable, Iterator
from pathlib import Path

import pytest

from bringup.instruments.profiles import BUILTIN_DIR

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


def write_fast_profiles(folder: Path, default_ms: int = 400) -> Path:
    """Copy every built-in profile into ``folder`` with every timeout set to ``default_ms``."""
    folder.mkdir(parents=True, exist_ok=True)
    for path in BUILTIN_DIR.glob("*.toml"):
        text = path.read_text()
        text = re.sub(r"(?m)^(default) = \d+", rf"\1 = {default_ms}", text)
        (folder / path.name).write_text(text)
    return folder


@pytest.fixture
def fast_profiles(tmp_path: Path) -> Path:
    return write_fast_profiles(tmp_path / "profiles")
