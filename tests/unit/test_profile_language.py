"""The profile language's pieces on their own: field splitting with quoted strings, echoed
headers, sequences, placeholder groups, scale terms, and the record check's diagnosis."""

from __future__ import annotations

import numpy as np
import pytest

from bringup.errors import ConfigError
from bringup.instruments.profiles import BUILTIN_DIR, load_profile
from bringup.instruments.scope import judge_record, split_fields
from bringup.instruments.visa import strip_header


def test_preamble_fields_keep_separators_inside_quotes():
    # the shape of an output preamble (IEEE 488.2 string response data holding commas), read
    text = '1;8;BIN;RP;MSB;"Ch1, DC coupling, 2.0V/div; 10us/div";1000;Y'
    assert split_fields(text, ";") == [
        "1", "8", "BIN", "RP", "MSB", '"Ch1, DC coupling, 2.0V/div; 10us/div"', "1000", "Y"
    ]  # fmt: skip
    assert split_fields("0,2,6000000,1,1.0e-09", ",")[2] == "6000000"


@pytest.mark.parametrize(
    ("reply", "value"),
    [
        (":CH1:SCALE 1.0E0", "1.0E0"),
        ("BYT_NR 1", "1"),
        ('WFID "Ch1, DC coupling"', '"Ch1, DC coupling"'),
        ("1.0E0", "1.0E0"),
        ("STOP", "STOP"),
        ('"a b"', '"a b"'),
        ('+0,"No error"', '+0,"No error"'),
    ],
)
def test_echoed_headers_are_stripped_and_nothing_else(reply, value):
    # IEEE 488.2 8.7.1: a response header is a program mnemonic followed by a space
    assert strip_header(reply) == value


def _edited(tmp_path, old: str, new: str, name: str = "sim-scope"):
    text = (BUILTIN_DIR / f"{name}.toml").read_text()
    assert old in text
    path = tmp_path / f"{name}.toml"
    path.write_text(text.replace(old, new, 1))
    return path


def test_a_sequence_is_sent_line_by_line(tmp_path):
    path = _edited(tmp_path, 'arm = "INIT"', 'arm = ["ABOR", "INIT"]')
    profile = load_profile(path)
    assert profile.lines("arm") == ["ABOR", "INIT"]
    assert profile.command("arm") == "ABOR ; INIT"


def test_a_query_sequence_ends_with_its_query(tmp_path):
    path = _edited(
        tmp_path,
        'measure_mean = "MEAS:VOLT:DC? {source}"',
        'measure_mean = ["MEAS:SOUR {source}", "MEAS:VOLT:DC?"]',
    )
    assert load_profile(path).lines("measure_mean", source="CH2") == [
        "MEAS:SOUR CH2",
        "MEAS:VOLT:DC?",
    ]
    bad = _edited(
        tmp_path,
        'measure_mean = "MEAS:VOLT:DC? {source}"',
        'measure_mean = ["MEAS:SOUR? {source}", "MEAS:VOLT:DC?"]',
    )
    with pytest.raises(ConfigError, match=r"commands\.measure_mean.*a command before the query"):
        load_profile(bad)


def test_derived_placeholders_are_alternatives(tmp_path):
    path = _edited(
        tmp_path, '"SENS{channel}:VOLT:RANG:PTP {volts}"', '"CHAN{channel}:SCAL {volts_per_div}"'
    )
    assert (
        load_profile(path).command("vertical_range", channel=2, volts=8.0, volts_per_div=1.0)
        == "CHAN2:SCAL 1.0"
    )
    bad = _edited(tmp_path, '"SENS{channel}:VOLT:RANG:PTP {volts}"', '"CHAN{channel}:SCAL 1"')
    with pytest.raises(ConfigError, match=r"lacks \{volts\} or \{volts_per_div\}"):
        load_profile(bad)


