"""Command profiles: the SCPI text each driver operation sends, kept in editable TOML files.

A profile says, for one instrument kind (scope, supply, thermometer), the command template of
every operation (``{name}`` placeholders filled by the driver), the words the instrument uses
for values (ON/OFF, slopes, formats) and the words its replies mean, the termination
characters, how it reports errors, how its waveform records are coded and scaled, how an
acquisition is known to be complete, the timeouts per operation (milliseconds) and the
``*IDN?`` pattern it fits. The drivers never spell SCPI themselves: a user adapts ``bringup``
to their own instrument by copying a profile, editing it and pointing ``--profiles DIR`` at
its folder. No profile runs code: every transform is one of a small declared set (a field, a
sum of fields, a constant or one query for each term of the scale; a fixed vocabulary of
derived placeholders such as ``{volts_per_div}``).

Every profile is checked on load: a missing operation, an unknown key, a placeholder the
operation does not have, a query template without ``?`` (or a command with one) gives a
``ConfigError`` naming the file, the key and the line. ``SCHEMA`` lists every key the loader
knows (``bringup/profiles/README.md`` documents each; a test keeps the two in step).
"""

from __future__ import annotations

import math
import os
import re
import string
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from bringup.errors import ConfigError
from bringup.tomlfile import TomlDocument, read_toml

BUILTIN_DIR = Path(__file__).resolve().parent.parent / "profiles"
KINDS = ("scope", "supply", "thermometer")


@dataclass(frozen=True)
class OperationSpec:
    """What a template must look like: placeholder groups of which each needs one member
    used (``volts|volts_per_div``), optional placeholders, and whether it is a query."""

    groups: tuple[frozenset[str], ...]
    optional: frozenset[str]
    query: bool

    @property
    def fields(self) -> frozenset[str]:
        """Every placeholder the template may use."""
        return frozenset().union(*self.groups, self.optional)


def _ops(spec: dict[str, str], may: tuple[str, ...] = ()) -> dict[str, OperationSpec]:
    """``"? a b|c [d]"`` -> a query needing ``{a}`` and one of ``{b}``/``{c}``, ``{d}`` optional;
    ``"! a"`` -> a command needing ``{a}``.

    ``may``: placeholders every operation of the kind may use (``{channel}`` on a supply),
    except the IEEE 488.2 common ones, which address the whole instrument."""
    out = {}
    for name, text in spec.items():
        marker, *tokens = text.split()
        groups = tuple(frozenset(t.split("|")) for t in tokens if not t.startswith("["))
        optional = frozenset(t.strip("[]") for t in tokens if t.startswith("["))
        if name not in _COMMON:
            optional |= frozenset(may) - frozenset().union(*groups)
        out[name] = OperationSpec(groups, optional, marker == "?")
    return out


_COMMON = {
    "identify": "?",
    "clear_status": "!",
    "error_query": "?",
    "error_detail": "?",
    "operation_complete": "?",
    "prepare": "!",
}

# Placeholders every operation of a kind may use (the common ones excepted): the channel the
# bench file names, its position, and the thermocouple type.
MAY: dict[str, tuple[str, ...]] = {
    "scope": (),
    "supply": ("channel", "channel_number"),
    "thermometer": ("channel", "channel_number", "tc_type"),
}

OPERATIONS: dict[str, dict[str, OperationSpec]] = {
    "scope": _ops(
        {
            **_COMMON,
            "channel_state": "! channel state",
            "coupling": "! channel coupling",
            "probe_ratio": "! channel ratio|gain",
            "bandwidth_limit": "! channel state",
            "vertical_range": "! channel volts|volts_per_div",
            "vertical_offset": "! channel volts|position_div|shift_volts",
            "record_duration": "! seconds|seconds_per_div",
            "record_points": "! points",
            "record_start": "! seconds|centre_seconds|pretrigger_percent",
            "sample_interval": "?",
            "trigger_source": "! source [channel]",
            "trigger_level": "! volts [source] [channel]",
            "trigger_slope": "! slope",
            "arm": "!",
            "acquisition_state": "?",
            "stop": "!",
            "math_expression": "! plus minus",
            "math_state": "! state",
            "data_source": "! source|channel",
            "data_format": "! format",
            "byte_order": "! order",
            "data_range": "! first last",
            "waveform_data": "? [source] [channel]",
            "waveform_preamble": "? [source] [channel]",
            "measure_mean": "? source|channel",
            "measure_peak_to_peak": "? source|channel",
        }
    ),
    "supply": _ops(
        {
            **_COMMON,
            "select_channel": "! channel",
            "set_voltage": "! volts",
            "voltage_setpoint": "?",
            "set_current_limit": "! amps",
            "current_limit": "?",
            "apply": "! volts amps",
            "set_ovp": "! volts",
            "ovp_level": "?",
            "ovp_tripped": "?",
            "ovp_clear": "!",
            "set_ocp": "! amps",
            "ocp_level": "?",
            "ovp_enable": "! state",
            "ovp_enabled": "?",
            "ocp_enable": "! state",
            "ocp_enabled": "?",
            "ocp_tripped": "?",
            "ocp_clear": "!",
            "sense": "! sense",
            "sense_state": "?",
            "output": "! state",
            "output_state": "?",
            "measure_voltage": "?",
            "measure_current": "?",
            "regulation_status": "?",
            "regulation_mode": "?",
        },
        may=MAY["supply"],
    ),
    "thermometer": _ops(
        {
            **_COMMON,
            "configure_sensor": "!",
            "reference_junction": "! reference",
            "temperature_unit": "! unit",
            "read_temperature": "?",
            "measure_voltage": "?",
        },
        may=MAY["thermometer"],
    ),
}

