"""DC rail records."""

import numpy as np
import pytest
from analysis_synth import quantise

from bringup.analysis import AnalysisError, measure_rail


def test_rail_with_ripple_and_noise():
    # A 12 V rail with 100 mV peak-to-peak of 25 kHz ripple and 5 mV rms noise, 12-bit.
    dt = 10e-9
    t = np.arange(100_000) * dt
    rng = np.random.default_rng(31)
    y = 12.0 + 0.05 * np.sin(2 * np.pi * 25e3 * t) + rng.normal(0, 0.005, t.size)
    y = quantise(y, bits=12, lo=10.0, hi=14.0)
    m = measure_rail(y)
    assert m.mean_v == pytest.approx(12.0, abs=2e-3)
    # sine rms = amplitude / sqrt 2; noise adds in quadrature
    assert m.noise_rms_v == pytest.approx(np.hypot(0.05 / np.sqrt(2), 0.005), rel=0.03)
    assert 0.1 < m.ripple_pp_v < 0.1 + 10 * 0.005
    assert m.min_v == y.min() and m.max_v == y.max()
    assert m.to_dict()["samples"] == 100_000


def test_rail_errors():
    with pytest.raises(AnalysisError):
        measure_rail(np.array([1.0]))
    with pytest.raises(AnalysisError, match="NaN"):
        measure_rail(np.array([1.0, np.nan, 2.0]))
