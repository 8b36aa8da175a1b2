"""A failed step: refused skip (a message, no traceback), a waiver with a name, going back.

On the ``no-overdrive`` scenario the gate-overdrive step fails (a gate that only follows the
source, [read: REFERENCES.md §4 and the issue's fault list]); the runner then refuses a skip and
accepts a waiver with a reason and a name. Results are read back from the log.
"""

from __future__ import annotations

from tui_pilot import sync, take_step, wait_for_session, wait_until

from bringup.store import SessionLog
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.screens.prompts import ReasonPrompt
from bringup.tui.screens.session import SessionScreen
from bringup.tui.screens.start import StartScreen

STEP = "gate-overdrive.vgs-on"


async def _type(pilot, text: str) -> None:
    await pilot.press(*[{" ": "space"}.get(ch, ch) for ch in text])


@sync
async def test_failed_step_refused_skip_waiver_and_going_back(log_path):
    app = BringupApp(Launcher(log_path))
    async with app.run_test(size=(130, 40)) as pilot:
        await wait_until(pilot, lambda: isinstance(app.screen, StartScreen), what="start")
        start = app.screen
        # a serial number the board file's pattern refuses: one line in the status bar
        await pilot.click("#serial")
        await _type(pilot, "BOARD-7")
        start.query_one("#scenario").value = "no-overdrive"
        await pilot.press("ctrl+n")
        await wait_until(pilot, lambda: "BOARD-7" in str(start.query_one("#status").render()),
                         what="the serial refused")  # fmt: skip
        assert isinstance(app.screen, StartScreen)
        serial = start.query_one("#serial")
        serial.value = "DHS24-0900"
        await pilot.press("ctrl+n")
        screen = await wait_for_session(pilot)

        runner = screen.link.runner
        for step in runner.checklist.steps():  # setting up: the rails are not under test here
            if step.id == STEP:
                break
            if step.gate:  # a safety gate is run, never skipped
                runner.run_step(step.id)
            else:
                runner.skip(step.id, "rails checked on the previous board")
        screen.refresh_all(select=STEP)
        await wait_until(pilot, lambda: screen.viewed == STEP)
        await take_step(pilot)
        assert runner.step_status(STEP).state == "fail"

        # a failed step cannot be skipped: the runner's refusal is shown, nothing changes
        await pilot.press("s")
        await wait_until(pilot, lambda: isinstance(app.screen, ReasonPrompt))
        await _type(pilot, "no time")
        await pilot.press("enter")
        await wait_until(pilot, lambda: isinstance(app.screen, SessionScreen))
        # the refusal comes back from the log writer's thread
        await wait_until(pilot, lambda: "waive" in str(screen.query_one("#status").render()))
        status = str(screen.query_one("#status").render())
        assert "waive" in status and "failed" in status, status
        assert runner.step_status(STEP).state == "fail"

        # the next step cannot run while this one is failed: said before any prompt
        await pilot.press("j")
        await wait_until(pilot, lambda: screen.viewed == "edge-speed.edges")
        await pilot.press("r")
        await wait_until(pilot, lambda: "in order" in str(screen.query_one("#status").render()))
        assert isinstance(app.screen, SessionScreen) and screen.running is None
        status = str(screen.query_one("#status").render())
        assert "Gate-source voltage" in status, status
        await pilot.press("k")
        await wait_until(pilot, lambda: screen.viewed == STEP)

        # the waiver: a reason and the name of someone other than the operator
        await pilot.press("w")
        await wait_until(pilot, lambda: isinstance(app.screen, ReasonPrompt))
        prompt = app.screen
        assert prompt.query_one("#who").value == ""  # the name field starts empty
        await _type(pilot, "rework on rev C")
        await pilot.press("enter")  # to the name field
        await _type(pilot, "tester")  # the session's own operator: refused in the prompt
        await pilot.press("enter")
        problem = str(prompt.query_one("#prompt-problem").render())
        assert "other than the session's operator" in problem, problem
        assert app.screen is prompt and runner.step_status(STEP).state == "fail"
        prompt.query_one("#who").value = "Rui \u202eLead"  # a direction override: refused
        await pilot.press("enter")
        assert "U+202E" in str(prompt.query_one("#prompt-problem").render())
        prompt.query_one("#who").value = ""
        await _type(pilot, "Rui Lead")
        await pilot.press("enter")
        await wait_until(pilot, lambda: isinstance(app.screen, SessionScreen))
        await wait_until(pilot, lambda: screen.viewed == "edge-speed.edges")
        assert runner.step_status(STEP).state == "waived"

        # back a stage from the edges: the gate step is shown again, ready for a retake
        await pilot.press("b")
        await wait_until(pilot, lambda: screen.viewed == STEP, what="back at the gate step")
        session_id = screen.link.session_id
        await pilot.press("q")

    with SessionLog.open(log_path) as log:
        events = log.events(session_id)
        gate = [a for a in log.attempts(session_id) if a.step_id == "vgs-on"]
    assert [a.outcome for a in gate] == ["fail"]
    waives = [(e.operator, e.reason) for e in events if e.kind == "waive"]
    assert waives == [("Rui Lead", "rework on rev C")]
    assert [e.stage_id for e in events if e.kind == "go-back"] == ["gate-overdrive"]
    assert not [e for e in events if e.kind == "skip" and e.step_id == "vgs-on"]
