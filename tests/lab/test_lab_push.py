"""``bringup push``: a bench's log copied to a real PostgreSQL server, append-only, each chain
checked first; pushing twice sends nothing; new entries and sign-offs follow; a broken chain
or a log that parted from the lab's copy is refused by name; the server refuses changes."""

from __future__ import annotations

import sqlite3

import psycopg
import pytest
from lab_samples import bringup, lab_counts, log_counts, make_log

from bringup.store import SessionLog


def _push(lab_db, db, *extra: str):
    return bringup("push", "--lab", lab_db.url, "--db", str(db), *extra, env=lab_db.env)


def test_push_copies_every_row_and_a_second_push_sends_nothing(lab_db, tmp_path):
    db = tmp_path / "bench.db"
    ids = make_log(db, 3)
    first = _push(lab_db, db, "--bench-name", "bench-a")
    assert first.returncode == 0, first.stderr
    assert [line.split(":")[0] for line in first.stdout.splitlines()[:3]] == [
        f"sent {sid}" for sid in ids
    ]
    with psycopg.connect(lab_db.url) as conn:
        assert lab_counts(conn) == log_counts(db)
        assert conn.execute("SELECT bench FROM bringup.logs").fetchall() == [("bench-a",)]
    again = _push(lab_db, db)
    assert again.returncode == 0, again.stderr
    assert not [line for line in again.stdout.splitlines() if line.startswith("sent ")]
    assert "0 session(s) sent (0 entries), 3 already there, 0 refused" in again.stdout
    # the bench name is the one of the first push (no --bench-name: it was not renamed)
    assert "bench bench-a:" in again.stdout
    with psycopg.connect(lab_db.url) as conn:
        assert lab_counts(conn) == log_counts(db)


def test_entries_and_sign_offs_added_later_follow_on_the_next_push(lab_db, tmp_path):
    db = tmp_path / "bench.db"
    ids = make_log(db, 2)
    assert _push(lab_db, db).returncode == 0
    with SessionLog.open(db) as log:
        log.record_event(ids[0], kind="note", operator="Ana Ortiz", reason="re-checked TP3")
        log.add_signature(
            ids[1], name="Third person", role="reviewer", signed_utc="2026-12-02T09:00:00Z",
            public_key=b"\x03" * 32, fingerprint="03" * 8, signature=b"\x05" * 64,
            content_digest="1" * 64,
        )  # fmt: skip
    later = _push(lab_db, db)
    assert later.returncode == 0, later.stderr
    assert f"sent {ids[0]}: 1 entries, 0 sign-offs" in later.stdout
    assert f"sent {ids[1]}: 0 entries, 1 sign-offs" in later.stdout
    with psycopg.connect(lab_db.url) as conn:
        assert lab_counts(conn) == log_counts(db)


def _break_a_metric(db, session_id: str) -> None:
    """Change a logged metric behind bringup's back (the log's own trigger dropped first)."""
    conn = sqlite3.connect(db)
    try:
        conn.execute("DROP TRIGGER metrics_no_update")
        conn.execute(
            "UPDATE metrics SET value = 2.5e-8 WHERE name = 'rise_time_s' AND attempt_id = "
            "(SELECT min(id) FROM attempts WHERE session_id = ?)",
            [session_id],
        )
        conn.commit()
    finally:
        conn.close()


def test_a_session_whose_chain_is_broken_is_refused_by_name_and_the_rest_is_sent(lab_db, tmp_path):
    db = tmp_path / "bench.db"
    ids = make_log(db, 3)
    _break_a_metric(db, ids[1])
    result = _push(lab_db, db)
    assert result.returncode == 1
    refused = [line for line in result.stderr.splitlines() if line.startswith("refused:")]
    assert len(refused) == 1, result.stderr
    assert ids[1] in refused[0] and "metric:rise_time_s" in refused[0]
    assert "Traceback" not in result.stderr
    with psycopg.connect(lab_db.url) as conn:
        pushed = {row[0] for row in conn.execute("SELECT id FROM bringup.sessions")}
    assert pushed == {ids[0], ids[2]}


