"""`sessions()` reads the whole log in a few queries; each summary equals the one-session read."""

import json
import sqlite3

import pytest
from store_samples import BENCH, BOARD, CHECKLIST, record

OTHER_CHECKLIST = {
    "id": "other",
    "stages": [{"id": "power-rails", "steps": [{"id": "first-power"}, {"id": "logic-rail"}]}],
}


def _new(log, serial, checklist=CHECKLIST):
    return log.create_session(
        board=BOARD, checklist=checklist, bench=BENCH, serial=serial, operator="Ana Ortiz"
    )


def test_the_listing_equals_each_session_read_on_its_own(log, db_path):
    empty = _new(log, "DHS24-0001")
    finished = _new(log, "DHS24-0002")
    record(log, finished, step="first-power")
    record(log, finished, step="logic-rail", outcome="fail")
    record(log, finished, step="logic-rail")  # a retake
    log.record_event(
        finished,
        kind="finish",
        operator="Ana Ortiz",
        payload={"verdict": "pass", "stages": {"power-rails": "pass", "gate-overdrive": "pass"}},
    )
    log.record_event(finished, kind="note", operator="Ana Ortiz", reason="compound re-applied")
    skipped = _new(log, "DHS24-0003", OTHER_CHECKLIST)
    log.record_event(skipped, kind="skip", operator="Ana Ortiz", stage_id="power-rails",
                     step_id="first-power", reason="powered by the previous shift")  # fmt: skip
    record(log, skipped, step="logic-rail", outcome="fail")
    log.record_event(skipped, kind="waive", operator="Ben Ito", stage_id="power-rails",
                     step_id="logic-rail", reason="rail within the datasheet limit")  # fmt: skip
    aborted = _new(log, "DHS24-0004")
    record(log, aborted, step="first-power", outcome="conditional-fail")
    log.record_event(aborted, kind="abort", operator="Ana Ortiz", reason="smell of burning")
    # An edit of a listing column outside bringup: named, and the chain's value shown.
    conn = sqlite3.connect(db_path)
    with conn:
        conn.execute("UPDATE sessions SET verdict = 'pass' WHERE id = ?", [aborted])
    conn.close()

    listed = {s.id: s for s in log.sessions()}
    assert set(listed) == {empty, finished, skipped, aborted}
    for sid, summary in listed.items():
        assert summary == log.session(sid).summary, sid
    # and what the chain says, by hand
    assert listed[empty].verdict == "not-started" and listed[empty].attempts == 0
    assert listed[finished].state == "finished" and listed[finished].attempts == 3
    assert listed[finished].progress == {"pass": 2}
    assert listed[skipped].progress == {"skipped": 1, "waived": 1}
    assert listed[skipped].steps_total == 2 and listed[finished].steps_total == 3
    assert listed[aborted].state == "aborted"
    assert listed[aborted].verdict == "conditional-fail"
    assert any(line.startswith("verdict:") for line in listed[aborted].altered)


def _listing_row_count(db_path, sid) -> int:
    conn = sqlite3.connect(db_path)
    try:
        return conn.execute("SELECT count(*) FROM listings WHERE session_id = ?", [sid]).fetchone()[
            0
        ]
    finally:
        conn.close()


def test_each_entry_leaves_a_listing_row_that_is_never_changed(log, db_path):
    sid = _new(log, "DHS24-0005")
    record(log, sid, step="first-power")
    log.record_event(sid, kind="note", operator="Ana Ortiz", reason="probe on TP3")
    log.set_session_state(sid)  # the columns rewritten without a new entry: no new row
    # one row at creation (seq 0) and one per chained entry
    assert _listing_row_count(db_path, sid) == 3
    conn = sqlite3.connect(db_path)
    for sql in ("UPDATE listings SET verdict = 'pass'", "DELETE FROM listings"):
        with pytest.raises(sqlite3.IntegrityError, match="append-only"):
            with conn:
                conn.execute(sql)
    conn.close()
    assert log.sessions()[0] == log.session(sid).summary


def test_a_listing_row_that_does_not_name_the_chain_head_is_not_shown(log, db_path):
    sid = _new(log, "DHS24-0006")
    record(log, sid, step="first-power", outcome="fail")
    # a row added outside bringup, past the chain's head, saying the board passed
    conn = sqlite3.connect(db_path)
    with conn:
        conn.execute(
            "INSERT INTO listings (session_id, seq, chain_hash, state, verdict, last_activity_utc, "
            "progress_json, attempts, steps_total) VALUES (?, 99, 'forged', 'finished', 'pass', "
            "'2099-01-01T00:00:00Z', ?, 3, 3)",
            [sid, json.dumps({"pass": 3})],
        )
    conn.close()
    (summary,) = log.sessions()
    assert summary == log.session(sid).summary
    assert summary.verdict == "fail" and summary.state == "open" and summary.attempts == 1


def test_a_log_from_before_the_listings_lists_by_replay_then_by_its_new_rows(tmp_path):
    from bringup.store import SessionLog

    path = tmp_path / "old.db"
    with SessionLog.open(path) as log:
        old = _new(log, "DHS24-0007")
        record(log, old, step="first-power", outcome="fail")
        other = _new(log, "DHS24-0008")
    # the log as schema 1 left it (no listings, no covering indexes, no sign-off statements)
    conn = sqlite3.connect(path)
    with conn:
        conn.execute("ALTER TABLE signatures DROP COLUMN statement_json")
        conn.execute("DROP TABLE listings")
        for index in ("attempts_heads", "events_heads", "sessions_listing"):
            conn.execute(f"DROP INDEX {index}")
        conn.execute("PRAGMA user_version = 1")
    conn.close()
    with SessionLog.open(path) as log:  # a writer upgrades it: no listing rows yet
        assert _listing_row_count(path, old) == 0
        before = {s.id: s for s in log.sessions()}
        assert before[old] == log.session(old).summary and before[old].verdict == "fail"
        log.record_event(other, kind="note", operator="Ana Ortiz", reason="after the upgrade")
        assert _listing_row_count(path, other) == 1 and _listing_row_count(path, old) == 0
        after = {s.id: s for s in log.sessions()}  # one listed from its row, one replayed
        for sid in (old, other):
            assert after[sid] == log.session(sid).summary, sid
