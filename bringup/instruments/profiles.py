"""Command profiles: the SCPI text each driver operation sends, kept in editable TOML files.

A profile says, for one instrument kind (scope, supply, thermometer), the command template of
every operation (``{name}`` placeholders filled by the driver), the words the instrument uses
for ON/OFF, slopes and formats, the termination characters, the waveform block format, the
timeouts per operation (milliseconds) and the ``*IDN?`` pattern it fits. The drivers never
spell SCPI themselves: a user adapts ``bringup`` to their own instrument by copying a profile,
editing it and pointing ``--profiles DIR`` at its folder.

Every profile is checked on load: a missing operation, an unknown key, a placeholder the
operation does not have, a query template without ``?`` (or a command with one) gives a
``ConfigError`` naming the file, the key and the line.
"""

from __future__ import annotations

import os
import re
import string
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from bringup.errors import ConfigError
from bringup.tomlfile import TomlDocument, read_toml

BUILTIN_DIR = Path(__file__).resolve().parent.parent / "profiles"
KINDS = ("scope", "supply", "thermometer")


@dataclass(frozen=True)
class OperationSpec:
    """What a template must look like: its placeholders and whether it is a query."""

    fields: frozenset[str]
    query: bool


def _ops(spec: dict[str, str]) -> dict[str, OperationSpec]:
    """``"name": "? a b"`` -> query with fields a, b; ``"! a"`` -> command with field a."""
    out = {}
    for name, text in spec.items():
        marker, *fields = text.split()
        out[name] = OperationSpec(frozenset(fields), marker == "?")
    return out


_COMMON = {"identify": "?", "clear_status": "!", "error_query": "?", "operation_complete": "?"}

OPERATIONS: dict[str, dict[str, OperationSpec]] = {
    "scope": _ops(
        {
            **_COMMON,
            "channel_state": "! channel state",
            "coupling": "! channel coupling",
            "probe_ratio": "! channel ratio",
            "bandwidth_limit": "! channel state",
            "vertical_range": "! channel volts",
            "vertical_offset": "! channel volts",
            "record_duration": "! seconds",
            "record_points": "! points",
            "record_start": "! seconds",
            "sample_interval": "?",
            "trigger_source": "! source",
            "trigger_level": "! volts",
            "trigger_slope": "! slope",
            "arm": "!",
            "stop": "!",
            "math_expression": "! plus minus",
            "math_state": "! state",
            "data_format": "! format",
            "byte_order": "! order",
            "waveform_data": "? source",
            "waveform_preamble": "? source",
            "measure_mean": "? source",
            "measure_peak_to_peak": "? source",
        }
    ),
    "supply": _ops(
        {
            **_COMMON,
            "set_voltage": "! volts",
            "voltage_setpoint": "?",
            "set_current_limit": "! amps",
            "current_limit": "?",
            "set_ovp": "! volts",
            "ovp_level": "?",
            "ovp_tripped": "?",
            "ovp_clear": "!",
            "output": "! state",
            "output_state": "?",
            "measure_voltage": "?",
            "measure_current": "?",
            "regulation_status": "?",
        }
    ),
    "thermometer": _ops(
        {
            **_COMMON,
            "configure_sensor": "!",
            "temperature_unit": "! unit",
            "read_temperature": "?",
            "measure_voltage": "?",
        }
    ),
}

# Words: instrument spellings of values. A word may itself have placeholders.
WORDS: dict[str, dict[str, frozenset[str]]] = {
    "scope": {
        **{w: frozenset() for w in ("on", "off", "coupling_dc", "coupling_ac", "coupling_gnd")},
        **{w: frozenset() for w in ("slope_rising", "slope_falling", "math_source")},
        **{w: frozenset() for w in ("format_int8", "format_int16", "format_float32")},
        **{w: frozenset() for w in ("order_big", "order_little")},
        "channel_source": frozenset({"channel"}),
    },
    "supply": {"on": frozenset(), "off": frozenset()},
    "thermometer": {"unit_celsius": frozenset()},
}

# Operations an instrument may lack: a profile either gives a template or lists the operation
# in ``[profile] absent``; the driver then refuses it with ``faults.NotOffered``.
OPTIONAL: dict[str, frozenset[str]] = {
    "scope": frozenset({"stop", "measure_mean", "measure_peak_to_peak"}),
    "supply": frozenset(),
    "thermometer": frozenset(),
}

