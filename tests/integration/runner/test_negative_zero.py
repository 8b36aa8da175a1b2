"""A scale of -0.0 sent by an instrument is logged so that the hash chain still verifies."""

from __future__ import annotations

import math

import numpy as np

from bringup.instruments.waveform import Waveform
from bringup.runner.analyses import AnalysisOutput
from bringup.runner.recording import now_utc
from bringup.runner.results import AttemptResult
from bringup.store import SessionLog


def test_a_negative_zero_origin_keeps_the_chain_and_reads_back_as_zero(make_runner):
    runner = make_runner()
    step = runner.checklist.step("power-rails.rails-unloaded")
    rng = np.random.default_rng(7)
    # an 8-bit record of a 12 V rail with noise, as a scope sends it (big-endian int16 codes)
    codes = np.clip(np.round(12.0 / 0.0625 + rng.normal(0, 2, 5000)), -32768, 32767)
    wf = Waveform("CH3", codes.astype(">i2"), y_increment=0.0625, y_origin=-0.0,
                  x_increment=1e-8, x_origin=-0.0)  # fmt: skip
    assert math.copysign(1.0, wf.x_origin) == -1.0  # IEEE 754 keeps the sign of zero
    now = now_utc()
    result = AttemptResult(step.id, step.stage_id, 1, "not-run", (), (), {}, {}, "tester", now,
                           now, message="not run: logging test")  # fmt: skip
    stored = runner.recorder.store(step, result, {"vdrv": wf}, AnalysisOutput())
    with SessionLog.open(runner.log.path, create=False) as log:
        report = log.verify_chain(runner.session_id)
        assert report.ok, report.problem
        back = log.load_waveform(stored.attempt_id, "vdrv")
    assert back.x_origin == 0.0 and math.copysign(1.0, back.x_origin) == 1.0
    assert back.y_origin == 0.0 and math.copysign(1.0, back.y_origin) == 1.0
    assert np.array_equal(back.codes, codes.astype(np.int16))