# Operations an instrument may lack: a profile either gives a template or lists the operation
# in ``[profile] absent``; the driver then refuses it with ``faults.NotOffered`` (and the
# runner says so before anything is energised). ``error_detail``, ``prepare``,
# ``acquisition_state``, ``data_source`` and ``data_range`` are simply left out when unused.
OPTIONAL: dict[str, frozenset[str]] = {
    "scope": frozenset(
        {
            "stop",
            "measure_mean",
            "measure_peak_to_peak",
            "math_expression",
            "math_state",
            "bandwidth_limit",
            "byte_order",
            "data_format",
            "sample_interval",
            "waveform_preamble",
        }
    ),
    "supply": frozenset(
        {
            "select_channel",
            "set_voltage",
            "set_current_limit",
            "apply",
            "set_ocp",
            "ocp_level",
            "ovp_enable",
            "ovp_enabled",
            "ocp_enable",
            "ocp_enabled",
            "ocp_tripped",
            "ocp_clear",
            "sense",
            "sense_state",
            "regulation_status",
            "regulation_mode",
        }
    ),
    "thermometer": frozenset({"reference_junction"}),
}
GROUPS: dict[str, tuple[tuple[str, ...], ...]] = {
    "supply": (
        ("set_ocp", "ocp_level"),
        ("ovp_enable", "ovp_enabled"),
        ("ocp_enable", "ocp_enabled"),
        ("sense", "sense_state"),
    ),
}
# Each tuple: at least one of these must be offered (the others may be absent).
ONE_OF: dict[str, tuple[tuple[str, ...], ...]] = {
    "supply": (
        ("regulation_status", "regulation_mode"),
        ("set_voltage", "apply"),
        ("set_current_limit", "apply"),
    ),
}
# OCP: with a level or an enable switch, the trip state and its reset come too.
NEEDS: dict[str, dict[str, tuple[str, ...]]] = {
    "supply": {
        "set_ocp": ("ocp_tripped", "ocp_clear"),
        "ocp_enable": ("ocp_tripped", "ocp_clear"),
        "ocp_tripped": ("ocp_clear",),
        "ocp_clear": ("ocp_tripped",),
    },
}

UNDECLARED = frozenset(
    {"error_detail", "prepare", "acquisition_state", "data_source", "data_range"}
)

# Words: instrument spellings of values. A word may itself have placeholders. Words marked
# optional fall back as noted in ``Profile.word``.
WORDS: dict[str, dict[str, frozenset[str]]] = {
    "scope": {
        **{w: frozenset() for w in ("on", "off", "coupling_dc", "coupling_ac")},
        **{w: frozenset() for w in ("slope_rising", "slope_falling")},
        "channel_source": frozenset({"channel"}),
        **{w: frozenset() for w in ("coupling_gnd", "math_source", "bandwidth_on")},
        **{w: frozenset() for w in ("bandwidth_off", "order_big", "order_little")},
        **{f"format_{d}": frozenset() for d in ("int8", "uint8", "int16", "uint16")},
        **{f"format_{d}": frozenset() for d in ("float32", "ascii")},
    },
    "supply": {"on": frozenset(), "off": frozenset()},
    "thermometer": {"unit_celsius": frozenset()},
}
OPTIONAL_WORDS = frozenset(
    {"coupling_gnd", "math_source", "bandwidth_on", "bandwidth_off", "order_big", "order_little"}
    | {f"format_{d}" for d in ("int8", "uint8", "int16", "uint16", "float32", "ascii")}
)

# Queries answered in words rather than numbers, and what each word may mean. Boolean queries
# know 1/0/ON/OFF (and +1/+0) unless the profile maps other words in ``[replies.<query>]``.
REPLY_MEANINGS: dict[str, dict[str, frozenset[str] | type]] = {
    "supply": {
        "output_state": bool,
        "ovp_tripped": bool,
        "ocp_tripped": bool,
        "ocp_enabled": bool,
        "ovp_enabled": bool,
        "sense_state": frozenset({"remote", "local"}),
        "regulation_mode": frozenset({"cv", "cc", "unregulated", "off"}),
    },
    "thermometer": {},
    "scope": {},
}
DEFAULT_BOOL_WORDS = {"1": True, "0": False, "ON": True, "OFF": False, "+1": True, "+0": False}

# Words a profile needs only when it offers the operation that sends them.
WORDS_IF: dict[str, dict[str, str]] = {
    "supply": {"sense_remote": "sense", "sense_local": "sense"},
    "thermometer": {"reference_internal": "reference_junction"},
}

STATUS_BITS = {"supply": ("ovp_tripped_bit", "current_limit_bit")}
DATATYPES = {
    "int8": "i1",
    "uint8": "u1",
    "int16": "i2",
    "uint16": "u2",
    "float32": "f4",
    "ascii": "f8",
}
SCALE_TERMS = ("points", "code_offset", "y_step", "y_zero", "x_ref", "x_step", "x_zero")
_SCALE_DEFAULTS = {"code_offset": 0.0, "y_zero": 0.0, "x_ref": 0.0, "x_zero": 0.0}
TERMINATIONS = ("\n", "\r\n", "\r")
_SAMPLE = {
    "channel": 1,
    "state": "ON",
    "coupling": "DC",
    "ratio": 10.0,
    "gain": 0.1,
    "volts": 1.5,
    "volts_per_div": 0.2,
    "position_div": -1.0,
    "shift_volts": -1.5,
    "seconds": 1e-6,
    "seconds_per_div": 1e-7,
    "centre_seconds": 5e-7,
    "pretrigger_percent": 10.0,
    "points": 1000,
    "source": "CH1",
    "slope": "POS",
    "plus": 1,
    "minus": 2,
    "format": "INT,16",
    "order": "NORM",
    "first": 1,
    "last": 1000,
    "amps": 0.5,
    "unit": "C",
    "sense": "EXT",
    "reference": "INT",
    "tc_type": "K",
    "channel_number": 2,
}