STATUS_BITS = {"supply": ("ovp_tripped_bit", "current_limit_bit")}
DATATYPES = {"int8": "i1", "int16": "i2", "float32": "f4"}
PREAMBLE_NAMES = ("points", "x_increment", "x_origin", "y_increment", "y_origin")
_SAMPLE = {
    "channel": 1,
    "state": "ON",
    "coupling": "DC",
    "ratio": 10.0,
    "volts": 1.5,
    "seconds": 1e-6,
    "points": 1000,
    "source": "CH1",
    "slope": "POS",
    "plus": 1,
    "minus": 2,
    "format": "INT,16",
    "order": "NORM",
    "amps": 0.5,
    "unit": "C",
}


@dataclass(frozen=True)
class BlockFormat:
    """How the scope sends waveform codes: numpy ``dtype`` string (``>i2``...) and preamble order."""

    datatype: str  # int8 | int16 | float32
    big_endian: bool
    preamble: tuple[str, ...]
    chunk_bytes: int

    @property
    def dtype(self) -> str:
        return (">" if self.big_endian else "<") + DATATYPES[self.datatype]


@dataclass(frozen=True)
class Profile:
    """One validated command profile. Build with ``load_profile``."""

    name: str
    kind: str
    path: Path
    description: str
    identity: re.Pattern[str]
    read_termination: str
    write_termination: str
    commands: Mapping[str, str]
    words: Mapping[str, str]
    default_timeout_ms: int
    timeouts_ms: Mapping[str, int]
    block: BlockFormat | None
    status_bits: Mapping[str, int]
    absent: frozenset[str] = frozenset()

    def has(self, operation: str) -> bool:
        """Whether the instrument offers ``operation`` (optional ones may be declared absent)."""
        return operation in self.commands

    def command(self, operation: str, **fields: Any) -> str:
        """The SCPI text of ``operation`` with its placeholders filled."""
        return self.commands[operation].format(**fields)

    def word(self, name: str, **fields: Any) -> str:
        """The instrument's spelling of a value (``on``, ``slope_rising``, ``channel_source``)."""
        return self.words[name].format(**fields)

    def timeout_ms(self, operation: str) -> int:
        """Timeout of ``operation`` in milliseconds (the profile's default if not listed)."""
        return self.timeouts_ms.get(operation, self.default_timeout_ms)

    def matches(self, identity: str) -> bool:
        """Whether an ``*IDN?`` answer fits this profile's pattern (regular expression search)."""
        return self.identity.search(identity) is not None


_TOP_KEYS = {"profile", "termination", "timeouts_ms", "commands", "words", "block", "status"}


def _table(src: TomlDocument, name: str, required: bool = True) -> dict[str, Any]:
    value = src.data.get(name)
    if value is None:
        if required:
            raise src.error((name,), f"missing table [{name}]")
        return {}
    if not isinstance(value, dict):
        raise src.error((name,), f"must be a table [{name}]")
    return value


def _string(src: TomlDocument, table: str, data: dict[str, Any], key: str) -> str:
    if key not in data:
        raise src.error((table, key), "missing")
    value = data[key]
    if not isinstance(value, str):
        raise src.error((table, key), f"must be a string, not {value!r}")
    return value


def _check_template(
    src: TomlDocument, table: str, key: str, template: str, fields: frozenset[str]
) -> None:
    try:
        used = {f for _, f, _, _ in string.Formatter().parse(template) if f is not None}
    except ValueError as exc:
        raise src.error((table, key), f"malformed template {template!r}: {exc}") from None
    unknown = used - fields
    if unknown:
        allowed = ", ".join(sorted(f"{{{f}}}" for f in fields)) or "none"
        raise src.error(
            (table, key),
            f"unknown placeholder {{{sorted(unknown)[0]}}} in {template!r} (allowed: {allowed})",
        )
    missing = fields - used
    if missing:
        raise src.error((table, key), f"template {template!r} lacks {{{sorted(missing)[0]}}}")
    try:
        template.format(**{f: _SAMPLE.get(f, "x") for f in fields})
    except (ValueError, IndexError, KeyError) as exc:
        raise src.error((table, key), f"malformed template {template!r}: {exc}") from None
    if not template.strip():
        raise src.error((table, key), "empty template")


