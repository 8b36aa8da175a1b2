"""Waveform transfer rate of the simulated scope against a socket server that only sends bytes.

Fetches a 10 Mpt int16 record (20 MB definite-length block) from the sim scope with a plain
socket client, and in the same run the same bytes from a minimal server that sends a prepared
buffer; prints the sim's rate as a fraction of the minimal server's (target >= 0.5: no Python
loop over samples anywhere on the path). The sim encodes a record (ADC codes to big-endian
int16) at the end of the acquisition, for the format set at that moment, and every fetch
sends that buffer; the first fetch on a fresh connection is reported apart.

    .venv/bin/python benchmarks/bench_sim_transfer.py
"""

from __future__ import annotations

import socket
import statistics
import sys
import threading
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from bringup.commands.sim import load_design  # noqa: E402
from sim_instruments.bench import start_bench  # noqa: E402

POINTS = 10_000_000
REPEATS = 7


def fetch(sock: socket.socket, buf: bytearray, command: bytes = b"TRAC? CH2\n") -> int:
    """Send a query and read one definite-length block plus its terminator; returns bytes."""
    sock.sendall(command)
    head = _recv_exact(sock, 2)
    digits = int(head[1:2])
    count = int(_recv_exact(sock, digits))
    need = count + 1
    view = memoryview(buf)[:need]
    got = 0
    while got < need:
        n = sock.recv_into(view[got:], need - got)
        if n == 0:
            raise ConnectionError("connection closed mid-block")
        got += n
    assert buf[count] == 0x0A
    return 2 + digits + need


def _recv_exact(sock: socket.socket, n: int) -> bytes:
    out = b""
    while len(out) < n:
        chunk = sock.recv(n - len(out))
        if not chunk:
            raise ConnectionError("connection closed")
        out += chunk
    return out


def minimal_server(payload: bytes) -> tuple[socket.socket, threading.Thread]:
    """A server that answers every line with ``payload`` (one ``sendall``)."""
    listener = socket.socket()
    listener.bind(("127.0.0.1", 0))
    listener.listen(1)

    def serve() -> None:
        conn, _ = listener.accept()
        conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
        with conn:
            pending = b""
            while True:
                data = conn.recv(4096)
                if not data:
                    return
                pending += data
                while b"\n" in pending:
                    _, pending = pending.split(b"\n", 1)
                    conn.sendall(payload)

    thread = threading.Thread(target=serve, daemon=True)
    thread.start()
    return listener, thread


def timed_fetches(port: int, buf: bytearray) -> list[float]:
    """Seconds per fetch, ``REPEATS`` fetches on one connection."""
    with socket.create_connection(("127.0.0.1", port)) as sock:
        sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, 4 << 20)
        times = []
        for _ in range(REPEATS):
            t0 = time.perf_counter()
            fetch(sock, buf)
            times.append(time.perf_counter() - t0)
        return times


def main() -> int:
    with start_bench(load_design("demo")) as bench:
        with socket.create_connection(("127.0.0.1", bench.servers["scope"].port)) as ctl:
            ctl.sendall(
                b"INP1 OFF;INP3 OFF;INP4 OFF;SIM:PWM ON;FORM INT,16;FORM:BORD NORM;"
                + f"SWE:POIN {POINTS};SWE:TIME 1E-3;INIT;*OPC?\n".encode()
            )
            assert ctl.recv(16).strip() == b"1"
        # the exact bytes the sim sends, for the minimal server
        record = bench.scope.record
        payload = bench.scope.encode(record, "CH2", "INT16", "NORM")
        body = memoryview(payload).cast("B").tobytes()
        block = f"#{len(str(len(body)))}{len(body)}".encode() + body + b"\n"
        buf = bytearray(len(body) + 1)
        sim_times = timed_fetches(bench.servers["scope"].port, buf)
        listener, _ = minimal_server(block)
        with listener:
            ref_times = timed_fetches(listener.getsockname()[1], buf)
    size_mb = len(block) / 1e6
    sim_rate = size_mb / statistics.median(sim_times)
    ref_rate = size_mb / statistics.median(ref_times)
    print(f"10 Mpt int16 block, {size_mb:.1f} MB, {REPEATS} fetches each, median:")
    print(
        f"  sim scope        {sim_rate:8.0f} MB/s (first fetch: {size_mb / sim_times[0]:.0f} MB/s)"
    )
    print(
        f"  minimal server   {ref_rate:8.0f} MB/s (first fetch: {size_mb / ref_times[0]:.0f} MB/s)"
    )
    print(
        f"sim / minimal = {sim_rate / ref_rate:.2f} (target >= 0.5); "
        f"first fetch / minimal = {(size_mb / sim_times[0]) / ref_rate:.2f}"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