#: Every table and key the loader knows, for the README check. ``<operation>`` stands for the
#: kind's operations, ``<word>`` for its words.
SCHEMA: dict[str, tuple[str, ...]] = {
    "profile": (
        "name",
        "kind",
        "description",
        "identity",
        "absent",
        "echoes_headers",
    ),
    "termination": ("read", "write"),
    "timeouts_ms": ("default", "<operation>"),
    "commands": ("<operation>",),
    "words": ("<word>",),
    "replies": ("<operation>",),
    "channels": ("count", "names"),
    "numbers": ("units",),
    "errors": ("style", "mask"),
    "status": STATUS_BITS["supply"],
    "screen": ("vertical_divisions", "horizontal_divisions"),
    "block": (
        "datatype",
        "byte_order",
        "chunk_bytes",
        "page_points",
        "pipeline",
        "code_min",
        "code_max",
    ),
    "preamble": ("separator", "fields"),
    "scale": SCALE_TERMS,
    "acquire": ("completion", "done", "poll_interval_ms", "timeout_ms"),
    "checks": ("tolerance",),
}
_SCOPE_ONLY = ("screen", "block", "preamble", "scale", "acquire", "checks")


@dataclass(frozen=True)
class ScaleTerm:
    """One term of the scale: a constant, the sum of preamble fields, or one query."""

    constant: float | None = None
    fields: tuple[str, ...] = ()
    query: str | None = None

    def describe(self) -> str:
        if self.fields:
            return " + ".join(self.fields)
        if self.query is not None:
            return f"query {self.query!r}"
        return f"{self.constant:g}"


@dataclass(frozen=True)
class BlockFormat:
    """How the scope sends waveform codes and how codes become volts and seconds.

    volts = (code - code_offset) * y_step + y_zero; seconds = (index - x_ref) * x_step +
    x_zero, each term from ``scale``. ``datatype`` ``ascii`` means a reply of numbers."""

    datatype: str  # int8 | uint8 | int16 | uint16 | float32 | ascii
    big_endian: bool
    chunk_bytes: int
    page_points: int | None
    pipeline: bool
    code_min: float
    code_max: float
    preamble_separator: str
    preamble_fields: tuple[str, ...]
    preamble_open: bool  # further fields after the declared ones are ignored
    scale: Mapping[str, ScaleTerm]
    tolerance: float

    @property
    def dtype(self) -> str:
        return (">" if self.big_endian else "<") + DATATYPES[self.datatype]

    @property
    def binary(self) -> bool:
        return self.datatype != "ascii"


@dataclass(frozen=True)
class AcquireRule:
    """How an armed acquisition is known to be complete: ``*OPC?`` answering 1, or polling
    ``acquisition_state?`` every ``poll_interval_ms`` until its reply is one of ``done``,
    for at most ``timeout_ms``."""

    completion: str  # "opc" | "poll"
    done: tuple[str, ...]
    poll_interval_ms: int
    timeout_ms: int


@dataclass(frozen=True)
class ChannelSet:
    """``[channels]``: how many outputs or inputs the instrument has and, where the instrument
    names them (``P25V``, ``101``), the word each is sent as; ``{channel}`` is filled with it,
    ``{channel_number}`` with its position (1 first)."""

    count: int
    names: tuple[str, ...] = ()

    def text(self, channel: int | str) -> str:
        """The spelling of ``channel`` (a number 1..count, or one of ``names``) in a command."""
        if self.names:
            return str(channel)
        return str(int(channel))

    def number(self, channel: int | str) -> int:
        """The position of ``channel`` among the instrument's channels, 1 first (for node
        suffixes such as ``SOURce2`` where the instrument names its outputs ``CH2``)."""
        if self.names:
            return self.names.index(str(channel)) + 1
        return int(channel)

    def accepts(self, channel: int | str) -> bool:
        """Whether a bench file's ``channel`` names one of these."""
        if self.names:
            return str(channel) in self.names
        return isinstance(channel, int) and 1 <= channel <= self.count

    def describe(self) -> str:
        return ", ".join(self.names) if self.names else f"1..{self.count}"