def load_profile(path: Path) -> Profile:
    """Read and validate one profile file; raises ``ConfigError`` naming file, key and line."""
    src = read_toml(Path(path))
    for key in src.data:
        if key not in _TOP_KEYS:
            raise src.error(
                (key,), f"unknown table (expected one of {', '.join(sorted(_TOP_KEYS))})"
            )
    head = _table(src, "profile")
    for key in head:
        if key not in ("name", "kind", "description", "identity", "absent"):
            raise src.error(("profile", key), "unknown key")
    name = _string(src, "profile", head, "name")
    if name != src.path.stem:
        raise src.error(("profile", "name"), f"{name!r} must equal the file name {src.path.stem!r}")
    kind = _string(src, "profile", head, "kind")
    if kind not in KINDS:
        raise src.error(("profile", "kind"), f"{kind!r} is not one of {', '.join(KINDS)}")
    try:
        identity = re.compile(_string(src, "profile", head, "identity"))
    except re.error as exc:
        raise src.error(("profile", "identity"), f"not a valid regular expression: {exc}") from None

    term = _table(src, "termination")
    for key in term:
        if key not in ("read", "write"):
            raise src.error(("termination", key), "unknown key (read, write)")
    read_term = _string(src, "termination", term, "read")
    write_term = _string(src, "termination", term, "write")
    for key, value in (("read", read_term), ("write", write_term)):
        if len(value) != 1:
            raise src.error(("termination", key), f"must be one character, not {value!r}")

    specs = OPERATIONS[kind]
    absent = _absent(src, head, kind)
    commands = _table(src, "commands")
    for key, template in commands.items():
        if key not in specs:
            raise src.error(("commands", key), f"unknown operation for a {kind}")
        if key in absent:
            raise src.error(("commands", key), "is declared absent in [profile] absent")
        if not isinstance(template, str):
            raise src.error(("commands", key), f"must be a string, not {template!r}")
        spec = specs[key]
        _check_template(src, "commands", key, template, spec.fields)
        if spec.query and "?" not in template:
            raise src.error(("commands", key), f"is a query: {template!r} needs a '?'")
        if not spec.query and "?" in template:
            raise src.error(("commands", key), f"is a command, not a query: {template!r}")
    for key in specs:
        if key not in commands and key not in absent:
            hint = " (or list it in [profile] absent)" if key in OPTIONAL[kind] else ""
            raise src.error(("commands", key), f"missing operation{hint}")

    word_specs = WORDS[kind]
    words = _table(src, "words")
    for key, value in words.items():
        if key not in word_specs:
            raise src.error(("words", key), f"unknown word for a {kind}")
        if not isinstance(value, str):
            raise src.error(("words", key), f"must be a string, not {value!r}")
        _check_template(src, "words", key, value, word_specs[key])
    for key in word_specs:
        if key not in words:
            raise src.error(("words", key), "missing word")

    timeouts = _table(src, "timeouts_ms")
    for key, value in timeouts.items():
        if key != "default" and key not in specs:
            raise src.error(("timeouts_ms", key), "not an operation of this profile")
        if isinstance(value, bool) or not isinstance(value, int) or not 1 <= value <= 3_600_000:
            raise src.error(
                ("timeouts_ms", key), f"must be whole milliseconds 1..3600000, not {value!r}"
            )
    if "default" not in timeouts:
        raise src.error(("timeouts_ms", "default"), "missing")
    default_ms = timeouts["default"]

    block = _block(src, kind)
    bits = _status(src, kind)
    return Profile(
        name=name,
        kind=kind,
        path=src.path,
        description=str(head.get("description", "")),
        identity=identity,
        read_termination=read_term,
        write_termination=write_term,
        commands=dict(commands),
        words=dict(words),
        default_timeout_ms=default_ms,
        timeouts_ms={k: v for k, v in timeouts.items() if k != "default"},
        block=block,
        status_bits=bits,
        absent=absent,
    )


def _absent(src: TomlDocument, head: dict[str, Any], kind: str) -> frozenset[str]:
    """``[profile] absent``: the optional operations this instrument does not offer."""
    value = head.get("absent", [])
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise src.error(("profile", "absent"), "must be a list of operation names")
    for name in value:
        if name not in OPTIONAL[kind]:
            allowed = ", ".join(sorted(OPTIONAL[kind])) or "none"
            raise src.error(
                ("profile", "absent"),
                f"{name!r} is not an optional operation (allowed: {allowed})",
            )
    return frozenset(value)


