"""What the log refuses and what it never does: overwrite, hide a failure, accept a blank reason."""

from __future__ import annotations

import sqlite3
import threading

import pytest
from store_samples import gate_waveform, record

from bringup.store import SessionLog, StoreError


def test_retakes_are_new_rows_and_earlier_attempts_stay_byte_identical(db_path, log, session_id):
    first = record(
        log, session_id, outcome="fail", metrics={"v_logic": {"value": 3.05, "unit": "V"}}
    )
    conn = sqlite3.connect(db_path)
    before = conn.execute("SELECT * FROM attempts WHERE id = ?", [first]).fetchone()
    second = record(
        log, session_id, outcome="pass", metrics={"v_logic": {"value": 3.30, "unit": "V"}}
    )
    after = conn.execute("SELECT * FROM attempts WHERE id = ?", [first]).fetchone()
    conn.close()
    assert second != first and before == after
    attempts = log.attempts(session_id, step_id="logic-rail")
    assert [(a.attempt_no, a.outcome) for a in attempts] == [(1, "fail"), (2, "pass")]
    assert log.latest_outcomes(session_id) == {("power-rails", "logic-rail"): "pass"}


def test_the_database_itself_refuses_updates_and_deletes(db_path, log, session_id):
    attempt_id = record(log, session_id, waveforms={"vgs": gate_waveform(points=1000)})
    conn = sqlite3.connect(db_path)
    for sql in (
        "UPDATE attempts SET outcome = 'pass'",
        "DELETE FROM attempts",
        "UPDATE metrics SET value = 3.3",
        "DELETE FROM waveforms",
        "UPDATE sessions SET serial = 'DHS24-9999'",
        "DELETE FROM sessions",
    ):
        with pytest.raises(sqlite3.IntegrityError, match="never changed|append-only"):
            conn.execute(sql)
    conn.close()
    assert log.attempts(session_id)[0].id == attempt_id


def test_skip_needs_a_reason_and_never_hides_a_failure(log, session_id):
    with pytest.raises(StoreError, match="needs a reason"):
        log.record_event(
            session_id,
            kind="skip",
            operator="Ana Ortiz",
            stage_id="power-rails",
            step_id="first-power",
        )
    log.record_event(
        session_id,
        kind="skip",
        operator="Ana Ortiz",
        stage_id="power-rails",
        step_id="first-power",
        reason="board powered up by the previous shift",
    )
    record(log, session_id, step="logic-rail", outcome="conditional-fail")
    with pytest.raises(StoreError, match="failed .conditional-fail.: waive it"):
        log.record_event(
            session_id,
            kind="skip",
            operator="Ana Ortiz",
            stage_id="power-rails",
            step_id="logic-rail",
            reason="x",
        )
    assert log.latest_outcomes(session_id) == {
        ("power-rails", "first-power"): "skipped",
        ("power-rails", "logic-rail"): "conditional-fail",
    }


def test_waive_only_a_failed_step_with_a_reason_and_a_name(log, session_id):
    record(log, session_id, step="first-power", outcome="pass")
    with pytest.raises(StoreError, match="only a failed step can be .its latest outcome is pass"):
        log.record_event(
            session_id,
            kind="waive",
            operator="Ben Ito",
            stage_id="power-rails",
            step_id="first-power",
            reason="r",
        )
    with pytest.raises(StoreError, match="latest outcome is nothing yet"):
        log.record_event(
            session_id,
            kind="waive",
            operator="Ben Ito",
            stage_id="gate-overdrive",
            step_id="vgs-on",
            reason="r",
        )
    record(log, session_id, step="logic-rail", outcome="fail")
    with pytest.raises(StoreError, match="needs a reason"):
        log.record_event(
            session_id,
            kind="waive",
            operator="Ben Ito",
            stage_id="power-rails",
            step_id="logic-rail",
            reason=" ",
        )
    with pytest.raises(StoreError, match="name is required"):
        log.record_event(
            session_id,
            kind="waive",
            operator="",
            stage_id="power-rails",
            step_id="logic-rail",
            reason="r",
        )
    log.record_event(
        session_id,
        kind="waive",
        operator="Ben Ito",
        stage_id="power-rails",
        step_id="logic-rail",
        reason="3.05 V is within the regulator's datasheet range; accepted for rev B",
    )
    assert log.latest_outcomes(session_id)[("power-rails", "logic-rail")] == "waived"
    (waive,) = [e for e in log.events(session_id) if e.kind == "waive"]
    assert waive.operator == "Ben Ito" and waive.reason.startswith("3.05 V")
    # a retake after the waiver is logged too and becomes the latest outcome
    record(log, session_id, step="logic-rail", outcome="pass")
    assert log.latest_outcomes(session_id)[("power-rails", "logic-rail")] == "pass"