@dataclass(frozen=True)
class NumberFormat:
    """``[numbers]``: the units that may follow a number in a reply (``C``, ``VDC``). A header
    echoed before it is ``[profile] echoes_headers``, for every reply."""

    units: tuple[str, ...] = ()

    def number_text(self, reply: str) -> str | None:
        """The number's text of ``reply`` with a declared unit removed (anything else is left
        for the caller to report)."""
        text = reply.strip()
        for unit in sorted(self.units, key=len, reverse=True):
            if text.upper().endswith(unit.upper()):
                text = text[: len(text) - len(unit)].strip()
                break
        return text


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
    commands: Mapping[str, tuple[str, ...]]
    words: Mapping[str, str]
    default_timeout_ms: int
    timeouts_ms: Mapping[str, int]
    block: BlockFormat | None
    status_bits: Mapping[str, int]
    absent: frozenset[str] = frozenset()
    channels: ChannelSet | None = None
    echoes_headers: bool = False
    replies: Mapping[str, Mapping[str, Any]] = field(default_factory=dict)
    numbers: NumberFormat = field(default_factory=lambda: NumberFormat())
    error_style: str = "queue"
    error_mask: int = 0x3C
    vertical_divisions: int = 8
    horizontal_divisions: int = 10
    acquire: AcquireRule | None = None

    def has(self, operation: str) -> bool:
        """Whether the instrument offers ``operation`` (optional ones may be declared absent)."""
        return operation in self.commands

    def uses_channel(self, operation: str) -> bool:
        """Whether ``operation``'s template names ``{channel}`` (the channel as an argument or
        a node suffix)."""
        return any("{channel" in line for line in self.commands.get(operation, ()))

    @property
    def channel_count(self) -> int:
        """How many channels (``[channels] count``; a scope without the table has 4)."""
        return self.channels.count if self.channels is not None else 4

    def lines(self, operation: str, **fields: Any) -> list[str]:
        """The SCPI lines of ``operation`` (most have one; a sequence has several, and a
        query's last line is the query) with their placeholders filled."""
        return [template.format(**fields) for template in self.commands[operation]]

    def command(self, operation: str, **fields: Any) -> str:
        """The SCPI text of ``operation`` with its placeholders filled (lines joined by
        `` ; `` for a sequence: for messages)."""
        return " ; ".join(self.lines(operation, **fields))

    def word(self, name: str, **fields: Any) -> str:
        """The instrument's spelling of a value (``on``, ``slope_rising``, ``channel_source``).

        ``bandwidth_on``/``bandwidth_off`` fall back to ``on``/``off``."""
        if name not in self.words and name in ("bandwidth_on", "bandwidth_off"):
            name = name.removeprefix("bandwidth_")
        return self.words[name].format(**fields)

    def has_word(self, name: str) -> bool:
        return name in self.words

    def reply_meaning(self, operation: str, reply: str) -> Any:
        """What a worded reply of ``operation`` means (``True``/``False`` for a boolean query,
        ``"cv"``, ``"remote"``...), or ``None`` when the profile does not describe it.
        Compared without case."""
        word = reply.strip().strip('"').strip()
        mapped = self.replies.get(operation, {})
        for key, meaning in mapped.items():
            if key.upper() == word.upper():
                return meaning
        if REPLY_MEANINGS.get(self.kind, {}).get(operation) is bool:
            return DEFAULT_BOOL_WORDS.get(word.upper())
        return None

    def timeout_ms(self, operation: str) -> int:
        """Timeout of ``operation`` in milliseconds (the profile's default if not listed)."""
        return self.timeouts_ms.get(operation, self.default_timeout_ms)

    def matches(self, identity: str) -> bool:
        """Whether an ``*IDN?`` answer fits this profile's pattern (regular expression search)."""
        return self.identity.search(identity) is not None


def _table(src: TomlDocument, name: str, required: bool = True) -> dict[str, Any]:
    value = src.data.get(name)
    if value is None:
        if required:
            raise src.error((name,), f"missing table [{name}]")
        return {}
    if not isinstance(value, dict):
        raise src.error((name,), f"must be a table [{name}]")
    return value


def _keys(src: TomlDocument, table: str, data: dict[str, Any], allowed: Iterable[str]) -> None:
    allowed = tuple(allowed)
    for key in data:
        if key not in allowed:
            raise src.error((table, key), f"unknown key (expected {', '.join(allowed)})")


def _string(src: TomlDocument, table: str, data: dict[str, Any], key: str) -> str:
    if key not in data:
        raise src.error((table, key), "missing")
    value = data[key]
    if not isinstance(value, str):
        raise src.error((table, key), f"must be a string, not {value!r}")
    return value


def _int(
    src: TomlDocument, table: str, data: dict[str, Any], key: str, default: int, lo: int, hi: int
) -> int:
    value = data.get(key, default)
    if isinstance(value, bool) or not isinstance(value, int) or not lo <= value <= hi:
        raise src.error((table, key), f"must be a whole number {lo}..{hi}, not {value!r}")
    return value


def _used(src: TomlDocument, table: str, key: str, template: str) -> set[str]:
    if not template.strip():
        raise src.error((table, key), "empty template")
    try:
        return {f for _, f, _, _ in string.Formatter().parse(template) if f is not None}
    except ValueError as exc:
        raise src.error((table, key), f"malformed template {template!r}: {exc}") from None


def _check_template(
    src: TomlDocument, table: str, key: str, templates: list[str], spec: OperationSpec
) -> None:
    """The placeholders of ``templates`` (one operation's lines) against ``spec``."""
    used: set[str] = set()
    for template in templates:
        used |= _used(src, table, key, template)
    shown = templates[0] if len(templates) == 1 else templates
    unknown = used - spec.fields
    if unknown:
        allowed = ", ".join(sorted(f"{{{f}}}" for f in spec.fields)) or "none"
        raise src.error(
            (table, key),
            f"unknown placeholder {{{sorted(unknown)[0]}}} in {shown!r} (allowed: {allowed})",
        )
    for group in spec.groups:
        if not used & group:
            names = " or ".join(f"{{{f}}}" for f in sorted(group))
            raise src.error((table, key), f"template {shown!r} lacks {names}")
    for template in templates:
        try:
            template.format(**{f: _SAMPLE.get(f, "x") for f in spec.fields})
        except (ValueError, IndexError, KeyError) as exc:
            raise src.error((table, key), f"malformed template {template!r}: {exc}") from None


