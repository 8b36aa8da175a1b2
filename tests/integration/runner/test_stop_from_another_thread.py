"""STOP from another thread (the notebook's key): the supply output goes OFF at once, while the
step's own thread still waits on an instrument, and the caller is told when it is confirmed.

The simulated bench is started by the test and reached through a bench file (real sockets).
A step is held where the issue found the output staying ON: waiting for the scope's trigger
(the acquisition waits until the test lets it go), or waiting for a slow supply reply.
"""

from __future__ import annotations

import threading

import pytest

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.runner import BenchSource, SessionRunner, StepAnswers

FIRST, UNLOADED = "power-rails.first-power", "power-rails.rails-unloaded"


@pytest.fixture
def rig(sim_bench, tmp_path):
    sim = sim_bench()
    path = tmp_path / "bench.toml"
    path.write_text(sim.bench_file_text())
    runner = SessionRunner.create(board=load_board("demo"), checklist=load_checklist(),
                                  serial="DHS24-0100", operator="tester",
                                  bench=BenchSource.from_file(path),
                                  db_path=tmp_path / "log.sqlite")  # fmt: skip
    # the ramp is not under test here, but a safety gate is run, never skipped
    assert runner.run_step(FIRST, answers=StepAnswers(confirmed=True)).state == "pass"
    yield sim, runner
    runner.close()


def _start(runner, step_id, **kw) -> tuple[threading.Thread, list]:
    results: list = []
    worker = threading.Thread(
        target=lambda: results.append(
            runner.run_step(step_id, answers=StepAnswers(confirmed=True), **kw)
        ),
        daemon=True,
    )
    worker.start()
    return worker, results


def _stop_with_watchdog(runner):
    """``runner.stop()`` on a helper thread, so that a STOP that waits for the step (the
    defect) fails the test instead of hanging it."""
    out: list = []
    helper = threading.Thread(target=lambda: out.append(runner.stop()), daemon=True)
    helper.start()
    helper.join(20)
    assert out, "STOP waited for the step's instrument exchange"
    return out[0]


def test_stop_switches_off_while_the_step_waits_for_the_scope(rig):
    sim, runner = rig
    entered, release = threading.Event(), threading.Event()
    real = sim.scope.acquire

    def held():  # a trigger that does not come until the test says so
        entered.set()
        release.wait(60)
        return real()

    sim.scope.acquire = held
    worker, results = _start(runner, UNLOADED)
    try:
        assert entered.wait(60)
        assert sim.supply.output_on
        off = _stop_with_watchdog(runner)
        assert off.confirmed and off.problem is None
        assert off.text().startswith("Supply output OFF, confirmed at ")
        assert not sim.supply.output_on
        assert worker.is_alive()  # still waiting for the scope: STOP did not wait for it
    finally:
        release.set()
        worker.join(60)
    (result,) = results
    assert result.state == "not-run" and "stopped by the operator" in result.message
    assert not sim.supply.output_on


@pytest.fixture
def patient_supply(tmp_path, monkeypatch):
    """The sim's supply profile with a 30 s reply timeout (a slow instrument's setting): the
    step's thread keeps waiting in its exchange, it does not time out and retry meanwhile."""
    from bringup.instruments.profiles import BUILTIN_DIR

    folder = tmp_path / "profiles"
    folder.mkdir()
    text = (BUILTIN_DIR / "sim-supply.toml").read_text()
    assert "default = 2000" in text
    (folder / "sim-supply.toml").write_text(text.replace("default = 2000", "default = 30000"))
    monkeypatch.setenv("BRINGUP_PROFILES", str(folder))


def test_stop_switches_off_while_the_step_waits_for_a_slow_supply_reply(patient_supply, rig):
    sim, runner = rig
    hold, holding, release = threading.Event(), threading.Event(), threading.Event()
    real_send = sim.supply.faults.send_reply

    def send_reply(sock, replies, stop):
        # the supply answers the step's next query late: its thread waits in the exchange,
        # holding the supply connection, as with a slow or congested instrument
        if hold.is_set():
            hold.clear()
            holding.set()
            release.wait(60)
        return real_send(sock, replies, stop)

    sim.supply.faults.send_reply = send_reply

    def progress(event):
        # the scope is about to acquire; the next supply exchange is the read-back after it
        if event.phase == "acquiring" and event.message == "acquiring":
            hold.set()

    worker, results = _start(runner, UNLOADED, on_progress=progress)
    try:
        assert holding.wait(60)
        assert sim.supply.output_on
        off = _stop_with_watchdog(runner)
        assert off.confirmed, off.problem
        assert not sim.supply.output_on
        assert worker.is_alive()  # still waiting for the late reply
        # ... in its first try: STOP did not wait for the exchange (second connection)
        assert runner.bench().bench.supply.session.retries == 0
    finally:
        release.set()
        worker.join(60)
    (result,) = results
    assert result.state == "not-run" and not sim.supply.output_on


def test_stop_with_no_step_running_and_no_bench_open_says_nothing_was_on(tmp_path):
    runner = SessionRunner.create(board=load_board("demo"), checklist=load_checklist(),
                                  serial="DHS24-0100", operator="tester",
                                  bench=BenchSource.simulated(), db_path=tmp_path / "l.sqlite")  # fmt: skip
    with runner:
        off = runner.stop()
        assert off.confirmed
        # the session carries on after a STOP: the next step runs
        assert runner.run_step(FIRST).state == "pass"
