"""Waveform transfer: a 10 Mpt int16 record from the simulated scope, in one run, through

- the driver (``Scope.fetch_waveform``: format commands, preamble, block, byte swap),
- the driver's block read alone (``InstrumentSession.query_block``),
- the driver on the public PyVISA API only (``fast_reads=False``),
- PyVISA's stock ``query_binary_values``,
- a plain socket client (header, then ``recv_into`` a preallocated buffer): the reference.

The driver asks for this host's byte order (the simulated scope's profile can say both), so
no record is swapped; the plain socket reads the same bytes. Interleaved repeats, the best of
each. Prints each throughput and its fraction of the plain socket's (target for the driver:
>= 0.8).
Run: ``python benchmarks/bench_driver_transfer.py [--points N] [--repeats R]``.
"""

from __future__ import annotations

import argparse
import socket
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np


class RawClient:
    """A plain socket client on one kept-open connection (as the driver keeps its own)."""

    def __init__(self, host: str, port: int):
        self.sock = socket.create_connection((host, port))
        self.sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)

    def _exactly(self, count: int) -> bytes:
        data = b""
        while len(data) < count:
            data += self.sock.recv(count - len(data))
        return data

    def read_block(self, command: bytes) -> np.ndarray:
        """One block: header, exactly the announced bytes (+ the terminator) into one buffer."""
        self.sock.sendall(command)
        head = self._exactly(2)
        count = int(self._exactly(int(head[1:2])))
        out = np.empty(count + 1, dtype=np.uint8)
        view = memoryview(out)
        have = 0
        while have < count + 1:
            have += self.sock.recv_into(view[have:], min(1 << 22, count + 1 - have))
        return out[:count]

    def close(self) -> None:
        self.sock.close()


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

    from bringup.commands.sim import load_design
    from bringup.instruments.bench import load_bench, open_bench
    from bringup.instruments.safety import energised
    from bringup.instruments.visa import InstrumentSession, resource_manager
    from sim_instruments.bench import start_bench

    sim = start_bench(load_design("demo"), scenario="healthy", seed=0)
    try:
        path = Path(tempfile.mkdtemp()) / "bench.toml"
        path.write_text(sim.bench_file_text())
        with open_bench(load_bench(path)) as bench:
            scope = bench.scope
            scope.configure_timebase(duration_s=2e-3, points=args.points, start_s=-1e-4)
            with energised(bench, volts=24.0, current_limit_a=8.0, ovp_v=27.0):
                bench.simulation.set_pwm(True)
                start = time.perf_counter()
                scope.acquire()
                print(
                    f"acquired {args.points:,} points in {time.perf_counter() - start:.1f} s (sim)"
                )
            first = scope.fetch_waveform(1)  # warm-up: the sim encodes and caches the block
            nbytes = first.codes.nbytes
            session = bench.sessions["scope"]
            raw_client = RawClient("127.0.0.1", int(sim.resources["scope"].split("::")[2]))
            # the bytes the driver asks for (this host's byte order: the profile can say both),
            # the format set once: the bare query is the plain client's whole exchange
            words = bench.profiles["scope"]
            native = "order_little" if sys.byteorder == "little" else "order_big"
            here = "<i2" if sys.byteorder == "little" else ">i2"
            raw_client.sock.sendall(f"FORM INT,16;:FORM:BORD {words.word(native)}\n".encode())
            ask = b"TRAC? CH1\n"
            # interleaved, so that a busy machine slows every contender alike
            runs: dict[str, list[float]] = {"raw": [], "driver": [], "block": []}
            for _ in range(args.repeats):
                t, raw = timed(lambda: raw_client.read_block(ask), 1)
                runs["raw"].append(t)
                t, wf = timed(lambda: scope.fetch_waveform(1), 1)
                runs["driver"].append(t)
                t, codes = timed(lambda: session.query_block("TRAC? CH1", here), 1)
                runs["block"].append(t)
            t_raw, t_driver, t_block = (min(runs[k]) for k in ("raw", "driver", "block"))
            raw_client.close()
            # the same record sent in the other byte order: swapped in place on arrival
            other = "order_big" if native == "order_little" else "order_little"
            session.configure("byte_order", order=words.word(other))
            there = ">i2" if here == "<i2" else "<i2"
            t_swapped, codes_swapped = timed(
                lambda: session.query_block("TRAC? CH1", there), args.repeats
            )
            session.configure("byte_order", order=words.word(native))

            slow = InstrumentSession(
                "scope", sim.resources["scope"], bench.profiles["scope"], fast_reads=False
            )
            slow.open()
            t_public, codes_public = timed(
                lambda: slow.query_block("TRAC? CH1", here, timeout_ms=60_000), args.repeats
            )
            slow.close()

            rm = resource_manager()
            res = rm.open_resource(
                sim.resources["scope"],
                read_termination="\n",
                write_termination="\n",
                timeout=60_000,
            )
            t_stock, stock = timed(
                lambda: res.query_binary_values(
                    "TRAC? CH1",
                    datatype="h",
                    is_big_endian=sys.byteorder == "big",
                    container=np.array,
                    chunk_size=1 << 20,
                ),
                max(1, args.repeats // 2),
            )
            res.close()
    finally:
        sim.stop()

    reference = np.frombuffer(raw, dtype=here)
    for name, got in (
        ("driver", wf.codes),
        ("block", codes),
        ("swapped", codes_swapped),
        ("public", codes_public),
        ("stock", stock),
    ):
        if not np.array_equal(got, reference):
            raise SystemExit(f"{name} read differs from the plain socket's block")

    def line(label: str, seconds: float) -> str:
        rate = nbytes / seconds / 1e6
        return (
            f"{label:<44} {seconds * 1000:8.1f} ms {rate:8.0f} MB/s  {t_raw / seconds:5.2f} x raw"
        )

    print(f"block: {args.points:,} int16 points = {nbytes / 1e6:.0f} MB, best of {args.repeats}")
    print(line("plain socket (reference)", t_raw))
    print(line("driver fetch_waveform (with preamble, checks)", t_driver))
    print(line("driver query_block (block read alone)", t_block))
    print(line("driver query_block, other byte order (swap)", t_swapped))
    print(line("driver on public PyVISA API (fast_reads=False)", t_public))
    print(line("pyvisa query_binary_values (stock)", t_stock))
    ratio = t_raw / t_driver
    print(
        f"driver / raw socket = {ratio:.2f} (target >= 0.8: {'met' if ratio >= 0.8 else 'NOT met'})"
    )


if __name__ == "__main__":
    main()
