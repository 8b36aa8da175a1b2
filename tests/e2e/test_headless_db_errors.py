"""Locked, corrupt and newer-schema logs through ``run``, ``resume`` and ``sessions``:
one line on stderr, exit status 2, no traceback, and the file left byte for byte as it was."""

from __future__ import annotations

import hashlib
import sqlite3
import subprocess
import sys
import textwrap

from bringup.store import CURRENT_VERSION, SessionLog

RUN = ["run", "--sim", "--serial", "DHS24-0001", "--operator", "tester", "--auto", "--json"]
COMMANDS = {"run": RUN, "resume": ["resume", "--auto"], "sessions": ["sessions", "--json"]}


def _digest(path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _bringup_all(commands: list[str], db) -> list[subprocess.CompletedProcess]:
    """Run the named commands on ``db`` at the same time; their results in order."""
    procs = [subprocess.Popen([sys.executable, "-m", "bringup", *COMMANDS[c], "--db", str(db)],
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
             for c in commands]  # fmt: skip
    results = []
    for proc in procs:
        out, err = proc.communicate(timeout=120)
        results.append(subprocess.CompletedProcess(proc.args, proc.returncode, out, err))
    return results


def _refused(result: subprocess.CompletedProcess, pattern: str) -> None:
    assert result.returncode == 2, (result.stdout, result.stderr)
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("bringup: error: ") and pattern in lines[0], lines[0]
    assert result.stdout == ""


def test_corrupt_log(tmp_path):
    db = tmp_path / "log.sqlite"
    db.write_bytes(b"not a database at all\n" * 200)
    before = _digest(db)
    for result in _bringup_all(list(COMMANDS), db):
        _refused(result, str(db))
    assert _digest(db) == before


def test_newer_schema(tmp_path):
    db = tmp_path / "log.sqlite"
    SessionLog.open(db).close()
    conn = sqlite3.connect(db)
    conn.execute(f"PRAGMA user_version = {CURRENT_VERSION + 1}")
    conn.close()
    before = _digest(db)
    for result in _bringup_all(list(COMMANDS), db):
        _refused(result, "newer bringup")
    assert _digest(db) == before


def test_locked_log(tmp_path):
    db = tmp_path / "log.sqlite"
    SessionLog.open(db).close()
    holder = textwrap.dedent(
        f"""
        import sqlite3, sys
        conn = sqlite3.connect({str(db)!r}, isolation_level=None)
        conn.execute("BEGIN EXCLUSIVE")
        print("locked", flush=True)
        sys.stdin.readline()
        """
    )
    locker = subprocess.Popen([sys.executable, "-c", holder], stdin=subprocess.PIPE,
                              stdout=subprocess.PIPE, text=True)  # fmt: skip
    try:
        assert locker.stdout.readline().strip() == "locked"
        before = _digest(db)
        run, listing = _bringup_all(["run", "sessions"], db)
        _refused(run, "locked")
        # `sessions` only reads, opening the log read-only: in WAL mode a reader is not
        # blocked by another process's write transaction (it reads the last committed state).
        assert listing.returncode == 0 and listing.stdout == "[]\n", listing.stderr
        assert _digest(db) == before
    finally:
        locker.stdin.close()
        locker.wait(timeout=30)
