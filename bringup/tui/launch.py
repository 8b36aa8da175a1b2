"""Lists and opens sessions for the start screen: the notebook's door to the runner and log.

``Launcher(db_path)`` reads the unfinished sessions from the log (``bringup.store``) and makes
``SessionLink`` objects by creating or resuming a ``bringup.runner.SessionRunner``. A simulated
bench is started by the runner itself (``BenchSource.simulated``) on free loopback ports and
stopped when the session is closed.
"""

from __future__ import annotations

import getpass
import os
from pathlib import Path

from bringup.errors import InputError
from bringup.tui.present import when_text
from bringup.tui.views import SessionRow

__all__ = ["Launcher", "SCENARIOS"]

#: The simulated bench's scenarios (sim_instruments), healthy first.
SCENARIOS = (
    "healthy",
    "weak-bootstrap",
    "no-overdrive",
    "slow-gate",
    "hot-switch",
    "sagging-rail",
)
#: A half-bridge board's scenarios (``sim_instruments.half_bridge_scenarios``; healthy too).
HALF_BRIDGE_SCENARIOS = ("shoot-through", "long-dead-time", "no-refresh", "switch-node-spike")


def _sim_text(source) -> str:
    """'sim bench (healthy, clock ×20)': the scenario and how fast the simulated thermal clock
    runs (simulated seconds per real second), so a soak's pace is explained on screen; an
    unpaced bench (a session started headless) passes its waits on its own clock at once."""
    if not source.time_scale:
        return f"sim bench ({source.scenario}, unpaced clock)"
    return f"sim bench ({source.scenario}, clock ×{source.time_scale:g})"


