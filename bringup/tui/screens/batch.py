"""The batch screen: every serial of one board revision side by side, and per metric a strip
with every serial against the limits. Reached from the start screen (Ctrl+B); reads only.

Rows are serials (bench, progress, verdict, sign-offs, last activity, then one column per
judged metric); a value carries its verdict when it is not a pass and ``◆`` when it is an
outlier of the batch (``bringup.analysis.batch``). ``h`` shows the highlighted serial's
history (every session and attempt, which ones the row shows); ``n`` the next board or
revision in the log.
"""

from __future__ import annotations

import math

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.message import Message
from textual.screen import ModalScreen, Screen
from textual.widgets import DataTable, Static

from bringup.analysis.quantities import format_quantity
from bringup.errors import BringupError
from bringup.tui.literal import literal, visible
from bringup.tui.widgets.key_footer import KeyFooter
from bringup.tui.widgets.status_line import StatusLine
from bringup.tui.widgets.strip_plot import OUTLIER_MARK, strip_text

__all__ = ["BatchScreen", "SerialHistoryScreen"]

_FIXED = ("serial", "bench", "done", "verdict", "signed", "last activity")


def _value_cell(batch, serial: str, key: str, unit: str) -> Text:
    cell = batch.cell(serial, key)
    if cell is None:
        return Text("-", style="dim")
    reading, _, outlier = cell
    text = Text(format_quantity(reading.value, unit))
    if reading.outcome != "pass":
        text.append(f" {reading.outcome}", style="bold")
    if outlier:
        text.append(f" {OUTLIER_MARK}", style="bold")
    return text


class BatchScreen(Screen[None]):
    """The batch of one board revision: table, strips, history one key away."""

    BINDINGS = [
        Binding("escape,q", "app.pop_screen", "back to the start"),
        Binding("h", "history", "history of the serial"),
        Binding("n", "next_board", "next board"),
    ]

    DEFAULT_CSS = """
    BatchScreen #batch-table { height: auto; max-height: 50%; }
    BatchScreen #batch-strips { height: 1fr; padding: 0 1; }
    BatchScreen .strip { margin-top: 1; }
    BatchScreen #batch-rule { color: #9fb3c1; padding: 0 1; }
    """

    class Loaded(Message):
        """The batch was read (``batch``), or could not be (``problem``)."""

        def __init__(self, batch=None, boards=(), problem: str = "") -> None:
            super().__init__()
            self.batch, self.boards, self.problem = batch, boards, problem

    def __init__(self) -> None:
        super().__init__()
        self.batch = None
        self.boards: tuple = ()
        self.board_index = 0

    def compose(self) -> ComposeResult:
        yield Static("batch · reading the log…", id="titlebar")
        yield DataTable(id="batch-table", cursor_type="row", zebra_stripes=True)
        yield Static("", id="batch-rule")
        yield VerticalScroll(id="batch-strips")
        yield StatusLine(id="status")
        yield KeyFooter()

    def on_mount(self) -> None:
        self._load(None)

    @work(thread=True, exclusive=True, exit_on_error=False, group="batch")
    def _load(self, index: int | None) -> None:
        """Read the log off the UI thread (a large log takes a moment)."""
        launcher = self.app.launcher  # type: ignore[attr-defined]
        try:
            boards = launcher.batch_boards()
            if not boards:
                self.post_message(self.Loaded(problem=f"{launcher.db_label()}: no sessions"))
                return
            board, revision = boards[(index or 0) % len(boards)]
            batch = launcher.batch(board, revision)
        except BringupError as exc:
            self.post_message(self.Loaded(problem=str(exc)))
            return
        except Exception as exc:  # one line, never a traceback
            self.post_message(self.Loaded(problem=f"{type(exc).__name__}: {exc}"))
            return
        self.post_message(self.Loaded(batch, boards))

    @on(Loaded)
    def _loaded(self, message: Loaded) -> None:
        status = self.query_one(StatusLine)
        if message.batch is None:
            status.say(message.problem, "fault")
            return
        self.batch, self.boards = message.batch, message.boards
        self._show()
        flagged = sum(1 for r in self.batch.rows if self.batch.outliers_of(r.serial))
        more = f"; n: next of {len(self.boards)} boards" if len(self.boards) > 1 else ""
        status.say(
            f"{len(self.batch.rows)} serials, {flagged} with outliers ({OUTLIER_MARK}); "
            f"h: history of the highlighted serial{more}",
            "warn" if flagged else "info",
        )

    def _show(self) -> None:
        batch = self.batch
        revision = f" rev {batch.revision}" if batch.revision else ""
        self.query_one("#titlebar", Static).update(
            literal(f"batch · {batch.board}{revision} · log {batch_where(self)}", multiline=False)
        )
        table = self.query_one("#batch-table", DataTable)
        table.clear(columns=True)
        table.add_columns(*_FIXED, *(c.name for c in batch.columns))
        for row in batch.rows:
            s = row.summary
            total = s.steps_total if s.steps_total is not None else "?"
            signed = ", ".join(sorted({role for role, _ in row.signatures})) or "unsigned"
            serial = literal(row.serial, multiline=False)
            if row.retaken:
                serial.append(f" ({len(row.sessions)}x)" if len(row.sessions) > 1 else " (r)")
            table.add_row(
                serial,
                "rehearsal" if s.rehearsal else "real",
                f"{s.steps_done}/{total}",
                s.verdict or "not-started",
                signed,
                s.last_activity_utc[:19].replace("T", " "),
                *(_value_cell(batch, row.serial, c.key, c.unit) for c in batch.columns),
                key=row.serial,
            )
        from bringup.batch.report import RULE_TEXT

        self.query_one("#batch-rule", Static).update(
            literal(f"{OUTLIER_MARK} {RULE_TEXT}; (2x): measured in 2 sessions, h shows them")
        )
        self._show_strips()
        table.focus()

    def _show_strips(self) -> None:
        from bringup.batch.report import limit_text

        batch = self.batch
        holder = self.query_one("#batch-strips", VerticalScroll)
        holder.remove_children()
        width = max((self.size.width or 100) - 6, 20)
        strips = []
        for c in batch.columns:
            d = batch.stats.get(c.key)
            if d is None:
                continue
            serials = batch.serials_of[c.key]
            points = [
                (batch.cell(s, c.key)[0].value, f) for s, f in zip(serials, d.outliers, strict=True)
            ]
            names = [visible(s) for s, f in zip(serials, d.outliers, strict=True) if f]
            title = (
                f"{c.name}  limit {limit_text(c)}  median {format_quantity(d.median, c.unit)}"
                f"  spread {format_quantity(d.scaled_mad, c.unit)}  n {d.n}"
            )
            text = strip_text(title, points, names, unit=c.unit, lower=c.lower,
                              upper=c.upper, centre=d.median, width=width)  # fmt: skip
            strips.append(Static(text, classes="strip", id=f"strip-{len(strips)}"))
        holder.mount_all(strips)

    def highlighted_serial(self) -> str | None:
        """The serial of the table's highlighted row."""
        if self.batch is None or not self.batch.rows:
            return None
        table = self.query_one("#batch-table", DataTable)
        return self.batch.rows[min(table.cursor_row, len(self.batch.rows) - 1)].serial

    def action_history(self) -> None:
        serial = self.highlighted_serial()
        if serial is None:
            self.query_one(StatusLine).say("No serial to show.", "warn")
            return
        row = next(r for r in self.batch.rows if r.serial == serial)
        self.app.push_screen(SerialHistoryScreen(self.batch, row))

    def action_next_board(self) -> None:
        if len(self.boards) < 2:
            self.query_one(StatusLine).say("The log holds one board revision only.", "info")
            return
        self.board_index = (self.board_index + 1) % len(self.boards)
        self._load(self.board_index)


