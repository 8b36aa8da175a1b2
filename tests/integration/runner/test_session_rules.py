"""The runner's rules on a simulated bench: order, skip, waive, go back, retake, refusal."""

from __future__ import annotations

import pytest

from bringup.errors import InputError
from bringup.runner import RunnerError, StepAnswers
from bringup.store import SessionLog

FIRST, UNLOADED, METER = (
    "power-rails.first-power",
    "power-rails.rails-unloaded",
    "power-rails.logic-meter",
)


def test_steps_run_in_order_and_a_skip_needs_a_reason(make_runner):
    runner = make_runner()
    assert runner.current_step() == FIRST
    assert [s.state for s in runner.stages()] == ["not-started"] * 5
    with pytest.raises(RunnerError, match="steps run in order"):
        runner.run_step(METER)
    with pytest.raises(RunnerError, match="needs a reason"):
        runner.skip(FIRST, "  ")
    # the first-power ramp and the rail checks are safety gates: run, never skipped
    with pytest.raises(RunnerError, match="is a safety gate: it cannot be skipped"):
        runner.skip(FIRST, "ramp done on the bench supply's front panel")
    assert runner.run_step(FIRST).state == "pass"
    assert runner.run_step(UNLOADED).state == "pass"
    assert runner.current_step() == METER
    result = runner.run_step(METER, notes="meter on its 4 V range")  # the sim reads its meter
    assert result.notes == "meter on its 4 V range"
    assert result.state == "pass"
    # the meter reads the logic rail: 3.3 V nominal, target 3.2-3.4 V
    assert result.metric("logic_level").measured == pytest.approx(3.3, abs=0.05)
    with SessionLog.open(runner.log.path, create=False) as log:
        events = log.events(runner.session_id)
        # the refused skip logged nothing; each step logged its energise event before power
        assert [(e.kind, e.step_id) for e in events] == [
            ("energise", "first-power"),
            ("energise", "rails-unloaded"),
            ("energise", "logic-meter"),
        ]
        assert [a.step_id for a in log.attempts(runner.session_id)] == [
            "first-power", "rails-unloaded", "logic-meter",
        ]  # fmt: skip
        assert log.attempts(runner.session_id)[2].notes == "meter on its 4 V range"
    assert runner.step_status(FIRST).state == "pass"


def test_waive_needs_a_failed_step_a_reason_and_a_name_and_retakes_keep_history(make_runner):
    runner = make_runner()
    runner.run_step(FIRST)
    runner.run_step(UNLOADED)
    with pytest.raises(RunnerError, match="only a failed step"):
        runner.waive(FIRST, "fine", "Bo")
    failed = runner.run_step(METER, answers=StepAnswers(confirmed=True, reading="3.6 V"))
    logic = failed.metric("logic_level")
    # typed 3.6 V against a 3.4 V max [computed]: margin -0.2 V, beyond the 0.02 V guard band
    assert failed.state == "fail" and logic.measured == pytest.approx(3.6)
    assert logic.margin == pytest.approx(-0.2)
    with pytest.raises(RunnerError, match="waive it"):
        runner.skip(METER, "meter broken")
    with pytest.raises(RunnerError, match="name"):
        runner.waive(METER, "meter reads high, known offset", " ")
    with pytest.raises(RunnerError, match="reason"):
        runner.waive(METER, "", "Bo Lindqvist")
    runner.waive(METER, "meter reads high, known offset", "Bo Lindqvist")
    assert runner.step_status(METER).state == "waived"
    assert runner.current_step() == "power-rails.rails-loaded"

    runner.go_back("power-rails")
    assert runner.current_step() == FIRST  # the walk restarts at the stage's first step
    runner.run_step(FIRST)
    assert runner.current_step() == UNLOADED
    retake = runner.run_step(METER, answers=StepAnswers(confirmed=True, reading="3.30"))
    assert retake.state == "pass" and retake.attempt_no == 2
    assert [a.state for a in runner.attempts(METER)] == ["fail", "pass"]
    with SessionLog.open(runner.log.path, create=False) as log:
        stored = log.attempts(runner.session_id, step_id="logic-meter")
        assert [a.outcome for a in stored] == ["fail", "pass"]  # the retake overwrote nothing
        assert stored[0].metrics["logic_level"]["value"] == pytest.approx(3.6)
        waive = [e for e in log.events(runner.session_id) if e.kind == "waive"][0]
        assert waive.operator == "Bo Lindqvist" and "offset" in waive.reason
        assert log.verify_chain(runner.session_id).ok


def test_a_bad_typed_reading_is_refused_with_the_step_named(make_runner):
    runner = make_runner()
    with pytest.raises(InputError, match=r"power-rails.logic-meter reading.*'3,3'"):
        runner.check_reading(METER, "3,3")
    assert runner.check_reading(METER, "3300 mV") == pytest.approx(3.3)
    runner.run_step(FIRST)
    runner.run_step(UNLOADED)
    result = runner.run_step(METER, answers=StepAnswers(confirmed=True, reading="three volts"))
    assert result.state == "not-run" and "three volts" in result.message