def _commands(src: TomlDocument, kind: str, absent: frozenset[str]) -> dict[str, tuple[str, ...]]:
    specs = OPERATIONS[kind]
    commands = _table(src, "commands")
    out: dict[str, tuple[str, ...]] = {}
    for key, value in commands.items():
        if key not in specs:
            raise src.error(("commands", key), f"unknown operation for a {kind}")
        if key in absent:
            raise src.error(("commands", key), "is declared absent in [profile] absent")
        templates = [value] if isinstance(value, str) else value
        if (
            not isinstance(templates, list)
            or not templates
            or not all(isinstance(t, str) for t in templates)
        ):
            raise src.error(
                ("commands", key), f"must be a string or a list of strings, not {value!r}"
            )
        spec = specs[key]
        _check_template(src, "commands", key, templates, spec)
        *before, last = templates
        if spec.query and "?" not in last:
            raise src.error(("commands", key), f"is a query: {last!r} needs a '?'")
        for line in before if spec.query else templates:
            if "?" in line.replace('"?"', ""):
                what = "a command before the query" if spec.query else "a command, not a query"
                raise src.error(("commands", key), f"is {what}: {line!r}")
        out[key] = tuple(templates)
    for key in specs:
        if key not in out and key not in absent and key not in UNDECLARED:
            hint = " (or list it in [profile] absent)" if key in OPTIONAL[kind] else ""
            raise src.error(("commands", key), f"missing operation{hint}")
    return out


def load_profile(path: Path) -> Profile:
    """Read and validate one profile file; raises ``ConfigError`` naming file, key and line."""
    src = read_toml(Path(path))
    head, name, kind, identity, echoes = _profile_head(src)
    read_term, write_term = _terminations(src)

    absent = _absent(src, head, kind)
    commands = _commands(src, kind, absent)
    _check_groups(src, kind, commands)
    words = _words(src, kind, commands)
    default_ms, op_ms = _timeouts(src, kind)
    style, mask = _errors(src, commands)
    screen = _table(src, "screen", required=False)
    _keys(src, "screen", screen, SCHEMA["screen"])
    block = _block(src, kind, commands)
    if kind == "scope":
        _needed_words(src, commands, words, block)
    return Profile(
        name=name,
        kind=kind,
        path=src.path,
        description=str(head.get("description", "")),
        identity=identity,
        read_termination=read_term,
        write_termination=write_term,
        commands=commands,
        words=words,
        default_timeout_ms=default_ms,
        timeouts_ms=op_ms,
        block=block,
        status_bits=_status(src, kind, commands),
        absent=absent,
        channels=_channels(src, kind, commands),
        echoes_headers=echoes,
        replies=_replies(src, kind, commands),
        numbers=_numbers(src),
        error_style=style,
        error_mask=mask,
        vertical_divisions=_int(src, "screen", screen, "vertical_divisions", 8, 1, 100),
        horizontal_divisions=_int(src, "screen", screen, "horizontal_divisions", 10, 1, 100),
        acquire=_acquire(src, kind, commands, op_ms.get("operation_complete", default_ms)),
    )


def _profile_head(src: TomlDocument) -> tuple[dict[str, Any], str, str, re.Pattern[str], bool]:
    """``[profile]``: (the table, name, kind, identity pattern, echoes_headers), checked, and
    the file's tables checked against the kind."""
    head = _table(src, "profile")
    for key in src.data:
        if key not in SCHEMA:
            raise src.error((key,), f"unknown table (expected one of {', '.join(SCHEMA)})")
    _keys(src, "profile", head, SCHEMA["profile"])
    name = _string(src, "profile", head, "name")
    if name != src.path.stem:
        raise src.error(("profile", "name"), f"{name!r} must equal the file name {src.path.stem!r}")
    kind = _string(src, "profile", head, "kind")
    if kind not in KINDS:
        raise src.error(("profile", "kind"), f"{kind!r} is not one of {', '.join(KINDS)}")
    for table in _SCOPE_ONLY:
        if kind != "scope" and table in src.data:
            raise src.error((table,), f"only a scope profile has a [{table}] table")
    try:
        identity = re.compile(_string(src, "profile", head, "identity"))
    except re.error as exc:
        raise src.error(("profile", "identity"), f"not a valid regular expression: {exc}") from None
    echoes = head.get("echoes_headers", False)
    if not isinstance(echoes, bool):
        raise src.error(("profile", "echoes_headers"), f"must be true or false, not {echoes!r}")
    return head, name, kind, identity, echoes


def _terminations(src: TomlDocument) -> tuple[str, str]:
    """``[termination]``: (read, write), each one of ``TERMINATIONS``."""
    term = _table(src, "termination")
    _keys(src, "termination", term, SCHEMA["termination"])
    read_term = _string(src, "termination", term, "read")
    write_term = _string(src, "termination", term, "write")
    for key, value in (("read", read_term), ("write", write_term)):
        if value not in TERMINATIONS:
            raise src.error(
                ("termination", key), f'must be "\\n", "\\r\\n" or "\\r", not {value!r}'
            )
    return read_term, write_term


def _timeouts(src: TomlDocument, kind: str) -> tuple[int, dict[str, int]]:
    """``[timeouts_ms]``: (the default, the per-operation timeouts), whole milliseconds."""
    timeouts = _table(src, "timeouts_ms")
    for key, value in timeouts.items():
        if key != "default" and key not in OPERATIONS[kind]:
            raise src.error(("timeouts_ms", key), "not an operation of this profile")
        if isinstance(value, bool) or not isinstance(value, int) or not 1 <= value <= 3_600_000:
            raise src.error(
                ("timeouts_ms", key), f"must be whole milliseconds 1..3600000, not {value!r}"
            )
    if "default" not in timeouts:
        raise src.error(("timeouts_ms", "default"), "missing")
    default_ms = timeouts["default"]
    op_ms = {k: v for k, v in timeouts.items() if k != "default"}
    return default_ms, op_ms


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


