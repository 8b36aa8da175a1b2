"""Fixtures of the simulated-bench tests: a started bench and real PyVISA sessions to it.

``bench``: a healthy demo-board bench (seed 0) from the shared ``sim_bench`` factory.
``connect(bench, name, timeout_ms=3000)``: a pyvisa-py SOCKET session to "scope", "supply" or
"thermometer", with ``\\n`` terminations; closed at teardown.
"""

from __future__ import annotations

import contextlib

import pytest


@pytest.fixture
def bench(sim_bench):
    return sim_bench()


@pytest.fixture
def connect(visa_rm):
    opened = []

    def open_(bench, name: str, timeout_ms: int = 3000):
        inst = visa_rm.open_resource(
            bench.resources[name],
            read_termination="\n",
            write_termination="\n",
            timeout=timeout_ms,
        )
        opened.append(inst)
        return inst

    yield open_
    for inst in opened:
        with contextlib.suppress(Exception):
            inst.close()
