"""Fixtures for the notebook's tests: a log in a temporary folder, fixed operator, no animation."""

from __future__ import annotations

import os

import pytest

# Animations and cursor blink make screens differ from run to run.
os.environ["TEXTUAL_ANIMATIONS"] = "none"


@pytest.fixture(autouse=True)
def _fixed_operator(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("BRINGUP_OPERATOR", "tester")


@pytest.fixture
def log_path(tmp_path, monkeypatch: pytest.MonkeyPatch):
    """A fresh log file, named relative to the test's folder (so screens show 'log.sqlite')."""
    monkeypatch.chdir(tmp_path)
    return "log.sqlite"


@pytest.fixture
def bench_file(sim_bench, tmp_path):
    """A simulated bench started by the test (so it outlives the session) and its bench file."""

    def make(scenario: str = "healthy", seed: int = 0):
        bench = sim_bench(scenario, seed=seed)
        path = tmp_path / f"bench-{scenario}.toml"
        path.write_text(bench.bench_file_text())
        return bench, str(path)

    return make
