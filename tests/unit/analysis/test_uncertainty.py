"""GUM budgets (JCGM 100:2008) against hand computation and against the truth over seeds."""

import math

import numpy as np
import pytest
from analysis_synth import rc_pwm, scope

from bringup.analysis.edges import code_step, measure_edges, noise_rms, state_levels
from bringup.analysis.uncertainty import (
    crossing_budget,
    dead_time_budget,
    duration_budget,
    excursion_budget,
    level_budget,
    loop_inductance_budget,
    quantisation,
    rectangular,
    refresh_time_budget,
    switching_energy_budget,
    temperature_budget,
    thermocouple_tolerance,
    triangular,
    type_a,
)

LN9 = math.log(9.0)


def test_standard_uncertainties_of_the_gum_rules():
    # GUM §4.3.7 / §4.3.9 (REFERENCES §10 [read]): a/sqrt(3), a/sqrt(6), q/sqrt(12), s/sqrt(n).
    assert rectangular(1.0) == pytest.approx(0.57735, abs=1e-5)
    assert triangular(1.0) == pytest.approx(0.40825, abs=1e-5)
    assert quantisation(1.0) == pytest.approx(0.28868, abs=1e-5)
    assert type_a(1.0, 4) == 0.5


def test_a_level_budget_by_hand():
    # 12 V read as the mean of 100 samples, 50 mV noise, 62.5 mV codes (dithered), gain
    # +/-2 %, offset +/-0.1 V, probe +/-1 % [computed]: u = sqrt(0.005^2 + 0.0018042^2 +
    # 0.138564^2 + 0.057735^2 + 0.069282^2) = 0.165413 V; U (k = 2) = 0.330827 V.
    b = level_budget(12.0, noise_rms_v=0.05, samples=100, code_step_v=0.0625,
                     gain_accuracy=0.02, offset_accuracy_v=0.1, probe_ratio_tolerance=0.01)  # fmt: skip
    assert b.combined == pytest.approx(0.165413, abs=1e-6)
    assert b.expanded == pytest.approx(0.330827, abs=2e-6)
    assert len(b.components) == 5 and "gain accuracy" in b.dominant().name
    d = b.to_dict()
    assert d["k"] == 2.0 and len(d["components"]) == 5


def test_thermocouple_class_and_a_soak_budget():
    # IEC 60584-1 [memory, REFERENCES §10]: class 2 is +/-2.5 K or 0.75 % of |t|, class 1
    # +/-1.5 K or 0.4 %: at 85 degC 2.5 K and 1.5 K, at 400 degC 3.0 K and 1.6 K [computed].
    assert thermocouple_tolerance(85.0) == 2.5
    assert thermocouple_tolerance(400.0) == pytest.approx(3.0)
    assert thermocouple_tolerance(85.0, 1) == 1.5
    assert thermocouple_tolerance(400.0, 1) == pytest.approx(1.6)
    with pytest.raises(ValueError):
        thermocouple_tolerance(85.0, 3)
    # Fit U 0.4 K (u 0.2), class 2 at 85 degC (2.5/sqrt(3) = 1.443376), 1/16 K reader
    # (0.018042): u = sqrt(0.04 + 2.083333 + 0.000326) = 1.457278 K [computed].
    b = temperature_budget(85.0, 0.4, resolution_c=0.0625)
    assert b.combined == pytest.approx(1.457278, abs=1e-6)
    assert "thermocouple" in b.dominant().name


def test_a_duration_budget_with_one_edge_says_so():
    b = duration_budget(10e-9, [10e-9], dt_s=1e-9)
    assert "one edge only" in b.components[0].name
    # two crossings, each triangular over +/- dt/2: sqrt(2) * 0.5 ns / sqrt(6) [computed]
    assert b.combined == pytest.approx(math.sqrt(2) * 0.5e-9 / math.sqrt(6))


def test_the_rise_time_interval_covers_the_truth_over_seeds():
    # First-order edges (10-90 = tau ln 9, REFERENCES §2) with 2 % noise, 8 bits, a sample
    # clock off by up to +/-50 ppm (drawn per trial): the median rise time's k = 2 interval
    # covers tau ln 9 in at least 95 % of 40 noisy trials.
    dt, tau = 1e-9, 6e-9  # 13 samples across 10-90: no interpolation bias to speak of
    # The same for the slowest edge judged alone (the runner's rise-time metric).
    covered = covered_max = 0
    rng = np.random.default_rng(70)
    for seed in range(40):
        clock = 1.0 + rng.uniform(-50e-6, 50e-6)
        y = scope(rc_pwm(20_000, dt, 2e-6, 0.5, tau, phase_s=0.3e-6 + seed * 0.1 * dt),
                  noise_v=0.24, seed=seed)  # fmt: skip
        m = measure_edges(y, dt * clock)  # the scope's clock is off: every time scales
        rising = m.transitions.duration_s[m.transitions.direction > 0]
        b = duration_budget(m.rise_time_s, rising, dt_s=dt, timebase_ppm=50.0)
        covered += abs(m.rise_time_s - LN9 * tau) <= b.expanded
        b = duration_budget(m.rise_time_max_s, rising, dt_s=dt, timebase_ppm=50.0,
                            statistic="max")  # fmt: skip
        covered_max += abs(m.rise_time_max_s - LN9 * tau) <= b.expanded
    assert covered >= 38 and covered_max >= 38