def test_finish_seals_the_session_except_for_notes(log, session_id):
    record(log, session_id)
    # One step passed, the rest not started: begun, not done (the caller's own view, passed
    # to set_session_state, is not what the listing shows: the chain is).
    log.set_session_state(
        session_id, verdict="conditional-pass", stage_verdicts={"power-rails": "pass"}
    )
    assert log.sessions()[0].verdict == "in-progress"
    log.record_event(
        session_id,
        kind="finish",
        operator="Ana Ortiz",
        payload={"verdict": "pass", "stages": {"power-rails": "pass", "gate-overdrive": "pass"}},
    )
    summary = log.sessions()[0]
    assert summary.finished and summary.verdict == "pass"
    assert summary.stage_verdicts == {"power-rails": "pass", "gate-overdrive": "pass"}
    with pytest.raises(StoreError, match="is finished"):
        record(log, session_id)
    with pytest.raises(StoreError, match="only notes"):
        log.record_event(session_id, kind="abort", operator="Ana Ortiz")
    log.record_event(
        session_id, kind="note", operator="Ana Ortiz", reason="heatsink compound re-applied"
    )
    assert [e.kind for e in log.events(session_id)] == ["finish", "note"]


def test_abort_and_resume_mark_the_session_state(log, session_id):
    record(log, session_id)
    log.record_event(session_id, kind="abort", operator="Ana Ortiz", reason="smell of burning")
    assert log.sessions()[0].state == "aborted"
    log.record_event(session_id, kind="resume", operator="Ana Ortiz")
    assert log.sessions()[0].state == "open"
    with pytest.raises(StoreError, match="event kind 'restart' is not one of"):
        log.record_event(session_id, kind="restart", operator="Ana Ortiz")


def test_a_log_opened_on_one_thread_is_written_from_workers(log, session_id):
    errors: list[BaseException] = []

    def worker(step: str) -> None:
        try:
            for _ in range(5):
                record(log, session_id, step=step)
        except BaseException as error:  # collected: a failing thread must fail the test
            errors.append(error)

    threads = [threading.Thread(target=worker, args=(s,)) for s in ("first-power", "logic-rail")]
    for thread in threads:
        thread.start()
    for thread in threads:
        thread.join(timeout=30)
    assert not errors
    attempts = log.attempts(session_id)
    assert sorted(a.seq for a in attempts) == list(range(1, 11))
    assert sorted(a.attempt_no for a in attempts if a.step_id == "first-power") == [1, 2, 3, 4, 5]
    assert log.verify_chain(session_id).ok


def test_two_logs_on_one_file_interleave_without_losing_entries(db_path, log, session_id):
    with SessionLog.open(db_path) as other:
        for _ in range(3):
            record(log, session_id, step="first-power")
            record(other, session_id, step="logic-rail")
    assert [a.seq for a in log.attempts(session_id)] == [1, 2, 3, 4, 5, 6]
    assert log.verify_chain(session_id).ok


def test_signatures_are_stored_as_given_and_never_changed(db_path, log, session_id):
    record(log, session_id)
    log.record_event(session_id, kind="finish", operator="Ana Ortiz", payload={"verdict": "pass"})
    key, signature = bytes(range(32)), bytes(range(64, 128))  # Ed25519 sizes: 32 and 64 bytes
    row_id = log.add_signature(
        session_id,
        name="Ana Ortiz",
        role="operator",
        signed_utc="2026-12-01T12:00:00Z",
        public_key=key,
        fingerprint="SHA256:abcd",
        signature=signature,
        content_digest=log.chain_head(session_id),
    )
    (stored,) = log.signatures(session_id)
    assert stored.id == row_id and stored.public_key == key and stored.signature == signature
    assert stored.content_digest == log.chain_head(session_id) and stored.role == "operator"
    assert log.session(session_id).signatures == [stored]
    with pytest.raises(StoreError, match="signer's role is required"):
        log.add_signature(
            session_id, name="Ana", role=" ", signed_utc="2026-12-01T12:00:00Z", public_key=key,
            fingerprint="f", signature=signature, content_digest="d",
        )  # fmt: skip
    conn = sqlite3.connect(db_path)
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        conn.execute("UPDATE signatures SET name = 'someone else'")
    conn.close()
