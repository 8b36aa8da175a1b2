"""Board files: a board's identity, its design values and the targets its measurements meet.

A board file is TOML (``checklists/demo-board.toml`` is the shipped example)::

    schema = 1
    [board]       name, revision, serial_pattern (a regular expression), description (optional)
    [design]      quantity strings in engineering notation, read to SI floats
                  (temperatures in degC, duty cycles as fractions; "95 %" is read as 0.95)
    [targets.ID]  label, unit, min and/or max, uncertainty (the guard band), rule

The decision rules are those of ILAC-G8:09/2019 §4.2 (see ``bringup.analysis.verdict``): agreed
before measuring, so they belong in the board file. Every problem found on load is one
``ConfigError`` naming the file, the key and its line; nothing starts on an invalid file.

Each [design] value must lie in its physical range (``DESIGN_RANGES``: positive where zero or a
negative value means nothing, temperatures above absolute zero, every value within a sane
magnitude) and the values must agree with each other (threshold < plateau < gate drive, UVLO and
diode drop below the gate drive, Qgs + Qgd <= Qg, the longest on-time within one period, the
temperature limit above the ambient). Keep ``serial_pattern`` simple (a fixed prefix and a few
character classes such as ``^DHS24-[0-9]{4}$``): nested repetitions like ``(a+)+`` can take
exponential time on a serial that almost matches, so serials longer than ``MAX_SERIAL_LENGTH``
characters are refused before the pattern is tried.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path

from bringup.analysis.quantities import canonical_unit, format_quantity, parse_quantity_unit
from bringup.analysis.verdict import RULES, Limit
from bringup.errors import InputError
from bringup.names import control_character
from bringup.tomlfile import TomlDocument, read_toml

__all__ = [
    "Board",
    "Target",
    "DESIGN_UNITS",
    "HALF_BRIDGE_UNITS",
    "DESIGN_RANGES",
    "control_character",
    "MAX_SERIAL_LENGTH",
    "BOARD_SCHEMA",
    "load_board",
    "demo_board_path",
    "checklists_dir",
]

#: The board-file format this version reads.
BOARD_SCHEMA = 1

#: Every [design] key and the unit its value is in ("" = a plain ratio). All are required: the
#: predictions and the simulator need each one.
DESIGN_UNITS: dict[str, str] = {
    "bus_voltage": "V",
    "gate_drive_voltage": "V",
    "logic_voltage": "V",
    "switching_frequency": "Hz",
    "duty_min": "",
    "duty_max": "",
    "on_time_max": "s",
    "bootstrap_capacitance": "F",
    "bootstrap_diode_drop": "V",
    "bootstrap_diode_leakage": "A",
    "bootstrap_cap_leakage": "A",
    "floating_quiescent_current": "A",
    "level_shift_charge": "C",
    "gate_source_pulldown": "ohm",
    "driver_uvlo_falling": "V",
    "driver_source_resistance": "ohm",
    "driver_sink_resistance": "ohm",
    "gate_resistor": "ohm",
    "gate_resistance_internal": "ohm",
    "mosfet_gate_charge": "C",
    "mosfet_qgs": "C",
    "mosfet_qgd": "C",
    "mosfet_threshold": "V",
    "mosfet_plateau": "V",
    "mosfet_ciss": "F",
    "mosfet_rds_on": "ohm",
    "mosfet_rds_on_vgs": "V",
    "mosfet_vgs_max": "V",
    "load_resistance": "ohm",
    "load_inductance": "H",
    "stray_inductance": "H",
    "switch_node_capacitance": "F",
    "ambient_temperature": "degC",
    "thermal_resistance": "K/W",
    "thermal_time_constant": "s",
    "temperature_limit": "degC",
}

#: The [design] keys of a half-bridge board (a synchronous buck or a phase leg: the high side
#: and a low side of the same MOSFET type, one bootstrap driver with dead time): all of them, or
#: none (a lone high-side switch). ``checklists/demo-half-bridge.toml`` is the shipped example.
HALF_BRIDGE_UNITS: dict[str, str] = {
    "load_current": "A",  # the electronic load's constant current (the inductor's mean)
    "dead_time": "s",  # the driver's dead-time setting at each edge, command to command
    "body_diode_drop": "V",  # the body diode's forward drop at the load current
    "bootstrap_resistor": "ohm",  # series resistor of the bootstrap charge path
    "driver_uvlo_rising": "V",  # the floating supply's rising UVLO (the output comes back on)
    "driver_negative_swing": "V",  # how far below ground the driver's switch pin may go
}

#: Absolute zero in degrees Celsius.
ABSOLUTE_ZERO_C = -273.15

#: Physical range of each [design] value (the duty cycles are checked on their own, 0 < d < 1):
#: ``(low, low_allowed, high)`` in the key's SI unit: the value must be above ``low`` (or equal
#: to it when ``low_allowed``) and at most ``high``. The highs are sane magnitudes for a
#: bootstrap-driven high-side stage (a 2 kV bus, a 50 V gate-drive rail), far beyond any real
#: board yet small enough that the predictions and the simulator stay finite (common practice).
DESIGN_RANGES: dict[str, tuple[float, bool, float]] = {
    "bus_voltage": (0.0, False, 2000.0),
    "gate_drive_voltage": (0.0, False, 50.0),
    "logic_voltage": (0.0, False, 50.0),
    "switching_frequency": (0.0, False, 100e6),
    "on_time_max": (0.0, False, 10.0),
    "bootstrap_capacitance": (0.0, False, 1.0),
    "bootstrap_diode_drop": (0.0, True, 5.0),
    "bootstrap_diode_leakage": (0.0, True, 1.0),
    "bootstrap_cap_leakage": (0.0, True, 1.0),
    "floating_quiescent_current": (0.0, True, 1.0),
    "level_shift_charge": (0.0, True, 1e-3),
    "gate_source_pulldown": (0.0, False, 1e12),
    "driver_uvlo_falling": (0.0, False, 50.0),
    "driver_source_resistance": (0.0, False, 1e6),
    "driver_sink_resistance": (0.0, False, 1e6),
    "gate_resistor": (0.0, True, 1e6),
    "gate_resistance_internal": (0.0, True, 1e6),
    "mosfet_gate_charge": (0.0, False, 1e-3),
    "mosfet_qgs": (0.0, False, 1e-3),
    "mosfet_qgd": (0.0, False, 1e-3),
    "mosfet_threshold": (0.0, False, 50.0),
    "mosfet_plateau": (0.0, False, 50.0),
    "mosfet_ciss": (0.0, False, 1e-3),
    "mosfet_rds_on": (0.0, False, 1e3),
    "mosfet_rds_on_vgs": (0.0, False, 100.0),
    "mosfet_vgs_max": (0.0, False, 100.0),
    "load_resistance": (0.0, False, 1e9),
    "load_inductance": (0.0, False, 10.0),
    "stray_inductance": (0.0, False, 1e-3),
    "switch_node_capacitance": (0.0, False, 1e-3),
    "ambient_temperature": (ABSOLUTE_ZERO_C, False, 500.0),
    "thermal_resistance": (0.0, False, 1e4),
    "thermal_time_constant": (0.0, False, 1e6),
    "temperature_limit": (ABSOLUTE_ZERO_C, False, 1000.0),
    # half-bridge boards only
    "load_current": (0.0, False, 1e4),
    "dead_time": (0.0, True, 1e-3),
    "body_diode_drop": (0.0, False, 10.0),
    "bootstrap_resistor": (0.0, True, 1e6),
    "driver_uvlo_rising": (0.0, False, 50.0),
    "driver_negative_swing": (0.0, True, 1000.0),
}

#: Longest serial number read (characters): a longer one is refused before the board's
#: pattern is tried, which bounds the time a badly written pattern can take.
MAX_SERIAL_LENGTH = 64

_TOP_KEYS = {"schema": True, "board": True, "design": True, "targets": True}
_BOARD_KEYS = {"name": True, "revision": True, "serial_pattern": True, "description": False}
_TARGET_KEYS = {
    "label": True,
    "unit": True,
    "min": False,
    "max": False,
    "uncertainty": True,
    "rule": True,
}
# A temperature limit and its guard band: degC for the limit, a difference (K) is the same size.
_UNCERTAINTY_UNIT = {"degC": "degC"}


@dataclass(frozen=True)
class Target:
    """What one measurement is judged against.

    ``limit`` is in ``unit`` (SI, canonical spelling: "V", "s", "W", "degC", "%"), ``uncertainty``
    the expanded uncertainty U in the same unit, used as the guard band w by the "guarded" rule
    (ILAC-G8:09/2019 §4.2) and ignored by "simple".
    """

    id: str
    label: str
    unit: str
    limit: Limit
    uncertainty: float
    rule: str


@dataclass(frozen=True)
class Board:
    """A validated board file. ``design`` values are SI floats keyed as in ``DESIGN_UNITS``."""

    name: str
    revision: str
    serial_pattern: str
    description: str
    design: dict[str, float]
    targets: dict[str, Target]
    source: dict
    path: Path
    text: str

    @property
    def is_half_bridge(self) -> bool:
        """True for a half-bridge board (its [design] has the ``HALF_BRIDGE_UNITS`` keys)."""
        return all(key in self.design for key in HALF_BRIDGE_UNITS)

    def check_serial(self, serial: str) -> None:
        """Raise ``InputError`` unless ``serial`` matches the board's serial pattern (fully).

        A serial with a control character or longer than ``MAX_SERIAL_LENGTH`` is refused
        before the pattern is tried."""
        bad = control_character(serial)
        if bad is not None:
            raise InputError(
                f"--serial {serial!r}: contains the control character {bad} (one line of text)"
            )
        if len(serial) > MAX_SERIAL_LENGTH:
            raise InputError(
                f"--serial: {len(serial)} characters, longer than {MAX_SERIAL_LENGTH} "
                "(a serial number is short)"
            )
        if not re.fullmatch(self.serial_pattern, serial):
            raise InputError(
                f"serial {serial!r} does not match the pattern {self.serial_pattern!r} "
                f"of board file {self.path}"
            )


def checklists_dir() -> Path:
    """The shipped checklist and demo board: the top-level ``checklists/`` folder beside the
    package in a source tree (or an editable install), else the copy a wheel installs as
    package data in ``bringup/checklist/shipped/`` (in the tree, a link to ``checklists/``)."""
    package = Path(__file__).resolve().parents[1]  # bringup/
    tree = package.parent / "checklists"
    if (tree / "high-side-bootstrap.toml").is_file():
        return tree
    return package / "checklist" / "shipped"


def demo_board_path() -> Path:
    """Path of the shipped demo board, ``checklists/demo-board.toml``."""
    return checklists_dir() / "demo-board.toml"


def check_table(
    doc: TomlDocument, keys: tuple[str, ...], value: object, allowed: Mapping[str, bool]
) -> dict:
    """Check that ``value`` at ``keys`` is a table with the required keys and no unknown ones.

    ``allowed`` maps each key to True when it is required. Returns the table.
    """
    if not isinstance(value, dict):
        raise doc.error(keys, "must be a table")
    for key in value:
        if key not in allowed:
            known = ", ".join(sorted(allowed))
            raise doc.error((*keys, key), f"unknown key (expected one of: {known})")
    for key, required in allowed.items():
        if required and key not in value:
            raise doc.error(keys, f"missing key {key!r}")
    return value


def expect_str(doc: TomlDocument, keys: Iterable[str], value: object) -> str:
    """``value`` as a non-empty string, else a ``ConfigError`` at ``keys``."""
    keys = tuple(keys)
    if not isinstance(value, str) or not value.strip():
        raise doc.error(keys, "must be a non-empty string")
    return value


def read_quantity(doc: TomlDocument, keys: Iterable[str], value: object, unit: str) -> float:
    """Read a quantity (string or number) in ``unit`` ("" = plain ratio) to an SI float."""
    keys = tuple(keys)
    try:
        number, found = parse_quantity_unit(value, unit or None)  # type: ignore[arg-type]
    except InputError as exc:
        raise doc.error(keys, str(exc)) from None
    if not unit and found is not None:
        if found == "%":
            return number / 100.0
        raise doc.error(keys, f"must be a plain ratio, got a quantity in {found}")
    return number


def _load_target(doc: TomlDocument, tid: str, raw: object) -> Target:
    keys = ("targets", tid)
    table = check_table(doc, keys, raw, _TARGET_KEYS)
    label = expect_str(doc, (*keys, "label"), table["label"])
    unit_text = expect_str(doc, (*keys, "unit"), table["unit"])
    try:
        unit = canonical_unit(unit_text)
    except ValueError:
        raise doc.error((*keys, "unit"), f"unknown unit {unit_text!r}") from None
    rule = table["rule"]
    if rule not in RULES:
        raise doc.error((*keys, "rule"), f"rule must be one of {', '.join(RULES)}, got {rule!r}")
    if "min" not in table and "max" not in table:
        raise doc.error(keys, "needs a 'min', a 'max' or both")
    low = read_quantity(doc, (*keys, "min"), table["min"], unit) if "min" in table else None
    high = read_quantity(doc, (*keys, "max"), table["max"], unit) if "max" in table else None
    if low is not None and high is not None and low > high:
        raise doc.error((*keys, "min"), f"min {table['min']!r} is above max {table['max']!r}")
    u_unit = _UNCERTAINTY_UNIT.get(unit, unit)
    uncertainty = read_quantity(doc, (*keys, "uncertainty"), table["uncertainty"], u_unit)
    if uncertainty < 0:
        raise doc.error((*keys, "uncertainty"), "must not be negative")
    return Target(tid, label, unit, Limit(low, high, unit), uncertainty, rule)


def _unit_of(key: str) -> str:
    """The unit of a [design] key, a high-side or a half-bridge one."""
    return DESIGN_UNITS.get(key) or HALF_BRIDGE_UNITS.get(key, "")


def _range_text(key: str, unit: str) -> str:
    low, low_allowed, high = DESIGN_RANGES[key]
    show = unit or ""
    if key in ("ambient_temperature", "temperature_limit"):
        below = "above absolute zero (-273.15 degC)"
    elif low_allowed:
        below = f"at least {format_quantity(low, show)}"
    else:
        below = "positive" if low == 0 else f"above {format_quantity(low, show)}"
    return f"must be {below} and at most {format_quantity(high, show)}"


def _check_design(doc: TomlDocument, design: dict[str, float]) -> None:
    """Each [design] value within its physical range, and the values consistent."""
    for key, (low, low_allowed, high) in DESIGN_RANGES.items():
        if key not in design:
            continue  # a half-bridge key of a high-side board
        value = design[key]
        inside = math.isfinite(value) and (value >= low if low_allowed else value > low)
        if not inside or value > high:
            unit = _unit_of(key)
            shown = format_quantity(value, unit)
            raise doc.error(("design", key), f"{shown} is out of range: {_range_text(key, unit)}")

    def v(key: str) -> str:
        return format_quantity(design[key], _unit_of(key))

    d = design
    if not d["mosfet_threshold"] < d["mosfet_plateau"]:
        raise doc.error(("design", "mosfet_plateau"),
                        f"the Miller plateau {v('mosfet_plateau')} must be above the "
                        f"threshold mosfet_threshold = {v('mosfet_threshold')}")  # fmt: skip
    if not d["mosfet_plateau"] < d["gate_drive_voltage"]:
        raise doc.error(("design", "mosfet_plateau"),
                        f"the Miller plateau {v('mosfet_plateau')} must be below the gate drive "
                        f"gate_drive_voltage = {v('gate_drive_voltage')} (the gate never gets "
                        "past it)")  # fmt: skip
    for key in ("driver_uvlo_falling", "bootstrap_diode_drop"):
        if not d[key] < d["gate_drive_voltage"]:
            raise doc.error(("design", key),
                            f"{v(key)} must be below the gate drive gate_drive_voltage = "
                            f"{v('gate_drive_voltage')}")  # fmt: skip
    if d["mosfet_qgs"] + d["mosfet_qgd"] > d["mosfet_gate_charge"] * (1 + 1e-9):
        raise doc.error(("design", "mosfet_gate_charge"),
                        f"{v('mosfet_gate_charge')} is less than mosfet_qgs + mosfet_qgd "
                        f"({v('mosfet_qgs')} + {v('mosfet_qgd')}): the total gate charge "
                        "includes both")  # fmt: skip
    period = 1.0 / d["switching_frequency"]
    if d["on_time_max"] > period * (1 + 1e-9):
        raise doc.error(("design", "on_time_max"),
                        f"{v('on_time_max')} is longer than one switching period "
                        f"({format_quantity(period, 's')} at {v('switching_frequency')})")  # fmt: skip
    if "driver_uvlo_rising" in d and not (
        d["driver_uvlo_falling"] <= d["driver_uvlo_rising"] < d["gate_drive_voltage"]
    ):
        raise doc.error(("design", "driver_uvlo_rising"),
                        f"{v('driver_uvlo_rising')} must lie between the falling UVLO "
                        f"driver_uvlo_falling = {v('driver_uvlo_falling')} and the gate drive "
                        f"gate_drive_voltage = {v('gate_drive_voltage')}")  # fmt: skip
    if not d["temperature_limit"] > d["ambient_temperature"]:
        raise doc.error(("design", "temperature_limit"),
                        f"{v('temperature_limit')} must be above the ambient "
                        f"ambient_temperature = {v('ambient_temperature')}")  # fmt: skip


def _nested_repetition(pattern: str) -> bool:
    """True when ``pattern`` repeats a part that itself repeats, one of the two without bound
    (``(a+)+``, ``(\\w*-?)*``): the shape that backtracks exponentially on a near match.
    Bounded nesting such as ``([0-9]{2}-){3}`` is fine. Read from Python's own regex parser;
    where that is not available the check is skipped (the length cap still holds)."""
    try:
        from re import _constants as c
        from re import _parser as parser
    except ImportError:  # pragma: no cover - another Python
        return False
    repeats = {c.MAX_REPEAT, c.MIN_REPEAT, getattr(c, "POSSESSIVE_REPEAT", c.MAX_REPEAT)}

    def walk(items, outer_max: int | None) -> bool:
        for op, arg in items:
            if op in repeats:
                _, high, body = arg
                if outer_max is not None and high > 1:
                    if outer_max == c.MAXREPEAT or high == c.MAXREPEAT:
                        return True
                if walk(body, high if high > 1 else outer_max):
                    return True
            elif op is c.SUBPATTERN and walk(arg[-1], outer_max):
                return True
            elif op is c.BRANCH and any(walk(b, outer_max) for b in arg[1]):
                return True
            elif op in (c.ASSERT, c.ASSERT_NOT) and walk(arg[1], outer_max):
                return True
        return False

    return walk(parser.parse(pattern), None)


def _plain_text(doc: TomlDocument, keys: tuple[str, ...], value: str) -> str:
    """``value`` unless it holds a control character (a newline breaks the session header)."""
    bad = control_character(value)
    if bad is not None:
        raise doc.error(keys, f"contains the control character {bad} (one line of text)")
    return value


def board_from_document(doc: TomlDocument) -> Board:
    """Validate a parsed board file (see the module docstring for the format)."""
    data = check_table(doc, (), doc.data, _TOP_KEYS)
    schema = data["schema"]
    if not isinstance(schema, int) or isinstance(schema, bool) or schema < 1:
        raise doc.error(("schema",), f"must be a positive integer, got {schema!r}")
    if schema > BOARD_SCHEMA:
        raise doc.error(
            ("schema",), f"format {schema} is newer than this bringup reads ({BOARD_SCHEMA})"
        )
    board = check_table(doc, ("board",), data["board"], _BOARD_KEYS)
    name = _plain_text(doc, ("board", "name"), expect_str(doc, ("board", "name"), board["name"]))
    revision = board["revision"]
    if isinstance(revision, int) and not isinstance(revision, bool):
        revision = str(revision)
    revision = _plain_text(
        doc, ("board", "revision"), expect_str(doc, ("board", "revision"), revision)
    )
    pattern = expect_str(doc, ("board", "serial_pattern"), board["serial_pattern"])
    try:
        re.compile(pattern)
    except re.error as exc:
        raise doc.error(("board", "serial_pattern"), f"not a regular expression: {exc}") from None
    if _nested_repetition(pattern):
        raise doc.error(
            ("board", "serial_pattern"),
            "a repeated group that itself repeats (such as '(a+)+') can take exponential time "
            "on a serial that almost matches: keep the pattern simple ('^DHS24-[0-9]{4}$')",
        )
    description = board.get("description", "")
    if not isinstance(description, str):
        raise doc.error(("board", "description"), "must be a string")

    raw_design = check_table(doc, ("design",), data["design"],
                             dict.fromkeys(DESIGN_UNITS, True) | dict.fromkeys(HALF_BRIDGE_UNITS, False))  # fmt: skip
    half = [key for key in HALF_BRIDGE_UNITS if key in raw_design]
    if half and len(half) < len(HALF_BRIDGE_UNITS):
        lacking = next(key for key in HALF_BRIDGE_UNITS if key not in raw_design)
        raise doc.error(("design",), f"has the half-bridge key {half[0]!r} but lacks {lacking!r} "
                        "(a half-bridge board gives every one of them)")  # fmt: skip
    units = DESIGN_UNITS | {key: HALF_BRIDGE_UNITS[key] for key in half}
    design = {
        key: read_quantity(doc, ("design", key), raw_design[key], unit)
        for key, unit in units.items()
    }
    for key in ("duty_min", "duty_max"):
        if not 0.0 < design[key] < 1.0:
            raise doc.error(("design", key), "a duty cycle must lie between 0 and 1 (0 % - 100 %)")
    if design["duty_min"] > design["duty_max"]:
        raise doc.error(("design", "duty_min"), "duty_min is above duty_max")
    _check_design(doc, design)

    raw_targets = data["targets"]
    if not isinstance(raw_targets, dict) or not raw_targets:
        raise doc.error(("targets",), "must hold at least one [targets.ID] table")
    targets = {tid: _load_target(doc, tid, raw) for tid, raw in raw_targets.items()}
    return Board(
        name=name,
        revision=revision,
        serial_pattern=pattern,
        description=description,
        design=design,
        targets=targets,
        source=doc.data,
        path=doc.path,
        text=doc.text,
    )


#: Shipped board files by the name that addresses them (``--board demo-half-bridge``).
SHIPPED_BOARDS = {"demo": "demo-board.toml", "demo-half-bridge": "demo-half-bridge.toml"}


def load_board(path: str | Path) -> Board:
    """Load and validate a board file; ``"demo"`` names the shipped demo board and
    ``"demo-half-bridge"`` the shipped half-bridge one (``SHIPPED_BOARDS``).

    Raises ``ConfigError`` (one line: file, line, key, problem) on the first problem found:
    a missing or unknown key, a quantity that does not read in its unit, a min above its max,
    an unknown decision rule, an unreadable file.
    """
    if str(path) in SHIPPED_BOARDS:
        path = checklists_dir() / SHIPPED_BOARDS[str(path)]
    return board_from_document(read_toml(path))
