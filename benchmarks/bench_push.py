"""``bringup push`` of a 100-session log to a real PostgreSQL server, against a plain COPY of the
same rows into the same server, and reading the lab back (``--lab``) against reading the log.

The log: one real headless run on the simulated bench (``bringup run --sim --auto``, in a new
process), then its attempts, waveforms and events logged again through ``SessionLog`` as 99
more sessions (valid chains, the run's own sizes). The server: a throwaway one started from the
installed binaries (``tests/lab/pg_server.py``), 127.0.0.1, fsync off (as in the tests).

Printed, each the best of ``--repeat`` runs, each run in a fresh database:

- push: ``push_log`` into an empty lab (every chain verified here, then sent), and its parts:
  the chain checks alone, and a plain ``COPY`` of the same rows (read with
  ``store.copying.session_rows``) into tables of the same shape with no trigger or key (the
  floor for moving these bytes); ratio push / (chain checks + COPY) (target <= 2x);
- a second push (nothing new: no chain is read) / the first (target <= 0.05);
- reading: ``LabReading.sessions()`` (every session copied into local snapshots and its chain
  re-checked) / the same listing and chain checks on the bench's own log (target <= 3x).

    python benchmarks/bench_push.py [--sessions N] [--repeat R]
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests" / "lab"))

from pg_server import create_database, start_server, stop_server  # noqa: E402

from bringup.lab import LabReading, LabTarget, push_log  # noqa: E402
from bringup.lab.schema import _TABLES  # noqa: E402
from bringup.store import SessionLog  # noqa: E402
from bringup.store.copying import SESSION_COLUMNS, session_rows  # noqa: E402


def relog(log: SessionLog, source: str, serial: str) -> str:
    """Log the session ``source``'s attempts and events again as a new session."""
    data = log.session(source)
    sid = log.create_session(board=data.board, checklist=data.checklist, bench=data.bench,
                             serial=serial, operator=data.summary.operator)  # fmt: skip
    entries = sorted([*data.attempts, *data.events], key=lambda e: e.seq)
    for entry in entries:
        if hasattr(entry, "attempt_no"):
            waves = {name: log.load_waveform(entry.id, name) for name in entry.waveforms}
            log.record_attempt(sid, stage_id=entry.stage_id, step_id=entry.step_id,
                               operator=entry.operator, started_utc=entry.started_utc,
                               finished_utc=entry.finished_utc, instruments=entry.instruments,
                               settings=entry.settings, metrics=entry.metrics,
                               predictions=entry.predictions, verdicts=entry.verdicts,
                               outcome=entry.outcome, notes=entry.notes, waveforms=waves,
                               extra=entry.extra)  # fmt: skip
        else:
            log.record_event(sid, kind=entry.kind, operator=entry.operator,
                             stage_id=entry.stage_id, step_id=entry.step_id,
                             reason=entry.reason, payload=entry.payload)  # fmt: skip
    return sid


def make_log(folder: Path, sessions: int) -> Path:
    db = folder / "bench.db"
    subprocess.run([sys.executable, "-m", "bringup", "run", "--sim", "--auto", "--serial",
                    "DHS24-0000", "--operator", "bench", "--db", str(db)],
                   check=True, capture_output=True)  # fmt: skip
    with SessionLog.open(db) as log:
        first = log.latest_session()
        for k in range(1, sessions):
            relog(log, first, f"DHS24-{k:04d}")
    return db


def copy_floor(db: Path, conninfo: str) -> float:
    """Seconds to read every row (as push does) and COPY it, one COPY per table, into bare
    tables of the same columns (no key, reference or trigger): the floor for these bytes."""
    import psycopg

    with psycopg.connect(conninfo, autocommit=True) as conn:
        for sql in _TABLES[2:]:
            name = sql.split("bringup.")[1].split()[0]
            conn.execute(
                f"CREATE TABLE bare_{name} (LIKE bringup.{name} INCLUDING DEFAULTS "
                "INCLUDING IDENTITY)"
            )
        start = time.perf_counter()
        tables: dict[str, tuple[tuple, list]] = {}

        def add(table: str, columns, record) -> None:
            tables.setdefault(table, (tuple(columns), []))[1].append(record)

        with SessionLog.open(db, read_only=True) as log:
            for summary in log.sessions():
                rows = session_rows(log, summary.id)
                add("sessions", ("log_id", *SESSION_COLUMNS), ["x", *rows.session.values()])
                for attempt in rows.attempts:
                    add("attempts", ("log_id", "session_id", *attempt),
                        ["x", summary.id, *attempt.values()])  # fmt: skip
                    for table, found in (("metrics", rows.metrics), ("waveforms", rows.waveforms)):
                        for item in found.get(attempt["seq"], []):
                            add(table, ("attempt", *item), [attempt["seq"], *item.values()])
                for event in rows.events:
                    add("events", ("log_id", "session_id", *event),
                        ["x", summary.id, *event.values()])  # fmt: skip
        with conn.transaction():
            for table, (columns, records) in tables.items():
                with conn.cursor().copy(
                    f"COPY bare_{table} ({', '.join(columns)}) FROM STDIN"
                ) as copy:
                    for record in records:
                        copy.write_row(record)
        return time.perf_counter() - start


def one_run(db: Path, server) -> dict[str, float]:
    import psycopg

    target = LabTarget(server.url(create_database(server)), "bench")
    times = {}
    with SessionLog.open(db, read_only=True) as log:
        start = time.perf_counter()
        for summary in log.sessions():
            assert log.verify_chain(summary.id).ok
        times["verify"] = time.perf_counter() - start
        with psycopg.connect(target.conninfo, autocommit=True) as conn:
            start = time.perf_counter()
            report = push_log(log, conn, target, "bench-1")
            times["push"] = time.perf_counter() - start
            assert not report.refused and len(report.sent) > 0
            start = time.perf_counter()
            again = push_log(log, conn, target, "bench-1")
            times["again"] = time.perf_counter() - start
            assert not again.sent
        start = time.perf_counter()
        listed = log.sessions()
        for summary in listed:
            log.verify_chain(summary.id)
        times["read_log"] = time.perf_counter() - start
    start = time.perf_counter()
    with LabReading.open(target) as lab:
        assert len(lab.sessions()) == len(listed)
    times["read_lab"] = time.perf_counter() - start
    times["copy"] = copy_floor(db, target.conninfo)
    return times


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sessions", type=int, default=100)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    server = start_server()
    os.environ["PGPASSWORD"] = server.bench_password
    try:
        with tempfile.TemporaryDirectory() as tmp:
            db = make_log(Path(tmp), args.sessions)
            size = db.stat().st_size / 1e6
            runs = [one_run(db, server) for _ in range(args.repeat)]
    finally:
        stop_server(server)
    best = {key: min(run[key] for run in runs) for key in runs[0]}
    print(f"log: {args.sessions} sessions, {size:.1f} MB")
    print(f"push                         {best['push']:.3f} s")
    print(f"  chain checks alone         {best['verify']:.3f} s")
    print(f"  COPY of the same rows      {best['copy']:.3f} s")
    ratio = best["push"] / (best["verify"] + best["copy"])
    print(f"push / (checks + COPY)       {ratio:.2f}x   (target <= 2x)")
    print(f"second push / first          {best['again'] / best['push']:.3f}   (target <= 0.05)")
    print(f"read --lab (copy + checks)   {best['read_lab']:.3f} s")
    print(f"read the log (list + checks) {best['read_log']:.3f} s")
    print(
        f"read --lab / read the log    {best['read_lab'] / best['read_log']:.2f}x   (target <= 3x)"
    )


if __name__ == "__main__":
    main()
