"""Bad profile and bench files: each gets one line naming the file, the key and the line.

Line numbers are checked against the test's own search of the file text, not the loader's.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from bringup.errors import ConfigError
from bringup.instruments.bench import load_bench, profile_for_role
from bringup.instruments.profiles import BUILTIN_DIR, all_profiles, find_profile, load_profile


def line_no(text: str, fragment: str) -> int:
    """1-based line of the first line containing ``fragment``."""
    for number, line in enumerate(text.splitlines(), start=1):
        if fragment in line:
            return number
    raise AssertionError(f"{fragment!r} not in the text")


def edited_profile(tmp_path: Path, name: str, old: str, new: str) -> tuple[Path, str]:
    text = (BUILTIN_DIR / f"{name}.toml").read_text()
    assert old in text
    text = text.replace(old, new, 1)
    path = tmp_path / f"{name}.toml"
    path.write_text(text)
    return path, text


PROFILE_CASES = [
    # (profile, old text, new text, key named, line marker, problem)
    ("sim-scope", 'arm = "INIT"\n', "", "commands.arm", "[commands]", "missing operation"),
    (
        "sim-scope",
        '"TRIG:LEV {volts}"',
        '"TRIG:LEV {volts"',
        "commands.trigger_level",
        "trigger_level =",
        "malformed template",
    ),
    (
        "sim-scope",
        '"TRIG:LEV {volts}"',
        '"TRIG:LEV {voltage}"',
        "commands.trigger_level",
        "trigger_level =",
        "unknown placeholder {voltage}",
    ),
    (
        "sim-scope",
        '"TRIG:LEV {volts}"',
        '"TRIG:LEV 1"',
        "commands.trigger_level",
        "trigger_level =",
        "lacks {volts}",
    ),
    (
        "sim-supply",
        '"MEAS:VOLT?"',
        '"MEAS:VOLT"',
        "commands.measure_voltage",
        "measure_voltage =",
        "is a query",
    ),
    (
        "sim-supply",
        '"OUTP {state}"',
        '"OUTP? {state}"',
        "commands.output",
        "output =",
        "is a command, not a query",
    ),
    (
        "sim-scope",
        'datatype = "int16"',
        'datatype = "int12"',
        "block.datatype",
        "datatype =",
        "'int12' is not one of",
    ),
    (
        "sim-scope",
        'byte_order = "big"',
        'byte_order = "middle"',
        "block.byte_order",
        "byte_order =",
        "must be 'big' or 'little'",
    ),
    (
        "sim-scope",
        '"x_origin", ',
        "",
        "scale.x_zero",
        "x_zero =",
        "'x_origin' is not a field of [preamble] fields",
    ),
    (
        "sim-thermometer",
        'identity = "^NULLPOINT,SIMTHERM-1,"',
        'identity = "^NULLPOINT,(SIMTHERM"',
        "profile.identity",
        "identity =",
        "not a valid regular expression",
    ),
    (
        "sim-thermometer",
        'name = "sim-thermometer"',
        'name = "my-meter"',
        "profile.name",
        "name =",
        "must equal the file name",
    ),
    (
        "sim-supply",
        "default = 2000",
        'default = "2 s"',
        "timeouts_ms.default",
        "default =",
        "whole milliseconds",
    ),
    (
        "sim-supply",
        "ovp_tripped_bit = 0",
        "ovp_tripped_bit = 16",
        "status.ovp_tripped_bit",
        "ovp_tripped_bit",
        "bit number 0..15",
    ),
    (
        "sim-scope",
        'slope_falling = "NEG"',
        'slope_down = "NEG"',
        "words.slope_down",
        "slope_down",
        "unknown word",
    ),
    (
        "sim-supply",
        'read = "\\n"',
        'read = "\\t"',
        "termination.read",
        "read =",
        "must be",
    ),
    ("sim-scope", "[words]", "[wording]", "wording", "[wording]", "unknown table"),
]


@pytest.mark.parametrize(("name", "old", "new", "key", "marker", "problem"), PROFILE_CASES)
def test_bad_profile_names_file_key_and_line(tmp_path, name, old, new, key, marker, problem):
    path, text = edited_profile(tmp_path, name, old, new)
    with pytest.raises(ConfigError) as info:
        load_profile(path)
    err = info.value
    assert err.key == key and problem in err.problem
    assert err.line == line_no(text, marker)
    assert str(err).startswith(f"{path}:{err.line}: {key}: ") and "\n" not in str(err)


def test_profile_that_is_not_toml_gives_the_line(tmp_path):
    path = tmp_path / "broken.toml"
    path.write_text('[profile]\nname = "broken"\nkind = scope\n')
    with pytest.raises(ConfigError, match="not valid TOML") as info:
        load_profile(path)
    assert info.value.line == 3


def test_users_profile_folder_shadows_the_built_in_and_adds_its_own(tmp_path):
    path, _ = edited_profile(tmp_path, "sim-scope", 'datatype = "int16"', 'datatype = "int8"')
    (tmp_path / "bench-meter.toml").write_text(
        (BUILTIN_DIR / "sim-thermometer.toml")
        .read_text()
        .replace('name = "sim-thermometer"', 'name = "bench-meter"')
    )
    assert find_profile("sim-scope", tmp_path).block.datatype == "int8"
    assert find_profile("sim-scope").block.datatype == "int16"
    assert all_profiles(tmp_path)["bench-meter"].kind == "thermometer"
    with pytest.raises(ConfigError, match="no profile of that name"):
        find_profile("nonesuch", tmp_path)


GOOD_BENCH = """\
[scope]
resource = "TCPIP::127.0.0.1::5025::SOCKET"
profile = "sim-scope"
calibration_due = 2027-06-30

