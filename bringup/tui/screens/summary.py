"""The summary of the whole session: every stage and step with its verdict and attempts."""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Static

from bringup.errors import BringupError
from bringup.tui.literal import literal
from bringup.tui.states import look_of
from bringup.tui.widgets.key_footer import KeyFooter

__all__ = ["SummaryScreen"]


class SummaryScreen(Screen[None]):
    """Read-only overview, ready for the record's export."""

    BINDINGS = [
        Binding("escape,m", "app.pop_screen", "back to the step"),
        Binding("q", "app.quit_safely", "quit (supply off)"),
    ]

    def compose(self) -> ComposeResult:
        yield Static("", id="titlebar")
        yield Static("", id="summary-verdict")
        yield DataTable(id="summary", cursor_type="row", zebra_stripes=True)
        yield Static("", id="summary-hint")
        yield KeyFooter()

    def on_mount(self) -> None:
        link = self.app.link  # type: ignore[attr-defined]
        self.query_one("#titlebar", Static).update(literal(link.header(), multiline=False))
        table = self.query_one("#summary", DataTable)
        table.add_columns("stage / step", "verdict", "attempts", "detail")
        try:
            rows = link.summary()
            overall = link.overall()
        except BringupError as exc:
            self.query_one("#summary-hint", Static).update(literal(str(exc)))
            return
        for row in rows:
            look = look_of(row.verdict)
            title = literal(row.title, "bold" if row.level == 0 else "", multiline=False)
            indent = "" if row.level == 0 else "   "
            table.add_row(
                Text(indent) + title,
                look.text(),
                str(row.attempts) if row.level else "",
                literal(row.detail, multiline=False),
            )
        look = look_of(overall)
        verdict = Text("Session verdict: ", style="bold")
        verdict.append(look.label().upper(), style=look.style)
        self.query_one("#summary-verdict", Static).update(verdict)
        self.query_one("#summary-hint", Static).update(
            literal(
                "The record (once every step has a verdict): "
                + self.app.launcher.carry_on(link.session_id, finished=True)  # type: ignore[attr-defined]
                + "  (--format html or json for the other forms)"
            )
        )
