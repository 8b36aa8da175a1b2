"""Dead time and shoot-through against generated gate pairs of known truth.

The truth: each gate is an RC edge, V(1 - exp(-t/tau)) rising and V exp(-t/tau) falling, so a
threshold V_th is crossed tau ln(V/(V - V_th)) after a turn-on command and tau ln(V_b/V_th)
after a turn-off command (first-order step response, REFERENCES §2 [computed]); the dead time
is the interval between one gate falling through the threshold and the other rising through
it (REFERENCES §12, common practice). Every record has noise, 8-bit quantisation, ringing on
the gate that turns on and a Miller bump under threshold on the gate that stays off.
"""

import math

import numpy as np
import pytest
from halfbridge_synth import gate_pair

from bringup.analysis import AnalysisError
from bringup.analysis.dead_time import gate_on_intervals, measure_dead_time


def test_dead_times_of_both_commutations_match_the_crossings():
    g = gate_pair(seed=3)
    r = measure_dead_time(g.high, g.low, g.dt, threshold_v=g.threshold_v)
    assert r.high_to_low.count == len(g.dead_hl) == 10
    assert r.low_to_high.count == len(g.dead_lh) == 9
    # Each commutation within 0.5 ns (a quarter sample) of its exact crossing-to-crossing time.
    np.testing.assert_allclose(r.high_to_low.dead_time_s, g.dead_hl, atol=0.5e-9)
    np.testing.assert_allclose(r.low_to_high.dead_time_s, g.dead_lh, atol=0.5e-9)
    # Commanded 100 ns and 70 ns: at 3 V of 12 V the crossings move by 15 ns ln(12/9) on
    # turn-on and 10 ns ln(12/3) on turn-off [computed], 90.4 ns and 60.4 ns.
    assert r.high_to_low.median_s == pytest.approx(100e-9 + 15e-9 * math.log(12 / 9)
                                                   - 10e-9 * math.log(4), abs=1.2e-9)  # fmt: skip
    assert r.low_to_high.median_s == pytest.approx(70e-9 + 15e-9 * math.log(12 / 9)
                                                   - 10e-9 * math.log(4), abs=1.2e-9)  # fmt: skip
    assert r.high_to_low.min_s <= r.high_to_low.median_s <= r.high_to_low.max_s
    assert not r.shoot_through and r.worst_overlap_s == 0.0


def test_an_overlap_is_reported_with_its_start_duration_and_current_spike():
    g = gate_pair(overlap_period=4, spike_a=18.0, seed=5)
    r = measure_dead_time(g.high, g.low, g.dt, threshold_v=g.threshold_v, current=g.current)
    assert len(g.overlaps) == 1 and len(r.overlaps) == 1
    o, (start, length) = r.overlaps[0], g.overlaps[0]
    assert o.transition == "high-to-low"
    assert o.start_s == pytest.approx(start, abs=0.5e-9)
    # Commanded 60 ns early: 60 + 10 ln 4 - 15 ln(4/3) = 69.5 ns of overlap [computed].
    assert o.duration_s == pytest.approx(length, abs=0.5e-9)
    assert length == pytest.approx(
        60e-9 + 10e-9 * math.log(4) - 15e-9 * math.log(12 / 9), abs=0.1e-9
    )
    # The spike rises to 18 A above the 0.3 A baseline at the overlap's end; the 8-bit
    # current channel has 0.16 A codes and 0.05 A noise.
    assert o.current_spike_a == pytest.approx(18.0, abs=0.3)
    assert o.current_baseline_a == pytest.approx(0.3, abs=0.1)
    assert o.current_peak_s == pytest.approx(start + length, abs=6e-9)
    # The overlapping commutation is the distribution's minimum, as a negative dead time.
    assert r.high_to_low.min_s == pytest.approx(-length, abs=0.5e-9)
    assert r.worst_overlap_s == pytest.approx(length, abs=0.5e-9)
    assert r.worst_spike_a == o.current_spike_a
    # The other nine commutations are unchanged.
    others = np.delete(r.high_to_low.dead_time_s, 4)
    np.testing.assert_allclose(others, np.delete(g.dead_hl, 4), atol=0.5e-9)


def test_miller_bumps_and_ringing_are_not_switching():
    # The 1.2 V bumps stay under 3 V - h and the 0.8 V ring stays far above it: each gate
    # switches exactly once per period.
    g = gate_pair(seed=7)
    on = gate_on_intervals(g.low, g.dt, threshold_v=g.threshold_v)
    assert len(on) == 10
    # Without hysteresis a noisy slow edge crosses a level more than once; with it, one each.
    assert np.all(np.diff(on.start_s) > 9e-6)


def test_a_threshold_outside_the_swing_is_refused():
    g = gate_pair(seed=1)
    with pytest.raises(AnalysisError, match="high-side gate: never switches through 13 V"):
        measure_dead_time(g.high, g.low, g.dt, threshold_v=13.0)


def test_a_gate_stuck_on_is_refused_not_timed():
    g = gate_pair(seed=1)
    stuck = np.full_like(g.low, 12.0) + np.random.default_rng(0).normal(0, 0.05, g.low.size)
    with pytest.raises(AnalysisError, match="low-side gate: never switches"):
        measure_dead_time(g.high, stuck, g.dt, threshold_v=g.threshold_v)


def test_a_gate_that_switches_once_leaves_the_other_commutation_without_value():
    # The low side turns on once, late in the record, and stays on: one high-to-low
    # commutation, no low-to-high one, and the reason says so.
    g = gate_pair(seed=1, periods=3)
    t = np.arange(g.low.size) * g.dt
    low = np.where(t > 24e-6, 12.0, 0.0) + np.random.default_rng(2).normal(0, 0.05, t.size)
    high = np.where(t < 20e-6, g.high, 0.0)
    r = measure_dead_time(high, low, g.dt, threshold_v=g.threshold_v)
    assert r.low_to_high.count == 0 and r.low_to_high.median_s is None
    assert "no low-to-high commutation" in r.low_to_high.reasons["median_s"]
    assert r.high_to_low.count == 1


@pytest.mark.parametrize("noise_v", [0.03, 0.08])
def test_stated_uncertainty_covers_the_truth_in_95_percent_of_trials(noise_v):
    # GUM §6.3: U = 2 u_c covers the truth about 95 % of the time. Over 30 seeds (noise,
    # quantisation phase, sub-sample timing), every commutation of both directions; at 0.03 V
    # the 62.5 mV codes of the 8-bit record dominate, at 0.08 V the noise does.
    inside = total = 0
    median_inside = 0
    for seed in range(30):
        g = gate_pair(seed=100 + seed, noise_v=noise_v, periods=6)
        r = measure_dead_time(g.high, g.low, g.dt, threshold_v=g.threshold_v)
        for comm, truth in ((r.high_to_low, g.dead_hl), (r.low_to_high, g.dead_lh)):
            err = np.abs(comm.dead_time_s - np.array(truth))
            inside += int(np.sum(err <= 2 * comm.u_s))
            total += err.size
        # The median covers the median of the truth.
        median_inside += abs(r.high_to_low.median_s - float(np.median(g.dead_hl))) <= (
            r.high_to_low.median_uncertainty_s
        )
    assert total == 30 * 11
    assert inside / total >= 0.95
    assert median_inside >= 0.95 * 30
    # ... and it is not vacuous: U stays under 1.5 ns on 2 ns samples.
    assert float(np.max(r.high_to_low.u_s)) < 0.75e-9
