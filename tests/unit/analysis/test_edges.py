"""Edge metrics (IEEE Std 181-2011 methods) against the outside world and their own properties."""

import math

import numpy as np
import pytest
from analysis_synth import damped_ring, rc_pwm, ringing_pwm, scope, trapezoid
from hypothesis import example, given, settings
from hypothesis import strategies as st

from bringup.analysis import AnalysisError, find_transitions, measure_edges, state_levels
from bringup.analysis.edges import negative_excursion

LN9 = math.log(9.0)


# --- First-order step -----------------------------------------------------------------------


def test_rc_edges_rise_and_fall_in_ln9_tau():
    # First-order step response: 10-90 % = tau ln 9 = 2.1972 tau (REFERENCES §2 [computed] from
    # the single-pole step response of any circuit-theory text).
    tau, dt = 50e-9, 1e-9
    clean = rc_pwm(200_000, dt, period_s=40e-6, duty=0.3, tau_s=tau, phase_s=3e-6)
    y = scope(clean, noise_v=0.05, offset_v=0.4, seed=1)  # 8-bit, noise, DC offset
    m = measure_edges(y, dt)
    assert m.level_method == "histogram"
    assert m.low_level_v == pytest.approx(0.4, abs=0.02)
    assert m.high_level_v == pytest.approx(12.4, abs=0.02)
    assert m.edges == 10
    assert m.rise_time_s == pytest.approx(LN9 * tau, rel=0.03)
    assert m.fall_time_s == pytest.approx(LN9 * tau, rel=0.03)
    assert m.frequency_hz == pytest.approx(25e3, rel=1e-4)
    assert m.duty_cycle == pytest.approx(0.3, abs=1e-3)


def test_20_80_reference_levels_give_tau_ln4():
    # First-order step: 20-80 % = tau ln 4 (REFERENCES §2 [computed]).
    tau, dt = 50e-9, 1e-9
    y = scope(rc_pwm(100_000, dt, 20e-6, 0.5, tau, phase_s=1e-6), noise_v=0.03, seed=2)
    m = measure_edges(y, dt, levels=(20, 50, 80))
    assert m.reference_levels_pct == (20.0, 50.0, 80.0)
    assert m.rise_time_s == pytest.approx(math.log(4.0) * tau, rel=0.04)


# --- Second-order step, reference waveforms from scipy.signal ------------------------------

# Exact omega_n * t_r(10-90) of the second-order step, REFERENCES §2 [computed with scipy];
# the overshoot is the textbook 100 exp(-pi zeta / sqrt(1 - zeta^2)) (Nise, Control Systems
# Engineering, ch. 4 [memory for the section]).
SECOND_ORDER = [(0.3, 1.3213), (0.5, 1.6376), (0.707, 2.1477), (0.8, 2.4675)]
# The acquisition for each: an 8-bit record resolves a 37 % or 16 % overshoot, but a 4.3 % or
# 1.5 % one is 0.5 V or 0.18 V on a 12 V edge, a couple of 8-bit steps; measure those as on
# the bench, with a high-resolution (12-bit) acquisition and less noise.
ACQUISITION = {0.3: (8, 0.02), 0.5: (8, 0.02), 0.707: (12, 0.005), 0.8: (12, 0.005)}


@pytest.mark.parametrize(("zeta", "wn_tr"), SECOND_ORDER)
def test_second_order_step_overshoot_and_rise_time(zeta, wn_tr):
    wn = 2 * math.pi * 10e6
    dt = 0.5e-9
    bits, noise_v = ACQUISITION[zeta]
    clean = ringing_pwm(40_000, dt, period_s=2e-6, duty=0.5, zeta=zeta, wn=wn, phase_s=0.3e-6)
    # Noise, quantisation and a range that does not clip.
    y = scope(clean, noise_v=noise_v, bits=bits, lo=-6.0, hi=18.0, seed=3)
    m = measure_edges(y, dt)
    expected_os = 100 * math.exp(-math.pi * zeta / math.sqrt(1 - zeta**2))
    # Within 10 % of the overshoot itself (0.15 points at zeta 0.8): noise on the peak and the
    # quantisation steps bias it by a few percent of its value.
    assert m.overshoot_pct == pytest.approx(expected_os, rel=0.10)
    # The falling edge's undershoot below the low level mirrors the overshoot.
    assert m.undershoot_pct == pytest.approx(expected_os, rel=0.10)
    assert m.rise_time_s == pytest.approx(wn_tr / wn, rel=0.015)
    assert m.fall_time_s == pytest.approx(wn_tr / wn, rel=0.015)
    assert m.edges == 20  # 10 periods of 2 us


