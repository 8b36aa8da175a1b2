"""Switch-node stresses against a generated half-bridge switch node of known truth.

Each edge is a linear ramp (so its 10-90 % slope is exactly bus/ramp time [computed]) followed
by the free response of an L-C loop, A exp(-alpha s) sin(w_d s) with alpha = zeta w_n and
w_d = w_n sqrt(1 - zeta^2) (the second-order system, Nise ch. 4 [memory]; REFERENCES §2).
Every record has 0.2-0.5 V of noise and 8-bit codes of 0.375 V.
"""

import math

import numpy as np
import pytest
from halfbridge_synth import switch_node

from bringup.analysis import AnalysisError
from bringup.analysis.switch_node_stress import loop_inductance, measure_switch_node


def test_loop_inductance_from_the_lc_resonance():
    # L = 1/((2 pi f)^2 C) (REFERENCES §12 [computed from the LC resonance]):
    # 100 MHz with 1 nF -> 2.533 nH; 150 nH with 10 pF rings at 130 MHz (REFERENCES §9).
    assert loop_inductance(100e6, 1e-9) == pytest.approx(2.533e-9, rel=1e-3)
    assert 1 / (2 * math.pi * math.sqrt(150e-9 * 10e-12)) == pytest.approx(130e6, rel=0.01)
    assert loop_inductance(1 / (2 * math.pi * math.sqrt(150e-9 * 10e-12)), 10e-12) == pytest.approx(
        150e-9
    )


def test_ring_frequency_damping_and_loop_inductance():
    sn = switch_node(seed=1, ring_hz=80e6, zeta=0.08)
    r = measure_switch_node(sn.y, sn.dt, bus_v=48.0, capacitance_f=1e-9, capacitance_u_f=0.05e-9)
    for es in (r.rising, r.falling):
        assert es.count == 3 and sum(x.ok for x in es.rings) == 3
        assert es.ring_frequency_hz == pytest.approx(80e6, rel=0.005)
        assert es.ring_zeta == pytest.approx(0.08, abs=0.004)
        # f_n = f_d / sqrt(1 - zeta^2) = 80.257 MHz; with C = 1 nF, L = 1/((2 pi f_n)^2 C)
        # = 3.9326 nH [computed].
        assert es.ring_natural_frequency_hz == pytest.approx(80.257e6, rel=0.005)
        assert es.loop_inductance_h == pytest.approx(3.9326e-9, rel=0.02)
        assert abs(es.loop_inductance_h - 3.9326e-9) <= es.loop_inductance_uncertainty_h
        # The 5 % capacitance tolerance dominates: U(L)/L about 2 x 5 % (GUM §5.1.6).
        assert es.loop_inductance_uncertainty_h / es.loop_inductance_h == pytest.approx(
            0.10, abs=0.01
        )


def test_ring_against_reference_methods_fft_and_logarithmic_decrement():
    # References outside the fit: the numpy FFT's peak and the logarithmic decrement of the
    # ring's successive peaks found by scipy.signal.find_peaks, delta = ln(x_n/x_{n+1}),
    # zeta = delta/sqrt(4 pi^2 + delta^2) (REFERENCES §12 [read]).
    from scipy.signal import find_peaks

    sn = switch_node(seed=4, ring_hz=60e6, zeta=0.05, noise_v=0.1)
    r = measure_switch_node(sn.y, sn.dt, bus_v=48.0)
    ring = r.falling.rings[0]
    i0 = int(round(ring.start_s / sn.dt))
    seg = -(sn.y[i0 : i0 + 200] - r.low_level_v)  # undershoot ring, upright
    peaks, _ = find_peaks(seg, distance=int(0.7 / (60e6 * sn.dt)))
    x = seg[peaks[:4]]
    delta = float(np.mean(np.log(x[:-1] / x[1:])))
    zeta_ref = delta / math.sqrt(4 * math.pi**2 + delta**2)
    spec = np.abs(np.fft.rfft(seg - seg.mean(), 8192))
    f_ref = np.argmax(spec[1:]) + 1
    f_ref = f_ref / (8192 * sn.dt)
    assert zeta_ref == pytest.approx(0.05, abs=0.01)
    assert f_ref == pytest.approx(60e6, rel=0.03)
    assert ring.zeta == pytest.approx(zeta_ref, abs=0.01)
    assert ring.frequency_hz == pytest.approx(f_ref, rel=0.03)


