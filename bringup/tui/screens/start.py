"""The start screen: pick up an unfinished session, or start a new board."""

from __future__ import annotations

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.message import Message
from textual.screen import Screen
from textual.widgets import Button, DataTable, Input, Label, Select, Static

from bringup.errors import BringupError
from bringup.tui.literal import literal
from bringup.tui.views import SessionRow
from bringup.tui.widgets.key_footer import KeyFooter
from bringup.tui.widgets.status_line import StatusLine

__all__ = ["StartScreen", "NewSessionForm"]

SIMULATED = "sim"
BENCH_FILE = "file"


class NewSessionForm(Vertical):
    """Board file, checklist, bench, serial number and operator of a new session.

    Posts ``NewSessionForm.Submitted`` (with ``values()``) when its button is pressed or Enter is
    pressed in the serial or operator field; the screen decides what to do with it.
    """

    DEFAULT_CSS = """
    NewSessionForm {
        width: 50;
        height: 1fr;
        border: tall #3a4a55;
        padding: 0 1;
        overflow-y: auto;
    }
    NewSessionForm Label { margin-top: 1; color: #9fb3c1; }
    NewSessionForm Button { margin-top: 1; width: 100%; }
    """

    class Submitted(Message):
        """The operator asked to start the session with these ``values`` (see ``values()``)."""

        def __init__(self, form: NewSessionForm, values: dict[str, str | None]) -> None:
            super().__init__()
            self.form = form
            self.values = values

        @property
        def control(self) -> NewSessionForm:
            return self.form

    def __init__(self, scenarios: tuple[str, ...], operator: str, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self.scenarios = scenarios
        self.operator = operator

    def compose(self) -> ComposeResult:
        yield Static("START A NEW BOARD", classes="pane-title")
        yield Label("Board file ('demo' = the demo board)")
        yield Input(value="demo", id="board")
        yield Label("Checklist file (empty = the standard one)")
        yield Input(placeholder="standard checklist", id="checklist")
        yield Label("Bench")
        yield Select(
            [("simulated bench (loopback)", SIMULATED), ("bench file…", BENCH_FILE)],
            value=SIMULATED,
            allow_blank=False,
            id="bench-kind",
        )
        yield Select(
            [(name, name) for name in self.scenarios],
            value=self.scenarios[0] if self.scenarios else Select.BLANK,
            allow_blank=not self.scenarios,
            id="scenario",
            prompt="scenario",
        )
        yield Input(placeholder="bench file (TOML)", id="bench-file")
        yield Label("Serial number")
        yield Input(placeholder="e.g. DHS24-0001", id="serial")
        yield Label("Operator")
        yield Input(value=self.operator, id="operator")
        yield Button("Ctrl+N  start the session", id="start-new", variant="primary")

    def on_mount(self) -> None:
        self.query_one("#bench-file").display = False

    @on(Button.Pressed, "#start-new")
    def _start_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        self.post_message(self.Submitted(self, self.values()))

    @on(Input.Submitted, "#serial, #operator")
    def _enter_pressed(self, event: Input.Submitted) -> None:
        event.stop()
        self.post_message(self.Submitted(self, self.values()))

    @on(Select.Changed, "#bench-kind")
    def _bench_kind(self, event: Select.Changed) -> None:
        sim = event.value == SIMULATED
        self.query_one("#scenario").display = sim
        self.query_one("#bench-file").display = not sim

    def values(self) -> dict[str, str | None]:
        """The form as a dict (empty strings for blank fields)."""
        kind = self.query_one("#bench-kind", Select).value
        scenario = self.query_one("#scenario", Select).value
        return {
            "board": self.query_one("#board", Input).value.strip(),
            "checklist": self.query_one("#checklist", Input).value.strip() or None,
            "bench_file": None
            if kind == SIMULATED
            else self.query_one("#bench-file", Input).value.strip(),
            "scenario": (scenario if isinstance(scenario, str) else None)
            if kind == SIMULATED
            else None,
            "serial": self.query_one("#serial", Input).value.strip(),
            "operator": self.query_one("#operator", Input).value.strip(),
        }


class StartScreen(Screen[None]):
    """Unfinished sessions on the left (newest first), a new session on the right."""

    BINDINGS = [
        Binding("ctrl+n", "new_session", "start new session", priority=True),
        Binding("ctrl+o", "resume", "resume selected", priority=True),
        Binding("ctrl+r", "reload", "reload list"),
        Binding("ctrl+b", "batch", "batch of boards", priority=True),
        Binding("ctrl+q", "app.quit_safely", "quit"),
    ]

    def __init__(self, autostart: tuple | None = None) -> None:
        """``autostart``: ("new", form values) or ("resume", session id) to open at once."""
        super().__init__()
        self._rows: list[SessionRow] = []
        self._autostart = autostart

    @property
    def launcher(self):
        return self.app.launcher  # type: ignore[attr-defined]

    def compose(self) -> ComposeResult:
        yield Static(
            literal(f"bringup · bench notebook · log {self.launcher.db_label()}", multiline=False),
            id="titlebar",
        )
        with Horizontal(id="start-body"):
            with Vertical(id="resume-pane"):
                yield Static("PICK UP WHERE YOU LEFT OFF", classes="pane-title")
                yield DataTable(id="sessions", cursor_type="row", zebra_stripes=True)
                yield Static("", id="sessions-hint")
            yield NewSessionForm(
                self.launcher.scenarios(), self.launcher.default_operator(), id="new-form"
            )
        yield StatusLine(id="status")
        yield KeyFooter()

    def on_mount(self) -> None:
        table = self.query_one("#sessions", DataTable)
        table.add_columns(
            "session", "serial", "bench", "done", "last activity", "operator", "board"
        )
        self.action_reload()
        if self._autostart is not None:
            self.say("Opening the session: connecting to the bench…")
            self._open(self._autostart)

    def say(self, message: str, kind: str = "info") -> None:
        self.query_one(StatusLine).say(message, kind)

    def action_reload(self) -> None:
        table = self.query_one("#sessions", DataTable)
        table.clear()
        try:
            self._rows = list(self.launcher.unfinished_sessions())
        except BringupError as exc:
            self._rows = []
            self.say(str(exc), "fault")
        for row in self._rows:
            # a simulated bench's session is marked where it is picked: a rehearsal, not a board
            bench = "REHEARSAL" if row.rehearsal else "real"
            cells = (row.id, row.serial, bench, row.progress, row.last_activity, row.operator,
                     row.board)  # fmt: skip
            table.add_row(*(literal(c, multiline=False) for c in cells), key=str(row.id))
        hint = self.query_one("#sessions-hint", Static)
        if self._rows:
            hint.update("Enter or Ctrl+O resumes the highlighted session.")
            table.focus()
        else:
            hint.update("No unfinished session in this log.")
            self.query_one("#serial", Input).focus()

    @on(DataTable.RowSelected, "#sessions")
    def _row_selected(self, event: DataTable.RowSelected) -> None:
        self.action_resume()

    def on_new_session_form_submitted(self, message: NewSessionForm.Submitted) -> None:
        self._start_new(message.values)

    def action_resume(self) -> None:
        table = self.query_one("#sessions", DataTable)
        if not self._rows:
            self.say("There is no session to resume.", "warn")
            return
        row = self._rows[table.cursor_row]
        self.say(f"Opening session {row.id}: connecting to the bench…")
        self._open(("resume", row.id))

    def action_batch(self) -> None:
        """The batch screen: the serials of a board revision side by side (Ctrl+B)."""
        from bringup.tui.screens.batch import BatchScreen

        self.app.push_screen(BatchScreen())

    def action_new_session(self) -> None:
        """Start a session from the form (Ctrl+N)."""
        self._start_new(self.query_one(NewSessionForm).values())

    def _start_new(self, values: dict[str, str | None]) -> None:
        if not values["serial"]:
            self.say("Type the board's serial number first.", "warn")
            self.query_one("#serial", Input).focus()
            return
        if not values["operator"]:
            self.say("Type the operator's name first.", "warn")
            self.query_one("#operator", Input).focus()
            return
        if values["bench_file"] == "":
            self.say("Name a bench file, or choose the simulated bench.", "warn")
            return
        self.say("Starting the session: connecting to the bench…")
        self._open(("new", values))

    @work(thread=True, exclusive=True, exit_on_error=False, group="open")
    def _open(self, what: tuple) -> None:
        """Open the session off the UI thread (it connects to instruments)."""
        try:
            if what[0] == "resume":
                link = self.launcher.resume(what[1])
            else:
                link = self.launcher.new_session(**what[1])
        except BringupError as exc:
            self.post_message(self.OpenFailed(str(exc)))
            return
        except Exception as exc:  # one line, never a traceback
            self.post_message(self.OpenFailed(f"could not open: {type(exc).__name__}: {exc}"))
            return
        self.post_message(self.Opened(link))

    class Opened(Message):
        """A session was opened (or created) and its bench connected."""

        def __init__(self, link: object) -> None:
            super().__init__()
            self.link = link

    class OpenFailed(Message):
        """Opening failed: one line for the status bar."""

        def __init__(self, problem: str) -> None:
            super().__init__()
            self.problem = problem

    def on_start_screen_opened(self, message: Opened) -> None:
        self.app.show_session(message.link)  # type: ignore[attr-defined]

    def on_start_screen_open_failed(self, message: OpenFailed) -> None:
        self.say(message.problem, "fault")
