"""Opening a log: WAL and foreign keys on, migrations, and files refused without being modified."""

from __future__ import annotations

import contextlib
import sqlite3
import subprocess
import sys
import textwrap

import pytest
from store_samples import BENCH, BOARD, CHECKLIST, file_digest, record

from bringup.store import CURRENT_VERSION, SessionLog, StoreError, default_db_path
from bringup.store import schema as schema_module


def test_a_new_log_is_in_wal_mode_with_foreign_keys_and_a_schema_version(tmp_path):
    db_path = tmp_path / "new.db"
    SessionLog.open(db_path).close()  # closing checkpoints the WAL into the main file
    conn = sqlite3.connect(db_path)
    # [read: sqlite.org/pragma.html: journal_mode is persistent for WAL; user_version and
    # application_id are header fields at offsets 60 and 68]
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert conn.execute("PRAGMA user_version").fetchone()[0] == CURRENT_VERSION >= 1
    header = db_path.read_bytes()[:100]
    assert int.from_bytes(header[68:72], "big") == schema_module.APPLICATION_ID
    assert int.from_bytes(header[60:64], "big") == CURRENT_VERSION
    conn.close()
    # foreign keys are enforced on the log's own connection
    with SessionLog.open(db_path) as log:
        assert log._conn.execute("PRAGMA foreign_keys").fetchone()[0] == 1
        with pytest.raises(sqlite3.IntegrityError, match="FOREIGN KEY"):
            log._conn.execute(
                "INSERT INTO metrics (attempt_id, name, value) VALUES (999, 'x', 1.0)"
            )


def test_default_path_is_in_the_user_data_directory(tmp_path, monkeypatch):
    # [read: XDG Base Directory Specification: $XDG_DATA_HOME, honoured by platformdirs on Linux]
    if sys.platform != "linux":
        pytest.skip("XDG variables apply on Linux")
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))
    assert default_db_path() == tmp_path / "data" / "bringup" / "bringup.db"
    with SessionLog.open() as log:
        assert log.path == tmp_path / "data" / "bringup" / "bringup.db"
    assert (tmp_path / "data" / "bringup" / "bringup.db").exists()


def test_a_missing_log_is_not_created_when_reading_only(tmp_path):
    missing = tmp_path / "typo.db"
    with pytest.raises(StoreError, match="no session log there"):
        SessionLog.open(missing, create=False)
    assert not missing.exists()


def _v1_log_with_a_session(db_path, monkeypatch=None):
    with SessionLog.open(db_path) as log:
        sid = log.create_session(
            board=BOARD, checklist=CHECKLIST, bench=BENCH, serial="DHS24-0007", operator="Ana"
        )
        record(log, sid, outcome="fail")
        log.record_event(sid, kind="note", operator="Ana", reason="before the upgrade")
    if monkeypatch is not None:
        _back_to_schema_1(db_path)
    return sid


def _back_to_schema_1(db_path) -> None:
    """The log as the first release would have left it: what schemas 2 and 3 added taken away."""
    conn = sqlite3.connect(db_path)
    with conn:
        conn.execute("ALTER TABLE signatures DROP COLUMN statement_json")
        conn.execute("DROP TABLE listings")
        for index in ("attempts_heads", "events_heads", "sessions_listing"):
            conn.execute(f"DROP INDEX {index}")
        conn.execute("PRAGMA user_version = 1")
    conn.close()


def test_migration_from_version_1_keeps_every_entry(db_path, monkeypatch):
    sid = _v1_log_with_a_session(db_path, monkeypatch)

    def to_next(conn: sqlite3.Connection) -> None:
        conn.execute("ALTER TABLE attempts ADD COLUMN probe_serial TEXT")

    monkeypatch.setattr(schema_module, "MIGRATIONS", [*schema_module.MIGRATIONS, to_next])
    with SessionLog.open(db_path) as log:
        assert log.verify_chain(sid).ok
        assert [a.outcome for a in log.attempts(sid)] == ["fail"]
        record(log, sid, outcome="pass")
        assert log.verify_chain(sid).ok
    conn = sqlite3.connect(db_path)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == CURRENT_VERSION + 1
    assert "probe_serial" in [c[1] for c in conn.execute("PRAGMA table_info(attempts)")]
    conn.close()


def test_a_failing_migration_leaves_version_1_and_its_data(db_path, monkeypatch):
    sid = _v1_log_with_a_session(db_path, monkeypatch)

    def broken(conn: sqlite3.Connection) -> None:
        conn.execute("ALTER TABLE attempts ADD COLUMN half_done TEXT")
        conn.execute("THIS IS NOT SQL")

    monkeypatch.setattr(schema_module, "MIGRATIONS", [*schema_module.MIGRATIONS, broken])
    failing = f"from schema 1 to {CURRENT_VERSION + 1} failed .*left at schema 1"
    with pytest.raises(StoreError, match=failing):
        SessionLog.open(db_path)
    conn = sqlite3.connect(db_path)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == 1
    assert "half_done" not in [c[1] for c in conn.execute("PRAGMA table_info(attempts)")]
    conn.close()
    monkeypatch.undo()
    with SessionLog.open(db_path) as log:
        assert log.verify_chain(sid).ok and len(log.attempts(sid)) == 1


