"""The uncertainty budget one key away: from a step's result, ``u`` opens the GUM budget of the
metric under the cursor (each contribution with its type, u(x_i), c_i and |c_i| u(x_i); u_c,
k and U), on the simulated bench over loopback sockets, driven by keys through the Pilot."""

from __future__ import annotations

from tui_pilot import screen_lines, sync, take_step, wait_for_session, wait_until

from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.screens.budget import BudgetScreen
from bringup.tui.screens.session import SessionScreen
from bringup.tui.screens.start import StartScreen

SIZE = (150, 44)


@sync
async def test_u_opens_the_budget_of_the_metric_under_the_cursor(log_path):
    app = BringupApp(Launcher(log_path))
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: isinstance(app.screen, StartScreen), what="start screen")
        await pilot.click("#serial")
        await pilot.press(*"DHS24-0007")
        await pilot.press("ctrl+n")
        screen = await wait_for_session(pilot)
        # the key is offered in the footer
        assert any(" u budget " in line for line in screen_lines(app))
        await take_step(pilot)  # first power
        await wait_until(pilot, lambda: screen.viewed == "power-rails.rails-unloaded")
        await take_step(pilot)  # the rails: levels and ripples
        await pilot.press("k")  # back to the rails' result (the cursor moved on after a pass)
        await wait_until(pilot, lambda: screen.viewed == "power-rails.rails-unloaded")

        # the result table's rows in checklist order: bus level, vdrv level, vdrv ripple...
        await pilot.click("#results", offset=(4, 1))
        await pilot.press("home", "down", "down")
        await pilot.press("u")
        await wait_until(pilot, lambda: isinstance(app.screen, BudgetScreen), what="budget")
        lines = "\n".join(screen_lines(app))
        assert "Uncertainty budget (GUM)" in lines and "ripple" in lines, lines
        # the ripple's own contributions, each with its type, u(x_i), c_i, |c_i| u(x_i)
        for heading in ("contribution", "type", "u(xᵢ)", "cᵢ", "|cᵢ|·u(xᵢ)"):
            assert heading in lines, heading
        assert "noise lifting the extremes" in lines and " B, rectangular " in lines
        assert " A " in lines
        assert "coverage factor k = 2" in lines and "expanded uncertainty U = k·u_c" in lines
        assert "largest contribution:" in lines
        # the result row shows the U the decision used: here the board file's declared 50 mV,
        # larger than the computed one, and the budget says so
        budget = app.screen.budget
        row = screen.link.attempts("power-rails.rails-unloaded")[-1].metrics[2]
        assert row.measured.endswith("± 50 mV") and budget.expanded != "50 mV"
        assert "the decision used U = 50 mV: the board file's declared uncertainty" in lines

        await pilot.press("escape")
        await wait_until(pilot, lambda: isinstance(app.screen, SessionScreen))
        await app.workers.wait_for_complete()
