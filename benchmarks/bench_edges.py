"""Edge analysis of a 10-Msample float32 record with ~2,000 noisy edges.

Prints the analysis time as a ratio to one ``numpy.histogram`` (100 bins) of the same array,
measured in the same run (target: <= 4x), and the peak memory that ``tracemalloc`` sees during
the analysis as a multiple of the record's size (target: a few copies at most).

    python benchmarks/bench_edges.py [--samples N] [--edges K] [--repeat R]
"""

from __future__ import annotations

import argparse
import time
import tracemalloc

import numpy as np

from bringup.analysis.edges import measure_edges


def build_record(samples: int, edges: int, seed: int = 181) -> tuple[np.ndarray, float]:
    """A 0/12 V PWM with RC edges, ringing, noise and 8-bit quantisation, as float32."""
    rng = np.random.default_rng(seed)
    dt = 1e-9
    period = max(2 * samples // edges, 20)  # samples per period: two edges each
    duty = 0.35
    tau = max(period / 400, 1.0)  # edge time constant in samples
    phase = np.arange(samples, dtype=np.float32) % np.float32(period)
    on = phase < duty * period
    since = np.where(on, phase, phase - np.float32(duty * period))
    decay = np.exp(-since / np.float32(tau))
    y = np.where(on, 1 - decay, decay)
    ring = 0.08 * np.exp(-since / np.float32(4 * tau)) * np.sin(since / np.float32(1.3 * tau))
    y = (y + np.where(on, ring, -ring)) * np.float32(12.0) + np.float32(0.4)
    y += rng.normal(0.0, 0.06, samples).astype(np.float32)
    lsb = np.float32(16.0 / 256)  # 8-bit scope, 16 V full scale
    y = (np.round(y / lsb) * lsb).astype(np.float32)
    return y, dt


def best_of(repeat: int, fn) -> float:
    best = float("inf")
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--samples", type=int, default=10_000_000)
    parser.add_argument("--edges", type=int, default=2000)
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()

    y, dt = build_record(args.samples, args.edges)
    record_bytes = y.nbytes
    t_hist = best_of(args.repeat, lambda: np.histogram(y, bins=100))
    t_edges = best_of(args.repeat, lambda: measure_edges(y, dt))
    metrics = measure_edges(y, dt)

    tracemalloc.start()
    measure_edges(y, dt)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()

    print(
        f"record: {y.size:,} samples float32 ({record_bytes / 1e6:.0f} MB), {metrics.edges} edges"
    )
    print(
        f"levels {metrics.low_level_v:.3f}/{metrics.high_level_v:.3f} V ({metrics.level_method}), "
        f"rise {metrics.rise_time_s * 1e9:.1f} ns, fall {metrics.fall_time_s * 1e9:.1f} ns, "
        f"duty {metrics.duty_cycle:.4f}"
    )
    print(f"numpy.histogram: {t_hist * 1e3:.1f} ms")
    print(f"measure_edges:   {t_edges * 1e3:.1f} ms")
    ratio = t_edges / t_hist
    print(
        f"ratio: {ratio:.2f}x one numpy.histogram (target <= 4x) {'OK' if ratio <= 4 else 'OVER'}"
    )
    mem = peak / record_bytes
    print(f"peak memory during analysis: {peak / 1e6:.1f} MB = {mem:.2f}x the record")


if __name__ == "__main__":
    main()
