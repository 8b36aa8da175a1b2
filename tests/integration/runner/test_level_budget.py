"""The Vgs level's uncertainty is computed from the bench, not only declared.

A bench file may give the scope's DC vertical accuracy (a fraction of full scale, as scope
datasheets state it) and each probe's ratio tolerance; both enter the GUM budget of every
level read on that channel, beside the record's own scatter and code step, and the decision
uses the larger of it and the board's declared uncertainty."""

from __future__ import annotations

import math

import pytest
from runner_walk import walk_to

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.errors import ConfigError
from bringup.instruments.bench import load_bench
from bringup.runner import BenchSource, SessionRunner, StepAnswers

VGS_ON = "gate-overdrive.vgs-on"


def _run_vgs_on(path, tmp_path):
    runner = SessionRunner.create(board=load_board("demo"), checklist=load_checklist(),
                                  serial="DHS24-0103", operator="tester",
                                  bench=BenchSource.from_file(path),
                                  db_path=tmp_path / "log.sqlite")  # fmt: skip
    try:
        walk_to(runner, VGS_ON, confirm=True)
        result = runner.run_step(VGS_ON, answers=StepAnswers(confirmed=True))
        attempt = runner.log.attempts(runner.session_id)[-1]
    finally:
        runner.close()
    return result, attempt


def test_the_bench_files_accuracy_enters_the_vgs_budget(sim_bench, tmp_path):
    sim = sim_bench()
    text = sim.bench_file_text()
    text = text.replace('profile = "sim-scope"\n', 'profile = "sim-scope"\ndc_accuracy = 0.03\n')
    # the differential probes (50:1) are on Vgs and Vbs
    text = text.replace("probe_ratio = 50\n", "probe_ratio = 50\nprobe_ratio_tolerance = 0.01\n")
    path = tmp_path / "bench.toml"
    path.write_text(text)
    result, attempt = _run_vgs_on(path, tmp_path)

    budget = attempt.extra["details"]["budgets"]["vgs_on"]
    vgs = result.metric("vgs_on")
    assert budget["k"] == 2 and budget["value"] == pytest.approx(vgs.measured)
    kinds = " ".join(c["name"] for c in budget["components"])
    assert "offset accuracy" in kinds and "probe ratio tolerance" in kinds
    # JCGM 100:2008 4.3.7: a rectangular half-width a gives u = a / sqrt(3); 6.2: U = k u_c.
    # The two bench terms alone: 3 % of the channel's full scale and 1 % of the reading.
    offset = next(c for c in budget["components"] if c["name"].startswith("offset accuracy"))
    full_scale = offset["u"] * math.sqrt(3) / 0.03
    floor = 2 * math.hypot(0.03 * full_scale / math.sqrt(3), 0.01 * vgs.measured / math.sqrt(3))
    assert budget["expanded"] >= floor
    assert budget["expanded"] == pytest.approx(floor, rel=0.05)  # the rest is small
    # the decision uses the larger of the computed and the declared uncertainty
    declared = load_board("demo").targets["vgs_on"].uncertainty
    assert vgs.uncertainty == pytest.approx(max(budget["expanded"], declared))
    assert 5 < full_scale < 100  # V: a range that shows a 12 V gate drive


def test_an_accuracy_out_of_range_is_refused_naming_the_key(sim_bench, tmp_path):
    text = sim_bench().bench_file_text()
    text = text.replace('profile = "sim-scope"\n', 'profile = "sim-scope"\ndc_accuracy = 3\n')
    path = tmp_path / "bench.toml"
    path.write_text(text)
    with pytest.raises(ConfigError, match="dc_accuracy") as err:
        load_bench(path)
    assert "fraction" in str(err.value)
