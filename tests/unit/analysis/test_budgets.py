"""The metric budgets of ``bringup.analysis.budgets`` against hand computation (GUM,
JCGM 100:2008: rectangular a/sqrt(3) §4.3.7, quantisation q/sqrt(12), first-order
propagation §5.1.2) and the ripple estimator against the bias of a raw peak-to-peak."""

from __future__ import annotations

import math

import numpy as np
import pytest
from analysis_synth import quantise

from bringup.analysis.budgets import (
    ChannelSpec,
    propagate,
    reading_budget,
    ripple_budget,
    typed_resolution,
)
from bringup.analysis.rails import ripple_estimate
from bringup.analysis.uncertainty import Budget, Component


def test_a_components_sensitivity_and_input_uncertainty_are_kept():
    # u(x) = 0.01 V, c = -3 s/V: contribution 0.03 s (GUM §5.1.3)
    c = Component.of("x", "type A", 0.01, -3.0, "V")
    assert c.u == pytest.approx(0.03) and c.kind == "A"
    d = c.to_dict()
    assert d["sensitivity"] == -3.0 and d["u_input"] == 0.01 and d["type"] == "A"


def test_propagation_carries_each_input_with_its_coefficient():
    # f = a - b: u_c^2 = u_a^2 + u_b^2 (GUM §5.1.2) [computed: 0.3, 0.4 -> 0.5]
    a = Budget("a", "V", 24.0, (Component("spec", "type B, rectangular", 0.3),))
    b = Budget("b", "V", 23.0, (Component("noise", "type A", 0.4),))
    f = propagate("a - b", "V", 1.0, (("a", a, 1.0), ("b", b, -1.0)))
    assert f.combined == pytest.approx(0.5)
    assert [c.sensitivity for c in f.components] == [1.0, -1.0]
    assert f.to_dict()["main"] == "b: noise"


def test_a_read_back_budget_from_its_specification():
    # +/-(0.05 % x 24 V + 10 mV) = 22 mV, rectangular: u = 22 mV/sqrt(3) = 12.70 mV [computed]
    b = reading_budget(24.0, "V", accuracy=(0.0005, 0.010), instrument="supply")
    assert b.combined == pytest.approx(0.022 / math.sqrt(3))
    # none given: a line says so, nothing invented
    none = reading_budget(24.0, "V", instrument="supply")
    assert none.expanded == 0.0 and "not given" in none.components[-1].name


@pytest.mark.parametrize(
    ("text", "value", "step"),
    [("3.300 V", 3.3, 0.001), ("3300 mV", 3.3, 0.001), ("3.3", 3.3, 0.1), ("12", 12.0, 1.0)],
)
def test_the_last_digit_typed(text, value, step):
    assert typed_resolution(text, value) == pytest.approx(step)


def test_raw_peak_to_peak_is_biased_by_noise_and_the_estimate_is_not():
    # A 100 mV p-p sine ripple (4 periods) with 5 mV rms noise on an 8-bit 1 V screen: the
    # record's max - min reads about 2 x 5 mV x sqrt(2 ln 8192) = 42 mV high (the expected
    # extreme of N normal draws, common practice); the estimate is within its U.
    n = 8192
    t = np.arange(n)
    errors, raw = [], []
    for seed in range(20):
        rng = np.random.default_rng(seed)
        y = 12.0 + 0.05 * np.sin(2 * np.pi * 4 * t / n + seed)
        rec = quantise(y + rng.normal(0.0, 0.005, n), 8, 11.5, 12.5)
        e = ripple_estimate(rec)
        b = ripple_budget(e, ChannelSpec(code_step_v=1.0 / 256))
        errors.append(abs(e.value_v - 0.1) / b.expanded)
        raw.append(e.raw_pp_v - 0.1)
    assert min(raw) > 0.02  # always high, by far more than its resolution
    assert sum(r <= 1.0 for r in errors) >= 19  # covered in >= 95 %
