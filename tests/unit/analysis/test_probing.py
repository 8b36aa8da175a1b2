"""The measuring chain's own rise time: root-sum-of-squares correction and its limit."""

import math

import numpy as np
import pytest
from analysis_synth import scope

from bringup.analysis.edges import measure_edges
from bringup.analysis.probing import (
    RESOLVED_RATIO,
    chain_rise_time,
    correct_rise_time,
)

LN9 = math.log(9.0)


def test_chain_rise_time_is_the_root_sum_of_squares_of_0_35_over_bw():
    # t_r = 0.35/BW (REFERENCES §2: ln 9/(2 pi) = 0.3497 [computed]); a 350 MHz scope is 1 ns,
    # a 500 MHz probe 0.7 ns, together sqrt(1 + 0.49) = 1.2207 ns [computed].
    assert chain_rise_time([350e6]) == pytest.approx(1e-9)
    assert chain_rise_time([350e6, 500e6]) == pytest.approx(1.2207e-9, rel=1e-4)
    assert chain_rise_time([350e6, None]) == pytest.approx(1e-9)
    assert chain_rise_time([]) == 0.0
    with pytest.raises(ValueError, match="positive"):
        chain_rise_time([0.0])


@pytest.mark.parametrize(("ratio", "reads_slow_pct"), [(3.0, 5.4), (5.0, 2.0), (2.0, 11.8)])
def test_the_correction_undoes_the_cascade(ratio, reads_slow_pct):
    # REFERENCES §9 [computed]: a chain 3x faster than the edge reads +5.4 %, 5x +2.0 %,
    # 2x +11.8 %; the correction gives the edge's own rise time back.
    edge, chain = 10e-9, 10e-9 / ratio
    measured = math.hypot(edge, chain)
    assert measured / edge - 1 == pytest.approx(reads_slow_pct / 100, abs=5e-4)
    c = correct_rise_time(measured, chain)
    assert c.resolved and c.corrected_s == pytest.approx(edge, rel=1e-12)
    assert ("well known" in c.note) == (measured / chain >= 3.0)


def test_an_edge_faster_than_the_chain_resolves_is_refused():
    c = correct_rise_time(1.3e-9, 1e-9)
    assert not c.resolved and c.corrected_s is None
    assert c.ratio == pytest.approx(1.3) and "not judged" in c.note
    assert correct_rise_time(RESOLVED_RATIO * 1e-9, 1e-9).resolved


def test_on_a_filtered_record_the_corrected_rise_time_is_the_edges_own():
    # Gaussian edges cascade exactly by root sum of squares (the variances of the impulse
    # responses add); a Gaussian step's 10-90 % is 2 x 1.2816 sigma = 2.5631 sigma [computed:
    # Phi^-1(0.9) = 1.2816]. An edge of 16 ns through a Gaussian "chain" of 4 ns (by
    # numerical convolution), noise and 12 bits: it reads sqrt(16^2 + 4^2) = 16.49 ns
    # [computed], and the correction gives 16 ns back.
    from scipy.special import ndtr

    dt = 0.1e-9
    t = np.arange(40_000) * dt
    s_edge = 16e-9 / 2.5631
    clean = 12 * (ndtr((t - 1e-6) / s_edge) - ndtr((t - 3e-6) / s_edge))
    s_chain = 4e-9 / 2.5631
    k = np.arange(-int(6 * s_chain / dt), int(6 * s_chain / dt) + 1) * dt
    kernel = np.exp(-0.5 * (k / s_chain) ** 2)
    filtered = np.convolve(clean, kernel / kernel.sum(), mode="same")
    m = measure_edges(scope(filtered, noise_v=0.01, bits=12, seed=61), dt)
    assert m.rise_time_s == pytest.approx(16.49e-9, rel=0.005)
    c = correct_rise_time(m.rise_time_s, 4e-9)
    assert c.resolved and c.corrected_s == pytest.approx(16e-9, rel=0.01)
