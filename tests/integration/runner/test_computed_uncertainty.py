"""The soak's "undecided" outcome and the computed uncertainty reach the step's decision."""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.runner.analyses import AnalysisInput, analyse
from bringup.runner.executing import _judge

SOAK = "thermal.soak"


def _log(t_end, step, final, noise, seed, slow=True):
    """A two-stage heatsink (70 % at 120 s, 30 % at 1500 s; REFERENCES §11) or, with
    ``slow=False``, one time constant of 120 s; thermocouple noise and 1/16 K steps."""
    t = np.arange(0.0, t_end + step / 2, step)
    rise = final - 25.0
    if slow:
        temp = final - 0.7 * rise * np.exp(-t / 120.0) - 0.3 * rise * np.exp(-t / 1500.0)
    else:
        temp = final - rise * np.exp(-t / 120.0)
    temp = temp + np.random.default_rng(seed).normal(0.0, noise, t.size)
    return list(t), list(np.round(temp / 0.0625) * 0.0625)


def _decide(times, temps):
    board, step = load_board("demo"), load_checklist().step(SOAK)
    out = analyse(step.analysis, AnalysisInput(soak_times_s=times, soak_temps_c=temps), board)
    _, metrics = _judge(SimpleNamespace(board=board, step=step), out)
    return out, {m.id: m for m in metrics}


def test_an_undecided_soak_gives_no_value_and_says_keep_soaking():
    # 300 s of a real heatsink (truth 85 degC against the demo's 70 degC limit) was read as
    # 71.3 degC with no warning; now no value is judged and the reason says why.
    out, metrics = _decide(*_log(300.0, 5.0, 85.0, 0.1, seed=1))
    final = metrics["heatsink_final"]
    assert final.measured is None and final.outcome == "fail"
    assert final.reason.startswith("undecided, keep soaking")
    assert out.details["soak_fit"]["outcome"] == "undecided"


def test_the_decision_uses_the_larger_of_computed_and_declared_uncertainty():
    # A noisy reader (4 K rms) over 450 s: the fit's own expanded uncertainty exceeds the demo
    # board's declared 2 K, so it becomes the guard band (ILAC-G8 with w = U).
    out, metrics = _decide(*_log(450.0, 5.0, 60.0, 4.0, seed=4, slow=False))
    computed = out.uncertainties["heatsink_final"]
    assert computed > 2.0
    assert metrics["heatsink_final"].uncertainty == computed
    # A quiet reader: the class 2 thermocouple alone (+/-2.5 K at 60 degC, rectangular:
    # U = 2 x 2.5/sqrt(3) = 2.887 K [computed], IEC 60584-1 [memory]) is wider than the
    # declared 2 K: the budget says so and the decision uses it.
    out, metrics = _decide(*_log(1500.0, 5.0, 60.0, 0.05, seed=3, slow=False))
    budget = out.details["budgets"]["heatsink_final"]
    assert any("thermocouple class 2" in c["name"] for c in budget["components"])
    assert budget["expanded"] == pytest.approx(2.887, abs=0.01)
    assert metrics["heatsink_final"].uncertainty == budget["expanded"]