def test_ringing_switch_node_goes_below_ground():
    wn = 2 * math.pi * 10e6
    clean = ringing_pwm(40_000, 0.5e-9, 2e-6, 0.5, 0.2, wn, phase_s=0.3e-6)
    y = scope(clean, lo=-8.0, hi=20.0, seed=4)
    m = measure_edges(y, 0.5e-9)
    # zeta 0.2: 52.7 % undershoot of a 12 V swing, about -6.3 V below ground.
    assert m.negative_excursion_v == pytest.approx(
        -12 * math.exp(-math.pi * 0.2 / math.sqrt(0.96)), abs=0.2
    )
    assert m.negative_excursion_v == negative_excursion(y)
    assert negative_excursion(np.array([0.5, 1.0, 2.0])) == 0.0


# --- Facts of the trade (common practice, no source) ---------------------------------------


def test_pwm_mean_is_duty_times_high_level():
    # Common practice, no source: a PWM output's mean is the duty cycle times the high level.
    # The generated waveforms are a 12 V PWM of known duty, through an RC and through a ringing
    # second-order edge: over a whole period the area an edge loses on the way up it gains
    # back on the way down, so the mean of the clean waveform is exactly duty x 12 V. The
    # records carry noise and 8-bit quantisation.
    dt, period, high = 2e-9, 40e-6, 12.0
    wn = 2 * math.pi * 5e6
    for duty in (0.05, 0.3, 0.5, 0.95):
        seed = int(duty * 100)
        rc = scope(rc_pwm(400_000, dt, period, duty, 30e-9, high, 7e-6), noise_v=0.05, seed=seed)
        ring = scope(
            ringing_pwm(400_000, dt, period, duty, 0.3, wn, high, phase_s=7e-6),
            noise_v=0.05,
            lo=-8.0,
            hi=20.0,
            seed=seed + 1,
        )
        for y in (rc, ring):
            m = measure_edges(y, dt)
            assert m.duty_cycle == pytest.approx(duty, abs=2e-3)
            # 5 mV is 0.04 % of the swing; an off-by-one-period window or a level-weighted
            # mean would be far outside it.
            assert m.cycle_mean_v == pytest.approx(duty * high, abs=5e-3)
        assert m.overshoot_pct > 30.0  # the second record does ring (37 % at zeta 0.3)


@pytest.mark.parametrize(
    ("r_ohm", "dt", "expected_s"),
    [(1000.0, 20e-9, 6e-6), (100.0, 2e-9, 600e-9), (47.0, 1e-9, 300e-9)],
)
def test_rc_pullup_rise_time_scales_with_r(r_ohm, dt, expected_s):
    # Common practice, no source: on the same gate an RC pull-up's 10-90 time scales with R:
    # about 6 us with 1 kOhm, about 600 ns with 100 Ohm, about half that again with 47 Ohm.
    c_gate = 2.7e-9
    tau = r_ohm * c_gate
    period = 40 * tau
    clean = rc_pwm(int(12 * period / dt), dt, period, 0.5, tau, phase_s=0.1 * period)
    m = measure_edges(scope(clean, noise_v=0.05, seed=5), dt)
    assert m.rise_time_s == pytest.approx(expected_s, rel=0.15)
    assert m.rise_time_s / (r_ohm * c_gate) == pytest.approx(LN9, rel=0.03)


# --- State levels --------------------------------------------------------------------------


def test_histogram_levels_are_refined_beyond_the_bin_centre():
    # REFERENCES §1 [computed]: on a 0-1 V trapezoid the raw modal bin centres would read
    # 0.005/0.995 V and an 80 ns ramp 79.2 ns; the refined levels are the states themselves.
    # A clean record, to pin the method exactly; the noisy, ringing variant follows.
    dt = 1e-9
    y = trapezoid(5000, dt, 1e-6, 80e-9, 2e-6, high_v=1.0)
    m = measure_edges(y, dt)
    assert m.level_method == "histogram"
    # Within 0.05 % of the amplitude (the ramp's few samples near each state share the bins).
    assert m.low_level_v == pytest.approx(0.0, abs=5e-4)
    assert m.high_level_v == pytest.approx(1.0, abs=5e-4)
    assert m.rise_time_s == pytest.approx(0.8 * 80e-9, rel=2e-3)
    assert m.pulse_width_s == pytest.approx(2e-6 + 80e-9, rel=1e-4)