def test_a_log_that_parted_from_the_labs_copy_is_refused(lab_db, tmp_path):
    """A copy of the log carried on differently (the same first session, so the same identity
    in the lab): the second continuation of one session is refused, nothing of it sent."""
    first, second = tmp_path / "bench.db", tmp_path / "copy.db"
    with SessionLog.open(first) as log:
        sid = log.create_session(
            board={"board": {"name": "DHS-24"}}, checklist={"id": "c", "stages": []},
            bench=None, serial="DHS24-0009", operator="Ana Ortiz",
        )  # fmt: skip
    second.write_bytes(first.read_bytes())
    for path, reason in ((first, "one way"), (second, "another way")):
        with SessionLog.open(path) as log:
            log.record_event(sid, kind="note", operator="Ana Ortiz", reason=reason)
    assert _push(lab_db, first).returncode == 0
    result = _push(lab_db, second)
    assert result.returncode == 1
    assert f"refused: session {sid}: the lab's copy and this log differ at entry 1" in (
        result.stderr
    )
    with psycopg.connect(lab_db.url) as conn:
        reasons = [row[0] for row in conn.execute("SELECT reason FROM bringup.events")]
    assert reasons == ["one way"]


def test_the_server_refuses_changes_removals_and_entries_that_do_not_link(lab_db, tmp_path):
    """The table owner itself (the bench role made the tables) cannot change what was pushed."""
    db = tmp_path / "bench.db"
    make_log(db, 1)
    assert _push(lab_db, db).returncode == 0
    changes = [
        "UPDATE bringup.metrics SET value = 0",
        "DELETE FROM bringup.waveforms",
        "UPDATE bringup.attempts SET outcome = 'pass'",
        "DELETE FROM bringup.events",
        "UPDATE bringup.sessions SET serial = 'X'",
        "DELETE FROM bringup.signatures",
        "UPDATE bringup.logs SET bench = 'other'",
        "TRUNCATE bringup.metrics",
        "TRUNCATE bringup.sessions CASCADE",
    ]
    with psycopg.connect(lab_db.url, autocommit=True) as conn:
        for sql in changes:
            with pytest.raises(psycopg.Error, match="append-only"):
                conn.execute(sql)
        before = lab_counts(conn)
        # an entry whose chain hash is not SHA-256(previous chain hash + content hash)
        row = conn.execute(
            "SELECT log_id, session_id, seq FROM bringup.events ORDER BY seq DESC LIMIT 1"
        ).fetchone()
        insert = (
            "INSERT INTO bringup.events (log_id, session_id, seq, kind, operator, reason, "
            "recorded_utc, field_hashes_json, content_hash, chain_hash) "
            "VALUES (%s, %s, %s, 'note', 'x', '', '2026-12-01T00:00:00Z', '{}', %s, %s)"
        )
        with pytest.raises(psycopg.Error, match="does not link"):
            conn.execute(insert, [row[0], row[1], row[2] + 1, "a" * 64, "b" * 64])
        with pytest.raises(psycopg.Error, match="does not follow"):
            conn.execute(insert, [row[0], row[1], row[2] + 5, "a" * 64, "b" * 64])
        assert lab_counts(conn) == before


def test_a_lab_that_grants_the_benches_only_select_and_insert(lab_db, tmp_path):
    """The stricter setup the schema's notes describe: an administrator made the tables, the
    benches' role may only read and add. A push works; switching a trigger off does not."""
    from bringup.lab.schema import ensure_schema

    with lab_db.server.admin(lab_db.name) as admin:
        assert ensure_schema(admin)
        admin.execute("GRANT USAGE ON SCHEMA bringup TO bench")
        admin.execute("GRANT SELECT, INSERT ON ALL TABLES IN SCHEMA bringup TO bench")
    db = tmp_path / "bench.db"
    make_log(db, 2)
    result = _push(lab_db, db)
    assert result.returncode == 0, result.stderr
    with psycopg.connect(lab_db.url, autocommit=True) as conn:
        assert lab_counts(conn) == log_counts(db)
        for sql in (
            "ALTER TABLE bringup.metrics DISABLE TRIGGER USER",
            "DROP TRIGGER metrics_append_only ON bringup.metrics",
            "DELETE FROM bringup.metrics",
        ):
            with pytest.raises(psycopg.Error, match="must be owner|permission denied"):
                conn.execute(sql)
