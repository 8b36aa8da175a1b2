"""The record's canonical JSON against RFC 8785, and the SVG envelope against numpy."""

from __future__ import annotations

import json
import struct

import numpy as np
import pytest

from bringup.record.rfc8785 import NotCanonicalError, canonical_text, format_number
from bringup.record.svg import Marker, envelope, plot_svg

# RFC 8785 Appendix B: IEEE 754 bit patterns and their ECMAScript number text [memory].
RFC8785_NUMBERS = [
    ("0000000000000000", "0"),
    ("8000000000000000", "0"),
    ("0000000000000001", "5e-324"),
    ("8000000000000001", "-5e-324"),
    ("7fefffffffffffff", "1.7976931348623157e+308"),
    ("4340000000000000", "9007199254740992"),
    ("4430000000000000", "295147905179352830000"),
    ("44b52d02c7e14af5", "9.999999999999997e+22"),
    ("44b52d02c7e14af6", "1e+23"),
    ("444b1ae4d6e2ef4f", "999999999999999900000"),
    ("444b1ae4d6e2ef50", "1e+21"),
    ("3eb0c6f7a0b5ed8c", "9.999999999999997e-7"),
    ("3eb0c6f7a0b5ed8d", "0.000001"),
    ("41b3de4355555554", "333333333.33333325"),
    ("becbf647612f3696", "-0.0000033333333333333333"),
    ("43143ff3c1cb0959", "1424953923781206.2"),
]


@pytest.mark.parametrize(("bits", "text"), RFC8785_NUMBERS)
def test_numbers_print_as_rfc8785(bits: str, text: str) -> None:
    value = struct.unpack(">d", bytes.fromhex(bits))[0]
    assert format_number(value) == text
    assert float(text) == value  # the text reads back to the same double


def test_members_sorted_by_utf16_code_units() -> None:
    # RFC 8785 §3.2.3 sorts on UTF-16 code units: U+1F600 (a surrogate pair, 0xD83D...) sorts
    # before U+FB33 (0xFB33) although its code point is larger [memory: RFC 8785 §3.2.3].
    doc = {"\ufb33": 1, "\U0001f600": 2, "a": 3, "\u00e9": 4}
    text = canonical_text(doc)
    keys = list(json.loads(text))
    assert keys == ["a", "\u00e9", "\U0001f600", "\ufb33"]
    assert sorted(doc) != keys  # plain code-point order would differ: the test can fail


def test_no_whitespace_and_minimal_escapes() -> None:
    text = canonical_text({"b": [1.5, None, True], "a": 'µ "q"\n\u0001'})
    assert text == '{"a":"µ \\"q\\"\\n\\u0001","b":[1.5,null,true]}'


def test_the_log_chain_form_is_not_the_record_form() -> None:
    """DEVELOPERS.md says why two canonical forms exist; this pins where they differ, so a
    change to either is seen. RFC 8785 section 3.2.2.3 prints 1.0 as "1" and 1e-7 as "1e-7";
    the chain keeps Python's repr ("1.0", "1e-07"), over which every logged hash was computed."""
    from bringup.store.chain_json import canonical_json

    value = {"a": 1.0, "b": 1e-7}
    assert canonical_text(value) == '{"a":1,"b":1e-7}'
    assert canonical_json(value) == '{"a":1.0,"b":1e-07}'


@pytest.mark.parametrize("bad", [float("nan"), float("inf"), 2**60, b"x"])
def test_values_without_a_json_form_are_refused(bad: object) -> None:
    with pytest.raises(NotCanonicalError) as err:
        canonical_text({"metrics": {"v": bad}})
    assert "$.metrics.v" in str(err.value)


def _noisy_gate(n: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """A 0 -> 12 V gate edge with ringing, noise and int16 quantisation (1 mV codes)."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) * 1e-9
    step = (t > 2e-6).astype(float)
    ring = 1.5 * np.exp(-(t - 2e-6) / 80e-9) * np.sin(2 * np.pi * 40e6 * (t - 2e-6)) * step
    y = 12.0 * step + ring + rng.normal(0, 0.05, n)
    codes = np.round(y / 1e-3).astype(np.int16)
    return t, codes * 1e-3


def test_envelope_matches_brute_force_min_max_per_column() -> None:
    t, y = _noisy_gate(20_000, 3)
    cols, lo, hi = envelope(t, y, 400, float(t[0]), float(t[-1]))
    # Reference: numpy per-column min/max of the same column assignment.
    col_of = np.clip(((t - t[0]) / (t[-1] - t[0]) * 400).astype(int), 0, 399)
    for c, a, b in zip(cols[::37], lo[::37], hi[::37], strict=True):
        sel = y[col_of == c]
        assert a == sel.min() and b == sel.max()
    # The ringing's first peak survives the reduction (a decimation by 50 could miss it).
    assert hi.max() == y.max()


def test_plot_is_plain_svg_with_labelled_markers() -> None:
    t, y = _noisy_gate(20_000, 4)
    svg = plot_svg(
        t,
        y,
        title="Gate",
        unit="V",
        markers=[
            Marker("level", "90 % level", y=10.8),
            Marker("time", "t90", t=2.05e-6),
            Marker("window", "on-time", t=2e-6, t_end=15e-6),
        ],
    )
    assert svg.startswith("<svg") and svg.endswith("</svg>")
    for label in ("90 % level", "t90", "on-time"):
        assert f">{label}<" in svg
    assert "stroke-dasharray" in svg  # markers are told by dash pattern, not colour alone
    assert "<script" not in svg and "http://" not in svg.replace(
        'xmlns="http://www.w3.org/2000/svg"', ""
    )
    assert len(svg) < 40_000  # 20,000 samples drawn as at most one pair per pixel column
