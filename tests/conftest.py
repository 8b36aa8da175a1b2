"""Fixtures shared by every test folder.

``demo_design`` (session): the demo board's ``[design]`` values as SI floats
(``checklists/demo-board.toml`` read by ``bringup.boards.board_file.load_board``).

``sim_bench``: a factory that starts simulated benches in this process on free loopback ports
and stops every one it started at teardown (supply output OFF, connections closed)::

    def test_something(sim_bench):
        bench = sim_bench()                                   # healthy, seed 0, demo board
        bench = sim_bench("slow-gate", seed=3, design=None)   # design=None -> demo board
        bench.resources["scope"]                              # "TCPIP::127.0.0.1::PORT::SOCKET"
        bench.scope.faults.inject("drop")                     # fault injection from Python
        bench.supply.output_on                                # instrument state
        bench.clock.advance(600.0)                            # jump simulated time (seconds)

``visa_rm``: the process's live ``pyvisa.ResourceManager("@py")`` (pyvisa-py backend).
Open resources with ``read_termination="\\n"``, ``write_termination="\\n"`` and a timeout in ms;
never call ``list_resources()`` (it broadcasts beyond this machine).
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping

import pytest


@pytest.fixture(autouse=True)
def _own_lock_folder(tmp_path_factory, monkeypatch: pytest.MonkeyPatch) -> None:
    """Each test's instrument locks in a folder of its own (``$BRINGUP_LOCK_DIR``, inherited
    by the processes it starts): a process a test kills leaves its lock record behind, and a
    later simulated bench on the same loopback port would otherwise report taking it over."""
    monkeypatch.setenv("BRINGUP_LOCK_DIR", str(tmp_path_factory.mktemp("locks")))


@pytest.fixture(scope="session")
def demo_design() -> dict[str, float]:
    from bringup.commands.sim import load_design

    return load_design("demo")


@pytest.fixture
def sim_bench(demo_design: dict[str, float]) -> Iterator[Callable[..., object]]:
    from sim_instruments.bench import RunningBench, start_bench

    started: list[RunningBench] = []

    def start(
        scenario: str = "healthy", seed: int = 0, design: Mapping[str, float] | None = None
    ) -> RunningBench:
        bench = start_bench(dict(design or demo_design), scenario=scenario, seed=seed)
        started.append(bench)
        return bench

    yield start
    for bench in started:
        bench.stop()


@pytest.fixture
def visa_rm():
    """The live ResourceManager: pyvisa keeps one per backend (and closes it at exit), so this
    is the same object the instrument layer uses; it is not closed here, so a test that closes
    it cannot leave a stale one for the next test."""
    import pyvisa

    return pyvisa.ResourceManager("@py")


@pytest.fixture(scope="session")
def batch_log(tmp_path_factory):
    """A real log of five simulated boards, one of them weak and one retaken
    (``tests/batch_logs.py``); built once per run. Tests only read it (copy it to write)."""
    from batch_logs import build_batch_log

    return build_batch_log(tmp_path_factory.mktemp("batch"))