def _bench_file_without_simulation(tmp_path, running):
    """The simulated bench's file with its [simulation] table removed: a bench on which the
    runner cannot play the operator's hands, like a real one."""
    text = running.bench_file_text().replace("[simulation]\nenabled = true\n", "")
    assert "[simulation]" not in text
    path = tmp_path / "bench.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_without_answers_a_step_is_refused_and_logged_as_not_run(make_runner, tmp_path):
    from bringup.boards.board_file import load_board
    from bringup.runner import BenchSource
    from sim_instruments.bench import start_bench

    with start_bench(load_board("demo").design, "healthy", 3) as running:
        source = BenchSource.from_file(_bench_file_without_simulation(tmp_path, running))
        runner = make_runner(bench=source)
        refused = runner.run_step(FIRST)
        assert refused.state == "not-run"
        assert "needs the operator's confirmation" in refused.message
        assert runner.step_status(FIRST).state == "not-run"
        done = runner.run_step(FIRST, answers=StepAnswers(confirmed=True))
        assert done.state == "pass" and done.attempt_no == 2
        assert not running.supply.output_on
        runner.close()  # while the bench still answers: closing confirms the output OFF
        with SessionLog.open(runner.log.path, create=False) as log:
            assert [a.outcome for a in log.attempts(runner.session_id)] == ["not-run", "pass"]


def test_a_clipped_trace_is_never_judged(make_runner, tmp_path):
    from bringup.checklist.load import load_checklist, standard_checklist_path

    # The logic rail (3.3 V) on a screen from 2.9 V to 3.3 V: its samples pile up on the top
    # code. Read as it is, the mean would look like a healthy 3.29 V.
    text = (
        standard_checklist_path()
        .read_text()
        .replace(
            'logic = { range = "1 V", offset = "design.logic_voltage" }',
            'logic = { range = "0.4 V", offset = "3.1 V" }',
            1,
        )
    )
    path = tmp_path / "narrow.toml"
    path.write_text(text)
    runner = make_runner(checklist=load_checklist(path))
    assert runner.run_step(FIRST).state == "pass"
    result = runner.run_step(UNLOADED)
    assert result.state == "fail"
    logic = result.metric("logic_level")
    assert logic.measured is None and logic.outcome == "fail" and "clipped" in logic.reason
    assert result.metric("vdrv_level").outcome == "pass"  # the other traces still count
    assert any("clipped at the top" in w for w in result.warnings)


def test_the_first_power_ramp_stops_at_the_first_step_over_its_limit(make_runner, tmp_path):
    from bringup.boards.board_file import demo_board_path, load_board

    # A ramp-current limit below what the board draws at its first step plays a short.
    text = demo_board_path().read_text().replace('max = "0.1 A"', 'max = "1 mA"', 1)
    path = tmp_path / "board.toml"
    path.write_text(text)
    board = load_board(path)
    assert board.targets["ramp_current"].limit.max == pytest.approx(1e-3)
    runner = make_runner(board=board)
    events = []
    result = runner.run_step(FIRST, on_progress=events.append)
    ramp = [e for e in events if e.phase == "ramp"]
    assert result.state == "fail"
    assert len(ramp) == 1  # stopped at 6 V: 12, 18 and 24 V were never applied
    assert "ramp stopped at 6 V" in " ".join(result.warnings)
    assert result.metric("ramp_current").measured > 1e-3
    assert runner.bench().bench.supply.output_is_on() is False


def test_resume_reloads_attempts_and_their_waveforms(make_runner):
    import numpy as np

    from bringup.runner import SessionRunner

    runner = make_runner()
    runner.run_step(FIRST)
    live = runner.run_step(UNLOADED)
    runner.close()
    again = SessionRunner.resume(runner.session_id[:8], db_path=runner.log.path)
    try:
        assert again.current_step() == METER
        stored = again.attempts(UNLOADED)[0]
        assert stored.state == live.state == "pass"
        for m in live.metrics:
            assert stored.metric(m.id).measured == pytest.approx(m.measured)
            assert stored.metric(m.id).outcome == m.outcome
        views = {v.net: v for v in again.waveforms_of(stored)}
        assert set(views) == {"bus", "vdrv", "logic"}
        fresh = {v.net: v for v in live.waveforms}
        # the same decimated trace, rebuilt from the stored raw codes and scale
        np.testing.assert_allclose(views["vdrv"].volts, fresh["vdrv"].volts)
        assert views["vdrv"].levels["mean"] == pytest.approx(fresh["vdrv"].levels["mean"])
    finally:
        again.close()
