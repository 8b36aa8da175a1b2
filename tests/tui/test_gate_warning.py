"""The notebook's energising prompt names every earlier safety gate that was waived.

A session whose logic-rail gate failed and was waived by someone other than the operator (set up
through the runner on the simulated bench, real sockets and a real log) is resumed in the
notebook; the prompt before the loaded-rails step powers the board lists the waived gate.
"""

from __future__ import annotations

from tui_pilot import sync, wait_for_session, wait_until

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.runner import BenchSource, SessionRunner, StepAnswers
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.screens.prompts import EnergisePrompt

LOADED = "power-rails.rails-loaded"


@sync
async def test_the_energise_prompt_lists_a_waived_gate(log_path):
    runner = SessionRunner.create(board=load_board("demo"), checklist=load_checklist(),
                                  serial="DHS24-0009", operator="tester",
                                  bench=BenchSource.simulated("healthy"), db_path=log_path)  # fmt: skip
    with runner:
        for step in ("power-rails.first-power", "power-rails.rails-unloaded"):
            assert runner.run_step(step).state == "pass"
        # typed 3.6 V against the demo board's 3.2-3.4 V logic rail: failed, then waived
        meter = "power-rails.logic-meter"
        failed = runner.run_step(meter, answers=StepAnswers(confirmed=True, reading="3.6 V"))
        assert failed.state == "fail"
        runner.waive(meter, "meter reads high, known offset", "Bo Lindqvist")
    app = BringupApp(Launcher(log_path))
    async with app.run_test(size=(130, 40)) as pilot:
        await pilot.press("ctrl+o")
        screen = await wait_for_session(pilot)
        await wait_until(pilot, lambda: screen.viewed == LOADED, what=LOADED)
        await pilot.press("r")
        await wait_until(pilot, lambda: isinstance(app.screen, EnergisePrompt), what="prompt")
        shown = str(app.screen.query_one("#unmet-gates").render())
        assert "Earlier safety gates waived or not passed" in shown, shown
        assert "Logic rail on the meter (power-rails.logic-meter): waived" in shown, shown
        await pilot.press("n")  # keep it off
        await wait_until(pilot, lambda: not isinstance(app.screen, EnergisePrompt))
        await pilot.press("q")
