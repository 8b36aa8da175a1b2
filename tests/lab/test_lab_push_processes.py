"""Real push processes against a real server: one killed mid-way by a real signal carries on at
the next push; benches pushing at once (and one log pushed twice at once) lose and double
nothing.

The moments are set with the server's own locks, not with timing: the test holds the lock a
push takes first for a session (or for creating the tables) and waits until the server shows
the push waiting on it (``pg_locks``), so the signal lands while that push has a transaction
open."""

from __future__ import annotations

import signal
import subprocess
import sys
import time

import psycopg
import pytest
from lab_samples import lab_counts, log_counts, make_log

from bringup.lab.push import lab_positions
from bringup.lab.schema import _SETUP_LOCK
from bringup.store import SessionLog
from bringup.store.copying import log_identity, positions


def _start_push(lab_db, db, bench: str) -> subprocess.Popen:
    command = [sys.executable, "-m", "bringup", "push", "--lab", lab_db.url, "--db", str(db),
               "--bench-name", bench]  # fmt: skip
    return subprocess.Popen(
        command, env=lab_db.env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
    )


def _wait_for_waiters(conn, count: int, pushes: list[subprocess.Popen]) -> None:
    """Until ``count`` backends wait on an advisory lock (a predicate wait; a push that ended
    instead is a failure with its output)."""
    deadline = time.monotonic() + 120  # a bound for a hung machine, not a speed check
    while time.monotonic() < deadline:
        waiting = conn.execute(
            "SELECT count(*) FROM pg_locks WHERE locktype = 'advisory' AND NOT granted"
        ).fetchone()[0]
        if waiting >= count:
            return
        for push in pushes:
            if push.poll() is not None:
                pytest.fail(f"a push ended before waiting: {push.communicate()}")
        time.sleep(0.02)
    pytest.fail("the pushes never reached the lock")


def _same_as_log(conn, db) -> None:
    with SessionLog.open(db, read_only=True) as log:
        here = positions(log)
        there = lab_positions(conn, log_identity(log))
    assert there == here


@pytest.mark.parametrize("signum", [signal.SIGKILL, signal.SIGINT], ids=["SIGKILL", "SIGINT"])
def test_a_push_killed_mid_way_carries_on_at_the_next_push(lab_db, tmp_path, signum):
    db = tmp_path / "bench.db"
    ids = make_log(db, 5)
    with SessionLog.open(db, read_only=True) as log:
        log_id = log_identity(log)
    with psycopg.connect(lab_db.url, autocommit=True) as holder:
        holder.execute("SELECT pg_advisory_lock(hashtext(%s))", [f"{log_id}/{ids[2]}"])
        push = _start_push(lab_db, db, "bench-a")
        _wait_for_waiters(holder, 1, [push])
        push.send_signal(signum)
        out, err = push.communicate(timeout=120)
        holder.execute("SELECT pg_advisory_unlock_all()")
    assert push.returncode in (-signum, 128 + signum), (push.returncode, err)
    assert "Traceback" not in err
    assert out.splitlines()[:2] == [
        f"sent {ids[0]}: 4 entries, 2 sign-offs",
        f"sent {ids[1]}: 4 entries, 2 sign-offs",
    ]
    with psycopg.connect(lab_db.url) as conn:
        held = {row[0] for row in conn.execute("SELECT DISTINCT session_id FROM bringup.events")}
        assert held == set(ids[:2])  # the session being sent left nothing half-way
        assert conn.execute("SELECT count(*) FROM bringup.sessions").fetchone()[0] == 2
    again = _start_push(lab_db, db, "bench-a")
    out, err = again.communicate(timeout=120)
    assert again.returncode == 0, err
    assert [line.split(":")[0] for line in out.splitlines()[:-1]] == [f"sent {s}" for s in ids[2:]]
    assert "3 session(s) sent (12 entries), 2 already there, 0 refused" in out
    with psycopg.connect(lab_db.url) as conn:
        assert lab_counts(conn) == log_counts(db)
        _same_as_log(conn, db)


def test_benches_pushing_at_once_lose_nothing(lab_db, tmp_path):
    """Bench A twice and bench B, all three held at the lab's first-push lock and let go at
    once: the tables are made once, every row of both logs arrives, none twice."""
    bench_a, bench_b = tmp_path / "a.db", tmp_path / "b.db"
    make_log(bench_a, 3)
    make_log(bench_b, 3, first_seed=10)
    with psycopg.connect(lab_db.url, autocommit=True) as holder:
        holder.execute("SELECT pg_advisory_lock(%s)", [_SETUP_LOCK])
        pushes = [
            _start_push(lab_db, bench_a, "bench-a"),
            _start_push(lab_db, bench_b, "bench-b"),
            _start_push(lab_db, bench_a, "bench-a"),
        ]
        _wait_for_waiters(holder, 3, pushes)
        holder.execute("SELECT pg_advisory_unlock_all()")
        results = [push.communicate(timeout=120) for push in pushes]
    assert [push.returncode for push in pushes] == [0, 0, 0], results
    sent_a = [line for out, _ in (results[0], results[2]) for line in out.splitlines()
              if line.startswith("sent ")]  # fmt: skip
    assert len(sent_a) == 3  # each of A's sessions sent by one of the two pushes only
    with psycopg.connect(lab_db.url) as conn:
        expected = {
            table: log_counts(bench_a)[table] + log_counts(bench_b)[table]
            for table in log_counts(bench_a)
        }
        assert lab_counts(conn) == expected
        _same_as_log(conn, bench_a)
        _same_as_log(conn, bench_b)
        assert conn.execute("SELECT count(*) FROM bringup.lab_version").fetchone()[0] == 1
