"""Above 60 V DC the energising prompt carries a hazard notice; "no" leaves the board unpowered.

60 V DC is the limit of IEC 62368-1's ES1 (extra-low voltage) class [memory]; the notice defers
to local codes and licensed practice. The board here is the demo board with its bus raised to
80 V: nothing is switched on, so the simulated bench never sees the 80 V.
"""

from __future__ import annotations

from pathlib import Path

from tui_pilot import sync, wait_for_session, wait_until

from bringup.boards.board_file import demo_board_path
from bringup.store import SessionLog
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.screens.prompts import EnergisePrompt
from bringup.tui.screens.session import SessionScreen


@sync
async def test_an_80_volt_bus_shows_the_hazard_notice_and_no_keeps_it_off(log_path):
    text = demo_board_path().read_text()
    assert 'bus_voltage = "24 V"' in text
    board = Path("board-80v.toml")
    board.write_text(text.replace('bus_voltage = "24 V"', 'bus_voltage = "80 V"'))
    values = {"board": str(board), "checklist": None, "bench_file": None,
              "scenario": "healthy", "serial": "DHS24-0080", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(130, 40)) as pilot:
        screen = await wait_for_session(pilot)
        await pilot.press("r")
        await wait_until(pilot, lambda: isinstance(app.screen, EnergisePrompt), what="prompt")
        prompt = app.screen
        assert "80 V" in str(prompt.query_one("#energise-text").render())
        notice = str(prompt.query_one("#hazard-notice").render())
        # the notice names the set voltage, the 60 V DC limit it is above (IEC 62368-1 ES1,
        # [memory]) and what the hazard is, in the instrument layer's wording and level
        assert "80 V DC" in notice and "above the usual 60 V DC" in notice, notice
        assert "caution" in notice.lower() and "shock hazard" in notice.lower(), notice
        await pilot.press("n")
        await wait_until(pilot, lambda: isinstance(app.screen, SessionScreen))
        assert "Not" in str(screen.query_one("#status").render())
        assert screen.running is None
        session_id = screen.link.session_id
        await pilot.press("q")
    with SessionLog.open(log_path) as log:
        assert log.attempts(session_id) == []  # nothing ran, nothing was energised
