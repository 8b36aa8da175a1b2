"""The notebook stays readable from 100x30 to 200x60: every key of the foot is shown whole
(on a 100-column terminal the stock one-line footer cut ``q quit, supply off`` off the right
edge) and each prompt names its keys at its foot.

What is checked is read back from the app's own screenshot (``screen_lines``).
"""

from __future__ import annotations

import pytest
from tui_pilot import screen_lines, sync, take_step, wait_for_session, wait_until

from bringup.runner import StepAnswers
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.screens.prompts import EnergisePrompt
from bringup.tui.screens.start import StartScreen
from bringup.tui.screens.summary import SummaryScreen
from bringup.tui.states import look_of

SIZES = [(100, 30), (200, 60)]
SOAK = "thermal.soak"
RAILS = "power-rails.rails-unloaded"

# what each screen's foot must say, whole (the key, then what it does)
SESSION_KEYS = ("r run/retake", "s skip", "w waive", "n note", "b back", "kj step", "1234 tabs",
                "p trace", "z zoom", "m summary", "q quit, supply off")  # fmt: skip
ENERGISE_KEYS = ("y yes, switch on", "n no, keep it off")
START_KEYS = ("^n start new session", "^o resume selected", "^r reload list", "^q quit")
SUMMARY_KEYS = ("esc back to the step", "q quit (supply off)")


def _foot(app, rows: int = 4) -> str:
    """The bottom ``rows`` lines of the screen, one string (a wrapped foot reads on)."""
    return "\n".join(screen_lines(app)[-rows:])


def _missing(app, labels: tuple[str, ...]) -> list[str]:
    foot = _foot(app)
    return [label for label in labels if label not in foot]


def _values(serial: str) -> dict:
    return {"board": "demo", "checklist": None, "bench_file": None, "scenario": "healthy",
            "serial": serial, "operator": "tester"}  # fmt: skip


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
@sync
async def test_every_key_of_each_foot_is_shown_whole(log_path, size):
    app = BringupApp(Launcher(log_path))
    async with app.run_test(size=size) as pilot:
        await wait_until(pilot, lambda: isinstance(app.screen, StartScreen))
        await pilot.pause()
        assert not _missing(app, START_KEYS), _foot(app)
        await pilot.press("ctrl+q")

    app = BringupApp(Launcher(log_path), open_new=_values("DHS24-0150"))
    async with app.run_test(size=size) as pilot:
        screen = await wait_for_session(pilot)
        assert not _missing(app, SESSION_KEYS), _foot(app)
        # every key the screen answers now is in its foot (Textual's own list of them)
        foot = _foot(app)
        for _node, binding, _enabled, _tip in screen.active_bindings.values():
            if binding.show:
                assert app.get_key_display(binding) in foot, (binding, foot)

        await pilot.press("r")  # the energising prompt names its two keys at its foot
        await wait_until(pilot, lambda: isinstance(app.screen, EnergisePrompt), what="prompt")
        await pilot.pause()
        assert not _missing(app, ENERGISE_KEYS), _foot(app)
        await pilot.press("n")
        await wait_until(pilot, lambda: not isinstance(app.screen, EnergisePrompt))

        await pilot.press("m")
        await wait_until(pilot, lambda: isinstance(app.screen, SummaryScreen), what="summary")
        await pilot.pause()
        assert not _missing(app, SUMMARY_KEYS), _foot(app)
        await pilot.press("escape")
        await wait_until(pilot, lambda: app.screen is screen)
        await pilot.press("q")


@sync
async def test_a_running_soak_shows_stop_and_finish_at_100_columns(log_path, bench_file):
    """While a step runs its foot trades the idle keys for x STOP (and, in a soak, t)."""
    bench, path = bench_file("healthy")
    bench.clock.set_scale(10.0)  # a soak of minutes: time to read its foot
    values = {**_values("DHS24-0151"), "bench_file": path, "scenario": None}
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(100, 30)) as pilot:
        screen = await wait_for_session(pilot)
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
        await wait_until(pilot, lambda: screen.running == SOAK, what="the soak to run")
        await wait_until(pilot, lambda: "x STOP (supply off)" in _foot(app), what="x in the foot")
        foot = _foot(app)
        assert "t finish soak" in foot and "q quit, supply off" in foot, foot
        assert "r run/retake" not in foot
        await pilot.press("x")
        await wait_until(pilot, lambda: screen.running is None, what="the soak to stop")
        await app.workers.wait_for_complete()
        await pilot.press("q")
    assert not bench.supply.output_on


