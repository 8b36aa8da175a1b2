"""The soak fit's statistical tests use scipy.special, not scipy.stats (start-up speed)."""

import subprocess
import sys

import pytest
from scipy import special, stats


@pytest.mark.parametrize("dof", [1, 7, 37, 400, 5000])
def test_the_chi_square_quantile_is_scipy_stats(dof):
    # Reference library: scipy.stats.chi2.ppf(q, dof) against the special function the fit
    # now calls (chdtri(dof, 1 - q): the inverse of the chi-square survival function).
    assert special.chdtri(dof, 0.001) == pytest.approx(stats.chi2.ppf(0.999, dof), rel=1e-12)


@pytest.mark.parametrize(("x", "d2"), [(0.3, 10), (3.1, 30), (12.0, 400)])
def test_the_f_survival_is_scipy_stats(x, d2):
    # Reference library: scipy.stats.f.sf(x, 2, d2) = fdtrc(2, d2, x).
    assert special.fdtrc(2, d2, x) == pytest.approx(stats.f.sf(x, 2, d2), rel=1e-12)


def test_a_soak_fit_does_not_import_scipy_stats():
    code = (
        "import sys, numpy as np\n"
        "from bringup.analysis import fit_soak\n"
        "rng = np.random.default_rng(5)\n"
        "t = np.arange(0.0, 3600.0, 10.0)\n"
        "y = 25 + 30 * (1 - np.exp(-t / 600)) + rng.normal(0, 0.05, t.size)\n"
        "y = np.round(y / 0.0625) * 0.0625\n"
        "fit = fit_soak(t, y, band_k=1.0)\n"
        "print(round(fit.final_c, 1), 'scipy.stats' in sys.modules)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    final, loaded = out.stdout.split()
    assert abs(float(final) - 55.0) < 1.0  # the fit still works (true final 55 degC)
    assert loaded == "False"
