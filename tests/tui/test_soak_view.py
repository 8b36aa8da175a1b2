"""The demo soak's prediction, watched live: the predicted final temperature at each refit
with its ± band narrowing as the log grows, drawn on the trace tab, with `p` to the
temperature log and the bench clock's speed-up in the header. Before, the live plot showed
only the temperature and the prediction as a level; its ± was a number in a line of text.

The bench is the in-process simulator over loopback at a pace of 50 simulated seconds per
second (the demo's is 20); what is checked is read from the app's own screenshot.
"""

from __future__ import annotations

import re

from tui_pilot import screen_lines, sync, wait_for_session, wait_until

from bringup.runner import StepAnswers
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.screens.prompts import EnergisePrompt

SOAK = "thermal.soak"
PACE = 50.0


def _plot_rows(app) -> list[str]:
    """The plot's rows right of its value axis."""
    return [line.split("┤", 1)[1] for line in screen_lines(app) if "┤" in line]


def _lit_rows(rows: list[str], column: int) -> list[int]:
    return [
        r for r, row in enumerate(rows) if column < len(row) and "\u2800" < row[column] <= "\u28ff"
    ]


@sync
async def test_the_soak_shows_its_prediction_and_band_narrowing(log_path):
    values = {"board": "demo", "checklist": None, "bench_file": None, "scenario": "healthy",
              "serial": "DHS24-0160", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path, sim_time_scale=PACE), open_new=values)
    async with app.run_test(size=(160, 48)) as pilot:
        screen = await wait_for_session(pilot)
        assert f"clock ×{PACE:g}" in str(screen.query_one("#titlebar").render())
        runner = screen.link.runner
        for step in runner.checklist.steps():  # setting up: only the soak is exercised here
            if step.id == SOAK:
                break
            typed = "3.30 V" if step.reading else None
            runner.run_step(step.id, answers=StepAnswers(confirmed=True, reading=typed))
        screen.refresh_all(select=SOAK)
        await wait_until(pilot, lambda: screen.viewed == SOAK, what="the soak step")
        await pilot.press("r")
        await wait_until(pilot, lambda: isinstance(app.screen, EnergisePrompt), what="prompt")
        await pilot.press("y")

        # the ± of the prediction as the live panel states it, at each refit
        bands: list[float] = []

        def fits() -> int:
            live = str(screen.query_one("#live-text").render())
            m = re.search(r"predicted final [-0-9.]+ °C ± ([0-9.]+) (m?)K", live)
            if m:
                u = float(m[1]) / (1000 if m[2] else 1)
                if not bands or bands[-1] != u:
                    bands.append(u)
            title = " ".join(screen_lines(app))
            found = re.search(r"predicted final temperature and its band, (\d+) fits", title)
            return int(found[1]) if found else 0

        await wait_until(pilot, lambda: fits() >= 12, what="a dozen fits", timeout=60)
        assert screen.running == SOAK
        text = "\n".join(screen_lines(app))
        assert "± U (k = 2, from the fit alone)" in text, text
        # the band narrows: wide (or beyond the view) at the first fits, tight at the latest
        rows = _plot_rows(app)
        lit = [c for c in range(max(map(len, rows))) if _lit_rows(rows, c)]
        first, last = _lit_rows(rows, lit[0]), _lit_rows(rows, lit[-1])
        assert max(last) - min(last) < max(first) - min(first), (first, last, "\n".join(rows))
        assert len(bands) >= 3 and bands[-1] < bands[0], bands

        await pilot.press("p")  # the temperature log instead, and back
        await wait_until(pilot, lambda: "heatsink temperature, live" in " ".join(screen_lines(app)))
        await pilot.press("p")
        await wait_until(pilot, lambda: fits() > 0, what="the prediction again")
        await pilot.press("x")  # not under test: stop it here, supply off
        await wait_until(pilot, lambda: screen.running is None, what="the soak to stop")
        await app.workers.wait_for_complete()
        await pilot.press("q")
