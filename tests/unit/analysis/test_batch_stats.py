"""Batch statistics against scipy/numpy and published formulas (tags as in shared REFERENCES.md)."""

import math

import numpy as np
import pytest
from scipy import stats

from bringup.analysis import batch

# --- robust centre and spread ----------------------------------------------------------------


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_scaled_mad_matches_scipy(seed):
    # scipy.stats.median_abs_deviation(scale="normal") is the reference library's scaled MAD
    rng = np.random.default_rng(seed)
    x = rng.normal(5.0, 0.3, size=17 + seed)
    assert batch.scaled_mad(x) == pytest.approx(
        stats.median_abs_deviation(x, scale="normal"), rel=1e-12
    )


def test_scaled_mad_estimates_sigma_of_normal_data():
    # the point of the 1.4826 factor: MAD x 1.4826 -> sigma for normal data [read: scipy docs]
    x = np.random.default_rng(7).normal(0.0, 2.0, size=200_000)
    assert batch.scaled_mad(x) == pytest.approx(2.0, rel=0.01)


def test_modified_z_scores_by_the_published_formula():
    # Iglewicz and Hoaglin 1993 [read; REFERENCES §13]: M_i = 0.6745 (x_i - median) / MAD;
    # the median and MAD here come from numpy/scipy, not from the code under test
    x = np.array([10.2, 10.4, 10.1, 10.3, 10.25, 14.0, 10.35])
    mad = stats.median_abs_deviation(x)  # unscaled
    expected = 0.6745 * (x - np.median(x)) / mad
    np.testing.assert_allclose(batch.modified_z_scores(x), expected, rtol=1e-12)


def test_outlier_rule_flags_only_the_far_board():
    # six boards near 27 ns, one at 60 ns: |M| of that one = 0.6745 * 33 / 0.3 >> 3.5
    x = [26.8, 27.1, 27.3, 26.9, 27.0, 27.4, 60.0]
    d = batch.distribution(x)
    assert d.outliers == (False,) * 6 + (True,)
    assert abs(d.z_scores[-1]) > 3.5
    assert d.median == pytest.approx(np.median(x))
    assert (d.minimum, d.maximum) == (26.8, 60.0)


def test_outlier_needs_a_difference_above_the_floor():
    # a large |M| from a tiny MAD is not a finding when the difference is inside the
    # measurement's uncertainty (here 10 ns against a 2 ns difference)
    x = [27.00, 27.01, 27.00, 27.02, 29.0]
    assert batch.distribution(x).outliers[-1] is True
    assert batch.distribution(x, floors=[10.0] * 5).outliers[-1] is False


def test_zero_mad_scores_infinite_for_the_odd_one():
    # quantised readings: three of four read the same code, MAD = 0
    z = batch.modified_z_scores([46.875, 46.875, 46.875, 78.125])
    assert list(z[:3]) == [0.0, 0.0, 0.0] and z[3] == math.inf
    d = batch.distribution([46.875, 46.875, 46.875, 78.125], floors=[50.0] * 4)
    assert d.mad_zero and d.outliers == (False,) * 4  # 31 mV apart, U = 50 mV: not resolved


def test_two_boards_are_never_outliers():
    # with n = 2 every |M| is 0.6745: the rule is not applied below three boards
    d = batch.distribution([1.0, 100.0])
    assert d.outliers == (False, False)
    assert [abs(z) for z in d.z_scores] == pytest.approx([0.6745, 0.6745])


def test_non_finite_values_are_refused():
    with pytest.raises(ValueError, match="finite"):
        batch.distribution([1.0, float("nan"), 2.0])


# --- capability ------------------------------------------------------------------------------


def test_cp_cpk_worked_example():
    # NIST/SEMATECH e-Handbook 6.1.6 example [memory]: USL 20, LSL 8, mean 16, s 2 ->
    # Cp = 12/12 = 1.0, Cpu = 4/6 = 0.6667, Cpl = 8/6 = 1.3333, Cpk = 0.6667. Values built
    # to have exactly that mean and sample standard deviation.
    z = np.random.default_rng(3).standard_normal(30)
    x = 16.0 + 2.0 * (z - z.mean()) / z.std(ddof=1)
    c = batch.capability(x, 8.0, 20.0)
    assert c.mean == pytest.approx(16.0) and c.std == pytest.approx(2.0)
    assert c.cp == pytest.approx(1.0)
    assert c.cpu == pytest.approx(4 / 6) and c.cpl == pytest.approx(8 / 6)
    assert c.cpk == pytest.approx(0.6667, abs=1e-4)


def test_cpk_interval_worked_example():
    # A textbook exercise [read: the exercise text; the bound formula is Bissell's normal
    # approximation, memory]: USL 100, LSL 90, n = 30, mean 97, s 1.6 -> Cpk = 3/4.8 = 0.625
    # [computed]; 95 % interval 0.625 -+ 1.96 sqrt(1/270 + 0.625^2/58) = 0.4248 .. 0.8253
    # [computed].
    z = np.random.default_rng(4).standard_normal(30)
    x = 97.0 + 1.6 * (z - z.mean()) / z.std(ddof=1)
    c = batch.capability(x, 90.0, 100.0)
    assert c.cpk == pytest.approx(0.625)
    assert c.cpk_interval == pytest.approx((0.4248, 0.8253), abs=2e-4)


def test_cp_interval_against_scipy_chi2():
    # Cp interval: Cp sqrt(chi2_{0.025, n-1}/(n-1)) .. Cp sqrt(chi2_{0.975, n-1}/(n-1))
    # [memory: the textbook chi-square interval]; quantiles from scipy.stats.chi2
    x = np.random.default_rng(5).normal(10.0, 0.5, size=25)
    c = batch.capability(x, 8.0, 12.0)
    s = np.std(x, ddof=1)
    cp = 4.0 / (6 * s)
    lo = cp * math.sqrt(stats.chi2.ppf(0.025, 24) / 24)
    hi = cp * math.sqrt(stats.chi2.ppf(0.975, 24) / 24)
    assert c.cp == pytest.approx(cp, rel=1e-12)
    assert c.cp_interval == pytest.approx((lo, hi), rel=2e-3)


@pytest.mark.parametrize("dof", [19, 24, 49, 999])
@pytest.mark.parametrize("p", [0.025, 0.975])
def test_chi2_quantile_against_scipy(dof, p):
    assert batch.chi2_quantile(p, dof) == pytest.approx(stats.chi2.ppf(p, dof), rel=5e-3)


def test_one_sided_limit_gives_one_sided_index():
    # a maximum only (rise time <= 200 ns): Cpk = Cpu = (USL - mean)/3s, no Cp
    x = np.random.default_rng(6).normal(30e-9, 2e-9, size=40)
    c = batch.capability(x, None, 200e-9)
    expected = (200e-9 - np.mean(x)) / (3 * np.std(x, ddof=1))
    assert c.cp is None and c.cp_interval is None and c.cpl is None
    assert c.cpk == pytest.approx(expected) and c.cpu == pytest.approx(expected)
    low = batch.capability(x, 10e-9, None)
    assert low.cpk == pytest.approx((np.mean(x) - 10e-9) / (3 * np.std(x, ddof=1)))


def test_capability_needs_enough_boards():
    x = np.random.default_rng(8).normal(1.0, 0.1, size=batch.MIN_CAPABILITY_BOARDS)
    assert batch.capability(x[:-1], 0.0, 2.0) is None
    assert batch.capability(x, 0.0, 2.0) is not None
    assert batch.capability(x, None, None) is None
    assert batch.capability(np.ones(30), 0.0, 2.0) is None  # no spread: no finite index
