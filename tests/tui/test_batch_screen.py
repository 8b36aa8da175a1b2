"""The batch screen, reached from the start screen with Ctrl+B, on a real log of simulated boards
(``tests/batch_logs.py``: three healthy, one weak-bootstrap, one retaken after rework, one with
markup in its serial). Driven by keys; what it shows is read from the screen where a person
reads it, and from the table's cells for the columns beyond the terminal's width."""

from __future__ import annotations

import sqlite3

from batch_logs import HEALTHY, WEAK
from tui_pilot import screen_lines, sync, wait_until

from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.screens.batch import BatchScreen, SerialHistoryScreen
from bringup.tui.screens.start import StartScreen
from bringup.tui.widgets.strip_plot import LIMIT_MARK, OUTLIER_MARK, strip_rows

SIZE = (140, 45)
DROOP = "droop-max-on-time.droop.vgs_droop"


def _copy(src, dst) -> str:
    """A copy of the batch log (the notebook gets its own file)."""
    with sqlite3.connect(src) as source, sqlite3.connect(dst) as target:
        source.backup(target)
    return str(dst)


async def _open_batch(pilot) -> BatchScreen:
    app = pilot.app
    await wait_until(pilot, lambda: isinstance(app.screen, StartScreen), what="start screen")
    await pilot.press("ctrl+b")
    await wait_until(
        pilot,
        lambda: isinstance(app.screen, BatchScreen) and app.screen.batch is not None,
        what="the batch screen with its batch",
    )
    await app.workers.wait_for_complete()
    await pilot.pause()
    return app.screen


def _cell_text(screen: BatchScreen, serial: str, key: str) -> str:
    table = screen.query_one("#batch-table")
    column = 6 + [c.key for c in screen.batch.columns].index(key)
    return str(table.get_row(serial)[column])


@sync
async def test_batch_screen_flags_the_weak_board_and_shows_serials_literally(batch_log, tmp_path):
    app = BringupApp(Launcher(_copy(batch_log.db, tmp_path / "copy.db")))
    async with app.run_test(size=SIZE) as pilot:
        screen = await _open_batch(pilot)
        text = "\n".join(screen_lines(app))
        assert "batch · DHS-24 demo heater switch rev B" in text
        for serial in (*HEALTHY, WEAK):
            assert serial in text, serial  # the markup serial as typed, not as markup
        assert "DHS24-0004 (2x)" in text  # retaken: measured in two sessions
        assert "5 serials, 1 with outliers" in text
        # the matrix: the weak board's droop carries its verdict and the outlier mark;
        # no healthy board has a mark anywhere
        assert _cell_text(screen, WEAK, DROOP).endswith(f"fail {OUTLIER_MARK}")
        for serial in HEALTHY:
            row = screen.query_one("#batch-table").get_row(serial)
            assert not any(OUTLIER_MARK in str(cell) for cell in row), serial
        # the droop strip, scrolled into view: the weak board named beside the outlier mark
        strips = [c for c in screen.batch.columns if c.key in screen.batch.stats]
        strip = screen.query_one(f"#strip-{[c.key for c in strips].index(DROOP)}")
        strip.scroll_visible(animate=False)
        await pilot.pause()
        lines = screen_lines(app)
        head = next(
            i for i, line in enumerate(lines) if line.strip().startswith("vgs_droop  limit")
        )
        assert f"{OUTLIER_MARK} outlier: {WEAK}" in lines[head]
        assert OUTLIER_MARK in lines[head + 1] and LIMIT_MARK in lines[head + 1]
        assert "max 300 mV" in lines[head + 2]
        # the outlier lies beyond the limit line, to its right
        assert lines[head + 1].index(OUTLIER_MARK) > lines[head + 1].index(LIMIT_MARK)
        await pilot.press("escape")
        await wait_until(pilot, lambda: isinstance(app.screen, StartScreen), what="back")


@sync
async def test_history_of_a_retaken_serial_is_one_key_away(batch_log, tmp_path):
    app = BringupApp(Launcher(_copy(batch_log.db, tmp_path / "copy.db")))
    async with app.run_test(size=SIZE) as pilot:
        screen = await _open_batch(pilot)
        while screen.highlighted_serial() != "DHS24-0004":
            await pilot.press("down")
        await pilot.press("h")
        await wait_until(pilot, lambda: isinstance(app.screen, SerialHistoryScreen), what="history")
        await pilot.pause()
        text = "\n".join(screen_lines(app))
        row = app.screen.row
        first, second = row.sessions
        assert "DHS24-0004: 2 sessions, 16 attempts" in text
        assert first.id in text and second.id in text
        table = app.screen.query_one("#history")
        shown = [table.get_row_at(i) for i in range(table.row_count)]
        # the shown attempts are the second session's, one per step; the first is history
        assert {r[0] for r in shown if r[6] == "shown"} == {second.id}
        assert sum(1 for r in shown if r[6] == "shown") == 8
        assert any(r[0] == first.id and r[4] == "fail" for r in shown)  # the weak droop
        await pilot.press("escape")
        await wait_until(pilot, lambda: isinstance(app.screen, BatchScreen), what="back")


@sync
async def test_batch_of_a_missing_log_says_so_in_one_line(tmp_path):
    app = BringupApp(Launcher(tmp_path / "none.db"))
    async with app.run_test(size=SIZE) as pilot:
        await wait_until(pilot, lambda: isinstance(app.screen, StartScreen), what="start screen")
        await pilot.press("ctrl+b")
        await wait_until(pilot, lambda: isinstance(app.screen, BatchScreen), what="batch screen")
        await app.workers.wait_for_complete()
        await pilot.pause()
        status = str(app.screen.query_one("#status").render())
        assert "none.db: no session log there" in status
        assert not (tmp_path / "none.db").exists()


def test_strip_rows_place_points_limits_and_outliers():
    # 0..10 with a max at 8: three boards near 1, one outlier at 10 (the rest of the scale
    # is padded by 4 %); every board on its own lane of the braille cell
    strip, scale = strip_rows(
        [(1.0, False), (1.05, False), (0.95, False), (10.0, True)],
        unit="V", lower=None, upper=8.0, centre=1.0, width=40,
    )  # fmt: skip
    assert len(strip) == len(scale) == 40
    assert strip.count(OUTLIER_MARK) == 1 and strip.rstrip().endswith(OUTLIER_MARK)
    limit = strip.index(LIMIT_MARK)
    assert abs(limit - round((8.0 - 0.59) / (10.36 - 0.59) * 39.5)) <= 1
    dots = [c for c in strip if 0x2800 < ord(c) <= 0x28FF]
    assert dots and strip.index(dots[0]) < 3  # the healthy boards at the left end
    assert "max 8 V" in scale
