"""Switching energy against a generated crossover of known truth, with a known probe skew.

The truth: a hard-switched clamped-inductive crossover (current rises while the voltage stays,
then the voltage falls) holds E = 1/2 V I (t_ri + t_fv) at turn-on and 1/2 V I (t_rv + t_fi)
at turn-off (Mohan, Undeland, Robbins, *Power Electronics*, ch. 2, W_c = 1/2 V_d I_o t_c
[memory]; REFERENCES §4 for P_sw = 1/2 V I (t_r + t_f) f_sw [read]); the 10 % window leaves
out 0.5 % at each end, so it holds 0.99 of it [computed]. Records carry noise, 8-bit codes and
ringing.
"""

import numpy as np
import pytest
from halfbridge_synth import crossover

from bringup.analysis.switching_energy import (
    deskewed,
    measure_deskew,
    measure_switching_energy,
)

BUS_V, LOAD_A = 48.0, 10.0
E_ON = 0.99 * 0.5 * BUS_V * LOAD_A * (20e-9 + 15e-9)  # 8.316 uJ [computed]
E_OFF = 0.99 * 0.5 * BUS_V * LOAD_A * (18e-9 + 25e-9)  # 10.217 uJ [computed]


def test_deskew_on_a_resistive_step_against_cross_correlation():
    v, i, dt = crossover(resistive=True, skew_s=7.3e-9, seed=1)
    d = measure_deskew(v, i, dt)
    assert d.edges == 6
    assert abs(d.skew_s - 7.3e-9) <= d.uncertainty_s
    assert d.skew_s == pytest.approx(7.3e-9, abs=0.3e-9)
    # Reference: numpy's cross-correlation of the two normalised edges' derivatives, its peak
    # refined by a parabola (common practice).
    dv = np.diff(v / BUS_V)
    di = np.diff(i / LOAD_A)
    xc = np.correlate(di, dv, mode="full")
    k = int(np.argmax(xc))
    frac = 0.5 * (xc[k - 1] - xc[k + 1]) / (xc[k - 1] - 2 * xc[k] + xc[k + 1])
    lag = (k - (dv.size - 1) + frac) * dt
    assert lag == pytest.approx(7.3e-9, abs=0.6e-9)
    assert d.skew_s == pytest.approx(lag, abs=0.6e-9)


def test_e_on_and_e_off_after_deskew_match_the_linear_crossover():
    v, i, dt = crossover(seed=2, skew_s=7.3e-9)
    vr, ir, _ = crossover(resistive=True, seed=3, skew_s=7.3e-9)
    d = measure_deskew(vr, ir, dt)
    e = measure_switching_energy(v, i, dt, skew_s=d.skew_s, skew_u_s=d.uncertainty_s / 2,
                                 frequency_hz=500e3)  # fmt: skip
    assert e.e_on_j.size == 3 and e.e_off_j.size == 3
    assert e.e_on_median_j == pytest.approx(E_ON, rel=0.03)
    assert e.e_off_median_j == pytest.approx(E_OFF, rel=0.03)
    assert abs(e.e_on_median_j - E_ON) <= e.e_on_uncertainty_j
    assert abs(e.e_off_median_j - E_OFF) <= e.e_off_uncertainty_j
    assert e.power_w == pytest.approx((E_ON + E_OFF) * 500e3, rel=0.03)  # about 9.3 W


def test_without_deskew_the_energy_is_wrong_by_more_than_its_uncertainty():
    # REFERENCES §12: a skew shifts the product; 7.3 ns against 15-25 ns edges is large.
    v, i, dt = crossover(seed=2, skew_s=7.3e-9)
    raw = measure_switching_energy(v, i, dt, skew_s=0.0, skew_u_s=0.1e-9)
    assert abs(raw.e_on_median_j - E_ON) > 0.1 * E_ON
    assert abs(raw.e_on_median_j - E_ON) > raw.e_on_uncertainty_j


def test_the_skew_uncertainty_enters_through_the_energy_sensitivity():
    # GUM §5.1.3: the skew's part is |dE/dskew| u(skew). On a clamped crossover E changes only
    # to second order with the skew (the current is whole before the voltage falls), so u
    # grows faster than linearly with u(skew); the brute-force change of E with the skew
    # stays inside the stated uncertainty.
    v, i, dt = crossover(seed=4)
    tight = measure_switching_energy(v, i, dt, skew_s=7.3e-9, skew_u_s=0.05e-9)
    loose = measure_switching_energy(v, i, dt, skew_s=7.3e-9, skew_u_s=3e-9)
    assert loose.e_on_u_j[0] > 2 * tight.e_on_u_j[0]
    for off in (-3e-9, 3e-9):
        moved = measure_switching_energy(v, i, dt, skew_s=7.3e-9 + off)
        assert abs(moved.e_on_j[0] - loose.e_on_j[0]) <= 2 * loose.e_on_u_j[0]


def test_deskewed_moves_the_current_earlier():
    x = np.zeros(100)
    x[50:] = 1.0
    np.testing.assert_allclose(deskewed(x, 1e-9, 2.5e-9)[46:49], [0.0, 0.5, 1.0])


def test_stated_uncertainty_covers_the_truth_in_95_percent_of_trials():
    # GUM §6.3: per edge E_on and E_off over 20 seeds (120 trials), with the deskew measured on
    # its own noisy resistive step each time.
    inside = total = 0
    for seed in range(20):
        v, i, dt = crossover(seed=400 + seed, periods=3)
        vr, ir, _ = crossover(resistive=True, seed=500 + seed, periods=2)
        d = measure_deskew(vr, ir, dt)
        e = measure_switching_energy(v, i, dt, skew_s=d.skew_s, skew_u_s=d.uncertainty_s / 2)
        for got, u, truth in ((e.e_on_j, e.e_on_u_j, E_ON), (e.e_off_j, e.e_off_u_j, E_OFF)):
            inside += int(np.sum(np.abs(got - truth) <= 2 * u))
            total += got.size
    assert total == 120
    assert inside / total >= 0.95
    assert float(np.max(e.e_on_u_j)) < 0.05 * E_ON  # not vacuous
