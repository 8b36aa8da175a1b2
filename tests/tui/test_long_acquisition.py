"""Responsiveness during a long acquisition, and what cancelling it leaves on the bench.

The simulated bench is started by the test (``sim_bench``) and reached through a bench file, so
it outlives the session: after the cancel its supply is asked over a fresh PyVISA connection.
"""

from __future__ import annotations

from tui_pilot import sync, wait_for_session, wait_until

from bringup.runner import StepAnswers
from bringup.store import SessionLog
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.screens.prompts import EnergisePrompt

SOAK = "thermal.soak"


@sync
async def test_keys_work_during_a_soak_and_cancel_leaves_the_supply_off(
    log_path, bench_file, visa_rm
):
    bench, path = bench_file("healthy")
    # slow the simulated clock: 10 simulated seconds per second makes the soak minutes long
    bench.clock.set_scale(10.0)
    values = {"board": "demo", "checklist": None, "bench_file": path, "scenario": None,
              "serial": "DHS24-0100", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(130, 40)) as pilot:
        screen = await wait_for_session(pilot)
        runner = screen.link.runner
        # setting up, not under test: the steps before the soak are skipped through the runner
        # (the safety gates are run: they are never skipped)
        for step in runner.checklist.steps():
            if step.id != SOAK and step.gate:  # a safety gate is run, never skipped
                typed = "3.30 V" if step.reading else None
                done = runner.run_step(step.id, answers=StepAnswers(confirmed=True, reading=typed))
                assert done.state == "pass", (step.id, done.message)
            elif step.id != SOAK:
                runner.skip(step.id, "only the soak is exercised here")
        screen.refresh_all(select=SOAK)
        await wait_until(pilot, lambda: screen.viewed == SOAK, what="the soak step")

        await pilot.press("r")
        await wait_until(pilot, lambda: isinstance(app.screen, EnergisePrompt), what="prompt")
        await pilot.press("y")
        await wait_until(pilot, lambda: bench.supply.output_on, what="supply on", timeout=20)
        await wait_until(
            pilot,
            lambda: (
                "reading" in str(screen.query_one("#live-text").render()).lower()
                or "soak" in str(screen.query_one("#live-text").render()).lower()
            ),
            what="live soak readings",
            timeout=20,
        )
        assert screen.running == SOAK
        # the temperature log grows on the trace tab while the soak runs
        plot = screen.query_one("#plot")
        await wait_until(pilot, lambda: plot.point_count >= 2, what="a temperature log")
        first = plot.point_count
        await wait_until(pilot, lambda: plot.point_count > first, what="the log to grow")

        # a key while the soak runs: handled at once, the soak still running
        # (the order is what is checked: the tab changed while the soak worker still ran; the
        # timeout is generous because CI machines are shared and a wall-clock bound would flake)
        await pilot.press("3")
        await wait_until(
            pilot, lambda: screen.query_one("#tabs").active == "tab-attempts", timeout=5
        )
        assert screen.running == SOAK and bench.supply.output_on

        # cancel: the step stops, nothing judged, the supply off
        await pilot.press("x")
        await wait_until(pilot, lambda: screen.running is None, what="the stop", timeout=10)
        await app.workers.wait_for_complete()
        assert "Stopped" in str(screen.query_one("#status").render())
        assert not bench.supply.output_on  # off after the cancel, before any quit
        session_id = screen.link.session_id
        await pilot.press("q")

    # the supply, asked over its own socket
    supply = visa_rm.open_resource(
        bench.resources["supply"], read_termination="\n", write_termination="\n", timeout=2000
    )
    try:
        assert supply.query("OUTPut:STATe?").strip() == "0"
    finally:
        supply.close()
    assert not bench.supply.output_on
    with SessionLog.open(log_path) as log:
        soak = [a for a in log.attempts(session_id) if a.step_id == "soak"]
    assert [a.outcome for a in soak] == ["not-run"]
