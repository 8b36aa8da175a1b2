"""Runners on simulated benches (real loopback sockets, real SQLite files)."""

from __future__ import annotations

import pytest

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.runner import BenchSource, SessionRunner
from bringup.runner.bench_source import UNPACED


@pytest.fixture
def make_runner(tmp_path):
    """``make_runner(scenario="healthy", bench=None, time_scale=...)``: a new session (on an
    unpaced simulated bench unless ``time_scale`` is given); closed (supply off, bench
    stopped) at the end of the test."""
    made = []

    def make(
        scenario: str = "healthy",
        bench: BenchSource | None = None,
        checklist=None,
        board=None,
        **kw,
    ) -> SessionRunner:
        # unpaced unless a test asks for a pace: the bench's dwells and soak intervals pass on
        # the simulator's clock, as in a headless run (a paced clock waits wall time for them)
        source = bench or BenchSource.simulated(scenario, **{"time_scale": UNPACED, **kw})
        runner = SessionRunner.create(board=board or load_board("demo"),
                                      checklist=checklist or load_checklist(),
                                      serial="DHS24-0100", operator="tester", bench=source,
                                      db_path=tmp_path / "log.sqlite")  # fmt: skip
        made.append(runner)
        return runner

    yield make
    for runner in made:
        runner.close()