def test_histogram_levels_are_refined_on_a_noisy_ringing_record():
    # The same check on what a scope shows: five 12 V trapezoids with 80 ns ramps, a 0.5 V
    # ring at 50 MHz (decaying in 40 ns) after every ramp, 50 mV of noise and 8-bit steps of
    # 62.5 mV. The histogram's bins are now 0.13 V wide, so a bin centre could be off by up to
    # 66 mV; the refined levels are within 10 mV (0.08 % of the amplitude).
    dt = 1e-9
    y = np.tile(trapezoid(4000, dt, 1e-6, 80e-9, 2e-6, high_v=12.0), 5)
    for k in range(5):
        t_top = k * 4e-6 + 1e-6 + 80e-9
        y = y + damped_ring(y.size, dt, t_top, 0.5, 50e6, 40e-9)
        y = y - damped_ring(y.size, dt, t_top + 2e-6 + 80e-9, 0.5, 50e6, 40e-9)
    m = measure_edges(scope(y, noise_v=0.05, seed=9), dt)
    assert m.level_method == "histogram"
    assert m.edges == 10
    assert m.low_level_v == pytest.approx(0.0, abs=0.01)
    assert m.high_level_v == pytest.approx(12.0, abs=0.01)
    assert m.rise_time_s == pytest.approx(0.8 * 80e-9, rel=0.015)
    assert m.fall_time_s == pytest.approx(0.8 * 80e-9, rel=0.015)
    assert m.pulse_width_s == pytest.approx(2e-6 + 80e-9, rel=1e-3)


def test_short_record_falls_back_to_min_max():
    y = np.concatenate((np.zeros(20), np.linspace(0, 5, 11)[1:-1], np.full(40, 5.0), [5.4, 5.0]))
    m = measure_edges(y, 1e-9)
    assert m.level_method == "minmax"
    assert m.low_level_v == 0.0 and m.high_level_v == 5.4
    assert m.overshoot_pct == 0.0  # zero by construction with min/max (REFERENCES §1)


def test_a_mode_in_the_last_bin_is_still_a_state():
    # IEEE 181 histogram method (REFERENCES §1 [read]): the high level is the mode of the upper
    # half. A clean 8-bit pulse (1 ms top sagging 12 -> 10 V over a 15 V range) puts its mode in
    # the very last bin; the peak test looked at the 4 bins left of it instead of 7 and fell
    # back to min/max (12.0 V, the top's first sample: the optimistic end of a sag).
    dt = 1e-6
    t = np.arange(1200) * dt - 0.1e-3
    clean = np.where((t >= 0) & (t < 1e-3), 12.0 - 2000.0 * t, 0.0)
    y = scope(clean, noise_v=0.0, lo=-2.0, hi=13.0)
    levels = state_levels(y)
    assert levels.method == "histogram"
    assert levels.low_v == pytest.approx(0.0, abs=15.0 / 256)  # within one 8-bit code
    assert 10.0 < levels.high_v < 12.0 - 0.1


def test_triangle_has_no_histogram_states():
    t = np.arange(10_000)
    y = np.abs((t % 1000) - 500.0)
    assert state_levels(y).method == "minmax"


@pytest.mark.parametrize(
    ("y", "fragment"),
    [
        (np.full(1000, 3.3), "one level only"),
        (3.3 + np.random.default_rng(0).normal(0, 0.01, 5000), "one level only"),
        (3.3 + np.random.default_rng(1).normal(0, 0.01, 100), "one level only"),
        (np.array([0.0, 1.0, 0.0]), "too few samples"),
        (np.array([0, 0, 0, 1, 1, 1, np.nan, 1, 0, 0.0]), "NaN"),
    ],
)
def test_what_cannot_be_measured_is_an_analysis_error(y, fragment):
    with pytest.raises(AnalysisError, match=fragment):
        measure_edges(y, 1e-9)


