"""Fixtures for the record's tests: a session in a real SQLite log and two key pairs."""

from __future__ import annotations

from pathlib import Path

import pytest
from record_samples import Keys, Session, write_session

from bringup.record.keys import generate_key_pair


@pytest.fixture
def session(tmp_path: Path) -> Session:
    """A finished demo session with a retake, a waiver, a skip and a note."""
    return write_session(tmp_path / "log.db")


@pytest.fixture
def keys(tmp_path: Path) -> Keys:
    """Key pairs for the operator and the reviewer."""
    op, rv = tmp_path / "okafor.key", tmp_path / "lindqvist.key"
    generate_key_pair("R. Okafor", op)
    generate_key_pair("M. Lindqvist", rv)
    return Keys(op, rv)
