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
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from bringup.errors import ConfigError
from bringup.tomlfile import TomlDocument, read_toml

BUILTIN_DIR = Path(__file__).resolve().parent.parent / "profiles"
KINDS = ("scope", "supply", "thermometer")


@dataclass(frozen=True)
class OperationSpec:
    """What a template must look like: its placeholders (``fields`` must all appear,
    ``optional`` may) and whether it is a query."""

    fields: frozenset[str]
    query: bool
    optional: frozenset[str] = frozenset()


def _ops(spec: dict[str, str], may: tuple[str, ...] = ()) -> dict[str, OperationSpec]:
    """``"name": "? a b"`` -> query with fields a, b; ``"! a"`` -> command with field a.

    ``may``: placeholders every operation of the kind may use (``{channel}`` on a supply),
    except the IEEE 488.2 common ones, which address the whole instrument."""
    out = {}
    for name, text in spec.items():
        marker, *fields = text.split()
        optional = frozenset(may) - set(fields) if name not in _COMMON else frozenset()
        out[name] = OperationSpec(frozenset(fields), marker == "?", optional)
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
        may=("channel", "channel_number"),
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
        may=("channel", "channel_number", "tc_type"),
    ),
}

# Operations an instrument may lack: a profile either gives a template or lists the operation
# in ``[profile] absent``. Groups go together: all of a group, or none of it (``GROUPS``).
OPTIONAL: dict[str, frozenset[str]] = {
    "scope": frozenset({"stop", "measure_mean", "measure_peak_to_peak"}),
    "supply": frozenset(
        {
            "select_channel",
            "set_voltage",
            "set_current_limit",
            "apply",
            "set_ocp",
            "ocp_level",
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

# Queries answered in words rather than numbers, and what each word may mean. Boolean queries
# know 1/0/ON/OFF (and +1/+0) unless the profile maps other words in ``[replies.<query>]``.
REPLY_MEANINGS: dict[str, dict[str, frozenset[str] | type]] = {
    "supply": {
        "output_state": bool,
        "ovp_tripped": bool,
        "ocp_tripped": bool,
        "ocp_enabled": bool,
        "sense_state": frozenset({"remote", "local"}),
        "regulation_mode": frozenset({"cv", "cc", "unregulated", "off"}),
    },
    "thermometer": {},
    "scope": {},
}
DEFAULT_BOOL_WORDS = {"1": True, "0": False, "ON": True, "OFF": False, "+1": True, "+0": False}

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
# Words a profile needs only when it offers the operation that sends them.
WORDS_IF: dict[str, dict[str, str]] = {
    "supply": {"sense_remote": "sense", "sense_local": "sense"},
    "thermometer": {"reference_internal": "reference_junction"},
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
    "sense": "EXT",
    "reference": "INT",
    "tc_type": "K",
    "channel_number": 2,
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
    channels: ChannelSet | None = None
    replies: Mapping[str, Mapping[str, Any]] = field(default_factory=dict)
    numbers: NumberFormat = field(default_factory=lambda: NumberFormat())

    def has(self, operation: str) -> bool:
        """Whether the instrument offers ``operation`` (optional ones may be declared absent)."""
        return operation in self.commands

    def uses_channel(self, operation: str) -> bool:
        """Whether ``operation``'s template names ``{channel}`` (the channel as an argument or
        a node suffix)."""
        return "{channel" in self.commands.get(operation, "")

    def command(self, operation: str, **fields: Any) -> str:
        """The SCPI text of ``operation`` with its placeholders filled (placeholders the
        template does not use are ignored)."""
        return self.commands[operation].format(**fields)

    def reply_meaning(self, operation: str, reply: str) -> Any:
        """What a worded reply of ``operation`` means (``True``/``False`` for a boolean query,
        ``"cv"``, ``"remote"``...), or ``None`` when the profile does not describe it."""
        word = reply.strip().strip('"').strip()
        mapped = self.replies.get(operation, {})
        for key, meaning in mapped.items():
            if key.upper() == word.upper():
                return meaning
        if REPLY_MEANINGS.get(self.kind, {}).get(operation) is bool:
            return DEFAULT_BOOL_WORDS.get(word.upper())
        return None

    def word(self, name: str, **fields: Any) -> str:
        """The instrument's spelling of a value (``on``, ``slope_rising``, ``channel_source``)."""
        return self.words[name].format(**fields)

    def timeout_ms(self, operation: str) -> int:
        """Timeout of ``operation`` in milliseconds (the profile's default if not listed)."""
        return self.timeouts_ms.get(operation, self.default_timeout_ms)

    def matches(self, identity: str) -> bool:
        """Whether an ``*IDN?`` answer fits this profile's pattern (regular expression search)."""
        return self.identity.search(identity) is not None


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
    """``[numbers]``: what may surround a number in a reply: a leading header word (an
    instrument that echoes the command's header) and a trailing unit (``C``, ``V``)."""

    units: tuple[str, ...] = ()
    header: bool = False

    def strip(self, reply: str) -> str | None:
        """The number's text of ``reply``, or ``None`` when the reply has more than the
        profile describes (left to the caller to report)."""
        text = reply.strip()
        if self.header and text[:1].isalpha():
            head, _, rest = text.partition(" ")
            text = rest.strip() if rest else head
        for unit in sorted(self.units, key=len, reverse=True):
            if text.upper().endswith(unit.upper()):
                text = text[: len(text) - len(unit)].strip()
                break
        return text


_TOP_KEYS = {
    "profile",
    "termination",
    "timeouts_ms",
    "commands",
    "words",
    "block",
    "status",
    "channels",
    "replies",
    "numbers",
}


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
    src: TomlDocument,
    table: str,
    key: str,
    template: str,
    fields: frozenset[str],
    optional: frozenset[str] = frozenset(),
) -> None:
    try:
        used = {f for _, f, _, _ in string.Formatter().parse(template) if f is not None}
    except ValueError as exc:
        raise src.error((table, key), f"malformed template {template!r}: {exc}") from None
    unknown = used - fields - optional
    if unknown:
        allowed = ", ".join(sorted(f"{{{f}}}" for f in fields | optional)) or "none"
        raise src.error(
            (table, key),
            f"unknown placeholder {{{sorted(unknown)[0]}}} in {template!r} (allowed: {allowed})",
        )
    missing = fields - used
    if missing:
        raise src.error((table, key), f"template {template!r} lacks {{{sorted(missing)[0]}}}")
    try:
        template.format(**{f: _SAMPLE.get(f, "x") for f in fields | optional})
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
        _check_template(src, "commands", key, template, spec.fields, spec.optional)
        if spec.query and "?" not in template:
            raise src.error(("commands", key), f"is a query: {template!r} needs a '?'")
        if not spec.query and "?" in template:
            raise src.error(("commands", key), f"is a command, not a query: {template!r}")
    for key in specs:
        if key not in commands and key not in absent:
            hint = " (or list it in [profile] absent)" if key in OPTIONAL[kind] else ""
            raise src.error(("commands", key), f"missing operation{hint}")
    _check_groups(src, kind, commands)

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
        _check_template(src, "words", key, value, word_specs.get(key, frozenset()))
    for key in word_specs:
        if key not in words:
            raise src.error(("words", key), "missing word")
    for key, operation in conditional.items():
        if operation in commands and key not in words:
            raise src.error(("words", key), f"missing word (the operation {operation!r} sends it)")

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
    bits = _status(src, kind, commands)
    channels = _channels(src, kind, commands)
    replies = _replies(src, kind, commands)
    numbers = _numbers(src)
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
        channels=channels,
        replies=replies,
        numbers=numbers,
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


def _check_groups(src: TomlDocument, kind: str, commands: Mapping[str, str]) -> None:
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


def _channels(src: TomlDocument, kind: str, commands: Mapping[str, str]) -> ChannelSet | None:
    """``[channels]``: ``count`` and optional ``names``; a multi-channel profile must say how a
    channel is addressed (a ``{channel}`` placeholder or a ``select_channel`` command)."""
    table = _table(src, "channels", required=False)
    if not table:
        return None
    if kind == "scope":
        raise src.error(("channels",), "a scope profile has no [channels] table")
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
    addressed = "select_channel" in commands or any("{channel" in t for t in commands.values())
    if count > 1 and not addressed:
        raise src.error(
            ("channels", "count"),
            f"{count} channels, but no template names {{channel}} and there is no select_channel",
        )
    return ChannelSet(count, tuple(names))


def _replies(
    src: TomlDocument, kind: str, commands: Mapping[str, str]
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
    """``[numbers]``: ``units`` that may follow a number, ``header`` before it."""
    table = _table(src, "numbers", required=False)
    for key in table:
        if key not in ("units", "header"):
            raise src.error(("numbers", key), "unknown key (units, header)")
    units = table.get("units", [])
    if not isinstance(units, list) or not all(isinstance(u, str) and u.strip() for u in units):
        raise src.error(("numbers", "units"), "must be a list of unit words")
    header = table.get("header", False)
    if not isinstance(header, bool):
        raise src.error(("numbers", "header"), f"must be true or false, not {header!r}")
    return NumberFormat(tuple(u.strip() for u in units), header)


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


def _status(src: TomlDocument, kind: str, commands: Mapping[str, str]) -> dict[str, int]:
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