[scope.channels.1]
net = "gate"
probe_ratio = 10

[scope.channels.3]
net = "vgs"
probe_ratio = 50

[supply]
resource = "TCPIP::127.0.0.1::5026::SOCKET"
profile = "sim-supply"

[thermometer]
resource = "TCPIP::127.0.0.1::5027::SOCKET"
profile = "sim-thermometer"

[simulation]
enabled = true
"""

BENCH_CASES = [
    # (old, new, key named, line marker, problem)
    (
        '[supply]\nresource = "TCPIP::127.0.0.1::5026::SOCKET"\nprofile = "sim-supply"\n',
        "",
        "supply",
        None,
        "missing table [supply]",
    ),
    (
        '"TCPIP::127.0.0.1::5025::SOCKET"',
        '"127.0.0.1:5025"',
        "scope.resource",
        'resource = "127.0.0.1:5025"',
        "not an explicit VISA resource",
    ),
    (
        '"TCPIP::127.0.0.1::5026::SOCKET"',
        '"TCPIP::10.0.0.7::5025::SOCKET"',
        "supply.resource",
        "10.0.0.7",
        "simulated bench is served on",
    ),
    (
        'net = "gate"',
        'net = "drain"',
        "scope.channels.1.net",
        'net = "drain"',
        "'drain' is not one of",
    ),
    (
        'net = "vgs"',
        'net  = "gate"',
        "scope.channels.3.net",
        'net  = "gate"',
        "already on channel 1",
    ),
    (
        "[scope.channels.3]",
        "[scope.channels.9]",
        "scope.channels.9",
        "[scope.channels.9]",
        "channel must be 1 to 8",
    ),
    (
        "probe_ratio = 50",
        "probe_ratio = -50",
        "scope.channels.3.probe_ratio",
        "probe_ratio = -50",
        "must be a number above 0",
    ),
    ("probe_ratio = 10\n", "", "scope.channels.1.probe_ratio", "[scope.channels.1]", "missing"),
    (
        "calibration_due = 2027-06-30",
        'calibration_due = "next June"',
        "scope.calibration_due",
        "calibration_due",
        "not a date",
    ),
    (
        'profile = "sim-supply"',
        'profile = "sim-supply"\nadress = "x"',
        "supply.adress",
        "adress",
        "unknown key",
    ),
    (
        "enabled = true",
        'enabled = "yes"',
        "simulation.enabled",
        "enabled =",
        "must be true or false",
    ),
    ("[simulation]", "[simulator]", "simulator", "[simulator]", "unknown table"),
]


@pytest.mark.parametrize(("old", "new", "key", "marker", "problem"), BENCH_CASES)
def test_bad_bench_file_names_file_key_and_line(tmp_path, old, new, key, marker, problem):
    assert old in GOOD_BENCH
    text = GOOD_BENCH.replace(old, new, 1)
    path = tmp_path / "bench.toml"
    path.write_text(text)
    with pytest.raises(ConfigError) as info:
        load_bench(path)
    err = info.value
    assert err.key == key and problem in err.problem, str(err)
    assert err.line == (line_no(text, marker) if marker else None)
    assert "\n" not in str(err)


def test_good_bench_file_loads(tmp_path):
    path = tmp_path / "bench.toml"
    path.write_text(GOOD_BENCH)
    config = load_bench(path)
    assert config.simulated and config.channel_for("vgs") == 3
    assert config.instruments["scope"].calibration_due.isoformat() == "2027-06-30"
    assert config.channels[1].probe_ratio == 10.0


@pytest.mark.parametrize(
    ("old", "new", "problem"),
    [
        ('profile = "sim-supply"', 'profile = "sim-supplies"', "no profile 'sim-supplies'"),
        (
            'profile = "sim-supply"',
            'profile = "sim-scope-longform"',
            "'sim-scope-longform' is a scope profile, not a supply one",
        ),
    ],
)
def test_bench_profile_that_is_missing_or_of_the_wrong_kind(tmp_path, old, new, problem):
    text = GOOD_BENCH.replace(old, new)
    path = tmp_path / "bench.toml"
    path.write_text(text)
    with pytest.raises(ConfigError) as info:
        profile_for_role(load_bench(path), "supply", None)
    assert info.value.key == "supply.profile" and problem in info.value.problem
    assert info.value.line == line_no(text, new)
