"""Trigger to verdict of one 10 Mpt edges step, against two raw transfers and two histograms.

The simulated scope holds one acquisition of the switch node (CH2) and Vgs (CH3, its
differential probe), 10 Mpt each. The step, timed from the record being ready: the driver fetches both channels
(``Scope.fetch_waveform``: format, preamble, block, record check), makes volts, measures the
edges of both (``measure_edges``), finds Vgs's Miller plateau and compresses both records as
the log stores them (``encode_waveform``; the SQLite insert itself is left out). The
reference: a plain socket client reading the same two blocks plus one ``numpy.histogram``
(100 bins) of each record in volts. Interleaved repeats, best of each (target <= 2x).

    python benchmarks/bench_edge_step.py [--points N] [--repeats R]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))
from bench_driver_transfer import RawClient  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, default=10_000_000)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()

    from bringup.analysis.edges import measure_edges
    from bringup.analysis.plateau import find_miller_plateau
    from bringup.commands.sim import load_design
    from bringup.instruments.bench import load_bench, open_bench
    from bringup.instruments.safety import energised
    from bringup.store.waveforms import StoredWaveform, encode_waveform
    from sim_instruments.bench import start_bench

    def step(scope) -> tuple:
        out = []
        for channel in (2, 3):
            wf = scope.fetch_waveform(channel)
            volts = wf.volts()
            out.append(measure_edges(volts, wf.x_increment, wf.x_origin))
            if channel == 3:
                out.append(find_miller_plateau(volts, wf.x_increment, wf.x_origin))
            encode_waveform(StoredWaveform(wf.codes, wf.x_increment, wf.x_origin,
                                           wf.y_increment, wf.y_origin))  # fmt: skip
        return tuple(out)

    sim = start_bench(load_design("demo"), scenario="healthy", seed=0)
    try:
        path = Path(tempfile.mkdtemp()) / "bench.toml"
        path.write_text(sim.bench_file_text())
        with open_bench(load_bench(path)) as bench:
            scope = bench.scope
            # the simulated bench's wiring: CH2 on the switch node, CH3 on Vgs (differential)
            scope.configure_channel(2, range_v=32.0, offset_v=12.0)
            scope.configure_channel(3, range_v=16.0, offset_v=6.0)
            scope.configure_timebase(duration_s=2e-3, points=args.points, start_s=-1e-4)
            scope.configure_trigger(source=2, level_v=12.0)
            with energised(bench, volts=24.0, current_limit_a=8.0, ovp_v=27.0):
                bench.simulation.set_pwm(True)
                scope.acquire()
            step(scope)  # warm-up: the sim encodes and caches both blocks
            volts = {n: scope.fetch_waveform(n).volts() for n in (2, 3)}
            raw_client = RawClient("127.0.0.1", int(sim.resources["scope"].split("::")[2]))
            words = bench.profiles["scope"]
            native = "order_little" if sys.byteorder == "little" else "order_big"
            raw_client.sock.sendall(f"FORM INT,16;:FORM:BORD {words.word(native)}\n".encode())
            runs: dict[str, list[float]] = {"reference": [], "step": []}
            for _ in range(args.repeats):
                start = time.perf_counter()
                for n in (2, 3):
                    raw_client.read_block(f"TRAC? CH{n}\n".encode())
                    np.histogram(volts[n], bins=100)
                runs["reference"].append(time.perf_counter() - start)
                start = time.perf_counter()
                step(scope)
                runs["step"].append(time.perf_counter() - start)
            raw_client.close()
    finally:
        sim.stop()
    ref, took = min(runs["reference"]), min(runs["step"])
    ratio = took / ref
    print(f"{args.points:,} points x 2 channels, best of {args.repeats} interleaved repeats")
    print(f"  two raw transfers + one numpy.histogram each   {ref * 1e3:8.1f} ms")
    print(f"  fetch + volts + edges + plateau + compress     {took * 1e3:8.1f} ms")
    print(f"trigger to verdict / reference = {ratio:.2f}x (target <= 2x) "
          f"{'OK' if ratio <= 2 else 'OVER'}")  # fmt: skip


if __name__ == "__main__":
    main()
