"""STOP (x) switches the supply output OFF at once, while the step's thread is still blocked in
an instrument call, and the foot of the screen says when the supply has confirmed it.

Before: x only set an event the step checks between instrument calls, so during a slow scope
reply (an ``*OPC?`` wait or a waveform read, up to 30 s) the output stayed ON. Here the simulated
scope's delay fault (``sim_instruments/README.md``: every reply 1.5 s late, under the 3 s
timeout so nothing times out) is armed as the acquisition starts; the supply is a test-owned
simulated bench asked over its own PyVISA connection afterwards.
"""

from __future__ import annotations

import threading

from tui_pilot import sync, take_step, wait_for_session, wait_until

from bringup.store import SessionLog
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.screens.prompts import EnergisePrompt
from bringup.tui.widgets.supply_lamp import SupplyLamp

STEP = "power-rails.rails-unloaded"  # energises, then reads three rails on the scope
SLOW_REPLY_S = 1.5


@sync
async def test_stop_switches_the_supply_off_while_the_step_is_blocked_on_the_scope(
    log_path, bench_file, visa_rm
):
    bench, path = bench_file("healthy")
    values = {"board": "demo", "checklist": None, "bench_file": path, "scenario": None,
              "serial": "DHS24-0101", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(130, 40)) as pilot:
        screen = await wait_for_session(pilot)
        await take_step(pilot)  # first power passes: the cursor moves on to the rails step
        await wait_until(pilot, lambda: screen.viewed == STEP, what=STEP)
        lamp = screen.query_one(SupplyLamp)

        # the scope turns slow the moment the acquisition starts (the runner's own progress
        # event, on the step's thread, just before the scope is set up and armed)
        slow = threading.Event()
        run = screen.link.run

        def run_with_a_slow_scope(step_id, answers, cancel, finish, on_progress):
            def progress(p):
                if p.text.startswith("acquiring") and not slow.is_set():
                    bench.scope.faults.inject("delay", seconds=SLOW_REPLY_S)
                    slow.set()
                on_progress(p)

            return run(step_id, answers, cancel, finish, progress)

        screen.link.run = run_with_a_slow_scope
        await pilot.press("r")
        await wait_until(pilot, lambda: isinstance(app.screen, EnergisePrompt), what="prompt")
        await pilot.press("y")
        await wait_until(pilot, slow.is_set, what="the acquisition", timeout=20)
        assert bench.supply.output_on and screen.running == STEP
        assert "may be ON" in lamp.text

        await pilot.press("x")
        # off while the step's worker is still waiting for the slow scope (a dozen replies
        # at 1.5 s each are still to come: before, the output stayed on through all of them)
        await wait_until(pilot, lambda: not bench.supply.output_on, what="supply off", timeout=8)
        await wait_until(pilot, lambda: lamp.state == "confirmed", what="confirmed", timeout=8)
        workers = [w for w in app.workers if w.group == "bench"]
        assert screen.running == STEP and workers and not workers[0].is_finished
        assert "supply OFF, confirmed" in lamp.text
        assert "confirmed" in str(screen.query_one("#status").render())

        bench.scope.faults.clear()  # let the step's thread come back and log its attempt
        await wait_until(pilot, lambda: screen.running is None, what="the step to end", timeout=40)
        await app.workers.wait_for_complete()
        status = str(screen.query_one("#status").render())
        assert "Stopped" in status and "confirmed" in status, status
        assert "supply OFF, confirmed" in lamp.text
        session_id = screen.link.session_id
        await pilot.press("q")

    supply = visa_rm.open_resource(
        bench.resources["supply"], read_termination="\n", write_termination="\n", timeout=2000
    )
    try:
        assert supply.query("OUTPut:STATe?").strip() == "0"
    finally:
        supply.close()
    with SessionLog.open(log_path) as log:
        rails = [a for a in log.attempts(session_id) if a.step_id == "rails-unloaded"]
        state = next(s.state for s in log.sessions() if s.id == session_id)
    assert [a.outcome for a in rails] == ["not-run"]  # nothing judged
    assert state == "open"  # STOP ends the step, not the session: it can be resumed
