"""A waiver is a second person's decision: the session's operator cannot waive its failures.

On the simulated bench (real loopback sockets) and a real SQLite log: the operator's own name
is refused by the runner whatever its case and spacing, the session's original operator is
refused by the log itself after the session was resumed by someone else, and nothing is logged
for a refused waiver.
"""

from __future__ import annotations

import pytest

from bringup.runner import RunnerError, SessionRunner, StepAnswers
from bringup.store import SessionLog, StoreError

FIRST, UNLOADED, METER = (
    "power-rails.first-power",
    "power-rails.rails-unloaded",
    "power-rails.logic-meter",
)


def _failed_meter(runner: SessionRunner) -> None:
    for step in (FIRST, UNLOADED):
        assert runner.run_step(step).state in ("pass", "conditional-pass")
    # typed 3.6 V against the logic rail's 3.2-3.4 V target (demo board): a failure
    failed = runner.run_step(METER, answers=StepAnswers(confirmed=True, reading="3.6 V"))
    assert failed.state == "fail"


def test_the_operator_cannot_waive_their_own_failure(make_runner):
    runner = make_runner()  # operator "tester"
    _failed_meter(runner)
    events = len(runner.log.events(runner.session_id))
    for name in ("tester", "  Tester ", "TESTER"):
        with pytest.raises(RunnerError, match="runs this session and cannot waive"):
            runner.waive(METER, "meter reads high, known offset", name)
    assert len(runner.log.events(runner.session_id)) == events
    assert runner.step_status(METER).state == "fail"
    runner.waive(METER, "meter reads high, known offset", "Bo Lindqvist")
    assert runner.step_status(METER).state == "waived"


def test_after_a_resume_by_someone_else_the_original_operator_still_cannot_waive(make_runner):
    runner = make_runner()
    _failed_meter(runner)
    db, session = runner.log.path, runner.session_id
    runner.close()
    with SessionRunner.resume(session, db_path=db, operator="Bo Lindqvist") as resumed:
        with pytest.raises(RunnerError, match="'bo lindqvist' runs this session"):
            resumed.waive(METER, "known offset", "bo lindqvist")
        # the name the session was started under: refused by the log (its snapshot's operator)
        with pytest.raises(StoreError, match="'tester' runs this session and cannot waive"):
            resumed.waive(METER, "known offset", "tester")
        resumed.waive(METER, "known offset", "C. Okafor")
    with SessionLog.open(db, read_only=True) as log:
        waives = [e for e in log.events(session) if e.kind == "waive"]
    assert [(w.operator, w.payload["recorded_by"]) for w in waives] == [
        ("C. Okafor", "Bo Lindqvist")
    ]
