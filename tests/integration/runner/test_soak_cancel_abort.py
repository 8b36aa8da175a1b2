"""The thermal soak's live prediction, and cancel/abort leaving the supply OFF."""

from __future__ import annotations

import threading

import pytest

from bringup.runner import SessionRunner

SOAK = "thermal.soak"


def _skip_to_soak(runner: SessionRunner) -> None:
    for step in runner.checklist.steps():
        if step.id != SOAK and step.gate:  # a safety gate is run, never skipped
            runner.run_step(step.id)
        elif step.id != SOAK:
            runner.skip(step.id, "soak tested on its own")


def test_soak_progress_carries_the_log_and_a_converging_prediction(make_runner):
    runner = make_runner()
    _skip_to_soak(runner)
    events = []
    result = runner.run_step(SOAK, on_progress=events.append)
    soaks = [e.soak for e in events if e.soak is not None]
    assert len(soaks) >= 8
    last = soaks[-1]
    assert list(last.times_s) == sorted(last.times_s)
    assert len(last.times_s) == len(last.temperatures_c)
    assert last.predicted_final_c is not None and last.settled
    # the soak stops once settled, after its minimum duration (480 s of bench time) and well
    # before its longest (1200 s)
    assert 480 <= last.times_s[-1] < 1200
    final = result.metric("heatsink_final")
    assert result.state == "pass"
    assert final.measured == pytest.approx(last.predicted_final_c, abs=0.5)
    # the healthy board's design predicts about 37.5 degC (see test_plans_predictions.py)
    assert final.measured == pytest.approx(final.predicted, abs=2.0)
    assert result.soak is not None and result.soak.temperatures_c == last.temperatures_c


def test_cancel_during_the_soak_stops_it_and_the_supply_is_off(make_runner):
    runner = make_runner(time_scale=50.0)
    _skip_to_soak(runner)
    cancel = threading.Event()

    def progress(event):
        if event.phase == "soaking":
            cancel.set()

    result = runner.run_step(SOAK, cancel=cancel, on_progress=progress)
    assert result.state == "not-run" and "cancelled by the operator" in result.message
    assert runner.bench().bench.supply.output_is_on() is False
    assert runner.step_status(SOAK).state == "not-run"


def test_abort_from_another_thread_makes_the_bench_safe(make_runner):
    runner = make_runner(time_scale=20.0)
    _skip_to_soak(runner)
    soaking = threading.Event()
    results = []

    def progress(event):
        if event.phase == "soaking":
            soaking.set()

    worker = threading.Thread(
        target=lambda: results.append(runner.run_step(SOAK, on_progress=progress))
    )
    worker.start()
    assert soaking.wait(timeout=60)
    assert runner.bench().bench.supply.output_is_on() is True
    runner.abort("operator pressed abort")
    worker.join(timeout=60)
    assert not worker.is_alive()
    assert results[0].state == "not-run" and "aborted" in results[0].message
    assert runner.bench().bench.supply.output_is_on() is False
    kinds = [e.kind for e in runner.log.events(runner.session_id)]
    assert "abort" in kinds
