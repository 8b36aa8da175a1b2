"""One bench, one process; one session, one writer.

Reported: two ``run`` processes on one bench switched the supply off under each other (and the
second logged the interference as a board failure); two ``resume`` processes on one session
interleaved their attempts. Here a real process holds the bench (or the session) through the
real code path, a second real ``bringup`` process is started against it, and the simulated bench
(in this test process, on loopback) shows what the second one sent. Then the holder is killed
with SIGKILL and the next process takes the lock over.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from bringup.store import SessionLog

RUN = ["run", "--auto", "--serial", "DHS24-0001", "--operator", "R. Okafor"]


@pytest.fixture
def env(tmp_path) -> dict[str, str]:
    """The instrument lock folder of these processes (and only theirs)."""
    return {**os.environ, "BRINGUP_LOCK_DIR": str(tmp_path / "locks"), "PYTHONUNBUFFERED": "1"}


def _bringup(env: dict, *args: str | Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "bringup", *map(str, args)], env=env,
                          stdin=subprocess.DEVNULL, capture_output=True, text=True, timeout=240)  # fmt: skip


def _holder(env: dict, code: str) -> subprocess.Popen:
    """A real process running ``code`` that prints "held" once it holds what it takes."""
    proc = subprocess.Popen([sys.executable, "-c", textwrap.dedent(code)], env=env,
                            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True)  # fmt: skip
    line = proc.stdout.readline().strip()
    assert line == "held", (line, proc.stderr.read() if proc.poll() is not None else "")
    return proc


def _one_line(done: subprocess.CompletedProcess, *want: str) -> str:
    err = done.stderr.strip()
    assert done.returncode == 2, (done.returncode, done.stdout, err)
    assert len(err.splitlines()) == 1 and "Traceback" not in err, err
    for text in want:
        assert text in err, (text, err)
    return err


def _kill(proc: subprocess.Popen) -> None:
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=30)


def test_a_second_run_on_a_held_bench_is_refused_before_it_sends_anything(sim_bench, env, tmp_path):
    bench = sim_bench()
    bench_file = tmp_path / "bench.toml"
    bench_file.write_text(bench.bench_file_text())
    holder = _holder(env, f"""
        from bringup.instruments.bench import open_bench_file
        bench = open_bench_file({str(bench_file)!r})
        print("held", flush=True)
        input()
        bench.close()
        """)  # fmt: skip
    try:
        # What the holder's own run would be doing: the board powered through its supply.
        bench.supply.voltage_set, bench.supply.output_on = 24.0, True
        clients = sum(server.client_count for server in bench.servers.values())
        db = tmp_path / "second.db"
        done = _bringup(env, *RUN, "--board", "demo", "--bench", bench_file, "--db", db)
        err = _one_line(done, f"is in use by PID {holder.pid} (", "python -c", "stop that one")
        named = [
            r for r in ("scope", "supply", "thermometer") if f"{r} {bench.resources[r]}" in err
        ]
        assert len(named) == 1, err  # the first resource found held, by role and resource
        # nothing was sent: no connection was made, the supply is still on as its holder left it
        assert sum(server.client_count for server in bench.servers.values()) == clients
        assert bench.supply.output_on and bench.supply.voltage_set == 24.0
        with SessionLog.open(db, create=False, read_only=True) as log:
            assert log.sessions() == []  # and no session was logged
        checked = _bringup(env, "instruments", "--bench", bench_file)
        _one_line(checked, f"is in use by PID {holder.pid}")
        checked = _bringup(env, "instruments", "--check", "--bench", bench_file)
        _one_line(checked, f"is in use by PID {holder.pid}")
        assert bench.supply.output_on
    finally:
        bench.supply.output_on = False
        _kill(holder)
    # The holder died without letting go (SIGKILL): the kernel dropped its lock, its record is
    # still in the lock file, and the next process takes the bench over and says so.
    done = _bringup(
        env, *RUN, "--board", "demo", "--bench", bench_file, "--db", tmp_path / "third.db", "--json"
    )
    assert done.returncode in (0, 1), done.stderr
    summary = json.loads(done.stdout)
    with SessionLog.open(tmp_path / "third.db", create=False) as log:
        notes = [e.reason for e in log.events(summary["session"]) if e.kind == "note"]
    assert any(f"PID {holder.pid}" in n and "taken over" in n for n in notes), notes


def test_two_resumes_of_one_session_cannot_interleave(env, tmp_path):
    db = tmp_path / "log.db"
    first = _bringup(env, *RUN, "--sim", "--scenario", "sagging-rail", "--db", db, "--json")
    assert first.returncode == 1, first.stderr
    session = json.loads(first.stdout)["session"]
    holder = _holder(env, f"""
        from bringup.runner import SessionRunner
        runner = SessionRunner.resume({session!r}, db_path={str(db)!r})
        print("held", flush=True)
        input()
        runner.close()
        """)  # fmt: skip
    try:
        with SessionLog.open(db, read_only=True) as log:
            before = (len(log.attempts(session)), len(log.events(session)))
        done = _bringup(env, "resume", session, "--sim", "--auto", "--db", db)
        _one_line(done, f"session {session} of {db} is in use by PID {holder.pid} (python -c")
        done = _bringup(env, "resume", "--sim", "--auto", "--db", db)  # the latest unfinished
        _one_line(done, f"session {session}", f"PID {holder.pid}")
        with SessionLog.open(db, read_only=True) as log:
            assert (len(log.attempts(session)), len(log.events(session))) == before
    finally:
        _kill(holder)
    done = _bringup(env, "resume", session, "--sim", "--auto", "--db", db)
    assert done.returncode in (0, 1), done.stderr  # resumed (on a healthy simulated bench now)
    with SessionLog.open(db, read_only=True) as log:
        kinds = [e.kind for e in log.events(session)]
    assert kinds.count("resume") == 2  # the killed holder's and this one's


def test_a_lock_file_left_by_a_dead_process_is_reported_by_the_next_holder(tmp_path):
    from bringup.locks import lock_resources

    folder = tmp_path / "locks"
    code = f"""
        from pathlib import Path
        from bringup.locks import lock_resources
        held = lock_resources([("supply", "TCPIP0::10.0.0.7::inst0::INSTR")], Path({str(folder)!r}))
        print("held", flush=True)
        input()
        """
    holder = _holder(dict(os.environ), code)
    _kill(holder)
    # the same instrument written another way (VISA board 0 and inst0 are the defaults)
    taken = lock_resources([("supply", "tcpip::10.0.0.7::INSTR")], folder)
    try:
        ((what, record),) = taken.took_over
        assert what == "supply tcpip::10.0.0.7::INSTR"
        assert record["pid"] == holder.pid and record["command"].startswith("python -c")
    finally:
        taken.release()
    again = lock_resources([("supply", "TCPIP::10.0.0.7::INSTR")], folder)
    assert again.took_over == []  # a clean release leaves no record behind
    again.release()
