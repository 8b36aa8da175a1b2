"""A step retaken within a session: the batch shows its latest judged attempt, and the earlier
one stays in the serial's history (a real runner on the simulated bench, a real log)."""

from __future__ import annotations

from bringup.batch.collect import collect_batch
from bringup.store import SessionLog

STEP = "power-rails.rails-unloaded"
KEY = "power-rails.rails-unloaded.vdrv_level"


def test_retaken_step_shows_its_latest_attempt(make_runner, tmp_path):
    runner = make_runner("healthy", seed=11)
    runner.run_step("power-rails.first-power")  # the safety gate first
    first = runner.run_step(STEP)
    second = runner.run_step(STEP)  # a retake (after touching up a probe, say)
    assert first.state == second.state == "pass"
    with SessionLog.open(tmp_path / "log.sqlite", create=False, read_only=True) as log:
        attempts = [
            a for a in log.attempts(runner.session_id) if f"{a.stage_id}.{a.step_id}" == STEP
        ]
        batch = collect_batch(log)
    assert [a.attempt_no for a in attempts] == [1, 2]
    (row,) = batch.rows
    reading = row.readings[KEY]
    # the row's value is the second attempt's, as logged (not an average, not the first)
    assert reading.attempt_no == 2 and reading.attempt_id == attempts[1].id
    assert reading.value == attempts[1].metrics["vdrv_level"]["value"]
    history = [h for h in row.history if f"{h.stage}.{h.step}" == STEP]
    assert [(h.attempt_no, h.shown) for h in history] == [(1, False), (2, True)]
    assert history[0].values["vdrv_level"] == attempts[0].metrics["vdrv_level"]["value"]
    assert row.retaken and len(row.sessions) == 1