def _words(src: TomlDocument, kind: str, commands: Mapping[str, tuple[str, ...]]) -> dict[str, str]:
    word_specs = WORDS[kind]
    conditional = WORDS_IF.get(kind, {})
    words = _table(src, "words")
    for key, value in words.items():
        if key not in word_specs and key not in conditional:
            raise src.error(("words", key), f"unknown word for a {kind}")
        if key in conditional and conditional[key] not in commands:
            raise src.error(
                ("words", key), f"only with the operation {conditional[key]!r}, which is absent"
            )
        if not isinstance(value, str):
            raise src.error(("words", key), f"must be a string, not {value!r}")
        fields = word_specs.get(key, frozenset())
        spec = OperationSpec(tuple(frozenset({f}) for f in fields), frozenset(), False)
        _check_template(src, "words", key, [value], spec)
    for key in word_specs:
        if key not in words and key not in OPTIONAL_WORDS:
            raise src.error(("words", key), "missing word")
    for key, operation in conditional.items():
        if operation in commands and key not in words:
            raise src.error(("words", key), f"missing word (the operation {operation!r} sends it)")
    return dict(words)


def _needed_words(
    src: TomlDocument,
    commands: Mapping[str, tuple[str, ...]],
    words: Mapping[str, str],
    block: BlockFormat | None,
) -> None:
    """The words an offered operation needs (a format word for the block's datatype...)."""
    needed = []
    if "math_state" in commands:
        needed.append("math_source")
    if "data_format" in commands and block is not None:
        needed.append(f"format_{block.datatype}")
    if "byte_order" in commands and block is not None:
        needed.append("order_big" if block.big_endian else "order_little")
    for word in needed:
        if word not in words:
            raise src.error(("words", word), "missing word (an operation of this profile uses it)")


def _check_groups(src: TomlDocument, kind: str, commands: Mapping[str, tuple[str, ...]]) -> None:
    """Operations that only make sense together: both or neither, one of, and needs."""
    for group in GROUPS.get(kind, ()):
        have = [op for op in group if op in commands]
        if have and len(have) != len(group):
            lacking = next(op for op in group if op not in commands)
            raise src.error(
                ("commands", lacking), f"missing: it goes with {have[0]!r} ({' + '.join(group)})"
            )
    for group in ONE_OF.get(kind, ()):
        if not any(op in commands for op in group):
            raise src.error(
                ("commands", group[0]), f"missing: a {kind} needs one of {', '.join(group)}"
            )
    for op, needed in NEEDS.get(kind, {}).items():
        if op in commands:
            for other in needed:
                if other not in commands:
                    raise src.error(("commands", other), f"missing: {op!r} needs it")


def _channels(
    src: TomlDocument, kind: str, commands: Mapping[str, tuple[str, ...]]
) -> ChannelSet | None:
    """``[channels]``: ``count`` and optional ``names``; a multi-channel profile must say how a
    channel is addressed (a ``{channel}`` placeholder or a ``select_channel`` command)."""
    table = _table(src, "channels", required=False)
    if not table:
        return None
    if kind == "scope":
        count = table.get("count")
        if set(table) - {"count"} or count not in (2, 4, 8) or isinstance(count, bool):
            raise src.error(("channels", "count"), f"a scope has 2, 4 or 8 channels, not {count!r}")
        return ChannelSet(count)
    for key in table:
        if key not in ("count", "names"):
            raise src.error(("channels", key), "unknown key (count, names)")
    count = table.get("count")
    if isinstance(count, bool) or not isinstance(count, int) or not 1 <= count <= 1000:
        raise src.error(("channels", "count"), f"must be a whole number 1..1000, not {count!r}")
    names = table.get("names", [])
    if not isinstance(names, list) or not all(
        isinstance(n, str | int) and not isinstance(n, bool) for n in names
    ):
        raise src.error(("channels", "names"), "must be a list of channel names")
    names = [str(n) for n in names]
    if names and len(names) != count:
        raise src.error(("channels", "names"), f"names {len(names)} channels, count is {count}")
    if len(set(names)) != len(names):
        raise src.error(("channels", "names"), "names a channel twice")
    addressed = "select_channel" in commands or any(
        "{channel" in line for lines in commands.values() for line in lines
    )
    if count > 1 and not addressed:
        raise src.error(
            ("channels", "count"),
            f"{count} channels, but no template names {{channel}} and there is no select_channel",
        )
    return ChannelSet(count, tuple(names))


def _replies(
    src: TomlDocument, kind: str, commands: Mapping[str, tuple[str, ...]]
) -> dict[str, dict[str, Any]]:
    """``[replies.<query>]``: what each word a query may answer means."""
    table = _table(src, "replies", required=False)
    meanings = REPLY_MEANINGS.get(kind, {})
    out: dict[str, dict[str, Any]] = {}
    for op, words in table.items():
        if op not in meanings:
            allowed = ", ".join(sorted(meanings)) or "none"
            raise src.error(("replies", op), f"not a query answered in words (allowed: {allowed})")
        if op not in commands:
            raise src.error(("replies", op), "the profile does not offer this query")
        if not isinstance(words, dict) or not words:
            raise src.error(("replies", op), "must be a table of reply word = meaning")
        allowed_meanings = meanings[op]
        mapped: dict[str, Any] = {}
        for word, meaning in words.items():
            if allowed_meanings is bool:
                if not isinstance(meaning, bool):
                    raise src.error(
                        ("replies", op, word), f"must be true or false, not {meaning!r}"
                    )
            elif not isinstance(meaning, str) or meaning.lower() not in allowed_meanings:
                choices = ", ".join(sorted(allowed_meanings))
                raise src.error(("replies", op, word), f"must be one of {choices}, not {meaning!r}")
            else:
                meaning = meaning.lower()
            mapped[word] = meaning
        out[op] = mapped
    for op, kinds in meanings.items():
        if kinds is not bool and op in commands and op not in out:
            raise src.error(("replies", op), f"missing: say what each word {op} answers means")
    return out