def batch_where(screen: Screen) -> str:
    """The log's name for the title bar."""
    return screen.app.launcher.db_label()  # type: ignore[attr-defined]


class SerialHistoryScreen(ModalScreen[None]):
    """Every session and attempt of one serial, oldest first; the ones the batch shows marked."""

    BINDINGS = [Binding("escape,h,q", "app.pop_screen", "back to the batch")]

    DEFAULT_CSS = """
    SerialHistoryScreen { align: center middle; }
    SerialHistoryScreen #history-box { width: 95%; height: 90%; border: tall #3a4a55;
        background: #11171b; padding: 0 1; }
    """

    def __init__(self, batch, row) -> None:
        super().__init__()
        self.batch, self.row = batch, row

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="history-box"):
            yield Static("", id="history-title")
            yield DataTable(id="history", cursor_type="row", zebra_stripes=True)
        yield KeyFooter()

    def on_mount(self) -> None:
        row = self.row
        title = literal(
            f"{row.serial}: {len(row.sessions)} sessions, {len(row.history)} attempts; "
            "'shown' marks what the batch row shows (the latest session's latest judged "
            "attempt of each step)",
        )
        self.query_one("#history-title", Static).update(title)
        table = self.query_one("#history", DataTable)
        table.add_columns("session", "verdict", "step", "try", "outcome", "recorded", "shown",
                          "values")  # fmt: skip
        units = {c.metric: c.unit for c in self.batch.columns}
        verdicts = {s.id: s.verdict or "not-started" for s in row.sessions}
        for h in row.history:
            values = ", ".join(
                f"{m} {format_quantity(v, units.get(m, ''))}"
                for m, v in h.values.items()
                if math.isfinite(v)
            )
            table.add_row(h.session_id, verdicts.get(h.session_id, ""), f"{h.stage}.{h.step}",
                          str(h.attempt_no), h.outcome, h.recorded_utc[:19].replace("T", " "),
                          "shown" if h.shown else "", values)  # fmt: skip
        table.focus()
