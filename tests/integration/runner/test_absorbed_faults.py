"""A fault that a retry or a switch-off gets past is logged with the attempt and shown in its
result, not lost (issue: a run where all steps passed with no trace of the faults).

Faults come from the simulated instruments' fault injection (real sockets, real SQLite)."""

from __future__ import annotations

import pytest

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.runner import BenchSource, SessionRunner, StepAnswers
from bringup.runner.recording import attempt_from_record

FIRST = "power-rails.first-power"


@pytest.fixture
def rig(sim_bench, tmp_path):
    sim = sim_bench()
    path = tmp_path / "bench.toml"
    path.write_text(sim.bench_file_text())
    runner = SessionRunner.create(board=load_board("demo"), checklist=load_checklist(),
                                  serial="DHS24-0100", operator="tester",
                                  bench=BenchSource.from_file(path),
                                  db_path=tmp_path / "log.sqlite")  # fmt: skip
    yield sim, runner
    runner.close()


@pytest.mark.parametrize(
    ("fault", "options", "said"),
    [
        ("drop", {}, "closed the connection"),  # a dropped connection, reopened
        ("delay", {"seconds": 2.5, "once": True}, "nothing within"),  # a reply past its timeout
        ("error", {"code": -222}, "-222"),  # an error found in the queue
    ],
)
def test_a_fault_got_past_is_logged_with_the_attempt(rig, fault, options, said):
    sim, runner = rig
    sim.supply.faults.inject(fault, **options)
    result = runner.run_step(FIRST, answers=StepAnswers(confirmed=True))
    assert result.state == "pass", result.message  # the retry saved the step ...
    assert not sim.supply.output_on
    assert any(said in line for line in result.absorbed), result.absorbed  # ... not in silence
    assert all(line.startswith("supply") for line in result.absorbed)
    (stored,) = runner.log.attempts(runner.session_id)
    assert stored.extra["absorbed"] == list(result.absorbed)
    assert attempt_from_record(stored, runner.checklist.step(FIRST)).absorbed == result.absorbed
    assert runner.log.verify_chain(runner.session_id).ok


def test_a_clean_step_absorbs_nothing(rig):
    sim, runner = rig
    result = runner.run_step(FIRST, answers=StepAnswers(confirmed=True))
    assert result.state == "pass" and result.absorbed == () and result.fault == ""