def _assert_refused_untouched(path, pattern: str, **open_args) -> None:
    before = file_digest(path)
    size = path.stat().st_size
    with pytest.raises(StoreError, match=pattern) as caught:
        SessionLog.open(path, **open_args)
    message = str(caught.value)
    assert "\n" not in message and str(path) in message
    assert path.stat().st_size == size and file_digest(path) == before


def test_newer_schema_is_refused_and_left_byte_identical(db_path):
    _v1_log_with_a_session(db_path)
    conn = sqlite3.connect(db_path)
    conn.execute(f"PRAGMA user_version = {CURRENT_VERSION + 1}")
    conn.commit()
    conn.close()
    newer, ours = CURRENT_VERSION + 1, CURRENT_VERSION
    _assert_refused_untouched(
        db_path, rf"newer bringup \(log schema {newer}; this one reads up to {ours}\)"
    )


def test_garbage_bytes_are_refused_and_left_byte_identical(tmp_path):
    path = tmp_path / "garbage.db"
    path.write_bytes(bytes(range(256)) * 64)
    _assert_refused_untouched(path, "not a SQLite database")


def test_a_damaged_database_is_refused_and_left_byte_identical(db_path):
    _v1_log_with_a_session(db_path)
    data = bytearray(db_path.read_bytes())
    # keep the 100-byte header, overwrite the b-tree of page 1 (the schema table)
    # [read: sqlite.org/fileformat.html, 1.3 "The Database Header" and 1.6 "B-tree Pages"]
    data[100:4096] = b"\xa5" * (4096 - 100)
    db_path.write_bytes(bytes(data))
    _assert_refused_untouched(db_path, "corrupt")


def test_another_programs_database_is_refused(tmp_path):
    path = tmp_path / "inventory.db"
    conn = sqlite3.connect(path)
    conn.execute("CREATE TABLE parts (pn TEXT)")
    conn.commit()
    conn.close()
    _assert_refused_untouched(path, "not a bringup log")


def test_a_write_lock_held_by_another_connection_is_reported(db_path):
    sid = _v1_log_with_a_session(db_path)
    holder = sqlite3.connect(db_path, isolation_level=None)
    holder.execute("BEGIN IMMEDIATE")
    try:
        _assert_refused_untouched(db_path, "locked by another process", busy_timeout_s=0.1)
    finally:
        holder.execute("ROLLBACK")
        holder.close()
    with SessionLog.open(db_path) as log:
        assert len(log.attempts(sid)) == 1


LOCKER = textwrap.dedent(
    """
    import sqlite3, sys
    conn = sqlite3.connect(sys.argv[1], isolation_level=None)
    conn.execute("BEGIN EXCLUSIVE")
    print("locked", flush=True)
    sys.stdin.readline()          # hold the lock until the test says so
    conn.execute("ROLLBACK")
    """
)


def test_an_exclusive_transaction_in_another_process_is_reported(db_path):
    sid = _v1_log_with_a_session(db_path)
    with SessionLog.open(db_path, busy_timeout_s=0.1) as log:  # opened before the lock
        locker = subprocess.Popen(
            [sys.executable, "-c", LOCKER, str(db_path)],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            text=True,
        )
        try:
            assert locker.stdout.readline().strip() == "locked"
            _assert_refused_untouched(db_path, "locked by another process", busy_timeout_s=0.1)
            with pytest.raises(StoreError, match="locked by another process"):
                record(log, sid, outcome="pass")
            # reads still work in WAL mode while another process holds the write lock
            assert len(log.attempts(sid)) == 1
        finally:
            with contextlib.suppress(OSError):  # the locker may already be gone
                locker.stdin.write("\n")
                locker.stdin.close()
            try:
                locker.wait(timeout=10)
            except subprocess.TimeoutExpired:
                locker.kill()
                locker.wait()
            locker.stdout.close()
        record(log, sid, outcome="pass")
        assert [a.outcome for a in log.attempts(sid)] == ["fail", "pass"]
        assert log.verify_chain(sid).ok


def test_damage_deep_in_the_file_is_found_by_the_integrity_check(db_path):
    sid = _v1_log_with_a_session(db_path)
    with SessionLog.open(db_path) as log:
        assert log.check_integrity() == []
    conn = sqlite3.connect(db_path)
    page_size = conn.execute("PRAGMA page_size").fetchone()[0]
    root = conn.execute("SELECT rootpage FROM sqlite_master WHERE name = 'metrics'").fetchone()[0]
    conn.close()
    data = bytearray(db_path.read_bytes())
    # a b-tree page starts with its type byte (2, 5, 10 or 13) and cell count at offset 3
    # [read: sqlite.org/fileformat.html, 1.6 "B-tree Pages"]: make it a page of no known type
    start = (root - 1) * page_size
    data[start : start + 8] = b"\x63\xff\xff\xff\xff\xff\xff\xff"
    db_path.write_bytes(bytes(data))
    with SessionLog.open(db_path) as log:  # page 1 is intact, so the file opens
        assert log.check_integrity() != []
        assert log.attempts(sid)[0].outcome == "fail"  # the attempts table itself is unharmed
        with pytest.raises(StoreError, match="corrupt"):
            log.verify_chain(sid)  # reads the damaged metrics table
