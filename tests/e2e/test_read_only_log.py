"""A reviewer's copy of the log on a read-only share still serves ``sessions``, ``export`` and
``verify --db``: those commands open the log read-only and write nothing.

The share is played by file and folder permissions (0444 file in a 0555 folder, and a 0444 file
in a writable folder). Root ignores permission bits, so when the tests run as root the commands
run under ``setpriv`` without the capabilities that let root write anywhere (CAP_DAC_OVERRIDE,
CAP_DAC_READ_SEARCH): a real process that cannot write the file, as a reviewer's would be.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from bringup.store import SessionLog

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "integration" / "record"))
from record_samples import write_session  # noqa: E402

_NO_OVERRIDE = ["--inh-caps=-dac_override,-dac_read_search",
                "--bounding-set=-dac_override,-dac_read_search"]  # fmt: skip


def _reader(*args: str | Path) -> subprocess.CompletedProcess:
    """``bringup ARGS`` in a process that cannot write what its permissions forbid."""
    command = [sys.executable, "-m", "bringup", *map(str, args)]
    if os.geteuid() == 0:
        if shutil.which("setpriv") is None:
            pytest.skip("running as root without setpriv: permission bits would not bind")
        command = ["setpriv", *_NO_OVERRIDE, *command]
    return subprocess.run(command, stdin=subprocess.DEVNULL, capture_output=True, text=True,
                          timeout=120)  # fmt: skip


def _bringup(*args: str | Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "bringup", *map(str, args)],
                          stdin=subprocess.DEVNULL, capture_output=True, text=True, timeout=120)  # fmt: skip


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture
def share(tmp_path):
    """A finished, signed session's log and its record in a folder made read-only afterwards."""
    folder = tmp_path / "share"
    folder.mkdir()
    session = write_session(folder / "log.db")
    key = tmp_path / "okafor.key"
    for args in (("keygen", "--name", "R. Okafor", "--out", key),
                 ("sign", session.session_id, "--key", key, "--role", "operator",
                  "--db", session.db),
                 ("export", session.session_id, "--out", tmp_path / "r.json", "--db", session.db)):  # fmt: skip
        done = _bringup(*args)
        assert done.returncode == 0, (args, done.stderr)
    # A read-only open leaves SQLite's -wal and -shm beside a log in a writable folder; the
    # last writer to close removes them (and so the copy handed to the reviewer is one file).
    SessionLog.open(folder / "log.db", create=False).close()
    assert sorted(p.name for p in folder.iterdir()) == ["log.db"]
    yield folder / "log.db", session.session_id, tmp_path / "r.json"
    folder.chmod(0o755)
    for path in folder.iterdir():
        path.chmod(0o644)


def _serves(db: Path, session: str, record: Path, out: Path) -> None:
    listed = _reader("sessions", "--json", "--db", db)
    assert listed.returncode == 0, listed.stderr
    (row,) = json.loads(listed.stdout)
    assert (row["id"], row["altered"]) == (session, [])
    exported = _reader("export", session, "--format", "json", "--out", out, "--db", db)
    assert exported.returncode == 0, exported.stderr
    assert out.read_bytes() == record.read_bytes()  # the same record as from the writable log
    verified = _reader("verify", record, "--db", db)
    assert verified.returncode == 0, verified.stdout + verified.stderr
    assert "chain intact, head matches, content matches, summary matches" in verified.stdout


def test_a_log_in_a_read_only_folder_is_listed_exported_and_verified(share, tmp_path):
    db, session, record = share
    before = _digest(db)
    db.chmod(0o444)
    db.parent.chmod(0o555)
    # the control: this process really cannot write there
    probe = _reader("sessions", "--db", db.parent / "new.db")
    assert probe.returncode == 0 and "no sessions" in probe.stdout
    run = _reader("run", "--sim", "--auto", "--serial", "DHS24-0001", "--operator", "t",
                  "--db", db)  # fmt: skip
    assert run.returncode == 2 and "Traceback" not in run.stderr, run.stderr
    assert len(run.stderr.strip().splitlines()) == 1, run.stderr
    _serves(db, session, record, tmp_path / "again.json")
    assert _digest(db) == before
    assert sorted(p.name for p in db.parent.iterdir()) == ["log.db"]


def test_a_read_only_file_in_a_writable_folder_is_served_unchanged(share, tmp_path):
    db, session, record = share
    before = _digest(db)
    db.chmod(0o444)
    _serves(db, session, record, tmp_path / "again.json")
    assert _digest(db) == before


def test_entries_only_in_the_wal_of_a_read_only_copy_are_refused_not_missed(share, tmp_path):
    db, session, _ = share
    # A live log copied while a writer held it open: the newest entry is only in the -wal.
    held = sqlite3.connect(db)
    held.execute("PRAGMA wal_autocheckpoint = 0")
    held.execute("SELECT count(*) FROM sessions").fetchone()
    with SessionLog.open(db) as log:
        log.record_event(session, kind="note", operator="J. Mbeki", reason="copied mid-write")
    copy = tmp_path / "copy"
    copy.mkdir()
    shutil.copy(db, copy / "log.db")
    shutil.copy(db.with_name("log.db-wal"), copy / "log.db-wal")
    held.close()
    assert (copy / "log.db-wal").stat().st_size > 0
    for path in copy.iterdir():
        path.chmod(0o444)
    copy.chmod(0o555)
    try:
        done = _reader("sessions", "--db", copy / "log.db")
        err = done.stderr.strip()
        assert done.returncode == 2 and len(err.splitlines()) == 1, err
        assert "log.db-wal beside it holds entries not yet in the main file" in err, err
    finally:
        copy.chmod(0o755)
    # the control: with write access to the folder the same copy shows the note
    with SessionLog.open(copy / "log.db", create=False, read_only=True) as log:
        assert [e.reason for e in log.events(session)][-1] == "copied mid-write"