@pytest.mark.parametrize(("noise_v", "lo", "hi"), [(0.3, -20.0, 76.0), (0.05, -2.0, 14.0)])
def test_a_flat_quantised_noisy_record_has_no_edges(noise_v, lo, hi):
    # An 8-bit record of a flat node (a switch node that does not switch) sits on two or three
    # adjacent codes: its "levels" are one code apart, within the noise, so no edge may be
    # reported (each would be noise timed as a sub-nanosecond edge: a silent wrong number).
    y = scope(np.zeros(60_000), noise_v=noise_v, lo=lo, hi=hi, seed=1)
    with pytest.raises(AnalysisError, match="one level only"):
        measure_edges(y, 1e-9)


def test_bad_options_are_analysis_errors():
    y = trapezoid(2000, 1e-9, 2e-7, 5e-8, 5e-7)
    with pytest.raises(AnalysisError, match="reference levels"):
        measure_edges(y, 1e-9, levels=(90, 50, 10))
    with pytest.raises(AnalysisError, match="sample interval"):
        measure_edges(y, 0.0)


# --- Transitions and hysteresis ------------------------------------------------------------


def test_noise_does_not_create_edges_and_partial_edges_do_not_count():
    dt = 1e-9
    # Starts in the middle of a falling edge and ends in the middle of a rising one.
    clean = rc_pwm(100_000, dt, 10e-6, 0.5, 40e-9, phase_s=5.02e-6)[: -(5_000 - 30)]
    y = scope(clean, noise_v=0.35, seed=6)  # 3 % of the amplitude: heavy chatter near 50 %
    tr, _ = find_transitions(y, dt)
    # Only the complete transitions: no false edge from noise, none from the partial ends.
    assert len(tr) == 18  # 9 rising, 9 falling between the partial ends
    assert list(np.unique(np.diff(tr.direction.astype(int)))) in ([-2, 2], [2, -2])


def test_per_edge_arrays_and_to_dict():
    dt = 1e-9
    y = scope(rc_pwm(50_000, dt, 10e-6, 0.25, 20e-9, phase_s=1e-6), seed=7)
    m = measure_edges(y, dt)
    d = m.to_dict()
    for key in (
        "low_level_v",
        "high_level_v",
        "level_method",
        "rise_time_s",
        "fall_time_s",
        "overshoot_pct",
        "undershoot_pct",
        "frequency_hz",
        "duty_cycle",
        "edges",
    ):
        assert key in d
    assert "transitions" not in d
    per = m.to_dict(per_edge=True)["transitions"]
    assert len(per["t_mid_s"]) == m.edges
    t_mid = np.array(per["t_mid_s"])
    rising = np.array(per["direction"]) > 0
    assert np.allclose(np.diff(t_mid[rising]), 10e-6, rtol=1e-3)
    assert all(isinstance(v, float | int | str | list | dict | type(None)) for v in d.values())


def test_float32_and_t0():
    dt = 1e-9
    y = scope(rc_pwm(50_000, dt, 10e-6, 0.4, 20e-9, phase_s=2e-6), seed=8)
    a = measure_edges(y, dt)
    b = measure_edges(y.astype(np.float32), dt, t0=-25e-6)
    assert b.rise_time_s == pytest.approx(a.rise_time_s, rel=1e-4)
    assert b.transitions.t_mid_s[0] == pytest.approx(a.transitions.t_mid_s[0] - 25e-6, abs=1e-12)


# --- Property tests (hypothesis) -----------------------------------------------------------


@settings(settings.get_profile("bringup-analysis"), max_examples=60)
@given(
    ramp_samples=st.floats(20, 300),
    start=st.floats(0.0, 1.0),
    low=st.floats(-5.0, 5.0),
    amplitude=st.floats(0.1, 30.0),
    width_samples=st.integers(400, 3000),
)
def test_crossings_of_a_linear_ramp_are_exact(ramp_samples, start, low, amplitude, width_samples):
    # Linear interpolation is exact on a linear ramp: the 10-90 time is 0.8 of the ramp and the
    # 50 % instant is mid-ramp, wherever the ramp falls between samples.
    dt = 1e-9
    t_start = (1000 + start) * dt
    n = 2000 + int(2 * ramp_samples) + width_samples + 2000
    y = low + trapezoid(n, dt, t_start, ramp_samples * dt, width_samples * dt, amplitude)
    m = measure_edges(y, dt)
    assert m.edges == 2
    assert m.low_level_v == pytest.approx(low, abs=1e-3 * amplitude)
    assert m.high_level_v == pytest.approx(low + amplitude, abs=1e-3 * amplitude)
    assert m.rise_time_s == pytest.approx(0.8 * ramp_samples * dt, rel=5e-3)
    assert m.fall_time_s == pytest.approx(0.8 * ramp_samples * dt, rel=5e-3)
    assert m.transitions.t_mid_s[0] == pytest.approx(
        t_start + 0.5 * ramp_samples * dt, abs=0.01 * dt * ramp_samples
    )


