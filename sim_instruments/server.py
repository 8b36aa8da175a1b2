"""A threaded raw-socket SCPI server on 127.0.0.1: one thread and one ``Session`` per client.

Raw-socket instruments (the VISA ``TCPIP::host::port::SOCKET`` resource class) take program
messages terminated by ``\\n`` and answer each message that holds queries with one response
message terminated by ``\\n`` (IEEE 488.2 8.1: response units joined by ``;``). Several clients
may be connected at once, as LAN instruments allow; they share the instrument's state under its
lock but each has its own error queue.
"""

from __future__ import annotations

import contextlib
import socket
import threading

from sim_instruments.scpi import Instrument

__all__ = ["ScpiServer", "MAX_LINE_BYTES"]

#: A program message longer than this is refused (-102) and the buffer dropped.
MAX_LINE_BYTES = 1 << 20


class ScpiServer:
    """Serve ``instrument`` on ``host:port`` (port 0 = a free port chosen by the OS).

    ``start()`` binds and starts the accept thread; ``stop()`` closes the listening socket and
    every client connection and joins the threads. Only loopback addresses are accepted.
    """

    def __init__(self, instrument: Instrument, host: str = "127.0.0.1", port: int = 0) -> None:
        if host not in ("127.0.0.1", "localhost", "::1"):
            raise ValueError(f"the simulated bench serves loopback only, not {host!r}")
        self.instrument = instrument
        self.host = host
        self._requested_port = port
        self._stop = threading.Event()
        self._listener: socket.socket | None = None
        self._accept_thread: threading.Thread | None = None
        self._clients: dict[socket.socket, threading.Thread] = {}
        self._clients_lock = threading.Lock()

    @property
    def port(self) -> int:
        """The TCP port actually bound."""
        if self._listener is None:
            raise RuntimeError("server not started")
        return self._listener.getsockname()[1]

    @property
    def resource(self) -> str:
        """The VISA resource string of this instrument."""
        return f"TCPIP::127.0.0.1::{self.port}::SOCKET"

    def start(self) -> ScpiServer:
        listener = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        listener.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        try:
            listener.bind(("127.0.0.1", self._requested_port))
        except OSError:
            listener.close()
            raise
        listener.listen(16)
        listener.settimeout(0.2)  # so the accept loop notices stop() promptly
        self._listener = listener
        self._accept_thread = threading.Thread(
            target=self._accept_loop, name=f"scpi-accept-{self.port}", daemon=True
        )
        self._accept_thread.start()
        return self

    def stop(self, timeout_s: float = 2.0) -> None:
        """Close the listener and every connection; join the threads (seconds to wait each)."""
        self._stop.set()
        if self._listener is not None:
            with contextlib.suppress(OSError):  # wakes a blocked accept() at once on Linux
                self._listener.shutdown(socket.SHUT_RDWR)
        if self._accept_thread is not None:
            self._accept_thread.join(timeout_s)
        if self._listener is not None:
            self._listener.close()
        with self._clients_lock:
            clients = list(self._clients.items())
        for conn, _ in clients:
            with contextlib.suppress(OSError):
                conn.shutdown(socket.SHUT_RDWR)
        for _, thread in clients:
            thread.join(timeout_s)

    @property
    def client_count(self) -> int:
        """Connections open now."""
        with self._clients_lock:
            return len(self._clients)

    def _accept_loop(self) -> None:
        assert self._listener is not None
        while not self._stop.is_set():
            try:
                conn, _ = self._listener.accept()
            except TimeoutError:
                continue
            except OSError:
                break
            conn.settimeout(None)
            conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
            thread = threading.Thread(
                target=self._serve, args=(conn,), name=f"scpi-client-{self.port}", daemon=True
            )
            with self._clients_lock:
                self._clients[conn] = thread
            thread.start()

    def _serve(self, conn: socket.socket) -> None:
        session = self.instrument.new_session()
        buffer = bytearray()
        try:
            while not self._stop.is_set():
                try:
                    chunk = conn.recv(65536)
                except OSError:
                    break
                if not chunk:
                    break
                buffer += chunk
                while True:
                    end = buffer.find(b"\n")
                    if end < 0:
                        break
                    raw = bytes(buffer[:end])
                    del buffer[: end + 1]
                    if not self._handle_line(conn, session, raw):
                        return
                if len(buffer) > MAX_LINE_BYTES:
                    session.push_error(-102, "program message too long")
                    buffer.clear()
        finally:
            self.instrument.close_session(session)
            with self._clients_lock:
                self._clients.pop(conn, None)
            with contextlib.suppress(OSError):
                conn.close()

    def _handle_line(self, conn: socket.socket, session, raw: bytes) -> bool:
        """Run one program message; False when the connection must close."""
        try:
            line = raw.decode("ascii").strip()
        except UnicodeDecodeError:
            session.push_error(-101, "byte outside ASCII")
            return True
        if not line:
            return True
        replies = session.execute(line)
        if not replies:
            return True
        try:
            return self.instrument.faults.send_reply(conn, replies, self._stop)
        except OSError:
            return False
