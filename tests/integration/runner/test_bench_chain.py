"""Bandwidths in the bench file reach the edges' analysis through a real simulated bench."""

from __future__ import annotations

import pytest
from runner_walk import walk_to

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.runner import BenchSource, SessionRunner, StepAnswers

EDGES = "edge-speed.edges"


def test_the_bench_files_bandwidths_are_taken_out_of_the_edges(sim_bench, tmp_path):
    sim = sim_bench()
    text = sim.bench_file_text()
    text = text.replace('profile = "sim-scope"\n', 'profile = "sim-scope"\nbandwidth_hz = 350e6\n')
    # The two 10:1 probes (CH1, CH2; the plan may move either onto the switch node).
    text = text.replace("probe_ratio = 10\n", "probe_ratio = 10\nprobe_bandwidth_hz = 500e6\n")
    path = tmp_path / "bench.toml"
    path.write_text(text)
    runner = SessionRunner.create(board=load_board("demo"), checklist=load_checklist(),
                                  serial="DHS24-0100", operator="tester",
                                  bench=BenchSource.from_file(path),
                                  db_path=tmp_path / "log.sqlite")  # fmt: skip
    try:
        walk_to(runner, EDGES, confirm=True)
        result = runner.run_step(EDGES, answers=StepAnswers(confirmed=True))
        details = runner.log.attempts(runner.session_id)[-1].extra["details"]
    finally:
        runner.close()
    # 0.35/350 MHz = 1 ns and 0.35/500 MHz = 0.7 ns: sqrt(1 + 0.49) = 1.2207 ns on the switch
    # node's channel, 1 ns on Vgs's (no probe bandwidth given) [computed, REFERENCES §9].
    switch = details["chain"]["switch_rise"]
    assert switch["chain_s"] == pytest.approx(1.2207e-9, rel=1e-4)
    assert details["chain"]["vgs_rise"]["chain_s"] == pytest.approx(1e-9)
    rise = result.metric("switch_rise").measured
    assert rise == pytest.approx(switch["corrected_s"]) and rise < switch["measured_s"]
    assert details["budgets"]["switch_rise"]["k"] == 2.0
