"""``bringup batch`` over 1,000 sessions against the sessions listing of the same log.

One healthy and one weak-bootstrap board are really run on the simulated bench (``bringup run
--sim --auto``) into a template log. The large log is made from them through the log's own
write API (``SessionLog.create_session``, ``record_attempt``, ``record_event``): N sessions of
one board revision, each a copy of a template session's snapshots and attempts (every 25th of
the weak one) with every metric value moved by a small random amount, so that the batch has
real spread. Waveforms are not copied (the batch never reads samples; it does read each
attempt's waveform descriptions, so the copies' reads are a little lighter than real ones).

The logs are written in ``/dev/shm`` when there is one (a memory file system: the build
makes one transaction per attempt, and on a disk each one waits for its sync).

Printed, each the best of ``--repeat`` runs, alternating:

- in one process: ``collect_batch`` over the log / the reads it cannot do without, timed
  alone: ``sessions()`` and ``attempts(id)`` of every session through the same reader
  (target <= 2x: the batch's own work is small beside reading the attempts); and, for
  scale, / ``sessions()`` alone (the listing);
- ``collect_batch`` on N sessions / 10 x on N/10 sessions (linear: target <= 1.5);
- new processes: ``bringup batch --json`` / ``bringup sessions --json`` on the same log.

    python benchmarks/bench_batch.py [--sessions N] [--repeat R]
"""

from __future__ import annotations

import argparse
import math
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from bringup.batch.collect import collect_batch
from bringup.store import SessionLog


def _run_templates(folder: Path) -> Path:
    """Two real headless runs on the simulated bench (healthy, weak-bootstrap)."""
    db = folder / "template.db"
    env = {**os.environ, "BRINGUP_LOCK_DIR": str(folder / "locks")}
    for serial, scenario, seed in (
        ("DHS24-9001", "healthy", 1),
        ("DHS24-9002", "weak-bootstrap", 2),
    ):
        subprocess.run(
            [sys.executable, "-m", "bringup", "run", "--sim", "--auto", "--scenario", scenario,
             "--seed", str(seed), "--serial", serial, "--operator", "bench", "--db", str(db)],
            env=env, capture_output=True, check=False,
        )  # fmt: skip
    return db


def _moved(metrics: dict, rng: np.random.Generator) -> dict:
    """The attempt's metrics with each numeric value moved by about 1 % (a board-to-board
    spread)."""
    out = {}
    for name, described in metrics.items():
        if isinstance(described, dict) and isinstance(described.get("value"), float):
            value = described["value"]
            if math.isfinite(value):
                described = {**described, "value": value * (1 + 0.01 * rng.standard_normal())}
        out[name] = described
    return out


def build_log(template: Path, path: Path, sessions: int, seed: int = 0) -> None:
    """``sessions`` copies of the template sessions through the log's write API."""
    rng = np.random.default_rng(seed)
    with SessionLog.open(template, create=False, read_only=True) as log:
        data = sorted((log.session(s.id) for s in log.sessions()), key=lambda d: d.summary.serial)
    healthy, weak = data
    with SessionLog.open(path) as log:
        for k in range(sessions):
            source = weak if k % 25 == 7 else healthy
            sid = log.create_session(board=source.board, checklist=source.checklist,
                                     bench=source.bench, serial=f"DHS24-{k:04d}",
                                     operator="bench")  # fmt: skip
            for a in source.attempts:
                log.record_attempt(
                    sid, stage_id=a.stage_id, step_id=a.step_id, operator=a.operator,
                    started_utc=a.started_utc, finished_utc=a.finished_utc,
                    instruments=a.instruments, settings=a.settings,
                    metrics=_moved(a.metrics, rng), predictions=a.predictions,
                    verdicts=a.verdicts, outcome=a.outcome, notes=a.notes, extra=a.extra,
                )  # fmt: skip
            finish = [e for e in source.events if e.kind == "finish"]
            if finish:
                log.record_event(sid, kind="finish", operator="bench", payload=finish[0].payload)


def _in_process(path: Path) -> tuple[float, float, float]:
    """(collect_batch, sessions() + attempts() of every session, sessions() alone), seconds."""
    with SessionLog.open(path, create=False, read_only=True) as log:
        start = time.perf_counter()
        summaries = log.sessions()
        listing = time.perf_counter() - start
        for summary in summaries:
            log.attempts(summary.id)
        reads = time.perf_counter() - start
        start = time.perf_counter()
        batch = collect_batch(log)
        whole = time.perf_counter() - start
    assert len(batch.rows) == len(summaries)
    return whole, reads, listing


def _process(argv: list[str]) -> float:
    start = time.perf_counter()
    done = subprocess.run(argv, capture_output=True, text=True)
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(argv)}: {done.stderr.strip()}")
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sessions", type=int, default=1000)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    shm = Path("/dev/shm")
    folder = Path(tempfile.mkdtemp(prefix="bench-batch-", dir=shm if shm.is_dir() else None))
    template = _run_templates(folder)
    large, small = folder / "large.db", folder / "small.db"
    start = time.perf_counter()
    build_log(template, large, args.sessions)
    built = time.perf_counter() - start
    build_log(template, small, max(args.sessions // 10, 3), seed=1)
    print(f"built {args.sessions} sessions through the log's write API in {built:.1f} s")
    bringup = [sys.executable, "-m", "bringup"]
    names = ("batch", "reads", "listing", "small", "cli_batch", "cli_sessions")
    best = dict.fromkeys(names, math.inf)
    for _ in range(max(args.repeat, 1)):
        for name, value in zip(("batch", "reads", "listing"), _in_process(large), strict=True):
            best[name] = min(best[name], value)
        best["small"] = min(best["small"], _in_process(small)[0])
        cli_batch = _process([*bringup, "batch", "--db", str(large), "--json"])
        cli_sessions = _process([*bringup, "sessions", "--db", str(large), "--json"])
        best["cli_batch"] = min(best["cli_batch"], cli_batch)
        best["cli_sessions"] = min(best["cli_sessions"], cli_sessions)
    n, m = args.sessions, max(args.sessions // 10, 3)
    print(f"collect_batch, {n} sessions: {best['batch']:.3f} s; sessions() + attempts() of each: "
          f"{best['reads']:.3f} s; ratio {best['batch'] / best['reads']:.2f}x (<= 2x); "
          f"/ sessions() alone ({best['listing']:.3f} s): {best['batch'] / best['listing']:.1f}x")  # fmt: skip
    linear = best["batch"] / (best["small"] * n / m)
    print(f"collect_batch {n} / ({n // m} x {m} sessions): {linear:.2f} (<= 1.5)")
    shutil.rmtree(folder, ignore_errors=True)
    print(f"new processes: bringup batch --json {best['cli_batch']:.2f} s / bringup sessions "
          f"--json {best['cli_sessions']:.2f} s = {best['cli_batch'] / best['cli_sessions']:.2f}x")  # fmt: skip


if __name__ == "__main__":
    main()
