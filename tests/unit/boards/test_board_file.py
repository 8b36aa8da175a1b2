"""Board files: the shipped demo loads; every malformed case is one line naming file, key, line."""

from __future__ import annotations

import re

import pytest

from bringup.boards.board_file import DESIGN_UNITS, demo_board_path, load_board
from bringup.errors import ConfigError, InputError

DEMO_TEXT = demo_board_path().read_text(encoding="utf-8")
CHECKLISTS = demo_board_path().parent


def _line_of(text: str, needle: str) -> int:
    """1-based line of the first line of ``text`` that starts with ``needle`` (test helper)."""
    for number, line in enumerate(text.splitlines(), start=1):
        if line.startswith(needle):
            return number
    raise AssertionError(f"{needle!r} not in text")


def _write(tmp_path, text: str):
    path = tmp_path / "board.toml"
    path.write_text(text, encoding="utf-8")
    return path


def test_demo_board_loads_with_si_values():
    board = load_board("demo")
    assert board.name.startswith("DHS-24")
    assert set(board.design) == set(DESIGN_UNITS)
    # "38 us" is 38e-6 s, "8 mohm" 8e-3 ohm, "25 kHz" 25e3 Hz: SI prefixes [read: SI brochure]
    assert board.design["on_time_max"] == pytest.approx(38e-6)
    assert board.design["mosfet_rds_on"] == pytest.approx(8e-3)
    assert board.design["switching_frequency"] == pytest.approx(25e3)
    # The longest on-time is max duty over the switching frequency [computed]: 0.95 / 25 kHz = 38 us
    assert board.design["duty_max"] / board.design["switching_frequency"] == pytest.approx(
        board.design["on_time_max"]
    )
    vgs = board.targets["vgs_on"]
    assert (vgs.limit.min, vgs.limit.max, vgs.unit, vgs.rule) == (10.5, 18.0, "V", "guarded")
    assert board.targets["switch_rise"].limit.max == pytest.approx(200e-9)
    assert board.source["board"]["revision"] == board.revision


def test_serial_pattern_is_checked():
    board = load_board("demo")
    board.check_serial("DHS24-0001")
    with pytest.raises(InputError, match="does not match"):
        board.check_serial("DHS24-01")


def _expect(tmp_path, text: str, key: str, line_needle: str, problem: str):
    path = _write(tmp_path, text)
    with pytest.raises(ConfigError) as info:
        load_board(path)
    err = info.value
    message = str(err)
    assert "\n" not in message
    assert err.key == key
    assert err.line == _line_of(text, line_needle), message
    assert message.startswith(f"{path}:{err.line}: {key}: ")
    assert re.search(problem, message), message
    return err


def test_unknown_design_key(tmp_path):
    text = DEMO_TEXT.replace(
        'gate_resistor = "10 ohm"', 'gate_resistor = "10 ohm"\ngate_resistr = "9 ohm"'
    )
    _expect(tmp_path, text, "design.gate_resistr", "gate_resistr =", "unknown key")


def test_missing_design_key(tmp_path):
    text = DEMO_TEXT.replace('mosfet_qgd = "14 nC"\n', "")
    _expect(tmp_path, text, "design", "[design]", "missing key 'mosfet_qgd'")


def test_bad_unit_in_design(tmp_path):
    text = DEMO_TEXT.replace('bootstrap_capacitance = "1 uF"', 'bootstrap_capacitance = "1 uH"')
    _expect(tmp_path, text, "design.bootstrap_capacitance", "bootstrap_capacitance", "in F")


def test_unknown_unit_in_target(tmp_path):
    text = DEMO_TEXT.replace('unit = "W"', 'unit = "watts"')
    err = _expect(tmp_path, text, "targets.switching_loss.unit", 'unit = "watts"', "unknown unit")
    assert "watts" in str(err)


def test_min_above_max(tmp_path):
    text = DEMO_TEXT.replace('min = "10.5 V"\nmax = "18 V"', 'min = "19 V"\nmax = "18 V"')
    _expect(tmp_path, text, "targets.vgs_on.min", 'min = "19 V"', "above max")