def test_undershoot_overshoot_and_the_negative_rating():
    sn = switch_node(seed=2, ring_fall_v=14.0, ring_rise_v=10.0)
    r = measure_switch_node(sn.y, sn.dt, bus_v=48.0, negative_rating_v=-5.0)
    # The exact extremes of the clean model (a 50x finer grid): about -12.4 V and 56.8 V.
    assert abs(r.min_v - sn.min_v) <= r.min_uncertainty_v
    assert abs(r.max_v - sn.max_v) <= r.max_uncertainty_v
    assert r.undershoot_v == pytest.approx(-sn.min_v, abs=1.0)
    assert r.overshoot_v == pytest.approx(sn.max_v - 48.0, abs=1.0)
    assert r.negative_margin_v == pytest.approx(r.min_v + 5.0)
    assert r.negative_margin_v < -6.0  # far past a -5 V rating
    quiet = measure_switch_node(
        switch_node(seed=2, ring_fall_v=2.0).y, sn.dt, negative_rating_v=-5.0
    )
    assert quiet.negative_margin_v > 2.0


def test_dv_dt_of_each_edge_between_10_and_90_percent():
    # IEEE 181 reference levels 10/90 %: a 48 V linear ramp in 8 ns (6 ns) rises at 6 V/ns
    # (falls at 8 V/ns) [computed].
    sn = switch_node(seed=3)
    r = measure_switch_node(sn.y, sn.dt)
    np.testing.assert_allclose(r.rising.edge_dv_dt_v_per_s, 6e9, rtol=0.03)
    np.testing.assert_allclose(r.falling.edge_dv_dt_v_per_s, -8e9, rtol=0.03)
    assert abs(r.rising.dv_dt_v_per_s - 6e9) <= r.rising.dv_dt_uncertainty_v_per_s
    assert r.falling.dv_dt_max_v_per_s < 0
    assert "no bus voltage given" in r.warnings[0]


@pytest.mark.parametrize(
    ("kwargs", "dt", "why"),
    [
        ({"ring_rise_v": 0.0, "ring_fall_v": 0.0}, 0.5e-9, "no ring above the noise"),
        ({"ring_hz": 80e6, "rise_s": 40e-9, "fall_s": 40e-9}, 4e-9, "sampled too slowly"),
        ({"second_ring_v": 8.0}, 0.5e-9, "not one damped sinusoid"),
    ],
)
def test_a_ring_that_cannot_be_fitted_says_why(kwargs, dt, why):
    sn = switch_node(seed=5, dt=dt, **kwargs)
    r = measure_switch_node(sn.y, sn.dt, capacitance_f=1e-9)
    for es in (r.rising, r.falling):
        assert es.ring_frequency_hz is None and es.loop_inductance_h is None
        assert why in es.reasons["ring_frequency_hz"]
        assert why in es.reasons["loop_inductance_h"]


def test_a_record_without_an_edge_is_refused():
    flat = np.full(4000, 48.0) + np.random.default_rng(0).normal(0, 0.3, 4000)
    with pytest.raises(AnalysisError, match="one level only"):
        measure_switch_node(flat, 1e-9)


def test_stated_uncertainty_covers_the_truth_in_95_percent_of_trials():
    # GUM §6.3 (U = 2 u_c, about 95 %): ring frequency and damping (medians of the edges'
    # fits), dv/dt and both extremes, over 20 seeds with noise 0.2 or 0.5 V and zeta 0.05-0.09.
    hits = {"f": 0, "zeta": 0, "dvdt": 0, "min": 0, "max": 0}
    n = 20
    for seed in range(n):
        zeta = 0.05 + 0.002 * seed
        sn = switch_node(seed=300 + seed, periods=2, noise_v=0.5 if seed % 2 else 0.2, zeta=zeta)
        r = measure_switch_node(sn.y, sn.dt, bus_v=48.0)
        es = r.falling
        hits["f"] += abs(es.ring_frequency_hz - sn.ring_hz) <= es.ring_frequency_uncertainty_hz
        hits["zeta"] += abs(es.ring_zeta - zeta) <= es.ring_zeta_uncertainty
        hits["dvdt"] += abs(es.dv_dt_v_per_s - sn.dv_dt_fall) <= es.dv_dt_uncertainty_v_per_s
        hits["min"] += abs(r.min_v - sn.min_v) <= r.min_uncertainty_v
        hits["max"] += abs(r.max_v - sn.max_v) <= r.max_uncertainty_v
    assert all(v >= 0.95 * n for v in hits.values()), hits
    # Not vacuous: the frequency is known to well under 1 %.
    assert es.ring_frequency_uncertainty_hz < 0.01 * sn.ring_hz
