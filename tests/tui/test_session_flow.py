"""A whole session through the notebook's Pilot, on the simulated bench over loopback sockets.

The interface is driven only by keys, as an operator would; what it did is then read back from
the SQLite log with the store's own reader and with plain sqlite3, not from the screen's state.
"""

from __future__ import annotations

import sqlite3

from tui_pilot import sync, take_step, wait_for_session, wait_until

from bringup.store import SessionLog
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.screens.prompts import ConfirmPrompt, EnergisePrompt, ReasonPrompt
from bringup.tui.screens.session import SessionScreen
from bringup.tui.screens.start import StartScreen
from bringup.tui.screens.summary import SummaryScreen

SIZE = (130, 40)


async def _type(pilot, text: str) -> None:
    await pilot.press(*[{" ": "space"}.get(ch, ch) for ch in text])


@sync
async def test_whole_healthy_session_with_retake_note_skip_quit_and_resume(log_path):
    # ---- first sitting: new session from the start screen's form --------------------------
    app = BringupApp(Launcher(log_path))
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: isinstance(app.screen, StartScreen), what="start screen")
        await pilot.click("#serial")
        await _type(pilot, "DHS24-0042")
        await pilot.press("ctrl+n")
        screen = await wait_for_session(pilot)
        session_id = screen.link.session_id
        assert screen.viewed == "power-rails.first-power"

        # first power: one question for the hands and the energising (it names 24 V)
        await pilot.press("r")
        await wait_until(pilot, lambda: isinstance(app.screen, EnergisePrompt), what="prompt")
        text = str(app.screen.query_one("#energise-text").render())
        assert "24 V" in text and "current limit" in text, text
        assert not app.screen.query("#hazard-notice")  # 24 V DC: no hazard notice
        await pilot.press("y")
        await wait_until(
            pilot,
            lambda: (
                screen.running is None and bool(screen.link.attempts("power-rails.first-power"))
            ),
            what="first attempt",
        )
        await app.workers.wait_for_complete()
        # the cursor followed the work to the next step; k goes back for a note on the first
        await wait_until(pilot, lambda: screen.viewed == "power-rails.rails-unloaded")
        await pilot.press("k")
        await wait_until(pilot, lambda: screen.viewed == "power-rails.first-power")
        await pilot.press("n")
        await _type(pilot, "ground spring on CH1")
        await pilot.press("enter")  # logged by a worker thread: wait for it to show
        await wait_until(
            pilot, lambda: "ground spring on CH1" in str(screen.query_one("#notes-list").render())
        )

        # the rail checks are safety gates: a skip is refused (the runner's words), the step
        # is run instead
        await pilot.press("j")
        await wait_until(pilot, lambda: screen.viewed == "power-rails.rails-unloaded")
        await pilot.press("s")
        await wait_until(pilot, lambda: isinstance(app.screen, ReasonPrompt))
        await _type(pilot, "scope busy on another bench")
        await pilot.press("enter")
        await wait_until(pilot, lambda: isinstance(app.screen, SessionScreen))
        await wait_until(pilot, lambda: "safety gate" in str(screen.query_one("#status").render()))
        assert screen.link.current_step_id() == "power-rails.rails-unloaded"
        await take_step(pilot)
        await wait_until(pilot, lambda: screen.link.current_step_id() == "power-rails.logic-meter")
        # after a pass the cursor moves on to the next step by itself
        await wait_until(pilot, lambda: screen.viewed == "power-rails.logic-meter")
        # the meter reading: the board is powered first, then the reading is asked (a unit the
        # step does not use is refused in the prompt itself), then it is confirmed
        await pilot.press("r")
        await wait_until(pilot, lambda: isinstance(app.screen, EnergisePrompt))
        await pilot.press("y")
        await wait_until(pilot, lambda: isinstance(app.screen, ReasonPrompt))
        assert screen.running == "power-rails.logic-meter"  # asked while the step runs
        await _type(pilot, "3.3 A")
        await pilot.press("enter")
        await pilot.pause()
        assert isinstance(app.screen, ReasonPrompt)
        problem = str(app.screen.query_one("#prompt-problem").render())
        assert "3.3 A" in problem, problem
        await pilot.press(*["backspace"] * 5)
        await _type(pilot, "3.31 V")
        await pilot.press("enter")
        await wait_until(pilot, lambda: isinstance(app.screen, ConfirmPrompt))
        assert any("3.31 V" in str(w.render()) for w in app.screen.query("Static"))
        await pilot.press("y")
        await wait_until(
            pilot,
            lambda: (
                screen.running is None and bool(screen.link.attempts("power-rails.logic-meter"))
            ),
            what="logic-meter attempt",
        )
        await app.workers.wait_for_complete()
        # a retake of the same step (the cursor had moved on: k back to it): a second
        # attempt, the first one kept; then the cursor moves on again
        await wait_until(pilot, lambda: screen.viewed == "power-rails.rails-loaded")
        await pilot.press("k")
        await wait_until(pilot, lambda: screen.viewed == "power-rails.logic-meter")
        assert await take_step(pilot, reading="3.29 V") == [
            "EnergisePrompt",
            "ReadingPrompt",
            "ConfirmPrompt",
        ]
        assert len(screen.link.attempts("power-rails.logic-meter")) == 2
        await wait_until(pilot, lambda: screen.viewed == "power-rails.rails-loaded")
        await take_step(pilot)
        assert screen.link.current_step_id() == "gate-overdrive.vgs-on"

        # a skip (of a step that is no safety gate) needs a reason: an empty one is refused,
        # then one is given (the cursor moved on to it after the pass)
        await wait_until(pilot, lambda: screen.viewed == "gate-overdrive.vgs-on")
        await pilot.press("s")
        await wait_until(pilot, lambda: isinstance(app.screen, ReasonPrompt))
        await pilot.press("enter")
        assert isinstance(app.screen, ReasonPrompt)
        await _type(pilot, "scope busy on another bench")
        await pilot.press("enter")
        await wait_until(pilot, lambda: isinstance(app.screen, SessionScreen))
        # the notebook moves on to the next step by itself, once the skip is logged
        await wait_until(pilot, lambda: screen.viewed == "edge-speed.edges")
        assert screen.link.current_step_id() == "edge-speed.edges"

        # quit in the middle of the session
        await pilot.press("q")
    assert app.return_code == 0

    with SessionLog.open(log_path) as log:
        summary = next(s for s in log.sessions() if s.id == session_id)
        assert summary.state == "open"
        attempts = log.attempts(session_id)
        events = log.events(session_id)
    assert [a.outcome for a in attempts if a.step_id == "first-power"] == ["pass"]
    logic = [a for a in attempts if a.step_id == "logic-meter"]
    assert [a.attempt_no for a in logic] == [1, 2]  # the retake did not overwrite
    assert [a.outcome for a in logic] == ["pass", "pass"]
    # the typed readings, as logged (plain sqlite3 on the metrics table): 3.31 V then 3.29 V
    with sqlite3.connect(log_path) as db:
        typed = db.execute(
            "SELECT m.value FROM metrics m JOIN attempts a ON a.id = m.attempt_id "
            "WHERE a.session_id = ? AND a.step_id = 'logic-meter' AND m.name = 'logic_level' "
            "ORDER BY a.attempt_no",
            (session_id,),
        ).fetchall()
    assert [round(v, 6) for (v,) in typed] == [3.31, 3.29]
    notes = [e for e in events if e.kind == "note"]
    assert [(n.step_id, n.reason) for n in notes] == [("first-power", "ground spring on CH1")]
    skips = [e for e in events if e.kind == "skip"]
    assert [(e.step_id, e.reason) for e in skips] == [("vgs-on", "scope busy on another bench")]

    # ---- second sitting: resume from the start screen and finish -----------------------------
    app = BringupApp(Launcher(log_path))
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: isinstance(app.screen, StartScreen), what="start screen")
        table = app.screen.query_one("#sessions")
        assert table.row_count == 1
        await pilot.press("ctrl+o")
        screen = await wait_for_session(pilot)
        assert screen.link.session_id == session_id
        assert screen.viewed == "edge-speed.edges"
        while screen.link.current_step_id() is not None:
            step = screen.link.current_step_id()
            if screen.viewed != step:
                await pilot.press("j")
                await wait_until(pilot, lambda s=step: screen.viewed == s, what=step)
            await take_step(pilot)
            assert screen.link.runner.step_status(step).state == "pass", step
        await pilot.press("m")
        await wait_until(pilot, lambda: isinstance(app.screen, SummaryScreen), what="summary")
        verdict = str(app.screen.query_one("#summary-verdict").render())
        await pilot.press("q")

    # the session's worst stage is the one with the skipped step
    assert "skipped" in verdict.lower()
    with sqlite3.connect(log_path) as db:
        state, final = db.execute(
            "SELECT state, verdict FROM sessions WHERE id = ?", (session_id,)
        ).fetchone()
        outcomes = dict(
            db.execute(
                "SELECT step_id, outcome FROM attempts WHERE session_id = ? ORDER BY seq",
                (session_id,),
            ).fetchall()
        )
    assert state == "finished"
    assert final == "skipped"
    for step in ("rails-unloaded", "edges", "droop", "soak"):
        assert outcomes[step] == "pass", (step, outcomes)
