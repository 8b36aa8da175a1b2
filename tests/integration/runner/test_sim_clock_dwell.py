"""A simulated bench nobody paces (a headless run): its waits pass on the simulated clock.

The simulated supply settles at once and the simulated physics (the thermal model) runs on
the simulator's clock, so a supply dwell or a soak interval is the simulator's time to pass,
not the host's: held at scale 0, the clock must move by exactly the bench's waits, and the
soak must still be logged on its interval grid and judged as on a paced bench.
"""

from __future__ import annotations

import pytest

from bringup.runner.bench_source import UNPACED

FIRST_POWER = "power-rails.first-power"
SOAK = "thermal.soak"


def _sim_time_s(runner) -> float:
    session = runner.bench().bench.scope.session
    with session.lock:
        return float(session.query("SIM:TIME?"))


def test_unpaced_ramp_dwells_move_the_simulated_clock_by_exactly_the_dwells(make_runner):
    runner = make_runner(time_scale=0.0)
    assert UNPACED == 0.0
    before = _sim_time_s(runner)
    result = runner.run_step(FIRST_POWER)
    assert result.state == "pass", result.message
    # checklists/high-side-bootstrap.toml, first-power: four ramp steps, dwell = "50 ms" each;
    # nothing else moves a held clock
    assert _sim_time_s(runner) - before == pytest.approx(4 * 0.050, abs=1e-9)


def test_unpaced_soak_is_logged_on_its_grid_and_judged(make_runner):
    runner = make_runner(time_scale=UNPACED)
    for step in runner.checklist.steps():
        if step.id != SOAK and step.gate:  # a safety gate is run, never skipped
            runner.run_step(step.id)
        elif step.id != SOAK:
            runner.skip(step.id, "soak tested on its own")
    before = _sim_time_s(runner)
    result = runner.run_step(SOAK)
    assert result.state == "pass", result.message
    times = list(result.soak.times_s)
    interval = 5.0  # checklists/high-side-bootstrap.toml, [stages.thermal.steps.soak.soak]
    assert times == pytest.approx([k * interval for k in range(len(times))], abs=1e-9)
    # the soak stops once settled, after its minimum duration (480 s) and before 1200 s
    assert 480 <= times[-1] < 1200
    # the supply's dwell (default 50 ms) before the log, then one interval between readings
    assert _sim_time_s(runner) - before == pytest.approx(0.050 + times[-1], abs=1e-6)
    final = result.metric("heatsink_final")
    # the healthy board's design predicts about 37.5 degC (see test_plans_predictions.py)
    assert final.measured == pytest.approx(final.predicted, abs=2.0)


def test_the_notebook_names_an_unpaced_clock_rather_than_a_zero_speed_up():
    from bringup.runner import BenchSource
    from bringup.tui.launch import _sim_text

    assert _sim_text(BenchSource.simulated("healthy", time_scale=UNPACED)) == (
        "sim bench (healthy, unpaced clock)"
    )
    assert _sim_text(BenchSource.simulated("healthy", time_scale=20.0)) == (
        "sim bench (healthy, clock ×20)"
    )
