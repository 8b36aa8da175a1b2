"""Runners on simulated benches (real loopback sockets, real SQLite files)."""

from __future__ import annotations

import pytest

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.runner import BenchSource, SessionRunner


@pytest.fixture
def make_runner(tmp_path):
    """``make_runner(scenario="healthy", bench=None, time_scale=...)``: a new session; closed
    (supply off, bench stopped) at the end of the test."""
    made = []

    def make(
        scenario: str = "healthy",
        bench: BenchSource | None = None,
        checklist=None,
        board=None,
        **kw,
    ) -> SessionRunner:
        source = bench or BenchSource.simulated(scenario, **kw)
        runner = SessionRunner.create(board=board or load_board("demo"),
                                      checklist=checklist or load_checklist(),
                                      serial="DHS24-0100", operator="tester", bench=source,
                                      db_path=tmp_path / "log.sqlite")  # fmt: skip
        made.append(runner)
        return runner

    yield make
    for runner in made:
        runner.close()