def test_missing_target_key(tmp_path):
    text = DEMO_TEXT.replace('uncertainty = "10 ns"\n', "", 1)
    _expect(
        tmp_path, text, "targets.switch_rise", "[targets.switch_rise]", "missing key 'uncertainty'"
    )


def test_unknown_rule(tmp_path):
    text = DEMO_TEXT.replace('\nrule = "guarded"', '\nrule = "lenient"', 1)
    _expect(tmp_path, text, "targets.ramp_current.rule", 'rule = "lenient"', "rule must be one of")


def test_unknown_top_level_key(tmp_path):
    text = DEMO_TEXT.replace("schema = 1\n", "schema = 1\nshema = 2\n")
    _expect(tmp_path, text, "shema", "shema", "unknown key")


def test_newer_schema(tmp_path):
    text = DEMO_TEXT.replace("schema = 1\n", "schema = 7\n")
    _expect(tmp_path, text, "schema", "schema = 7", "newer")


def test_duty_out_of_range(tmp_path):
    text = DEMO_TEXT.replace("duty_max = 0.95", "duty_max = 1.5")
    _expect(tmp_path, text, "design.duty_max", "duty_max", "between 0 and 1")


def test_duty_may_be_written_in_percent(tmp_path):
    board = load_board(_write(tmp_path, DEMO_TEXT.replace("duty_max = 0.95", 'duty_max = "95 %"')))
    assert board.design["duty_max"] == pytest.approx(0.95)


def test_syntax_error_names_the_line(tmp_path):
    text = DEMO_TEXT.replace('gate_resistor = "10 ohm"', 'gate_resistor = "10 ohm')
    path = _write(tmp_path, text)
    with pytest.raises(ConfigError) as info:
        load_board(path)
    assert info.value.line == _line_of(text, "gate_resistor")
    assert "not valid TOML" in str(info.value)


def test_missing_file(tmp_path):
    with pytest.raises(ConfigError, match="file not found"):
        load_board(tmp_path / "nope.toml")


def test_bad_serial_pattern(tmp_path):
    text = DEMO_TEXT.replace(
        'serial_pattern = "^DHS24-[0-9]{4}$"', 'serial_pattern = "^DHS24-[0-9"'
    )
    _expect(tmp_path, text, "board.serial_pattern", "serial_pattern", "not a regular expression")


def test_design_keys_are_the_ones_the_simulator_reads():
    # The contract of DEVELOPERS.md: the simulator reads the same [design] keys.
    from sim_instruments.stage_params import DESIGN_KEYS

    assert set(DESIGN_UNITS) == set(DESIGN_KEYS)


@pytest.mark.parametrize(
    ("line", "bad", "problem"),
    [
        ('gate_resistor = "10 ohm"', 'gate_resistor = "-10 ohm"', "out of range: must be at least 0"),
        ('bootstrap_capacitance = "1 uF"', 'bootstrap_capacitance = "0 F"', "must be positive"),
        ('ambient_temperature = "25 degC"', 'ambient_temperature = "-400 degC"', "absolute zero"),
        ('bus_voltage = "24 V"', 'bus_voltage = "1e300 V"', "at most 2 kV"),
        ('load_resistance = "4 ohm"', 'load_resistance = "0 ohm"', "must be positive"),
        ('thermal_time_constant = "240 s"', 'thermal_time_constant = "-240 s"', "positive"),
        ('mosfet_plateau = "4.6 V"', 'mosfet_plateau = "40 V"', "below the gate drive"),
        ('mosfet_plateau = "4.6 V"', 'mosfet_plateau = "2 V"', "above the threshold"),
        ('driver_uvlo_falling = "8.2 V"', 'driver_uvlo_falling = "13 V"', "below the gate drive"),
        ('mosfet_gate_charge = "40 nC"', 'mosfet_gate_charge = "20 nC"', "mosfet_qgs \\+ mosfet_qgd"),
        ('on_time_max = "38 us"', 'on_time_max = "50 us"', "longer than one switching period"),
        ('temperature_limit = "70 degC"', 'temperature_limit = "20 degC"', "above the ambient"),
    ],
)  # fmt: skip
def test_design_values_outside_their_physical_range_are_refused(tmp_path, line, bad, problem):
    # Each of these loaded before and failed only mid-run (math range error, division by zero)
    # or never: one line naming file:line and key now, before anything is powered.
    assert line in DEMO_TEXT
    key = bad.split(" =")[0]
    _expect(tmp_path, DEMO_TEXT.replace(line, bad), f"design.{key}", f"{key} =", problem)


