"""The soak log's instants on a simulated bench are exact, however loaded the host is.

A wall-timed log at the simulator's 600x speed-up turns every 20 ms of scheduling delay
between the time stamp and the reading into 12 s of bench time at the wrong instant; on a
loaded machine that bent the fit of a healthy soak into "undecided" and failed the board.
The runner now holds the simulator's clock and steps it by one interval per reading.
"""

from __future__ import annotations

import pytest

SOAK = "thermal.soak"


def test_a_simulated_soak_is_logged_on_its_interval_grid(make_runner):
    runner = make_runner(time_scale=1000.0)  # a paced clock: the wall waits between readings
    for step in runner.checklist.steps():
        if step.id != SOAK and step.gate:  # a safety gate is run, never skipped
            runner.run_step(step.id)
        elif step.id != SOAK:
            runner.skip(step.id, "soak tested on its own")
    link = runner.bench()
    scale_before = link.bench.simulation.time_scale()
    # a load stand-in, sent over the wire: every thermometer reply 30 ms late (18 s of bench
    # time at the default 600x speed-up)
    thermometer = link.bench.thermometer.session
    with thermometer.lock:
        thermometer.write("SIM:FAUL:DEL 0.03")
    result = runner.run_step(SOAK)

    assert result.soak is not None, (result.state, result.message)
    times = list(result.soak.times_s)
    interval = 5.0  # checklists/high-side-bootstrap.toml, [stages.thermal.steps.soak.soak]
    assert len(times) >= 8
    assert times == pytest.approx([k * interval for k in range(len(times))], abs=1e-9)
    assert result.state == "pass", result.message
    # the speed-up the simulator had before the soak is given back afterwards
    assert link.bench.simulation.time_scale() == scale_before
