"""Every key in the footers does what its label says (the keys not driven by the other tests:
the tabs, next trace, zoom, the summary and back, a prompt's Esc, reloading the session list,
and the soak's finish key, shown only while a soak runs).

The bench is the seeded simulator over loopback; results are read from the screen and the log.
"""

from __future__ import annotations

from tui_pilot import screen_lines, sync, take_step, wait_for_session, wait_until

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.runner import BenchSource, SessionRunner
from bringup.store import SessionLog
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.screens.prompts import ReasonPrompt
from bringup.tui.screens.session import SessionScreen
from bringup.tui.screens.start import StartScreen
from bringup.tui.screens.summary import SummaryScreen

STEP = "gate-overdrive.vgs-on"


def _footer(app) -> str:
    """The keys line(s) at the foot of the screen, as shown (they wrap on a narrow terminal)."""
    from bringup.tui.widgets.key_footer import KeyFooter

    rows = app.screen.query_one(KeyFooter).size.height
    return " ".join(screen_lines(app)[-rows:])


@sync
async def test_the_session_screen_keys(log_path):
    values = {"board": "demo", "checklist": None, "bench_file": None, "scenario": "healthy",
              "serial": "DHS24-0140", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(160, 45)) as pilot:
        screen = await wait_for_session(pilot)
        footer = _footer(app)
        for label in ("r run/retake", "s skip", "w waive", "n note", "b back", "1234", "p trace",
                      "z zoom", "m summary", "q quit"):  # fmt: skip
            assert label.split()[-1] in footer, (label, footer)
        # x and t only while a step (t: a soak) runs
        assert "STOP" not in footer and "finish soak" not in footer
        assert screen.check_action("stop_soak", ()) is False

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
        await wait_until(pilot, lambda: screen.viewed != STEP)  # the cursor moved on
        await pilot.press("k")
        await wait_until(pilot, lambda: screen.viewed == STEP)
        tabs = screen.query_one("#tabs")
        plot = screen.query_one("#plot")

        await pilot.press("2")
        await wait_until(pilot, lambda: tabs.active == "tab-trace")
        assert plot.point_count > 0
        await wait_until(pilot, lambda: "p: next of" in " ".join(screen_lines(app)))

        def title() -> str:
            return next(line for line in screen_lines(app) if "p: next of" in line)

        first = title()
        await pilot.press("p")  # the next trace of the attempt
        await wait_until(pilot, lambda: title() != first, what="the next trace")
        assert "attempt 1" in title()
        zoomed = plot.zoomed
        await pilot.press("z")
        await wait_until(pilot, lambda: plot.zoomed is not zoomed)
        await pilot.press("3")
        await wait_until(pilot, lambda: tabs.active == "tab-attempts")
        assert screen.query_one("#attempts").row_count == 1
        await pilot.press("4")
        await wait_until(pilot, lambda: tabs.active == "tab-notes")
        await pilot.press("1")
        await wait_until(pilot, lambda: tabs.active == "tab-result")

        # s then Esc: the prompt goes, nothing is logged
        await pilot.press("s")
        await wait_until(pilot, lambda: isinstance(app.screen, ReasonPrompt))
        await pilot.press("escape")
        await wait_until(pilot, lambda: isinstance(app.screen, SessionScreen))
        assert runner.step_status(STEP).state == "pass"

        # m: the summary; Esc and m both go back
        await pilot.press("m")
        await wait_until(pilot, lambda: isinstance(app.screen, SummaryScreen))
        assert "back to the step" in _footer(app)
        await pilot.press("escape")
        await wait_until(pilot, lambda: isinstance(app.screen, SessionScreen))
        await pilot.press("m")
        await wait_until(pilot, lambda: isinstance(app.screen, SummaryScreen))
        await pilot.press("m")
        await wait_until(pilot, lambda: isinstance(app.screen, SessionScreen))
        session_id = screen.link.session_id
        await pilot.press("q")
    with SessionLog.open(log_path) as log:
        kinds = [e.kind for e in log.events(session_id) if e.step_id == "vgs-on"]
    assert "skip" not in kinds


@sync
async def test_the_start_screen_reloads_its_list(log_path):
    app = BringupApp(Launcher(log_path))
    async with app.run_test(size=(130, 40)) as pilot:
        await wait_until(pilot, lambda: isinstance(app.screen, StartScreen))
        table = app.screen.query_one("#sessions")
        assert table.row_count == 0
        for label in ("start new session", "resume selected", "reload list", "quit"):
            assert label in _footer(app), _footer(app)
        # a session started elsewhere meanwhile (another terminal on the same log)
        with SessionRunner.create(board=load_board("demo"), checklist=load_checklist(),
                                  serial="DHS24-0141", operator="tester",
                                  bench=BenchSource.simulated("healthy"),
                                  db_path=log_path):  # fmt: skip
            pass
        await pilot.press("ctrl+r")
        await wait_until(pilot, lambda: table.row_count == 1, what="the reloaded list")
        assert any("DHS24-0141" in line for line in screen_lines(app))
        await pilot.press("ctrl+q")
    assert app.return_code == 0
