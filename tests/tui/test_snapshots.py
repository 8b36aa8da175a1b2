"""Screenshot baselines (pytest-textual-snapshot) of the start screen, a passed step, a failed
step and the summary. Each baseline SVG in ``__snapshots__`` was looked at before it was kept.

Plain ``def`` tests (``snap_compare`` runs the app itself); ``run_before`` waits for layout
first. Session ids and times are fixed (``tui_fixed_labels``); the bench is the seeded simulator.
"""

from __future__ import annotations

from textual.widgets import Input
from tui_fixed_labels import FixedLauncher
from tui_pilot import take_step, wait_for_session, wait_until

from bringup.tui.app import BringupApp
from bringup.tui.screens.start import StartScreen
from bringup.tui.screens.summary import SummaryScreen

SIZE = (130, 40)
STEP = "gate-overdrive.vgs-on"


def _values(scenario: str) -> dict:
    return {"board": "demo", "checklist": None, "bench_file": None, "scenario": scenario,
            "serial": "DHS24-0001", "operator": "tester"}  # fmt: skip


async def _no_blink(pilot) -> None:
    for widget in pilot.app.screen.query(Input):
        widget.cursor_blink = False
    await pilot.pause()


async def _take_gate_step(pilot) -> None:
    """Skip the power-rail steps (through the runner), then take the gate-overdrive step."""
    screen = await wait_for_session(pilot)
    runner = screen.link.runner
    for step in runner.checklist.steps():
        if step.id == STEP:
            break
        if step.gate:  # a safety gate is run, never skipped
            runner.run_step(step.id)
        else:
            runner.skip(step.id, "rails checked on the previous board")
    screen.refresh_all(select=STEP)
    await wait_until(pilot, lambda: screen.viewed == STEP, what=STEP)
    await take_step(pilot)
    if screen.viewed != STEP:  # a pass moves the cursor on: back to the step for its result
        await pilot.press("k")
        await wait_until(pilot, lambda: screen.viewed == STEP, what=STEP)
    screen.query_one("#checklist").focus()
    await pilot.pause()


def test_start_screen(snap_compare, log_path):
    from bringup.boards.board_file import load_board
    from bringup.checklist.load import load_checklist
    from bringup.runner import BenchSource, SessionRunner

    # one unfinished session in the log (created, one step skipped, no bench opened)
    runner = SessionRunner.create(
        board=load_board("demo"), checklist=load_checklist(), serial="DHS24-0007",
        operator="tester", bench=BenchSource.simulated("healthy"), db_path=log_path,
    )  # fmt: skip
    with runner:
        runner.run_step("power-rails.first-power")  # a safety gate: run, never skipped

    async def run_before(pilot) -> None:
        await pilot.pause()
        await wait_until(pilot, lambda: isinstance(pilot.app.screen, StartScreen))
        await _no_blink(pilot)

    assert snap_compare(BringupApp(FixedLauncher(log_path)), terminal_size=SIZE,
                        run_before=run_before)  # fmt: skip


def test_passed_step(snap_compare, log_path):
    async def run_before(pilot) -> None:
        await pilot.pause()
        await _take_gate_step(pilot)

    app = BringupApp(FixedLauncher(log_path), open_new=_values("healthy"))
    assert snap_compare(app, terminal_size=SIZE, run_before=run_before)


def test_failed_step(snap_compare, log_path):
    async def run_before(pilot) -> None:
        await pilot.pause()
        await _take_gate_step(pilot)

    app = BringupApp(FixedLauncher(log_path), open_new=_values("no-overdrive"))
    assert snap_compare(app, terminal_size=SIZE, run_before=run_before)


def test_summary(snap_compare, log_path):
    async def run_before(pilot) -> None:
        await pilot.pause()
        await _take_gate_step(pilot)
        await pilot.press("m")
        await wait_until(pilot, lambda: isinstance(pilot.app.screen, SummaryScreen))
        await pilot.pause()

    app = BringupApp(FixedLauncher(log_path), open_new=_values("no-overdrive"))
    assert snap_compare(app, terminal_size=SIZE, run_before=run_before)


def test_passed_step_100x30(snap_compare, log_path):
    """The smallest terminal the notebook is laid out for: the result in three two-line
    columns beside the checklist, the keys wrapped onto two lines at the foot."""

    async def run_before(pilot) -> None:
        await pilot.pause()
        await _take_gate_step(pilot)
        # the column is longer than the screen: where it scrolled to depends on when the
        # cursor went on to the next step and back; the step at the top, for a fixed picture
        pilot.app.screen.query_one("#checklist").scroll_to_highlight(top=True)
        await pilot.pause()

    app = BringupApp(FixedLauncher(log_path), open_new=_values("healthy"))
    assert snap_compare(app, terminal_size=(100, 30), run_before=run_before)