def test_the_level_interval_covers_the_truth_over_seeds():
    # A 12 V high state read through a channel whose gain is off by up to +/-2 % and a probe
    # off by up to +/-1 % (drawn per trial, uniform within the specification), with noise and
    # 8 bits: the level's k = 2 interval from its budget covers 12 V in >= 95 % of trials.
    covered = 0
    rng = np.random.default_rng(71)
    dt = 1e-9
    for seed in range(40):
        gain = (1 + rng.uniform(-0.02, 0.02)) * (1 + rng.uniform(-0.01, 0.01))
        y = scope(gain * rc_pwm(20_000, dt, 2e-6, 0.5, 20e-9, phase_s=0.3e-6), seed=seed)
        levels = state_levels(y)
        n_high = int(np.count_nonzero(np.abs(y - levels.high_v) < 0.25))
        b = level_budget(levels.high_v, noise_rms_v=noise_rms(y), samples=n_high,
                         code_step_v=code_step(y), gain_accuracy=0.02,
                         probe_ratio_tolerance=0.01)  # fmt: skip
        covered += abs(levels.high_v - 12.0) <= b.expanded
    assert covered >= 38


def test_crossing_budget_by_hand():
    # A 3 V crossing of a 15 ns RC edge to 12 V: slope (12 - 3)/15 ns = 0.6 V/ns, curvature
    # -0.6 V/ns / 15 ns; 0.05 V noise, 2 ns samples. Noise/slope = 83.3 ps (REFERENCES §10
    # [computed]); the last-crossing choice adds 83.3 ps/sqrt(3); the interpolation remainder
    # |y''| dt^2/(8 |y'|) = (0.04 V/ns^2)(4 ns^2)/(8 x 0.6 V/ns) = 33.3 ps, /sqrt(3) [computed].
    b = crossing_budget(0.05, 0.6e9, -0.6e9 / 15e-9, 2e-9)
    noise = 0.05 / 0.6e9
    remainder = 0.04e18 * 4e-18 / (8 * 0.6e9)
    assert remainder == pytest.approx(33.33e-12, rel=1e-3)
    assert b.combined == pytest.approx(
        math.sqrt(noise**2 * (1 + 1 / 3) + remainder**2 / 3), rel=1e-9
    )
    assert b.dominant().evaluation == "type A"
    assert crossing_budget(0.05, 0.0).combined == math.inf  # a flat "edge" cannot be timed


def test_half_bridge_budgets_by_hand():
    # Dead time: two crossings of 0.1 ns and 0.2 ns and a 0.1 ns channel skew, root sum of
    # squares (GUM §5.1.2): sqrt(0.01 + 0.04 + 0.01) = 0.2449 ns [computed].
    assert dead_time_budget(90e-9, 0.1e-9, 0.2e-9, 0.1e-9).combined == pytest.approx(
        0.2449e-9, rel=1e-3
    )
    # Excursion: 0.3 V noise on 10 000 samples, 0.375 V codes, a ring peak missed by up to
    # 0.1 V: sqrt(0.09 + (0.3 sqrt(2 ln 1e4))^2/3 + 0.375^2/12 + 0.1^2/3) [computed].
    b = excursion_budget(-12.0, 0.3, 10_000, 0.375, 0.1)
    want = math.sqrt(
        0.09 + (0.3 * math.sqrt(2 * math.log(1e4))) ** 2 / 3 + 0.375**2 / 12 + 0.01 / 3
    )
    assert b.combined == pytest.approx(want, rel=1e-12) and b.value == -12.0
    # L = 1/((2 pi f)^2 C): 1 % on f and 5 % on C give sqrt(2^2 + 5^2) = 5.385 % (GUM §5.1.6).
    b = loop_inductance_budget(80e6, 0.8e6, 1e-9, 0.05e-9)
    assert b.value == pytest.approx(1 / ((2 * math.pi * 80e6) ** 2 * 1e-9))
    assert b.combined / b.value == pytest.approx(0.05385, rel=1e-3)
    # Refresh time t = tau ln(H/(H - D)): tau 0.5 us, V_f 11.3 V, D 1.8 V, V_req 8.2 V; the
    # partial derivatives against a central difference of the formula itself (GUM §5.1.3).
    b = refresh_time_budget(0.5e-6, 0.01e-6, 11.3, 0.05, 1.8, 0.02, 8.2)

    def t(tau, vf, d):
        return tau * math.log((vf - 8.2) / (vf - 8.2 - d))

    h = 1e-6
    parts = [
        (t(0.5e-6 * (1 + h), 11.3, 1.8) - t(0.5e-6 * (1 - h), 11.3, 1.8)) / (1e-6 * h) * 0.01e-6,
        (t(0.5e-6, 11.3 + h, 1.8) - t(0.5e-6, 11.3 - h, 1.8)) / (2 * h) * 0.05,
        (t(0.5e-6, 11.3, 1.8 + h) - t(0.5e-6, 11.3, 1.8 - h)) / (2 * h) * 0.02,
    ]
    assert b.value == pytest.approx(t(0.5e-6, 11.3, 1.8))
    assert b.combined == pytest.approx(math.sqrt(sum(p * p for p in parts)), rel=1e-5)
    assert refresh_time_budget(0.5e-6, 0, 11.3, 0, 3.2, 0, 8.2).value == math.inf
    # Switching energy: components add in quadrature, the skew's through its sensitivity.
    b = switching_energy_budget(8e-6, 0.02e-6, 400.0, 0.1e-9, 0.01e-6, 0.01)
    assert b.combined == pytest.approx(math.sqrt(0.02**2 + 0.04**2 + 0.01**2 + 0.08**2) * 1e-6)
