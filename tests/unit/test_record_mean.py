"""The record check's mean of the codes: exact, whatever the record's length and codes.

numpy's float64 mean is the reference (its pairwise sum of integers below 2^53 is exact).
"""

from __future__ import annotations

import numpy as np
import pytest

from bringup.instruments.scope import mean_code


@pytest.mark.parametrize(
    ("dtype", "fill"),
    [("int16", 32767), ("int16", -32768), ("uint16", 65535), ("int8", -128), ("uint8", 255)],
)
def test_full_scale_codes_do_not_overflow_the_row_sums(dtype, fill):
    # 100 003 codes at the top of the range: an int32 sum of the whole would overflow for
    # 16-bit codes (65 538 x 32 767 > 2^31); the rows and the tail must each stay exact
    codes = np.full(100_003, fill, dtype=dtype)
    assert mean_code(codes) == float(fill)


@pytest.mark.parametrize("dtype", ["int16", "uint16", "<i2", ">i2", "int8", "float32"])
def test_mean_matches_numpy_on_a_noisy_record(dtype):
    rng = np.random.default_rng(14)
    info = np.iinfo(dtype) if np.dtype(dtype).kind in "iu" else None
    volts = np.sin(np.linspace(0, 40 * np.pi, 1_000_001)) + 0.05 * rng.standard_normal(1_000_001)
    if info is None:
        codes = volts.astype(dtype)
    else:
        span = (info.max - info.min) / 2.2
        codes = np.clip(np.rint(volts * span / 1.2 + (info.max + info.min) / 2), info.min,
                        info.max).astype(dtype)  # fmt: skip
    assert mean_code(codes) == pytest.approx(float(np.mean(codes, dtype=np.float64)), rel=1e-12)
