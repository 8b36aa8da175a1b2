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
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path

from bringup.analysis.quantities import canonical_unit, parse_quantity_unit
from bringup.analysis.verdict import RULES, Limit
from bringup.checklist.tomlfile import TomlDocument, read_toml
from bringup.errors import InputError

__all__ = [
    "Board",
    "Target",
    "DESIGN_UNITS",
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

    def check_serial(self, serial: str) -> None:
        """Raise ``InputError`` unless ``serial`` matches the board's serial pattern (fully)."""
        if not re.fullmatch(self.serial_pattern, serial):
            raise InputError(
                f"serial {serial!r} does not match the pattern {self.serial_pattern!r} "
                f"of board file {self.path}"
            )


def checklists_dir() -> Path:
    """The shipped checklist and demo board: the top-level ``checklists/`` folder beside the
    package in a source tree (or an editable install), else the copy a wheel installs as
    package data in ``bringup/checklist/shipped/`` (in the tree, a link to ``checklists/``)."""
    here = Path(__file__).resolve().parent
    tree = here.parents[1] / "checklists"
    if (tree / "high-side-bootstrap.toml").is_file():
        return tree
    return here / "shipped"


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
    name = expect_str(doc, ("board", "name"), board["name"])
    revision = board["revision"]
    if isinstance(revision, int) and not isinstance(revision, bool):
        revision = str(revision)
    revision = expect_str(doc, ("board", "revision"), revision)
    pattern = expect_str(doc, ("board", "serial_pattern"), board["serial_pattern"])
    try:
        re.compile(pattern)
    except re.error as exc:
        raise doc.error(("board", "serial_pattern"), f"not a regular expression: {exc}") from None
    description = board.get("description", "")
    if not isinstance(description, str):
        raise doc.error(("board", "description"), "must be a string")

    raw_design = check_table(doc, ("design",), data["design"], dict.fromkeys(DESIGN_UNITS, True))
    design = {
        key: read_quantity(doc, ("design", key), raw_design[key], unit)
        for key, unit in DESIGN_UNITS.items()
    }
    for key in ("duty_min", "duty_max"):
        if not 0.0 < design[key] < 1.0:
            raise doc.error(("design", key), "a duty cycle must lie between 0 and 1 (0 % - 100 %)")
    if design["duty_min"] > design["duty_max"]:
        raise doc.error(("design", "duty_min"), "duty_min is above duty_max")

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


def load_board(path: str | Path) -> Board:
    """Load and validate a board file; ``"demo"`` names the shipped demo board.

    Raises ``ConfigError`` (one line: file, line, key, problem) on the first problem found:
    a missing or unknown key, a quantity that does not read in its unit, a min above its max,
    an unknown decision rule, an unreadable file.
    """
    if str(path) == "demo":
        path = demo_board_path()
    return board_from_document(read_toml(path))
