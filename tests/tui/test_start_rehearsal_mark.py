"""The start screen's list of unfinished sessions marks a simulated bench's session as a
rehearsal (issue 13), so it is never picked up as a board's session by mistake."""

from __future__ import annotations

from tui_pilot import sync, wait_until

from bringup.store import SessionLog
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.screens.start import StartScreen

_BENCH = {
    "scope": {"resource": "TCPIP::192.0.2.10::5025::SOCKET", "profile": "sim-scope"},
    "supply": {"resource": "TCPIP::192.0.2.11::5025::SOCKET", "profile": "sim-supply"},
}
_CHECKLIST = {"id": "hs", "stages": [{"id": "rails", "steps": [{"id": "bus"}]}]}
_BOARD = {"board": {"name": "DHS-24", "revision": "B"}}


@sync
async def test_the_session_list_marks_a_rehearsal(log_path):
    with SessionLog.open(log_path) as log:
        real = log.create_session(board=_BOARD, checklist=_CHECKLIST, bench=_BENCH,
                                  serial="REAL-0001", operator="tester")  # fmt: skip
        sim = log.create_session(
            board=_BOARD, checklist=_CHECKLIST, serial="SIM-0001", operator="tester",
            bench={**_BENCH, "simulation": {"enabled": True}},
        )  # fmt: skip
    app = BringupApp(Launcher(log_path))
    async with app.run_test(size=(130, 40)) as pilot:
        await wait_until(pilot, lambda: isinstance(app.screen, StartScreen), what="start screen")
        table = app.screen.query_one("#sessions")
        await wait_until(pilot, lambda: table.row_count == 2, what="two sessions listed")
        heads = [str(c.label) for c in table.columns.values()]
        rows = {
            str(table.get_row_at(i)[0]): dict(
                zip(heads, map(str, table.get_row_at(i)), strict=True)
            )
            for i in range(table.row_count)
        }
    assert rows[sim]["bench"] == "REHEARSAL" and rows[sim]["serial"] == "SIM-0001"
    assert rows[real]["bench"] == "real"
