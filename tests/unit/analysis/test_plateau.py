"""Miller plateau on a gate-source record."""

import numpy as np
import pytest
from analysis_synth import damped_ring, gate_with_plateau, rc_pwm, scope

from bringup.analysis import AnalysisError, find_miller_plateau

# A real gate loop rings on the plateau: 0.2 V (three 8-bit steps) at 150 MHz, decaying in
# 6 ns, excited where the plateau starts and where it ends (see ``gate_with_plateau``). Each
# test runs on that record and, beside it, on the same record without the ringing.
RING_V = [0.0, 0.2]


@pytest.mark.parametrize("ring_v", RING_V)
@pytest.mark.parametrize("plateau_s", [20e-9, 31e-9, 200e-9])
@pytest.mark.parametrize("noise_v", [0.02, 0.1])
def test_finds_the_shelf_voltage_and_duration(plateau_s, noise_v, ring_v):
    # The gate-charge picture of TI SLUA618: V_gs rises through R into C_iss to V_pl, stays
    # there while Q_gd flows, then rises to V_drv. Demo-board values: 4.6 V plateau. The
    # record carries noise, 8-bit quantisation and (ring_v > 0) the gate loop's ringing.
    dt = 0.5e-9
    clean = gate_with_plateau(
        4000, dt, 200e-9, 1200e-9, v_pl=4.6, plateau_s=plateau_s, ring_v=ring_v
    )
    found = find_miller_plateau(scope(clean, noise_v=noise_v, seed=11), dt)
    assert found is not None
    assert found.voltage_v == pytest.approx(4.6, abs=0.1)  # 8-bit steps are 62.5 mV
    assert found.duration_s == pytest.approx(plateau_s, rel=0.1, abs=2 * dt)
    assert found.edges_with_plateau == found.edges_examined == 1
    assert 200e-9 < found.start_s < 200e-9 + 40e-9


@pytest.mark.parametrize("ring_v", RING_V)
def test_several_edges_report_the_median(ring_v):
    dt = 0.5e-9
    one = gate_with_plateau(3000, dt, 200e-9, 1000e-9, plateau_s=40e-9, ring_v=ring_v)
    y = scope(np.tile(one, 4), noise_v=0.05, seed=12)
    found = find_miller_plateau(y, dt, t0=1e-3)
    assert found is not None and found.edges_with_plateau == 4
    assert found.duration_s == pytest.approx(40e-9, rel=0.1)
    assert found.voltage_v == pytest.approx(4.6, abs=0.1)
    assert found.start_s > 1e-3


@pytest.mark.parametrize("ring_v", RING_V)
@pytest.mark.parametrize("noise_v", [0.0, 0.05, 0.15, 0.3])
def test_a_plain_rc_edge_has_no_plateau(noise_v, ring_v):
    # With ring_v > 0 both rings start at the same instant on the way up: a 0.4 V ring on a
    # plain RC edge is not a shelf either.
    dt = 0.5e-9
    clean = gate_with_plateau(4000, dt, 200e-9, 1200e-9, plateau_s=0.0, ring_v=ring_v)
    for seed in range(4):
        assert find_miller_plateau(scope(clean, noise_v=noise_v, seed=seed), dt) is None
    pwm = rc_pwm(40_000, dt, 4e-6, 0.5, 40e-9, phase_s=1e-6)
    if ring_v:
        for k in range(5):  # a ring after each rising edge (t = 3, 7, ... 19 us)
            pwm = pwm + damped_ring(pwm.size, dt, 3e-6 + k * 4e-6, ring_v, 150e6, 6e-9)
    assert find_miller_plateau(scope(pwm, noise_v=noise_v, seed=13), dt) is None


def test_no_rising_edge_is_an_analysis_error():
    with pytest.raises(AnalysisError, match="one level only"):
        find_miller_plateau(np.full(1000, 12.0), 1e-9)