@pytest.mark.parametrize("size", SIZES, ids=lambda s: f"{s[0]}x{s[1]}")
@sync
async def test_every_result_column_is_shown_whole(log_path, size):
    """The rails' result (six metrics with values, limits and margins) at 100x30 and 200x60:
    each header and each metric's verdict, values, limits and margin whole on the screen (at
    100 columns the limits and margin columns were cut off the right edge)."""
    app = BringupApp(Launcher(log_path), open_new=_values("DHS24-0152"))
    async with app.run_test(size=size) as pilot:
        screen = await wait_for_session(pilot)
        await take_step(pilot)  # first power
        await wait_until(pilot, lambda: screen.viewed == RAILS, what="the rails step")
        await take_step(pilot)
        await pilot.press("k")  # back to the rails' result
        await wait_until(pilot, lambda: screen.viewed == RAILS, what="the rails step")
        table = screen.query_one("#results")
        metrics = screen.link.attempts(RAILS)[-1].metrics
        assert len(metrics) >= 5 and table.row_count == len(metrics)
        table.focus()
        for row, m in enumerate(metrics):
            table.move_cursor(row=row)  # the row scrolls into view, as with the arrow keys
            await pilot.pause()
            lines = screen_lines(app)
            text = "\n".join(lines)
            for header in ("metric", "verdict", "measured", "predicted", "limits", "margin"):
                assert header in text, (size, header)
            look = look_of(m.verdict)
            for value in (f"{look.symbol} {look.brief}", m.measured, m.predicted, m.limits,
                          m.margin):  # fmt: skip
                assert any(value in line for line in lines), (size, m.label, value, text)
            words = " ".join(" ".join(line.split()) for line in lines)
            assert all(word in words for word in m.label.split()), (size, m.label)
        await pilot.press("q")


def _column_text(app, table, index: int) -> str:
    """What the screen shows in one column of ``table``, its lines read top to bottom and
    joined (a wrapped name reads on from one line to the next)."""
    columns = list(table.columns.values())
    x = table.region.x + sum(c.get_render_width(table) for c in columns[:index])
    width = columns[index].get_render_width(table)
    lines = screen_lines(app)[table.region.y : table.region.bottom]
    return " ".join(" ".join(line[x : x + width].split()) for line in lines)


@pytest.mark.parametrize("size", [(100, 30), (160, 48)], ids=lambda s: f"{s[0]}x{s[1]}")
@sync
async def test_the_summary_shows_each_detail_whole(log_path, size):
    """The summary of a whole healthy session: each step's name and detail wrap in their
    columns (at 160 columns the detail column was cut off the right edge)."""
    app = BringupApp(Launcher(log_path), open_new=_values("DHS24-0153"))
    async with app.run_test(size=size) as pilot:
        screen = await wait_for_session(pilot)
        runner = screen.link.runner
        for step in runner.checklist.steps():  # setting up: every step run through the runner
            typed = "3.30 V" if step.reading else None
            runner.run_step(step.id, answers=StepAnswers(confirmed=True, reading=typed))
        screen.refresh_all()
        await pilot.press("m")
        await wait_until(pilot, lambda: isinstance(app.screen, SummaryScreen), what="summary")
        table = app.screen.query_one("#summary")
        await wait_until(pilot, lambda: table.row_count > 0, what="the summary's rows")
        table.focus()
        rows = screen.link.summary()
        assert len([r for r in rows if r.level]) == 8 and table.row_count == len(rows)
        for n, row in enumerate(rows):
            table.move_cursor(row=n)  # the row scrolls into view, as with the arrow keys
            await pilot.pause()
            title, detail = _column_text(app, table, 0), _column_text(app, table, 3)
            assert "…" not in title + detail
            assert " ".join(row.title.split()) in title, (size, row.title, title)
            assert " ".join(row.detail.split()) in detail, (size, row.detail, detail)
        await pilot.press("escape")
        await wait_until(pilot, lambda: app.screen is screen)
        await pilot.press("q")