def _numbers(src: TomlDocument) -> NumberFormat:
    """``[numbers]``: ``units`` that may follow a number."""
    table = _table(src, "numbers", required=False)
    for key in table:
        if key != "units":
            raise src.error(
                ("numbers", key),
                "unknown key (units; an echoed header is [profile] echoes_headers)",
            )
    units = table.get("units", [])
    if not isinstance(units, list) or not all(isinstance(u, str) and u.strip() for u in units):
        raise src.error(("numbers", "units"), "must be a list of unit words")
    return NumberFormat(tuple(u.strip() for u in units))


def _errors(src: TomlDocument, commands: Mapping[str, tuple[str, ...]]) -> tuple[str, int]:
    table = _table(src, "errors", required=False)
    _keys(src, "errors", table, SCHEMA["errors"])
    style = table.get("style", "queue")
    if style not in ("queue", "event_register"):
        raise src.error(("errors", "style"), f"{style!r} must be 'queue' or 'event_register'")
    mask = _int(src, "errors", table, "mask", 0x3C, 1, 255)
    if "mask" in table and style != "event_register":
        raise src.error(("errors", "mask"), "only for style = 'event_register'")
    return style, mask


def _scale_term(src: TomlDocument, key: str, value: Any, fields: tuple[str, ...]) -> ScaleTerm:
    if isinstance(value, bool):
        raise src.error(
            ("scale", key), f"must be a field name, a list, a number or a query, not {value!r}"
        )
    if isinstance(value, int | float):
        if not math.isfinite(value):
            raise src.error(("scale", key), f"must be finite, not {value!r}")
        return ScaleTerm(constant=float(value))
    names = [value] if isinstance(value, str) else value
    if isinstance(names, list) and names and all(isinstance(n, str) for n in names):
        for n in names:
            if n not in fields:
                raise src.error(("scale", key), f"{n!r} is not a field of [preamble] fields")
        return ScaleTerm(fields=tuple(names))
    if isinstance(value, dict) and set(value) == {"query"} and isinstance(value["query"], str):
        q = value["query"]
        spec = OperationSpec((), frozenset({"source", "channel"}), True)
        _check_template(src, "scale", key, [q], spec)
        if "?" not in q:
            raise src.error(("scale", key), f"is a query: {q!r} needs a '?'")
        return ScaleTerm(query=q)
    raise src.error(
        ("scale", key),
        f"must be a preamble field name, a list of field names (summed), a number or "
        f'{{ query = "...?" }}, not {value!r}',
    )


def _block(
    src: TomlDocument, kind: str, commands: Mapping[str, tuple[str, ...]]
) -> BlockFormat | None:
    if kind != "scope":
        return None
    block = _table(src, "block")
    _keys(src, "block", block, SCHEMA["block"])
    datatype, order = _block_codes(src, block)
    chunk, page, pipeline = _block_reads(src, block, commands)
    code_min, code_max = _code_range(src, block, datatype)
    sep, names, open_end = _preamble_fields(src, commands)
    scale = _scale_terms(src, names)
    tol = _tolerance(src)
    return BlockFormat(
        datatype,
        order == "big",
        chunk,
        page,
        pipeline,
        float(code_min),
        float(code_max),
        sep,
        names,
        open_end,
        scale,
        float(tol),
    )


def _block_codes(src: TomlDocument, block: dict[str, Any]) -> tuple[str, str]:
    """``[block]`` datatype and byte order (a multi-byte binary code needs one)."""
    datatype = _string(src, "block", block, "datatype")
    if datatype not in DATATYPES:
        raise src.error(("block", "datatype"), f"{datatype!r} is not one of {', '.join(DATATYPES)}")
    width = int(DATATYPES[datatype][1])
    order = block.get("byte_order")
    if order is None:
        if width > 1 and datatype != "ascii":
            raise src.error(
                ("block", "byte_order"), f"missing ({datatype} codes need 'big' or 'little')"
            )
        order = "big"
    if order not in ("big", "little"):
        raise src.error(("block", "byte_order"), f"{order!r} must be 'big' or 'little'")
    return datatype, order


def _block_reads(
    src: TomlDocument, block: dict[str, Any], commands: Mapping[str, tuple[str, ...]]
) -> tuple[int, int | None, bool]:
    """``[block]`` chunk bytes, points per page (paged reads need ``data_range``) and
    pipelining (only of pages)."""
    chunk = block.get("chunk_bytes", 1 << 22)
    if isinstance(chunk, bool) or not isinstance(chunk, int) or not 4096 <= chunk <= 1 << 28:
        raise src.error(("block", "chunk_bytes"), f"must be bytes 4096..268435456, not {chunk!r}")
    page = block.get("page_points")
    if page is not None:
        page = _int(src, "block", block, "page_points", 0, 100, 1 << 30)
        if "data_range" not in commands:
            raise src.error(("block", "page_points"), "paged reads need a data_range operation")
    pipeline = block.get("pipeline", False)
    if not isinstance(pipeline, bool):
        raise src.error(("block", "pipeline"), f"must be true or false, not {pipeline!r}")
    if pipeline and page is None:
        raise src.error(("block", "pipeline"), "only with page_points")
    return chunk, page, pipeline