class Launcher:
    """Opens sessions in the log at ``db_path`` (None = the default log).

    ``sim_time_scale``: simulated seconds per real second of a simulated bench's thermal model
    (None = the runner's default); the demo slows it so a soak can be watched converging.
    """

    def __init__(
        self, db_path: str | Path | None = None, *, sim_time_scale: float | None = None
    ) -> None:
        self.db_path = Path(db_path).expanduser() if db_path is not None else None
        self.sim_time_scale = sim_time_scale

    def db_label(self) -> str:
        """The log file's path, for the title bar."""
        if self.db_path is not None:
            return str(self.db_path)
        from bringup.store import default_db_path

        return str(default_db_path())

    def db_option(self) -> str:
        """' --db PATH' (shell-quoted) when the log is not the default one, else ''."""
        import shlex

        if self.db_path is None:
            return ""
        from bringup.store import default_db_path

        try:
            if self.db_path.resolve() == default_db_path().resolve():
                return ""
        except OSError:
            pass
        return f" --db {shlex.quote(str(self.db_path))}"

    def carry_on(self, session_id: str | None, finished: bool = False) -> str:
        """The exact command that carries on from here: resume an unfinished session, export
        a finished one's record, or open the notebook when no session was opened."""
        import shlex

        db = self.db_option()
        if session_id is None:
            return f"bringup open{db}"
        sid = shlex.quote(str(session_id))
        if finished:
            return f"bringup export {sid} --format pdf --out record.pdf{db}"
        return f"bringup resume {sid}{db}"

    def scenarios(self) -> tuple[str, ...]:
        """Scenario names of the simulated bench."""
        return SCENARIOS

    def default_operator(self) -> str:
        """$BRINGUP_OPERATOR, else the login name, else ''."""
        name = os.environ.get("BRINGUP_OPERATOR", "").strip()
        if name:
            return name
        try:
            return getpass.getuser()
        except (KeyError, OSError):
            return ""

    def unfinished_sessions(self) -> tuple[SessionRow, ...]:
        """Open sessions, most recent activity first, with their progress."""
        from bringup.store import SessionLog

        if self.db_path is not None and not self.db_path.exists():
            return ()
        with SessionLog.open(self.db_path) as log:
            summaries = [s for s in log.sessions() if s.state == "open"]
        rows = []
        for s in summaries:
            total = s.steps_total if s.steps_total is not None else "?"
            board = s.board_name + (f" rev {s.board_revision}" if s.board_revision else "")
            rows.append(
                SessionRow(
                    s.id,
                    board,
                    s.serial,
                    s.operator,
                    f"{s.steps_done}/{total}",
                    when_text(s.last_activity_utc),
                    s.verdict or "not-started",
                    s.rehearsal,
                )
            )
        return tuple(rows)

    def batch_boards(self) -> tuple[tuple[str, str | None], ...]:
        """The (board name, revision) pairs in the log, the most recently active first: the
        batches the batch screen can show."""
        from bringup.store import SessionLog

        with SessionLog.open(self.db_path, create=False, read_only=True) as log:
            summaries = log.sessions()  # most recent activity first
        pairs: dict[tuple[str, str | None], None] = {}
        for s in summaries:
            pairs.setdefault((s.board_name, s.board_revision), None)
        return tuple(pairs)

    def batch(self, board: str | None, revision: str | None):
        """The ``bringup.batch.collect.Batch`` of ``board`` at ``revision`` in this log (read
        only; ``StoreError``/``InputError`` in one line when the log or the board is not there)."""
        from bringup.batch.collect import collect_batch
        from bringup.store import SessionLog

        with SessionLog.open(self.db_path, create=False, read_only=True) as log:
            return collect_batch(log, board, revision, self.db_label())

    def _bench(self, bench_file: str | None, scenario: str | None):
        from bringup.runner import BenchSource

        if bench_file:
            path = Path(bench_file).expanduser()
            if not path.is_file():
                raise InputError(f"bench file {bench_file}: no such file")
            return BenchSource.from_file(path), f"bench {path.name}"
        name = scenario or "healthy"
        if name not in SCENARIOS + HALF_BRIDGE_SCENARIOS:
            known = ", ".join(SCENARIOS + HALF_BRIDGE_SCENARIOS)
            raise InputError(f"--scenario {name}: unknown (one of {known})")
        if self.sim_time_scale is None:
            source = BenchSource.simulated(name)
        else:
            source = BenchSource.simulated(name, time_scale=self.sim_time_scale)
        return source, _sim_text(source)

    def new_session(
        self,
        *,
        board: str,
        checklist: str | None,
        bench_file: str | None,
        scenario: str | None,
        serial: str,
        operator: str,
    ):
        """Create a session (validating every file) and return its ``SessionLink``."""
        from bringup.boards.board_file import SHIPPED_BOARDS, load_board
        from bringup.checklist.load import SHIPPED_CHECKLISTS, load_checklist
        from bringup.runner import SessionRunner
        from bringup.tui.link import SessionLink

        if not board:
            raise InputError("board file: type a path, or 'demo' for the demo board")
        if board not in SHIPPED_BOARDS and not Path(board).expanduser().is_file():
            raise InputError(f"board file {board}: no such file")
        shipped = checklist in SHIPPED_CHECKLISTS
        if checklist and not shipped and not Path(checklist).expanduser().is_file():
            raise InputError(f"checklist file {checklist}: no such file")
        source, text = self._bench(bench_file, scenario)
        runner = SessionRunner.create(
            board=load_board(board),
            checklist=load_checklist(checklist or None),
            serial=serial,
            operator=operator,
            bench=source,
            db_path=self.db_path,
        )
        return SessionLink(runner, text)

    def resume(self, session_id: str):
        """Reopen an unfinished session on the bench it was started with."""
        from bringup.runner import SessionRunner
        from bringup.tui.link import SessionLink

        runner = SessionRunner.resume(str(session_id), db_path=self.db_path)
        source = runner.bench_source
        if source.is_simulated:
            text = _sim_text(source)
        else:
            text = f"bench {Path(source.path).name}"
        return SessionLink(runner, text)

    def close(self) -> None:
        """Nothing to release: each session's runner owns its bench and log."""
