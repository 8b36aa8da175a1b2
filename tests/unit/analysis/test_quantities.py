"""Engineering-notation quantities: reading and printing."""

import math

import pytest

from bringup.analysis.quantities import format_quantity, parse_quantity, parse_quantity_unit
from bringup.errors import InputError


@pytest.mark.parametrize(
    ("text", "unit", "value"),
    [
        ("4.7u", None, 4.7e-6),
        ("40 nC", None, 40e-9),
        ("40 nC", "C", 40e-9),
        ("100k", None, 100e3),
        ("2.2 \u00b5F", "F", 2.2e-6),  # micro sign
        ("2.2 \u03bcF", "F", 2.2e-6),  # Greek mu
        ("2.2 uF", "F", 2.2e-6),
        ("2.2uF", None, 2.2e-6),
        ("47R", "ohm", 47.0),  # IEC 60062 resistor codes
        ("4R7", None, 4.7),
        ("R47", None, 0.47),
        ("4k7", "ohm", 4700.0),
        ("2K2", None, 2200.0),
        ("1M5", None, 1.5e6),
        ("8 mohm", "ohm", 8e-3),
        ("8 m\u03a9", "ohm", 8e-3),
        ("8 m\u2126", "\u03a9", 8e-3),  # ohm sign
        ("100 kohm", "ohm", 100e3),
        ("10 Kohm", None, 10e3),
        ("30 K/W", "K/W", 30.0),
        ("25 degC", "degC", 25.0),
        ("25 \u00b0C", "degC", 25.0),
        ("-40 \u00b0C", None, -40.0),
        ("2 K", "K", 2.0),  # kelvin when a kelvin is expected
        ("25 kHz", "Hz", 25e3),
        ("38 us", "s", 38e-6),
        ("1.5 mA", "A", 1.5e-3),
        ("20 min", "s", 1200.0),
        ("1.5 h", None, 5400.0),
        ("12", "V", 12.0),  # a bare number is in the expected unit
        ("1e-6", None, 1e-6),
        (" -0.5 V ", "V", -0.5),
        (".5u", None, 0.5e-6),
        (3, None, 3.0),
        (2.5, "V", 2.5),
    ],
)
def test_reads_engineering_notation(text, unit, value):
    assert parse_quantity(text, unit) == pytest.approx(value, rel=1e-12)


def test_prefixed_values_are_exact_floats():
    # Decimal scaling: "38 us" is the float 38e-6, not 38 * 1e-6.
    assert parse_quantity("38 us") == 38e-6
    assert parse_quantity("4.7 uF") == 4.7e-6


def test_returns_the_unit_it_read():
    assert parse_quantity_unit("25 \u00b0C") == (25.0, "degC")
    assert parse_quantity_unit("4k7") == (4700.0, "ohm")
    assert parse_quantity_unit("100k") == (100e3, None)
    assert parse_quantity_unit("3.3", "V") == (3.3, "V")


@pytest.mark.parametrize(
    ("text", "unit", "fragment"),
    [
        ("24 Vx", "V", "unknown unit 'Vx'"),
        ("24 A", "V", "its unit is A"),
        ("4R7", "V", "resistor code"),
        ("1,5", None, "'1,5'"),
        ("", None, "empty"),
        ("nan", None, "'nan'"),
        ("inf V", "V", "'inf V'"),
        ("V", None, "'V'"),
        ("1 kdegC", None, "kdegC"),
        (float("nan"), None, "finite"),
        (True, None, "boolean"),
        ("1e999", None, "finite"),
    ],
)
def test_bad_text_is_an_input_error_quoting_it(text, unit, fragment):
    with pytest.raises(InputError) as info:
        parse_quantity(text, unit, where="design.bus_voltage")
    message = str(info.value)
    assert message.startswith("design.bus_voltage: cannot read ")
    assert fragment in message
    assert "\n" not in message


def test_error_message_reads_as_in_the_contract():
    with pytest.raises(
        InputError, match=r"^design.bus_voltage: cannot read '24 Vx' as a quantity in V"
    ):
        parse_quantity("24 Vx", "V", where="design.bus_voltage")


@pytest.mark.parametrize(
    ("value", "unit", "text"),
    [
        (4.7e-6, "F", "4.7 \u00b5F"),
        (38e-6, "s", "38 \u00b5s"),
        (100e3, "ohm", "100 k\u03a9"),
        (8e-3, "ohm", "8 m\u03a9"),
        (12.345678, "V", "12.35 V"),
        (0.0, "V", "0 V"),
        (-3.3, "V", "-3.3 V"),
        (25.0, "degC", "25 \u00b0C"),
        (30.0, "K/W", "30 K/W"),
        (1800.0, "s", "1800 s"),
        (0.5, "", "0.5"),
        (None, "V", "n/a"),
        (math.nan, "V", "nan V"),
    ],
)
def test_prints_engineering_notation(value, unit, text):
    assert format_quantity(value, unit) == text


@pytest.mark.parametrize("value", [4.7e-6, 38e-6, 100e3, 12.5, 0.008, 1.2e-9, 25e3])
@pytest.mark.parametrize("unit", ["F", "s", "ohm", "V", "Hz"])
def test_print_then_read_round_trips(value, unit):
    assert parse_quantity(format_quantity(value, unit), unit) == pytest.approx(value, rel=1e-3)
