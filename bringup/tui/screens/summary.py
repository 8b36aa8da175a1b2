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
        self._rows: list = []
        self._laid_for = 0
        try:
            self._rows = list(link.summary())
            overall = link.overall()
        except BringupError as exc:
            self.query_one("#summary-hint", Static).update(literal(str(exc)))
            return
        self.call_after_refresh(self._fill)
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

    def on_resize(self) -> None:
        self.call_after_refresh(self._fill)

    def _fill(self) -> None:
        """The rows in columns fitted to the table's width: a step's name and its detail wrap
        in their columns (at 160 columns the detail was cut off the right edge)."""
        table = self.query_one("#summary", DataTable)
        width = table.size.width
        if width <= 0 or width == self._laid_for:
            return
        self._laid_for = width
        looks = [look_of(row.verdict) for row in self._rows]
        verdict_w = max([len("verdict"), *(len(look.label()) for look in looks)])
        titles = [len(row.title) + (3 if row.level else 0) for row in self._rows]
        rest = width - 2 - verdict_w - len("attempts") - 8  # scroll bar, cell padding
        title_w = max(16, min(max([len("stage / step"), *titles]), rest * 2 // 5))
        table.clear(columns=True)
        table.add_column("stage / step", width=title_w)
        table.add_column("verdict", width=verdict_w)
        table.add_column("attempts", width=len("attempts"))
        table.add_column("detail", width=max(16, rest - title_w))
        for row, look in zip(self._rows, looks, strict=True):
            title = literal(row.title, "bold" if row.level == 0 else "", multiline=False)
            table.add_row(
                Text("   " if row.level else "") + title,
                look.text(),
                str(row.attempts) if row.level else "",
                literal(row.detail, multiline=False),
                height=None,  # as many lines as the wrapped name and detail need
            )
