"""Paged waveform read: a 10 Mpt record from the simulated scope's ten-field dialect, which
returns at most 250 000 points per ``:WAVeform:DATA?``, read page by page through the shipped
``rigol-ds1000z`` profile into one record, against one plain socket read of the same bytes
from the same server (its page limit lifted for that read only). Same run, same machine.

Prints each rate and the paged read's fraction of the plain read's (target >= 0.5), for the
pages alone (``Scope._read_codes``) and for the whole fetch (source, format, preamble, scale,
pages, and the record check against the scope's own mean and peak-to-peak).
Run: ``python benchmarks/bench_paged_read.py [--points N] [--repeats R]``.
"""

from __future__ import annotations

import argparse
import socket
import statistics
import tempfile
import time
from pathlib import Path

import numpy as np


def _exactly(sock: socket.socket, count: int) -> bytes:
    data = b""
    while len(data) < count:
        data += sock.recv(count - len(data))
    return data


def plain_read(sock: socket.socket, points: int) -> np.ndarray:
    """The whole record in one ``:WAVeform:DATA?``: header, then the bytes into one buffer."""
    sock.sendall(b":WAVeform:STARt 1\n:WAVeform:STOP %d\n:WAVeform:DATA?\n" % points)
    head = _exactly(sock, 2)
    count = int(_exactly(sock, int(head[1:2])))
    out = np.empty(count + 1, dtype=np.uint8)
    view = memoryview(out)
    have = 0
    while have < count + 1:
        have += sock.recv_into(view[have:], min(1 << 22, count + 1 - have))
    return out[:count]


def timed(fn, repeats: int) -> tuple[float, object]:
    times, result = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        result = fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times), result


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=10_000_000)
    parser.add_argument("--repeats", type=int, default=5)
    args = parser.parse_args()
    points = args.points

    from bringup.commands.sim import load_design
    from bringup.instruments.bench import load_bench, open_bench
    from sim_instruments.bench import start_bench

    sim = start_bench(load_design("demo"), dialects={"scope": "tenfield"})
    try:
        path = Path(tempfile.mkdtemp()) / "bench.toml"
        path.write_text(sim.bench_file_text())
        with open_bench(load_bench(path)) as bench:
            scope = bench.scope
            scope.configure_channel(2, range_v=48.0, offset_v=18.0)
            scope.configure_timebase(duration_s=1e-3, points=points, start_s=-1e-4)
            scope.configure_trigger(source=2, level_v=12.0)
            scope.acquire()
            fields = scope._fields(2)
            bench.sessions["scope"].configure("data_source", **fields)
            scope._send_format()
            page_s, codes = timed(lambda: scope._read_codes(fields, points), args.repeats)
            fetch_s, wf = timed(lambda: scope.fetch_waveform(2), args.repeats)
        dialect = sim.scope.dialect
        dialect.MAX_BYTE_POINTS = points  # the reference reads everything at once
        dialect.source = "CH2"
        host, port = sim.resources["scope"].split("::")[1:3]
        sock = socket.create_connection((host, int(port)))
        sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
        try:
            plain_s, raw = timed(lambda: plain_read(sock, points), args.repeats)
        finally:
            sock.close()
    finally:
        sim.stop()
    assert np.array_equal(np.asarray(codes), raw), "paged and plain reads differ"
    assert wf.points == points
    mb = points / 1e6
    print(f"{points} points, {points // 250_000 + (points % 250_000 > 0)} pages of 250 000")
    print(f"plain socket, one read      {plain_s * 1e3:8.1f} ms  {mb / plain_s:8.1f} MB/s")
    print(
        f"driver, pages only          {page_s * 1e3:8.1f} ms  {mb / page_s:8.1f} MB/s  "
        f"ratio {plain_s / page_s:.2f} (target >= 0.5)"
    )
    print(
        f"driver, whole checked fetch {fetch_s * 1e3:8.1f} ms  {mb / fetch_s:8.1f} MB/s  "
        f"ratio {plain_s / fetch_s:.2f}"
    )


if __name__ == "__main__":
    main()
