"""``bringup demo`` in a real terminal (tmux): keys in, screen read back, supply off on Ctrl+C.

The simulated bench is started by the test and handed to the demo as a bench file, so it
outlives the demo's process and its supply can be asked afterwards over its own socket.
"""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path

import pytest
from tmux_pane import TMUX, Pane

pytestmark = pytest.mark.skipif(TMUX is None, reason="tmux is not installed on this machine")


def _wait(predicate, timeout: float, what: str) -> None:
    deadline = time.monotonic() + timeout
    while not predicate():
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out waiting for {what}")
        time.sleep(0.05)


def test_demo_in_tmux_runs_a_step_and_ctrl_c_turns_the_supply_off(bench_file, tmp_path, visa_rm):
    bench, path = bench_file("healthy")
    log = tmp_path / "smoke.sqlite"
    bringup = Path(sys.executable).with_name("bringup")
    env = {**os.environ, "TERM": "xterm-256color", "BRINGUP_OPERATOR": "smoke",
           "TEXTUAL_ANIMATIONS": "none"}  # fmt: skip
    command = f"{bringup} demo --bench {path} --db {log}; echo bringup-exit=$?; read done"
    pane = Pane(command, env)
    try:
        pane.wait_for("CHECKLIST", "First power", "r run/retake", timeout=40)

        # first power: one prompt names the supply; y energises; the step passes
        pane.keys("r")
        pane.wait_for("ENERGISE THE BOARD?", "switch on at 24 V")
        pane.keys("y")
        pane.wait_for("✔ passed", "Next: 1.2", timeout=40)

        # the cursor moved on to the next step: r runs it; Ctrl+C while its supply is on
        pane.wait_for("1.2  Rail levels")
        pane.keys("r")
        pane.wait_for("ENERGISE THE BOARD?")
        pane.keys("y")
        _wait(lambda: bench.supply.output_on, 30, "the supply to go on")
        pane.keys("C-c")
        screen = pane.wait_for("bringup-exit=", timeout=30)
    finally:
        pane.kill()

    assert "bringup-exit=0" in screen, screen
    assert "Traceback" not in screen
    assert "unfinished; to carry on: bringup resume" in screen, screen  # the exact command
    assert not bench.supply.output_on
    supply = visa_rm.open_resource(
        bench.resources["supply"], read_termination="\n", write_termination="\n", timeout=2000
    )
    try:
        assert supply.query("OUTPut:STATe?").strip() == "0"
    finally:
        supply.close()

    from bringup.store import SessionLog

    with SessionLog.open(log) as opened:
        (session,) = opened.sessions()
        outcomes = [(a.step_id, a.outcome) for a in opened.attempts(session.id)]
    assert outcomes[0] == ("first-power", "pass")
    assert session.state == "open"  # quit mid-session: it can be resumed


CRASHING = """
import sys
from bringup.tui.screens.session import SessionScreen

original = SessionScreen.on_step_progressed

def crash(self, message):
    # an unexpected error in the interface once a live reading shows the supply on
    for name, value in message.progress.readings:
        number, _, unit = value.partition(" ")
        if name == "supply voltage" and unit == "V" and float(number) > 1.0:
            raise RuntimeError(f"injected fault while the supply read {value}")
    return original(self, message)

SessionScreen.on_step_progressed = crash
from bringup.cli import main
sys.exit(main(["demo", "--bench", sys.argv[1], "--db", sys.argv[2]]))
"""


def test_a_crash_mid_step_prints_one_line_and_leaves_the_supply_off(bench_file, tmp_path):
    bench, path = bench_file("healthy")
    log = tmp_path / "crash.sqlite"
    script = tmp_path / "crashing.py"
    script.write_text(CRASHING)
    env = {**os.environ, "TERM": "xterm-256color", "BRINGUP_OPERATOR": "smoke",
           "TEXTUAL_ANIMATIONS": "none"}  # fmt: skip
    command = f"{sys.executable} {script} {path} {log} 2>&1; echo bringup-exit=$?; read done"
    pane = Pane(command, env)
    try:
        pane.wait_for("CHECKLIST", "r run/retake", timeout=40)
        pane.keys("r")
        pane.wait_for("ENERGISE THE BOARD?")
        pane.keys("y")
        screen = pane.wait_for("bringup-exit=", timeout=40)
    finally:
        pane.kill()
    assert "bringup-exit=2" in screen, screen
    assert "Traceback" not in screen
    # the fault came while the supply was on (a live reading above 1 V) ...
    assert "unexpected fault: RuntimeError: injected fault while the supply read" in screen
    # ... and the way out switched it off

    assert "supply was switched off" in screen
    assert not bench.supply.output_on
    detail = (tmp_path / "bringup-fault.txt").read_text()  # the traceback, for a bug report
    assert "Traceback" in detail and "RuntimeError: injected fault" in detail, detail[:400]