@settings(settings.get_profile("bringup-analysis"), max_examples=40)
@given(
    gain=st.floats(0.01, 100.0),
    offset=st.floats(-50.0, 50.0),
    seed=st.integers(0, 2**16),
)
@example(gain=42.38772266151187, offset=0.0, seed=231)  # moved the 50 % instants by 0.018 dt
def test_levels_and_times_follow_an_affine_change_of_the_record(gain, offset, seed):
    # Scaling and shifting the record scales and shifts the levels and leaves every instant
    # (common practice, no source: a measurement must not depend on the volts per division).
    # The histogram is binned on (y - min)/(max - min), so the bins scale with the data and
    # an 8-bit code on a bin edge stays in its bin: the property holds to rounding, not to a
    # bin. Each tolerance is about 1e4 times the float64 rounding it allows for.
    dt = 1e-9
    y = scope(rc_pwm(20_000, dt, 4e-6, 0.35, 25e-9, phase_s=0.5e-6), noise_v=0.05, seed=seed)
    a = measure_edges(y, dt)
    b = measure_edges(gain * y + offset, dt)
    tol = 1e-9 * gain * a.amplitude_v
    assert b.level_method == a.level_method == "histogram"
    assert b.low_level_v == pytest.approx(gain * a.low_level_v + offset, abs=tol)
    assert b.high_level_v == pytest.approx(gain * a.high_level_v + offset, abs=tol)
    assert b.edges == a.edges
    assert np.allclose(b.transitions.t_mid_s, a.transitions.t_mid_s, rtol=0, atol=1e-7 * dt)
    assert np.allclose(b.transitions.t_low_s, a.transitions.t_low_s, rtol=0, atol=1e-7 * dt)
    assert np.allclose(b.transitions.t_high_s, a.transitions.t_high_s, rtol=0, atol=1e-7 * dt)
    assert b.rise_time_s == pytest.approx(a.rise_time_s, rel=1e-7)
    assert b.fall_time_s == pytest.approx(a.fall_time_s, rel=1e-7)
    assert b.overshoot_pct == pytest.approx(a.overshoot_pct, abs=1e-7)


@settings(settings.get_profile("bringup-analysis"), max_examples=40)
@given(seed=st.integers(0, 2**16), duty=st.floats(0.1, 0.9))
def test_inverting_the_record_swaps_rise_and_fall(seed, duty):
    dt = 1e-9
    y = scope(rc_pwm(20_000, dt, 4e-6, duty, 25e-9, phase_s=0.3e-6), noise_v=0.05, seed=seed)
    a = measure_edges(y, dt)
    b = measure_edges(-y, dt)
    # Not bit-exact: a sample on a histogram bin edge falls into the mirrored bin's neighbour.
    assert b.rise_time_s == pytest.approx(a.fall_time_s, rel=2e-3)
    assert b.fall_time_s == pytest.approx(a.rise_time_s, rel=2e-3)
    # Medians of widths and periods: complementary to within the edge jitter.
    assert b.duty_cycle == pytest.approx(1 - a.duty_cycle, abs=1e-3)


@settings(settings.get_profile("bringup-analysis"), max_examples=50)
@given(
    low=st.floats(-20.0, 20.0),
    amplitude=st.floats(0.01, 50.0),
    runs=st.lists(st.integers(5, 400), min_size=4, max_size=30),
    noise=st.floats(0.0, 0.03),
    seed=st.integers(0, 2**16),
)
def test_every_state_change_is_one_edge(low, amplitude, runs, noise, seed):
    # Alternating states of random lengths with noise up to 3 % of the amplitude: the levels
    # come out within the noise, and each state change is exactly one transition.
    rng = np.random.default_rng(seed)
    if sum(runs) < 200:
        noise = 0.0  # min/max levels (short records) are for clean records only (REFERENCES §1)
    states = np.concatenate([np.full(r, k % 2, dtype=float) for k, r in enumerate(runs)])
    y = low + amplitude * (states + rng.normal(0.0, noise, states.size))
    tr, levels = find_transitions(y, 1e-9)
    assert len(tr) == len(runs) - 1
    assert levels.low_v == pytest.approx(low, abs=amplitude * (0.02 + 3 * noise))
    assert levels.high_v == pytest.approx(low + amplitude, abs=amplitude * (0.02 + 3 * noise))
    # A jump between two samples crosses 50 % between them.
    change = np.flatnonzero(np.diff(states)) * 1e-9
    assert np.all(np.abs(tr.t_mid_s - change - 0.5e-9) <= 0.5e-9 + 1e-15)