def _block(src: TomlDocument, kind: str) -> BlockFormat | None:
    block = _table(src, "block", required=kind == "scope")
    if kind != "scope":
        if block:
            raise src.error(("block",), "only a scope profile has a [block] table")
        return None
    for key in block:
        if key not in ("datatype", "byte_order", "preamble", "chunk_bytes"):
            raise src.error(("block", key), "unknown key")
    datatype = _string(src, "block", block, "datatype")
    if datatype not in DATATYPES:
        raise src.error(("block", "datatype"), f"{datatype!r} is not one of {', '.join(DATATYPES)}")
    order = _string(src, "block", block, "byte_order")
    if order not in ("big", "little"):
        raise src.error(("block", "byte_order"), f"{order!r} must be 'big' or 'little'")
    preamble = block.get("preamble")
    if preamble is None:
        raise src.error(("block", "preamble"), "missing")
    if not isinstance(preamble, list) or not all(isinstance(p, str) for p in preamble):
        raise src.error(("block", "preamble"), "must be a list of field names")
    for needed in PREAMBLE_NAMES:
        if preamble.count(needed) != 1:
            raise src.error(("block", "preamble"), f"must name {needed!r} exactly once")
    for extra in preamble:
        if extra not in PREAMBLE_NAMES and extra != "ignore":
            raise src.error(("block", "preamble"), f"unknown field {extra!r} (or 'ignore')")
    chunk = block.get("chunk_bytes", 1 << 22)
    if isinstance(chunk, bool) or not isinstance(chunk, int) or not 4096 <= chunk <= 1 << 28:
        raise src.error(("block", "chunk_bytes"), f"must be bytes 4096..268435456, not {chunk!r}")
    return BlockFormat(datatype, order == "big", tuple(preamble), chunk)


def _status(src: TomlDocument, kind: str) -> dict[str, int]:
    status = _table(src, "status", required=kind in STATUS_BITS)
    names = STATUS_BITS.get(kind, ())
    if not names and status:
        raise src.error(("status",), f"a {kind} profile has no [status] table")
    for key, value in status.items():
        if key not in names:
            raise src.error(("status", key), "unknown key")
        if isinstance(value, bool) or not isinstance(value, int) or not 0 <= value <= 15:
            raise src.error(("status", key), f"must be a bit number 0..15, not {value!r}")
    for key in names:
        if key not in status:
            raise src.error(("status", key), "missing")
    return dict(status)


PROFILES_ENV = "BRINGUP_PROFILES"


def profile_dirs(user_dir: Path | None) -> list[Path]:
    """Folders searched for profiles: the user's first (their copies win), then the built-in.

    Without an explicit ``user_dir`` (``--profiles DIR``), the folder named by the environment
    variable ``BRINGUP_PROFILES`` is the user's: that reaches every command that opens a bench
    (``run``, ``resume``, the notebook), not only ``bringup instruments``.
    """
    if user_dir is None and os.environ.get(PROFILES_ENV):
        user_dir = Path(os.environ[PROFILES_ENV])
    dirs = [Path(user_dir)] if user_dir is not None else []
    return [*dirs, BUILTIN_DIR]


def find_profile(name: str, user_dir: Path | None = None) -> Profile:
    """The profile called ``name`` (file ``<name>.toml``) from the user's folder or the built-in."""
    folders = profile_dirs(user_dir)
    if len(folders) > 1 and not folders[0].is_dir():
        where = "" if user_dir is not None else f" (from {PROFILES_ENV})"
        raise ConfigError(folders[0], None, f"profile folder not found{where}")
    for folder in folders:
        candidate = folder / f"{name}.toml"
        if candidate.is_file():
            return load_profile(candidate)
    searched = ", ".join(str(d) for d in profile_dirs(user_dir))
    raise ConfigError(name, None, f"no profile of that name in {searched}")


def all_profiles(user_dir: Path | None = None) -> dict[str, Profile]:
    """Every profile found, by name (the user's folder shadows built-in names)."""
    found: dict[str, Profile] = {}
    for folder in reversed(profile_dirs(user_dir)):
        if folder.is_dir():
            for path in sorted(folder.glob("*.toml")):
                found[path.stem] = load_profile(path)
    return found


def matching_profiles(identity: str, profiles: Iterable[Profile]) -> list[str]:
    """Names of the profiles whose ``*IDN?`` pattern fits ``identity``."""
    return [p.name for p in profiles if p.matches(identity)]
