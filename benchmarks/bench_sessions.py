"""``bringup sessions`` on a log of 10,000 sessions against the same command on 10 sessions.

The 10 sessions are logged through ``SessionLog`` with the shipped checklist and demo board
snapshots (what ``bringup run`` stores): finished, open, aborted, with retakes, skips, waivers
and notes. The large log holds the same 10 and 9,990 copies of them made with SQL (new ids,
same rows, their ``listings`` rows with them: the listing checks each row against its
chain's head by ``seq`` and chain hash, which the copies keep, so they list like the originals). Each command
runs in a new process; the ratio is the minimum of ``--repeat`` runs each, alternating
(target <= 2x).

    python benchmarks/bench_sessions.py [--sessions N] [--repeat R]
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import sqlite3
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.runner.file_snapshots import board_snapshot, checklist_snapshot
from bringup.store import SessionLog

BENCH = {"scope": {"resource": "TCPIP0::127.0.0.1::5025::SOCKET", "idn": "NULLPOINT,SIMSCOPE"}}


def _attempt(log: SessionLog, sid: str, stage: str, step: str, outcome: str) -> None:
    log.record_attempt(sid, stage_id=stage, step_id=step, operator="bench",
                       started_utc="2026-12-01T10:00:00Z", finished_utc="2026-12-01T10:00:02Z",
                       instruments={"scope": "NULLPOINT,SIMSCOPE-4,0001,1.0"},
                       settings={"CH1:SCALe": 1.0}, metrics={"v": {"value": 3.3, "unit": "V"}},
                       predictions={"v": 3.3}, verdicts={"v": {"outcome": outcome}},
                       outcome=outcome)  # fmt: skip


def write_templates(path: Path) -> list[str]:
    """Ten sessions of varied shape through the real log API."""
    checklist = load_checklist()
    steps = [(stage.id, step.key) for stage in checklist.stages for step in stage.steps]
    with SessionLog.open(path) as log:
        ids = []
        for k in range(10):
            sid = log.create_session(board=board_snapshot(load_board("demo")),
                                     checklist=checklist_snapshot(checklist), bench=BENCH,
                                     serial=f"DHS24-{k:04d}", operator="bench")  # fmt: skip
            ids.append(sid)
            done = steps[: 2 + k % (len(steps) - 1)]
            for i, (stage, step) in enumerate(done):
                _attempt(log, sid, stage, step, "fail" if (i + k) % 5 == 0 else "pass")
                if (i + k) % 5 == 0:
                    if k % 2:
                        _attempt(log, sid, stage, step, "pass")  # a retake
                    else:
                        log.record_event(sid, kind="waive", operator="Reviewer", stage_id=stage,
                                         step_id=step, reason="within the datasheet")  # fmt: skip
            log.record_event(sid, kind="note", operator="bench", reason="probe on TP3")
            if k % 3 == 1:
                log.record_event(sid, kind="abort", operator="bench", reason="end of shift")
            elif k % 3 == 2 and len(done) == len(steps):
                log.record_event(sid, kind="finish", operator="bench",
                                 payload={"verdict": "pass", "stages": {}})  # fmt: skip
    return ids


def clone(path: Path, copies: int) -> None:
    """Add ``copies`` copies of every session (and its attempts and events) under new ids."""
    conn = sqlite3.connect(path)

    def columns(table: str) -> list[str]:
        return [row[1] for row in conn.execute(f"PRAGMA table_info({table})")]

    with conn:
        conn.execute("CREATE TEMP TABLE n (k INTEGER PRIMARY KEY)")
        conn.executemany("INSERT INTO n VALUES (?)", [(k,) for k in range(1, copies + 1)])
        conn.execute("CREATE TEMP TABLE originals AS SELECT id FROM sessions")
        cols = columns("sessions")
        picked = ", ".join("s.id || '-' || n.k" if c == "id" else f"s.{c}" for c in cols)
        conn.execute(f"INSERT INTO sessions ({', '.join(cols)}) SELECT {picked} "
                     "FROM sessions s JOIN originals o ON s.id = o.id, n")  # fmt: skip
        for table in ("attempts", "events", "listings"):
            cols = [c for c in columns(table) if c != "id"]
            picked = ", ".join("x.session_id || '-' || n.k" if c == "session_id" else f"x.{c}"
                               for c in cols)  # fmt: skip
            conn.execute(f"INSERT INTO {table} ({', '.join(cols)}) SELECT {picked} "
                         f"FROM {table} x JOIN originals o ON x.session_id = o.id, n")  # fmt: skip
    conn.close()


def timed(argv: list[str], env: dict) -> tuple[float, float]:
    """(wall seconds, CPU seconds user + system) of one run of ``argv`` in a new process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    done = subprocess.run(argv, env=env, capture_output=True, text=True)
    elapsed = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(argv)}: {done.stderr.strip()}")
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return elapsed, cpu


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sessions", type=int, default=10_000)
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()
    folder = Path(tempfile.mkdtemp(prefix="bench-sessions-"))
    small, large = folder / "small.db", folder / "large.db"
    write_templates(small)
    shutil.copy(small, large)
    clone(large, args.sessions // 10 - 1)
    env = dict(os.environ)
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    script = Path(sys.executable).with_name("bringup")
    bringup = [str(script)] if script.exists() else [sys.executable, "-m", "bringup"]
    timed([*bringup, "sessions", "--db", str(small)], env)  # warm-up
    best_small = best_large = cpu_small = cpu_large = float("inf")
    for _ in range(max(args.repeat, 3)):
        wall, cpu = timed([*bringup, "sessions", "--db", str(small)], env)
        best_small, cpu_small = min(best_small, wall), min(cpu_small, cpu)
        wall, cpu = timed([*bringup, "sessions", "--db", str(large)], env)
        best_large, cpu_large = min(best_large, wall), min(cpu_large, cpu)
    with SessionLog.open(large, create=False, read_only=True) as log:
        start = time.perf_counter()
        listed = len(log.sessions())
        in_process = time.perf_counter() - start
    ratio = best_large / best_small
    print(f"bringup sessions: {listed:,} sessions {best_large:.3f} s, 10 sessions "
          f"{best_small:.3f} s (SessionLog.sessions() alone on the large log: "
          f"{in_process:.3f} s)")  # fmt: skip
    print(f"bringup sessions, {listed:,} / 10 sessions: {ratio:.2f}x (target <= 2x) "
          f"{'OK' if ratio <= 2 else 'OVER'}")  # fmt: skip
    # CPU time (user + system, minimum of the same runs): steadier than wall time when other
    # work shares the machine's cores
    cpu_ratio = cpu_large / cpu_small
    print(f"  CPU time: {cpu_large:.3f} s / {cpu_small:.3f} s = {cpu_ratio:.2f}x (target <= 2x) "
          f"{'OK' if cpu_ratio <= 2 else 'OVER'}")  # fmt: skip
    shutil.rmtree(folder)


if __name__ == "__main__":
    main()
