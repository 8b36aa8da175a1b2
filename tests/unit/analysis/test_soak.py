"""First-order soak fit."""

import math

import numpy as np
import pytest

from bringup.analysis import AnalysisError, fit_soak


def soak_log(t_end, step=10.0, final=80.0, start=25.0, tau=300.0, noise=0.1, seed=0):
    t = np.arange(0.0, t_end + step / 2, step)
    rng = np.random.default_rng(seed)
    temp = final - (final - start) * np.exp(-t / tau) + rng.normal(0, noise, t.size)
    return t, np.round(temp / 0.0625) * 0.0625  # a thermocouple reader's 1/16 K resolution


def test_three_point_worked_example():
    # REFERENCES §5 [computed]: 34.9698 / 43.1324 / 49.8154 degC at 60 / 120 / 180 s are a
    # first-order soak to 80.00 degC with tau 300.0 s (Aitken extrapolation).
    t = np.array([60.0, 120.0, 180.0, 240.0, 300.0, 360.0, 420.0, 480.0])
    temp = 80.0 - 55.0 * np.exp(-t / 300.0)
    assert temp[:3] == pytest.approx([34.9698, 43.1324, 49.8154], abs=1e-4)
    f = fit_soak(t, temp)
    assert f.final_c == pytest.approx(80.0, abs=1e-3)
    assert f.tau_s == pytest.approx(300.0, rel=1e-4)


@pytest.mark.parametrize("t_end", [600.0, 900.0, 1800.0])
def test_predicts_final_temperature_within_its_uncertainty(t_end):
    t, temp = soak_log(t_end, seed=int(t_end))
    f = fit_soak(t, temp, band_k=1.0)
    assert abs(f.final_c - 80.0) <= max(f.final_c_uncertainty, 0.05) * 1.5
    assert f.tau_s == pytest.approx(300.0, rel=0.05)
    # Within 1 K of 80 degC when 55 exp(-t/300) = 1: t = 300 ln 55 = 1202 s [computed].
    assert f.settle_time_s == pytest.approx(300.0 * math.log(55.0), rel=0.05)
    assert f.settle_in_s == pytest.approx(max(f.settle_time_s - t[-1], 0.0))
    assert f.residual_rms_c == pytest.approx(0.1, rel=0.3)


def test_warns_with_less_than_two_tau():
    t, temp = soak_log(450.0)
    f = fit_soak(t, temp)
    assert f.taus_covered < 2 and any("underestimate" in w for w in f.warnings)


@pytest.mark.parametrize(
    ("t", "temp", "fragment"),
    [
        (np.arange(5.0), np.arange(5.0), "too few samples"),
        (np.arange(50.0), np.full(50, 25.0), "flat"),
        (np.arange(50.0), 25 + np.random.default_rng(1).normal(0, 1.0, 50), "within the noise"),
        (*soak_log(100.0, step=1.0, noise=0.02), "time constants of data"),
        (np.array([0, 1, 2, 2, 3, 4, 5, 6, 7, 8.0]), np.arange(10.0), "do not increase"),
        (np.arange(10.0), np.array([1, 2, 3, np.nan, 5, 6, 7, 8, 9, 10.0]), "NaN"),
        (np.arange(10.0), np.arange(9.0), "9 temperatures"),
    ],
)
def test_refuses_data_that_cannot_support_a_fit(t, temp, fragment):
    with pytest.raises(AnalysisError, match=fragment):
        fit_soak(t, temp)


def test_a_log_that_is_not_first_order_is_refused_or_flagged():
    # A square wave is no soak at all.
    t = np.arange(0, 1000, 5.0)
    temp = 25 + 10 * ((t // 100) % 2)
    with pytest.raises(AnalysisError):
        fit_soak(t, temp)
    # Two time constants (fast die, slow heatsink): a single-tau fit leaves structured residuals.
    two = 25 + 20 * (1 - np.exp(-t / 20)) + 35 * (1 - np.exp(-t / 800))
    f = fit_soak(t, two)
    assert any("structured" in w or "underestimate" in w for w in f.warnings)
