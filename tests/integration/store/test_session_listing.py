"""`sessions()` reads the whole log in two queries; each summary equals the one-session read."""

import sqlite3

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
