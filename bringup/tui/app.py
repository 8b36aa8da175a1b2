"""The bench notebook application: start screen, session screen, summary.

The app holds a ``launcher`` (lists and opens sessions, owns any simulated bench it started)
and, once a session is open, its ``link`` (the one object that talks to the runner). On every
way out (the quit key, Ctrl+C, a crash) ``shutdown`` puts the bench in its safe state: the
supply output OFF. Only Textual's public API is used (no private hooks).
"""

from __future__ import annotations

import io
from typing import Any

from rich.console import Console
from textual.app import App
from textual.binding import Binding

from bringup.tui.screens.session import SessionScreen
from bringup.tui.screens.start import StartScreen

__all__ = ["BringupApp"]


class BringupApp(App[int]):
    """``launcher``: see ``bringup.tui.launch.Launcher``. ``open_new``: the new-session form's
    values to open at once (``bringup demo``); ``resume``: a session id to reopen at once."""

    CSS_PATH = "bringup.tcss"
    TITLE = "bringup"
    ENABLE_COMMAND_PALETTE = False
    BINDINGS = [
        Binding("ctrl+c", "quit_safely", "quit", priority=True, show=False),
        Binding("ctrl+q", "quit_safely", "quit", show=False),
    ]

    def __init__(
        self, launcher: Any, *, open_new: dict | None = None, resume: int | str | None = None
    ) -> None:
        super().__init__()
        self.launcher = launcher
        self.link: Any = None
        self._open_new = open_new
        self._resume = resume
        self._shut = False
        #: (session id, every step has a verdict) of the session shown last; (None, False)
        self.last_session: tuple[str | None, bool] = (None, False)
        # After an unhandled exception Textual exits and prints the traceback on its public
        # ``error_console``: here that console writes into a buffer, so the bench gets one line
        # (``crash_message``, printed by ``run_app`` once the supply is off) and the traceback
        # is kept for a bug report instead of filling the operator's terminal.
        self._crash_text = io.StringIO()
        self.error_console = Console(
            file=self._crash_text, width=1000, color_system=None, markup=False, highlight=False
        )

    def on_mount(self) -> None:
        if self._open_new is not None:
            self.push_screen(StartScreen(autostart=("new", self._open_new)))
        elif self._resume is not None:
            self.push_screen(StartScreen(autostart=("resume", self._resume)))
        else:
            self.push_screen(StartScreen())

    def show_session(self, link: Any) -> None:
        """Show ``link``'s session (called on the UI thread once it is open)."""
        if self.link is not None and self.link is not link:
            self.link.close()
        self.last_session = (link.session_id, False)
        self.link = link
        self.push_screen(SessionScreen())

    def carry_on(self) -> str:
        """One line for the terminal once the notebook has closed: the exact command that
        carries on (with ``--db`` when the log is not the default one)."""
        session_id, finished = self.last_session
        command = self.launcher.carry_on(session_id, finished)
        if session_id is None:
            return f"bringup: no session was opened; to start one: {command}"
        if finished:
            return (
                f"bringup: session {session_id} has a verdict on every step; its record: {command}"
            )
        return f"bringup: session {session_id} is unfinished; to carry on: {command}"

    def shutdown(self) -> None:
        """Safe state then close: supply OFF, instruments released. Safe to call twice."""
        if self._shut:
            return
        self._shut = True
        link, self.link = self.link, None
        if link is not None:
            try:
                self.last_session = (link.session_id, link.overall_finished())
            except Exception:  # the bench goes safe whatever the log says
                self.last_session = (link.session_id, False)
            link.close()

    def action_quit_safely(self) -> None:
        """Leave: on the way out ``shutdown`` switches the supply off at once and stops a
        running step (``SessionLink.close``)."""
        self.exit(0)

    def on_unmount(self) -> None:
        self.shutdown()

    @property
    def crash_message(self) -> str | None:
        """One line saying why the app stopped on an unexpected error (None if it did not)."""
        lines = [line.strip() for line in self.crash_detail.splitlines() if line.strip()]
        if not lines:
            return None
        return f"unexpected fault: {lines[-1]}"  # Rich's traceback ends with "Type: message"

    @property
    def crash_detail(self) -> str:
        """The traceback of an unexpected error, as Textual rendered it ('' if none)."""
        return self._crash_text.getvalue()