def test_every_design_key_has_a_range_and_the_demo_board_is_inside():
    from bringup.boards.board_file import DESIGN_RANGES, HALF_BRIDGE_UNITS

    keys = set(DESIGN_UNITS) | set(HALF_BRIDGE_UNITS)
    assert set(DESIGN_RANGES) | {"duty_min", "duty_max"} == keys
    design = load_board("demo").design
    for key, (low, _, high) in DESIGN_RANGES.items():
        if key not in HALF_BRIDGE_UNITS:
            assert low < design[key] <= high, key
    half = load_board("demo-half-bridge").design
    for key, (low, _, high) in DESIGN_RANGES.items():
        assert low < half[key] <= high, key


def test_the_half_bridge_keys_come_all_together(tmp_path):
    """A board with some half-bridge keys and not the others is refused in one line naming the
    first one missing: the simulator and the half-bridge analyses need every one."""
    text = (CHECKLISTS / "demo-half-bridge.toml").read_text()
    line = 'bootstrap_resistor = "3.3 ohm"\n'
    assert line in text
    path = tmp_path / "half.toml"
    path.write_text(text.replace(line, ""))
    with pytest.raises(ConfigError, match="lacks 'bootstrap_resistor'"):
        load_board(path)
    assert load_board("demo-half-bridge").is_half_bridge
    assert not load_board("demo").is_half_bridge


def test_the_rising_uvlo_lies_between_the_falling_one_and_the_drive(tmp_path):
    text = (CHECKLISTS / "demo-half-bridge.toml").read_text()
    path = tmp_path / "half.toml"
    path.write_text(text.replace('driver_uvlo_rising = "8.7 V"', 'driver_uvlo_rising = "7.9 V"'))
    with pytest.raises(ConfigError, match="between the falling UVLO"):
        load_board(path)


def test_a_long_serial_is_refused_before_the_pattern_is_tried():
    """``^(a+)+$`` on 'aaa…a!' backtracks exponentially (over 40 s at 30 characters): the length
    cap refuses a long serial at once, before the user's pattern runs."""
    import dataclasses
    import time

    board = dataclasses.replace(load_board("demo"), serial_pattern="^(a+)+$")
    start = time.monotonic()
    with pytest.raises(InputError, match="longer than 64"):
        board.check_serial("a" * 200 + "!")
    assert time.monotonic() - start < 1.0
    load_board("demo").check_serial("DHS24-0001")


@pytest.mark.parametrize("pattern", ["^(a+)+$", "^([A-Z]*-?)*$", "^(?:x|(y+))+$"])
def test_a_serial_pattern_with_nested_unbounded_repetition_is_refused(tmp_path, pattern):
    old = 'serial_pattern = "^DHS24-[0-9]{4}$"'
    assert old in DEMO_TEXT
    text = DEMO_TEXT.replace(old, f"serial_pattern = '{pattern}'")
    _expect(tmp_path, text, "board.serial_pattern", "serial_pattern =", "exponential time")


def test_simple_serial_patterns_load(tmp_path):
    old = 'serial_pattern = "^DHS24-[0-9]{4}$"'
    for pattern in ("^([0-9]{2}-){3}[A-Z]+$", "^DHS24-(A|B)?[0-9]+$"):
        board = load_board(
            _write(tmp_path, DEMO_TEXT.replace(old, f"serial_pattern = '{pattern}'"))
        )
        assert board.serial_pattern == pattern
