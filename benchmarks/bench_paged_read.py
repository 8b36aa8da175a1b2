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


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=10_000_000)
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument(
        "--pipeline", action="store_true", help="ask for each next page before reading this one"
    )
    args = parser.parse_args()
    points = args.points

    from bringup.commands.sim import load_design
    from bringup.instruments.bench import load_bench, open_bench
    from bringup.instruments.profiles import BUILTIN_DIR
    from sim_instruments.bench import start_bench

    sim = start_bench(load_design("demo"), dialects={"scope": "tenfield"})
    try:
        folder = Path(tempfile.mkdtemp())
        path = folder / "bench.toml"
        path.write_text(sim.bench_file_text())
        profiles = None
        if args.pipeline:  # the shipped profile with [block] pipeline = true
            profiles = folder / "profiles"
            profiles.mkdir()
            text = (BUILTIN_DIR / "rigol-ds1000z.toml").read_text()
            text = text.replace("page_points = 250000", "page_points = 250000\npipeline = true")
            (profiles / "rigol-ds1000z.toml").write_text(text)
        with open_bench(load_bench(path), profiles_dir=profiles) as bench:
            scope = bench.scope
            scope.configure_channel(2, range_v=48.0, offset_v=18.0)
            scope.configure_timebase(duration_s=1e-3, points=points, start_s=-1e-4)
            scope.configure_trigger(source=2, level_v=12.0)
            scope.acquire()
            fields = scope._fields(2)
            bench.sessions["scope"].configure("data_source", **fields)
            scope._send_format()
            dialect = sim.scope.dialect
            host, port = sim.resources["scope"].split("::")[1:3]
            sock = socket.create_connection((host, int(port)))
            sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
            times: dict[str, list[float]] = {"plain": [], "pages": [], "fetch": []}
            try:
                # interleaved, so that the three see the same load on a shared machine
                for _ in range(args.repeats):
                    dialect.MAX_BYTE_POINTS = points  # the reference reads it all at once
                    start = time.perf_counter()
                    raw = plain_read(sock, points)
                    times["plain"].append(time.perf_counter() - start)
                    dialect.MAX_BYTE_POINTS = 250_000  # the family's own limit again
                    start = time.perf_counter()
                    codes = scope._read_codes(fields, points)
                    times["pages"].append(time.perf_counter() - start)
                    start = time.perf_counter()
                    wf = scope.fetch_waveform(2)
                    times["fetch"].append(time.perf_counter() - start)
            finally:
                sock.close()
    finally:
        sim.stop()
    assert np.array_equal(np.asarray(codes), raw), "paged and plain reads differ"
    assert wf.points == points
    mb = points / 1e6
    pages = points // 250_000 + (points % 250_000 > 0)
    print(f"{points} points, {pages} pages of 250 000{', pipelined' if args.pipeline else ''}, "
          f"{args.repeats} interleaved repeats (best / median)")  # fmt: skip
    best = {k: min(v) for k, v in times.items()}
    median = {k: statistics.median(v) for k, v in times.items()}
    for key, label in (("plain", "plain socket, one read"), ("pages", "driver, pages only"),
                       ("fetch", "driver, whole checked fetch")):  # fmt: skip
        ratio = (
            ""
            if key == "plain"
            else (f"  ratio {best['plain'] / best[key]:.2f} / {median['plain'] / median[key]:.2f}")
        )
        target = " (target >= 0.5)" if key == "pages" else ""
        print(f"{label:28} {best[key] * 1e3:7.1f} / {median[key] * 1e3:7.1f} ms "
              f"{mb / best[key]:8.1f} MB/s{ratio}{target}")  # fmt: skip


if __name__ == "__main__":
    main()
