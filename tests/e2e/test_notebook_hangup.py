"""The notebook in a real terminal (tmux) that is closed while a step has the supply ON: the
process gets SIGHUP, as when an SSH link drops. The supply goes OFF and the session's log
names the signal.

The simulated bench runs in this test process and is reached through a bench file, so it
outlives the notebook's process (here ``bringup resume``); its scope holds the step's
acquisition (a trigger that does not come) until the test lets it go, so the signal lands while
the output is ON.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import threading
import time
import uuid
from pathlib import Path

import pytest

from bringup.store import SessionLog

TMUX = shutil.which("tmux")
pytestmark = pytest.mark.skipif(TMUX is None, reason="tmux is not installed on this machine")


class Pane:
    """One detached tmux session on its own server socket."""

    def __init__(self, command: str, env: dict[str, str]) -> None:
        self.socket = f"bringup-hup-{uuid.uuid4().hex[:8]}"
        self.env = env
        self._tmux("new-session", "-d", "-s", "hup", "-x", "130", "-y", "40", command)

    def _tmux(self, *args: str) -> str:
        out = subprocess.run([TMUX, "-L", self.socket, *args], capture_output=True, text=True,
                             env=self.env, timeout=10, check=True)  # fmt: skip
        return out.stdout

    def keys(self, *keys: str) -> None:
        self._tmux("send-keys", "-t", "hup", *keys)

    def wait_for(self, *texts: str, timeout: float = 40.0) -> None:
        _wait(lambda: all(t in self._tmux("capture-pane", "-p", "-t", "hup") for t in texts),
              timeout, f"{texts!r} on the screen")  # fmt: skip

    def close(self) -> None:
        """Close the terminal: the programs in it get SIGHUP."""
        subprocess.run([TMUX, "-L", self.socket, "kill-server"], capture_output=True,
                       env=self.env, timeout=10)  # fmt: skip


def _wait(predicate, timeout: float, what: str) -> None:
    deadline = time.monotonic() + timeout
    while not predicate():
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out waiting for {what}")
        time.sleep(0.05)  # polling, not a fixed wait for the app


def _abort_events(log_path: Path) -> list:
    if not log_path.exists():
        return []
    with SessionLog.open(log_path, create=False) as log:
        return [e for s in log.sessions() for e in log.events(s.id) if e.kind == "abort"]


def test_closing_the_notebooks_terminal_switches_off_and_logs_sighup(sim_bench, tmp_path):
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
    bringup = Path(sys.executable).with_name("bringup")
    env = {**os.environ, "TERM": "xterm-256color", "BRINGUP_OPERATOR": "tester",
           "TEXTUAL_ANIMATIONS": "none"}  # fmt: skip
    # the session is started through the runner with its first step skipped, so that the
    # notebook resumes at 1.2 (a step with the scope) and r runs it
    from bringup.boards.board_file import load_board
    from bringup.checklist.load import load_checklist
    from bringup.runner import BenchSource, SessionRunner

    with SessionRunner.create(board=load_board("demo"), checklist=load_checklist(),
                              serial="DHS24-0100", operator="tester",
                              bench=BenchSource.from_file(path), db_path=log) as runner:  # fmt: skip
        runner.skip("power-rails.first-power", "not under test here")
        session = runner.session_id
    pane = Pane(f"{bringup} resume {session} --db {log}", env)
    try:
        pane.wait_for("CHECKLIST", "1.2  Rail levels", "r run/retake")
        pane.keys("r")
        pane.wait_for("ENERGISE THE BOARD?")
        pane.keys("y")
        assert entered.wait(40)
        assert sim.supply.output_on
        pane.close()  # the terminal goes away with the step energised
        _wait(lambda: _abort_events(log), 30, "the abort to be logged")
    finally:
        release.set()
        pane.close()
    assert not sim.supply.output_on
    # the signal is named (closing the notebook may log its own abort beside it)
    (abort,) = [e for e in _abort_events(log) if e.reason.startswith("SIGHUP: ")]
    assert abort.payload["supply_off_confirmed"] is True