def _code_range(src: TomlDocument, block: dict[str, Any], datatype: str) -> tuple[Any, Any]:
    """``[block]`` code_min and code_max: within the datatype's range, min below max."""
    if datatype == "ascii":
        lo, hi = -math.inf, math.inf
    elif datatype == "float32":
        lo, hi = -3.4e38, 3.4e38
    else:
        info = {"int8": (-128, 127), "uint8": (0, 255), "int16": (-32768, 32767)}
        lo, hi = info.get(datatype, (0, 65535))
    code_min = block.get("code_min", lo)
    code_max = block.get("code_max", hi)
    for key, value in (("code_min", code_min), ("code_max", code_max)):
        if isinstance(value, bool) or not isinstance(value, int | float) or not lo <= value <= hi:
            raise src.error(("block", key), f"must be a code within {lo:g}..{hi:g}, not {value!r}")
    if code_min >= code_max:
        raise src.error(("block", "code_max"), f"must be above code_min ({code_min:g})")
    return code_min, code_max


def _preamble_fields(
    src: TomlDocument, commands: Mapping[str, tuple[str, ...]]
) -> tuple[str, tuple[str, ...], bool]:
    """``[preamble]``: (separator, field names, whether more fields may follow ``...``)."""
    pre = _table(src, "preamble", required="waveform_preamble" in commands)
    if pre and "waveform_preamble" not in commands:
        raise src.error(("preamble",), "a [preamble] needs the waveform_preamble operation")
    _keys(src, "preamble", pre, SCHEMA["preamble"])
    sep = pre.get("separator", ",")
    if sep not in (",", ";"):
        raise src.error(("preamble", "separator"), f"must be ',' or ';', not {sep!r}")
    fields = pre.get("fields", [])
    if pre and (
        not isinstance(fields, list) or not fields or not all(isinstance(f, str) for f in fields)
    ):
        raise src.error(("preamble", "fields"), "must be a list of field names")
    open_end = bool(fields) and fields[-1] == "..."
    names = tuple(fields[:-1] if open_end else fields)
    for n in names:
        if n == "..." or not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", n):
            raise src.error(("preamble", "fields"), f"{n!r} is not a field name ('...' only last)")
    if len(set(names)) != len(names):
        raise src.error(("preamble", "fields"), "a field name appears twice")
    return sep, names, open_end


def _scale_terms(src: TomlDocument, names: tuple[str, ...]) -> dict[str, ScaleTerm]:
    """``[scale]``: each term from the preamble's fields, a number or a query; the steps are
    required, the others default."""
    table = _table(src, "scale")
    _keys(src, "scale", table, SCHEMA["scale"])
    scale: dict[str, ScaleTerm] = {}
    for key in SCALE_TERMS:
        if key in table:
            scale[key] = _scale_term(src, key, table[key], names)
        elif key in ("y_step", "x_step"):
            raise src.error(("scale", key), "missing")
        elif key in _SCALE_DEFAULTS:
            scale[key] = ScaleTerm(constant=_SCALE_DEFAULTS[key])
    # without a "points" term the block's own length is the only announcement of the count
    return scale


def _tolerance(src: TomlDocument) -> Any:
    """``[checks] tolerance``: a fraction of full scale in (0, 0.5]."""
    checks = _table(src, "checks", required=False)
    _keys(src, "checks", checks, SCHEMA["checks"])
    tol = checks.get("tolerance", 0.02)
    if isinstance(tol, bool) or not isinstance(tol, int | float) or not 0 < tol <= 0.5:
        raise src.error(
            ("checks", "tolerance"), f"must be a fraction of full scale in (0, 0.5], not {tol!r}"
        )
    return tol


def _acquire(
    src: TomlDocument, kind: str, commands: Mapping[str, tuple[str, ...]], opc_ms: int
) -> AcquireRule | None:
    if kind != "scope":
        return None
    table = _table(src, "acquire", required=False)
    _keys(src, "acquire", table, SCHEMA["acquire"])
    completion = table.get("completion", "opc")
    if completion not in ("opc", "poll"):
        raise src.error(("acquire", "completion"), f"{completion!r} must be 'opc' or 'poll'")
    done = table.get("done", [])
    if completion == "poll":
        if "acquisition_state" not in commands:
            raise src.error(
                ("acquire", "completion"), "'poll' needs an acquisition_state operation"
            )
        if not isinstance(done, list) or not done or not all(isinstance(d, str) for d in done):
            raise src.error(("acquire", "done"), "must list the replies that mean complete")
    elif "done" in table:
        raise src.error(("acquire", "done"), "only for completion = 'poll'")
    interval = _int(src, "acquire", table, "poll_interval_ms", 20, 1, 10_000)
    timeout = _int(src, "acquire", table, "timeout_ms", opc_ms, 1, 3_600_000)
    return AcquireRule(completion, tuple(done), interval, timeout)


def _status(
    src: TomlDocument, kind: str, commands: Mapping[str, tuple[str, ...]]
) -> dict[str, int]:
    # the bits are read only by the regulation_status query; without it there is no table
    wanted = kind in STATUS_BITS and "regulation_status" in commands
    status = _table(src, "status", required=wanted)
    names = STATUS_BITS.get(kind, ()) if wanted else ()
    if not names and status:
        why = "no regulation_status query" if kind in STATUS_BITS else f"a {kind} profile"
        raise src.error(("status",), f"no [status] table here ({why})")
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