# --- Overshoot under noise (issue 12) -------------------------------------------------------


@pytest.mark.parametrize("tau", [50e-9, 20e-9])
@pytest.mark.parametrize("noise_v", [0.12, 0.36])  # 1 % and 3 % of the 12 V swing
def test_edges_without_overshoot_read_none_under_noise(tau, noise_v):
    # A first-order edge has no overshoot at all (its step response is monotone, REFERENCES
    # §2). The highest noisy sample read 2.5 % median (1 % noise) and 7-8 % (3 % noise).
    dt = 1e-9
    y = scope(rc_pwm(100_000, dt, 10e-6, 0.5, tau, phase_s=1e-6), noise_v=noise_v, seed=17)
    m = measure_edges(y, dt)
    assert m.overshoot_pct <= m.overshoot_uncertainty_pct
    assert m.overshoot_pct < (0.5 if noise_v < 0.2 else 1.0)
    assert m.undershoot_pct <= m.undershoot_uncertainty_pct
    assert m.overshoot_max_pct <= m.overshoot_max_uncertainty_pct + 0.5


def test_second_order_overshoot_is_covered_by_its_stated_uncertainty():
    # scipy.signal.step of wn^2/(s^2 + 2 zeta wn s + wn^2) (the reference library) against
    # the textbook 100 exp(-pi zeta/sqrt(1 - zeta^2)) (Nise, ch. 4 [memory for the section]),
    # 1 % noise, 8- and 12-bit records, 5 seeds each: the stated k = 2 interval covers the
    # true overshoot in at least 38 of the 40 records (95 %).
    wn = 2 * math.pi * 10e6
    dt = 0.5e-9
    covered = total = 0
    for zeta in (0.3, 0.5, 0.707, 0.8):
        clean = ringing_pwm(40_000, dt, 2e-6, 0.5, zeta, wn, phase_s=0.3e-6)
        truth = 100 * math.exp(-math.pi * zeta / math.sqrt(1 - zeta**2))
        for bits in (8, 12):
            for seed in range(5):
                y = scope(clean, noise_v=0.12, bits=bits, lo=-6.0, hi=18.0, seed=40 + seed)
                m = measure_edges(y, dt)
                total += 1
                covered += abs(m.overshoot_pct - truth) <= m.overshoot_uncertainty_pct
                assert m.overshoot_uncertainty_pct < 1.0  # and it says something
    assert covered >= 38 and total == 40


# --- Few samples on an edge (issue 12) ------------------------------------------------------


@pytest.mark.parametrize("samples", [3.0, 4.0, 5.0])
def test_too_few_samples_on_an_edge_is_said_with_the_fix(samples):
    # A first-order edge whose 10-90 % span (tau ln 9, REFERENCES §2) is 3 to 5 samples reads
    # +3 % to +9 % slow [computed]: the result says so and names the record setting.
    dt = 1e-9
    tau = samples * dt / LN9
    y = scope(rc_pwm(60_000, dt, 1e-6, 0.5, tau, phase_s=0.37 * dt), noise_v=0.02, seed=51)
    m = measure_edges(y, dt)
    assert m.rise_time_s > LN9 * tau * 1.02  # it does read slow
    assert m.rise_time_samples == pytest.approx(m.rise_time_min_s / dt)
    text = " ".join(m.warnings)
    assert "rising edge spans only" in text and "falling edge spans only" in text
    assert "more record points over the same time span" in text
    assert "shorter time span" in text


def test_enough_samples_on_an_edge_gives_no_warning():
    dt = 1e-9
    tau = 20 * dt / LN9
    y = scope(rc_pwm(60_000, dt, 1e-6, 0.5, tau, phase_s=0.37 * dt), noise_v=0.02, seed=52)
    m = measure_edges(y, dt)
    assert m.rise_time_samples > 15 and not m.warnings
    assert m.rise_time_s == pytest.approx(LN9 * tau, rel=0.01)
