"""Decisions with measurement uncertainty (ILAC-G8:09/2019 §4.2)."""

import json
import math

import pytest

from bringup.analysis.verdict import Limit, judge


# ILAC-G8:09/2019 §4.2, non-binary rule with guard band w = U; example values from
# shared REFERENCES.md §6 [computed]: upper TL 10.00 V, U 0.20 V.
@pytest.mark.parametrize(
    ("value", "outcome"),
    [(9.70, "pass"), (9.90, "conditional-pass"), (10.10, "conditional-fail"), (10.30, "fail")],
)
def test_ilac_g8_guarded_example(value, outcome):
    verdict = judge(value, Limit(None, 10.00, "V"), uncertainty=0.20, rule="guarded")
    assert verdict.outcome == outcome
    assert verdict.guard_band == 0.20
    assert verdict.margin == pytest.approx(10.00 - value)


# ILAC-G8:09/2019 §4.2.1 simple acceptance (w = 0): binary, pass below the limit and fail
# above it [read; REFERENCES §6]. That a value exactly at the limit passes is [memory],
# not recorded in REFERENCES: the project's choice for the boundary.
@pytest.mark.parametrize(
    ("value", "outcome"),
    [(9.70, "pass"), (9.90, "pass"), (10.00, "pass"), (10.10, "fail"), (10.30, "fail")],
)
def test_ilac_g8_simple_acceptance(value, outcome):
    verdict = judge(value, Limit(None, 10.00, "V"), uncertainty=0.20, rule="simple")
    assert verdict.outcome == outcome
    assert verdict.guard_band == 0.0


def test_lower_limit_is_the_mirror_image():
    limit = Limit(10.0, None, "V")
    assert [judge(v, limit, 0.2).outcome for v in (10.3, 10.1, 9.9, 9.7)] == [
        "pass",
        "conditional-pass",
        "conditional-fail",
        "fail",
    ]


def test_two_sided_limit_takes_the_worse_side_and_nearest_margin():
    limit = Limit(22.8, 25.2, "V")
    v = judge(24.0, limit, 0.1)
    assert v.outcome == "pass" and v.margin == pytest.approx(1.2)
    v = judge(25.15, limit, 0.1)
    assert v.outcome == "conditional-pass" and v.margin == pytest.approx(0.05)
    v = judge(22.0, limit, 0.1)
    assert v.outcome == "fail" and v.margin == pytest.approx(-0.8)
    assert "min" in v.reason


@pytest.mark.parametrize("value", [None, math.nan, math.inf, -math.inf, 9.9e37, 9.91e37, -9.9e37])
def test_unusable_values_never_pass(value):
    for rule in ("simple", "guarded"):
        verdict = judge(value, Limit(-1e40, 1e40, "V"), 0.0, rule)
        assert verdict.outcome == "fail"
        assert verdict.margin is None
        assert verdict.reason
        json.dumps(verdict.to_dict(), allow_nan=False)  # to_dict stays valid JSON


def test_limit_validation():
    with pytest.raises(ValueError):
        Limit(2.0, 1.0, "V")
    with pytest.raises(ValueError):
        Limit(None, None, "V")
    with pytest.raises(ValueError):
        Limit(math.nan, 1.0, "V")
    with pytest.raises(ValueError):
        judge(1.0, Limit(0, 2, "V"), -0.1)
    with pytest.raises(ValueError):
        judge(1.0, Limit(0, 2, "V"), 0.1, rule="lenient")


def test_to_dict_and_reason():
    verdict = judge(9.9, Limit(None, 10.0, "V"), 0.2)
    d = verdict.to_dict()
    assert set(d) >= {"outcome", "value", "margin", "guard_band", "reason"}
    assert "\n" not in d["reason"] and "10 V" in d["reason"]
    assert verdict.accepted
    assert not judge(10.1, Limit(None, 10.0, "V"), 0.2).accepted
