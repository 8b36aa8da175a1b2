"""Text a person typed or a file supplied is shown exactly as typed, never read as markup.

Before: an operator named ``Ana [/] Op`` stopped the notebook with Textual's markup error, and
``[bold red]``, ``[link=...]`` and ``[@click=app.quit]`` in a name were drawn as styles, links and
clickable actions. What is on screen is read back from the app's own screenshot
(``screen_lines``) and from the widgets' rendered text; what was logged from the SQLite file.
"""

from __future__ import annotations

from pathlib import Path

from tui_pilot import screen_lines, sync, take_step, wait_for_session, wait_until

from bringup.checklist.load import standard_checklist_path
from bringup.store import SessionLog
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher
from bringup.tui.messages import StepFaulted
from bringup.tui.screens.session import SessionScreen
from bringup.tui.screens.start import StartScreen

# Textual content markup (a crash, a style, a link, an action), HTML and an entity
HOSTILE_NAME = (
    "Ana [/] Op [bold red]Red[/] [link=https://example.invalid]L[/link] "
    "[@click=app.quit]Q[/] <b>H</b> &amp;"
)
HOSTILE_NOTE = "[@click=app.quit]quit[/] [/] <script>alert(1)</script> [b]x"


def _rendered(widget) -> str:
    return str(widget.render())


async def _type(pilot, text: str) -> None:
    keys = {" ": "space", "[": "left_square_bracket", "]": "right_square_bracket"}
    await pilot.press(*[keys.get(ch, ch) for ch in text])


@sync
async def test_a_name_and_a_note_full_of_markup_are_shown_as_typed(log_path):
    app = BringupApp(Launcher(log_path))
    async with app.run_test(size=(200, 50)) as pilot:
        await wait_until(pilot, lambda: isinstance(app.screen, StartScreen), what="start screen")
        start = app.screen
        start.query_one("#operator").value = ""
        await pilot.click("#operator")
        await _type(pilot, HOSTILE_NAME)
        assert start.query_one("#operator").value == HOSTILE_NAME
        await pilot.click("#serial")
        await _type(pilot, "DHS24-0011")
        await pilot.press("ctrl+n")
        screen = await wait_for_session(pilot)
        assert app.crash_message is None

        header = _rendered(screen.query_one("#titlebar"))
        assert HOSTILE_NAME in header, header
        assert any(HOSTILE_NAME in line for line in screen_lines(app))

        await take_step(pilot)  # first power, on the simulated bench
        await wait_until(pilot, lambda: screen.viewed != "power-rails.first-power")
        await pilot.press("k")  # back to the attempt just taken
        await wait_until(pilot, lambda: screen.viewed == "power-rails.first-power")
        banner = _rendered(screen.query_one("#verdict-banner"))
        assert HOSTILE_NAME in banner, banner

        # a note typed with markup and HTML: kept and shown as typed, the app still running
        await pilot.press("n")
        await _type(pilot, HOSTILE_NOTE)
        await pilot.press("enter")
        await wait_until(pilot, lambda: HOSTILE_NOTE in _rendered(screen.query_one("#notes-list")))
        assert app.is_running and app.return_code is None
        assert any("[@click=app.quit]quit[/] [/]" in line for line in screen_lines(app))
        session_id = screen.link.session_id
        await pilot.press("q")
    assert app.crash_message is None
    with SessionLog.open(log_path) as log:
        assert log.session(session_id).summary.operator == HOSTILE_NAME
        assert [e.reason for e in log.events(session_id) if e.kind == "note"] == [HOSTILE_NOTE]


@sync
async def test_ansi_escapes_and_direction_overrides_from_files_are_made_visible(log_path):
    # a checklist step whose title carries a right-to-left override (U+202E), an ANSI colour
    # sequence (ESC [ 31 m) and markup, and whose instructions blink: a file supplies them
    checklist = Path("checklist-ansi.toml")
    checklist.write_text(
        standard_checklist_path()
        .read_text()
        .replace(
            'title = "First power: stepped ramp at a low current limit"',
            'title = "First power \\u202eevil\\u202c \\u001b[31m[bold]red[/bold]"',
        )
        .replace(
            "Set the board's PWM enable to off.",
            "Set the board's PWM enable \\u001b[5moff\\u001b[0m [link=x]now[/link].",
            1,
        )
    )
    values = {"board": "demo", "checklist": str(checklist), "bench_file": None,
              "scenario": "healthy", "serial": "DHS24-0012", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(200, 50)) as pilot:
        screen = await wait_for_session(pilot)
        lines = screen_lines(app)
        text = "\n".join(lines)
        assert "\x1b" not in text and "\u202e" not in text
        # ESC shows as its control picture, the override as its code point, markup as typed
        title = "First power ⟨U+202E⟩evil⟨U+202C⟩ ␛[31m[bold]red[/bold]"
        assert title in _rendered(screen.query_one("#step-title"))
        assert "enable ␛[5moff␛[0m [link=x]now[/link]." in _rendered(
            screen.query_one("#step-instructions")
        )
        assert "First power ⟨U+202E⟩evil⟨U+202C⟩ ␛[31m[bo" in text  # the checklist column
        # a fault message quoting an instrument's reply: shown as sent, markup and all
        screen.post_message(
            StepFaulted(screen.viewed, "scope: reply '[/]' \x1b[2J[@click=app.quit]")
        )
        await wait_until(pilot, lambda: "Fault" in _rendered(screen.query_one("#status")))
        assert "reply '[/]' ␛[2J[@click=app.quit]" in _rendered(screen.query_one("#status"))
        assert app.is_running
        await pilot.press("q")
    assert app.crash_message is None


@sync
async def test_a_name_with_a_direction_override_is_refused_in_the_form(log_path):
    app = BringupApp(Launcher(log_path))
    async with app.run_test(size=(130, 40)) as pilot:
        await wait_until(pilot, lambda: isinstance(app.screen, StartScreen), what="start screen")
        start = app.screen
        start.query_one("#operator").value = "Ana \u202eevil"
        start.query_one("#serial").value = "DHS24-0013"
        await pilot.press("ctrl+n")
        status = _rendered(start.query_one("#status"))
        assert "U+202E" in status and "operator" in status, status  # one line, no traceback
        assert isinstance(app.screen, StartScreen)
        assert not [s for s in app.screen_stack if isinstance(s, SessionScreen)]
        await pilot.press("ctrl+q")
    assert not Path(log_path).exists() or not SessionLog.open(log_path).sessions()
