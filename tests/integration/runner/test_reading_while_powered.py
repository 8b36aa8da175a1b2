"""Step 1.3 (the logic rail on the meter) asks for its reading once the board is powered.

Reported: the notebook asked for the meter reading before the supply was switched on, so the
value typed could only be a guess or a reading of a dead board. The plan now gives the order
the bench needs (energise, then read, then confirm) and the runner asks for the reading from
the step's thread once the supply output is ON. The simulated bench runs in this process (real
loopback sockets), so the test looks at the supply's output at the moment the reading is asked.
"""

from __future__ import annotations

import pytest

from bringup.runner import BenchSource, StepAnswers

METER = "power-rails.logic-meter"


@pytest.fixture
def bench(sim_bench, tmp_path):
    running = sim_bench("healthy")
    path = tmp_path / "bench.toml"
    path.write_text(running.bench_file_text())
    return running, BenchSource.from_file(path)


def _to_meter(runner) -> None:
    for step in ("power-rails.first-power", "power-rails.rails-unloaded"):
        done = runner.run_step(step, answers=StepAnswers(confirmed=True))
        assert done.state == "pass", done.message


def test_the_reading_is_asked_with_the_board_powered_and_judged(bench, make_runner):
    running, source = bench
    runner = make_runner(bench=source)
    _to_meter(runner)
    assert runner.plan(METER).prompts == ("energise", "reading", "confirm")
    assert runner.plan("power-rails.first-power").prompts == ("confirm", "energise")
    asked = []

    def read_now(prompt: str, unit: str) -> str:
        asked.append((prompt, unit, running.supply.output_on, running.supply.voltage_set))
        return "3.31 V"

    result = runner.run_step(METER, answers=StepAnswers(confirmed=True, read_now=read_now))
    assert asked == [("Logic rail voltage on the meter", "V", True, pytest.approx(24.0))]
    assert result.state == "pass" and result.metric("logic_level").measured == pytest.approx(3.31)
    assert not running.supply.output_on  # off again once the step ended


def test_no_reading_typed_stops_the_step_with_the_supply_off(bench, make_runner):
    running, source = bench
    runner = make_runner(bench=source)
    _to_meter(runner)

    def read_now(prompt: str, unit: str) -> None:
        assert running.supply.output_on
        return None  # the operator closed the prompt

    result = runner.run_step(METER, answers=StepAnswers(confirmed=True, read_now=read_now))
    assert result.state == "not-run" and "no reading typed" in result.message
    assert not running.supply.output_on