@pytest.mark.parametrize(
    ("old", "new", "key", "problem"),
    [
        ('y_step = "y_increment"', 'y_step = "y_inc"', "scale.y_step", "is not a field"),
        (
            'y_step = "y_increment"',
            'y_step = { query = "WAV:YINC" }',
            "scale.y_step",
            "needs a '?'",
        ),
        ('y_step = "y_increment"', 'y_step = { formula = "2*x" }', "scale.y_step", "no expression"),
        ('y_step = "y_increment"\n', "", "scale.y_step", "missing"),
        ('separator = ","', 'separator = " "', "preamble.separator", "must be"),
        (
            'datatype = "int16"',
            'datatype = "uint16"\ncode_min = -1',
            "block.code_min",
            "within 0..65535",
        ),
        ("[termination]", "[channels]\ncount = 3\n\n[termination]", "channels.count", "2, 4 or 8"),
        (
            "[words]",
            '[acquire]\ncompletion = "poll"\n\n[words]',
            "acquire.completion",
            "acquisition_state",
        ),
        ('read = "\\n"', 'read = "\\r\\n"', None, None),
    ],
)
def test_scale_block_and_acquire_keys_are_checked(tmp_path, old, new, key, problem):
    path = _edited(tmp_path, old, new)
    if key is None:
        assert load_profile(path).read_termination == "\r\n"  # CR+LF is a termination too
        return
    with pytest.raises(ConfigError) as info:
        load_profile(path)
    assert info.value.key == key
    if problem == "no expression":
        assert "there is" not in info.value.problem and "a number or" in info.value.problem
    else:
        assert problem in info.value.problem


def test_scale_terms_are_a_field_a_sum_a_constant_or_a_query(tmp_path):
    path = _edited(
        tmp_path,
        'y_zero = "y_origin"',
        'y_zero = ["y_origin", "x_origin"]\ncode_offset = 128\nx_ref = { query = "WAV:XREF? {source}" }',
    )
    scale = load_profile(path).block.scale
    assert scale["y_zero"].fields == ("y_origin", "x_origin")
    assert scale["code_offset"].constant == 128.0
    assert scale["x_ref"].query == "WAV:XREF? {source}"


# --- the record check's judgement (pure) ---------------------------------------------------


def _block(datatype="uint8", big=True):
    from bringup.instruments.profiles import BlockFormat

    return BlockFormat(datatype, big, 1 << 20, None, False, 0, 255, ",", (), False, {}, 0.02)


def test_a_record_that_agrees_is_accepted():
    rng = np.random.default_rng(1)
    volts = 2.5 + 1.5 * np.sin(np.linspace(0, 20, 5000)) + rng.normal(0, 0.02, 5000)
    codes = np.clip(np.rint(volts / 0.04) + 128, 0, 255).astype(np.uint8)
    true = (codes.astype(float) - 128) * 0.04
    judged = judge_record(
        codes, 0.04, -128 * 0.04, _block(), true.mean(), np.ptp(true), 0.02 * 10.24
    )
    assert judged is None


def test_signedness_read_wrong_names_the_datatype():
    # the reported case: [-2, 0, 1, 2.5, 4] V coded unsigned about reference code 128, read as
    # signed bytes with no code offset (values computed here: code = V / 0.05 + 128)
    volts = np.array([-2.0, 0.0, 1.0, 2.5, 4.0])
    codes = (volts / 0.05 + 128).astype(np.uint8)
    wrong = codes.view(np.int8)
    judged = judge_record(wrong, 0.05, 0.0, _block("int8"), volts.mean(), np.ptp(volts), 0.2)
    assert judged is not None and judged[1] == "block.datatype"
    assert "read as uint8" in judged[0]


def test_a_missing_code_offset_names_the_offset_terms():
    volts = np.array([-2.0, 0.0, 1.0, 2.5, 4.0])
    codes = (volts / 0.05 + 128).astype(np.uint8)
    judged = judge_record(codes, 0.05, 0.0, _block(), volts.mean(), np.ptp(volts), 0.2)
    assert judged is not None and judged[1] == "scale.code_offset or scale.y_zero"


def test_a_wrong_step_names_the_step():
    volts = np.array([-2.0, 0.0, 1.0, 2.5, 4.0])
    codes = (volts / 0.05 + 128).astype(np.uint8)
    judged = judge_record(codes, 0.1, -12.8, _block(), volts.mean(), np.ptp(volts), 0.2)
    assert judged is not None and judged[1] == "scale.y_step"


def test_a_swapped_byte_order_names_the_byte_order():
    rng = np.random.default_rng(2)
    codes = (8000 * np.sin(np.linspace(0, 30, 4000)) + rng.normal(0, 40, 4000)).astype(">i2")
    native = codes.astype(np.int16)
    true = native * 1e-3
    swapped = native.byteswap()
    block = _block("int16")
    judged = judge_record(swapped, 1e-3, 0.0, block, true.mean(), np.ptp(true), 0.02 * 65.5)
    assert judged is not None and judged[1] == "block.byte_order"
