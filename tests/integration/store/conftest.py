"""Fixtures for the session-log tests: real SQLite files under pytest's tmp_path."""

from __future__ import annotations

from pathlib import Path

import pytest
from store_samples import BENCH, BOARD, CHECKLIST

from bringup.store import SessionLog


@pytest.fixture
def db_path(tmp_path: Path) -> Path:
    return tmp_path / "bench-log.db"


@pytest.fixture
def log(db_path: Path):
    opened = SessionLog.open(db_path)
    yield opened
    opened.close()


@pytest.fixture
def session_id(log: SessionLog) -> str:
    return log.create_session(
        board=BOARD, checklist=CHECKLIST, bench=BENCH, serial="DHS24-0001", operator="Ana Ortiz"
    )
