"""The notebook in a real terminal (a pseudo-terminal) that is closed while a step has the
supply ON: the process gets SIGHUP, as when a terminal window is closed or an SSH link drops.
The supply goes OFF, the session's log names the signal and the process ends with 129.

The simulated bench runs in this test process and is reached through a bench file, so it
outlives the notebook's process (``bringup resume``); its scope holds the step's acquisition
(a trigger that does not come) until the test lets it go, so the signal lands while the output
is ON.
"""

from __future__ import annotations

import os
import pty
import select
import signal
import sys
import threading
import time
from pathlib import Path

import pytest

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.runner import BenchSource, SessionRunner, StepAnswers
from bringup.store import SessionLog

pytestmark = pytest.mark.skipif(not hasattr(os, "fork"), reason="needs a pseudo-terminal")


class Terminal:
    """A process on a pseudo-terminal: keys in, its output read until a text shows."""

    def __init__(self, argv: list[str], env: dict[str, str]) -> None:
        self.pid, self.fd = pty.fork()
        if self.pid == 0:  # the child: the program, on the terminal's slave side
            os.execve(argv[0], argv, env)
        self.seen = b""

    def wait_for(self, text: str, timeout: float = 40.0) -> None:
        deadline = time.monotonic() + timeout
        while text.encode() not in self.seen:
            if time.monotonic() > deadline:
                raise AssertionError(f"{text!r} never appeared; the output:\n{self.seen[-2000:]!r}")
            ready, _, _ = select.select([self.fd], [], [], 0.1)
            if ready:
                try:
                    self.seen += os.read(self.fd, 65536)
                except OSError:
                    raise AssertionError(f"the program ended: {self.seen[-2000:]!r}") from None

    def keys(self, text: str) -> None:
        os.write(self.fd, text.encode())

    def close(self) -> None:
        """Close the terminal: the program gets SIGHUP from the kernel."""
        if self.fd >= 0:
            os.close(self.fd)
            self.fd = -1

    def exit_status(self, timeout: float = 60.0) -> int:
        deadline = time.monotonic() + timeout
        while True:
            pid, status = os.waitpid(self.pid, os.WNOHANG)
            if pid:
                return os.waitstatus_to_exitcode(status)
            if time.monotonic() > deadline:
                os.kill(self.pid, signal.SIGKILL)
                os.waitpid(self.pid, 0)
                raise AssertionError("the notebook did not end after its terminal closed")
            time.sleep(0.05)  # polling the child, not a fixed wait for it


def _abort_events(log_path: Path) -> list:
    with SessionLog.open(log_path, create=False) as log:
        return [e for s in log.sessions() for e in log.events(s.id) if e.kind == "abort"]


def test_closing_the_notebooks_terminal_switches_off_logs_sighup_and_exits_129(sim_bench, tmp_path):
    sim = sim_bench()
    path = tmp_path / "bench.toml"
    path.write_text(sim.bench_file_text())
    log = tmp_path / "hup.sqlite"
    entered, release = threading.Event(), threading.Event()
    real = sim.scope.acquire

    def held():
        entered.set()
        release.wait(60)
        return real()

    sim.scope.acquire = held
    # the session is started through the runner with its first step done, so that the
    # notebook resumes at 1.2 (a step with the scope) and r runs it
    with SessionRunner.create(board=load_board("demo"), checklist=load_checklist(),
                              serial="DHS24-0100", operator="tester",
                              bench=BenchSource.from_file(path), db_path=log) as runner:  # fmt: skip
        # a safety gate: run (no scope in it), never skipped
        done = runner.run_step("power-rails.first-power", answers=StepAnswers(confirmed=True))
        assert done.state == "pass", done.message
        session = runner.session_id
    bringup = str(Path(sys.executable).with_name("bringup"))
    env = {**os.environ, "TERM": "xterm-256color", "TEXTUAL_ANIMATIONS": "none",
           "COLUMNS": "130", "LINES": "40"}  # fmt: skip
    term = Terminal([bringup, "resume", session, "--db", str(log)], env)
    try:
        term.wait_for("run/retake")
        term.keys("r")
        term.wait_for("ENERGISE")
        term.keys("y")
        assert entered.wait(40)
        assert sim.supply.output_on
        term.close()  # the terminal goes away with the step energised
        deadline = time.monotonic() + 30
        while not _abort_events(log) and time.monotonic() < deadline:
            time.sleep(0.05)
        assert not sim.supply.output_on  # off before the step's thread has seen anything
        release.set()  # the step's thread may end now; the process leaves after it
        status = term.exit_status()
    finally:
        release.set()
        term.close()
        if term.pid:
            try:
                os.kill(term.pid, signal.SIGKILL)
                os.waitpid(term.pid, 0)
            except (ProcessLookupError, ChildProcessError):
                pass
    assert status == 128 + signal.SIGHUP
    # the signal is named (closing the notebook may log its own abort beside it)
    (abort,) = [e for e in _abort_events(log) if e.reason.startswith("SIGHUP: ")]
    assert abort.payload["supply_off_confirmed"] is True
