"""The runner's collaborators on their own: the walk (``SessionState``), the ``Planner`` and
the ``Recorder`` are built and checked here without a ``SessionRunner`` or a bench."""

from __future__ import annotations

import pytest

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.runner.bench_source import BenchSource
from bringup.runner.planning import Planner
from bringup.runner.results import AttemptResult
from bringup.runner.state import RunnerError, SessionState

FIRST, UNLOADED, METER = (
    "power-rails.first-power",
    "power-rails.rails-unloaded",
    "power-rails.logic-meter",
)


def _attempt(step_id: str, state: str, n: int = 1) -> AttemptResult:
    stage = step_id.split(".")[0]
    t = "2026-01-01T00:00:00.000Z"
    return AttemptResult(step_id, stage, n, state, (), (), {}, {}, "tester", t, t)


def test_the_walk_keeps_the_order_rule_and_the_go_back_cursor_without_a_runner():
    checklist = load_checklist()
    state = SessionState(checklist)
    assert state.current_step() == FIRST
    with pytest.raises(RunnerError, match="steps run in order"):
        state.check_order(checklist.step(UNLOADED))
    state.add(_attempt(FIRST, "pass"))
    state.decide(UNLOADED, "skipped", "scope elsewhere")
    state.add(_attempt(METER, "fail"))
    with pytest.raises(RunnerError, match="waive it"):
        state.check_skip(METER)
    state.check_waive(METER)  # a failed step may be waived
    with pytest.raises(RunnerError, match="only a failed step"):
        state.check_waive(FIRST)
    assert state.current_step() == METER
    state.decide(METER, "waived", "known meter offset (Bo)")
    after = state.current_step()
    assert after not in (FIRST, UNLOADED, METER)
    state.go_back("power-rails")
    assert state.current_step() == FIRST  # retaken in order from the stage's first step
    state.add(_attempt(FIRST, "pass", 2))
    assert state.current_step() == UNLOADED
    stage = state.stages()[0]
    assert stage.stage_id == "power-rails"
    assert [s.state for s in stage.steps][:3] == ["pass", "skipped", "waived"]
    state.running = UNLOADED
    assert state.status(checklist.step(UNLOADED)).state == "in-progress"
    assert not state.complete()


def test_the_planner_resolves_a_step_for_the_board_and_takes_the_benchs_probes():
    board = load_board("demo")
    step = load_checklist().step("edge-speed.edges")
    planner = Planner(board, BenchSource.simulated())
    default = planner.plan(step)
    assert default.channels, "the edges step plans scope channels"
    # A bench whose probes are all differential: every channel takes one of them.
    planner.use_probes({1: "differential", 2: "differential", 3: "differential"})
    kinds = {c.probe for c in planner.plan(step).channels}
    assert kinds == {"differential"}


def test_the_recorder_logs_attempts_and_events_of_one_session_on_its_own(tmp_path):
    """The ``Recorder`` alone, on a real SQLite file: an attempt and an event go in, are
    chained, and a resumed walk replays them (``resuming.replay``)."""
    from bringup.runner.analyses import AnalysisOutput
    from bringup.runner.file_snapshots import board_snapshot, checklist_snapshot
    from bringup.runner.recording import Recorder
    from bringup.runner.resuming import replay
    from bringup.store import SessionLog

    checklist, board = load_checklist(), load_board("demo")
    log = SessionLog.open(tmp_path / "log.sqlite")
    sid = log.create_session(board=board_snapshot(board), checklist=checklist_snapshot(checklist),
                             bench=None, serial="DHS24-0001", operator="tester")  # fmt: skip
    recorder = Recorder(log, sid)
    try:
        stored = recorder.store(checklist.step(FIRST), _attempt(FIRST, "pass"), {},
                                AnalysisOutput())  # fmt: skip
        assert stored.attempt_id is not None
        # (the power-rail steps are safety gates: the log refuses to skip one)
        recorder.event("skip", "tester", stage_id="gate-overdrive", step_id="vgs-on",
                       reason="scope elsewhere")  # fmt: skip
        assert log.verify_chain(sid).ok
        walk = SessionState(checklist)
        replay(log.session(sid).timeline, checklist, walk)
        assert (walk.state(FIRST), walk.state("gate-overdrive.vgs-on")) == ("pass", "skipped")
        assert walk.current_step() == UNLOADED
    finally:
        recorder.close()
