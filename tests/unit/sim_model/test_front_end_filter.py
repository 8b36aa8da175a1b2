"""The simulated scope's bandwidth pole (numpy, in blocks) against scipy.signal.lfilter."""

import numpy as np
import pytest
from scipy.signal import lfilter

from sim_instruments.scope import FULL_BANDWIDTH_HZ, LIMIT_BANDWIDTH_HZ, one_pole


@pytest.mark.parametrize("n", [1, 7, 127, 128, 4099, 200_003])
@pytest.mark.parametrize("fc_dt", [FULL_BANDWIDTH_HZ * 1e-9, LIMIT_BANDWIDTH_HZ * 1e-9, 1e-4])
def test_one_pole_matches_lfilter(n, fc_dt):
    # Reference library: scipy.signal.lfilter of b = [1 - p], a = [1, -p] started in the
    # steady state of the first sample (zi = p * x[0]), in float64. A gate-like record: steps,
    # ringing, noise and 8-bit quantisation.
    rng = np.random.default_rng(n)
    k = np.arange(n)
    x = 12.0 * (k // 997 % 2) + 0.3 * np.sin(k / 5.0) * np.exp(-(k % 997) / 50.0)
    x = np.round((x + rng.normal(0.0, 0.05, n)) / 0.0625) * 0.0625 + 0.4
    x = x.astype(np.float32)
    p = float(np.exp(-2.0 * np.pi * fc_dt))
    want, _ = lfilter([1.0 - p], [1.0, -p], x.astype(np.float64), zi=[p * float(x[0])])
    got = one_pole(x, p)
    assert got.dtype == np.float32 and got.shape == x.shape
    # float32 arithmetic on a 12.4 V record: a few units in the last place of 16 V
    np.testing.assert_allclose(got, want, rtol=0, atol=16 * 2.0**-20)
