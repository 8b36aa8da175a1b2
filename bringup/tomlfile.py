"""The one TOML reader for every file the user writes (board, checklist, answers, bench, profile),
able to say on which line any key sits, for one-line error messages.

It sits at the top of ``bringup`` beside ``errors`` so that both ``checklist``/``boards`` and
``instruments`` may import it without importing each other.

``tomllib`` parses TOML but keeps no line numbers, so the loader that reports "file:line: key:
problem" scans the text itself: it tracks the current table header (``[a.b]``) and records the
first line of every ``key = value`` (dotted keys included). Inline tables resolve to the line of
their key, which is as close as an error message needs to be.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from bringup.errors import ConfigError

__all__ = ["TomlDocument", "read_toml", "parse_toml", "locate_keys"]

_PART = r'(?:[A-Za-z0-9_-]+|"[^"\n]*"|\'[^\'\n]*\')'
_DOTTED = rf"{_PART}(?:\s*\.\s*{_PART})*"
_HEADER_RE = re.compile(rf"^\s*\[\[?\s*({_DOTTED})\s*\]\]?\s*(?:#.*)?$")
_KEYVAL_RE = re.compile(rf"^\s*({_DOTTED})\s*=")
_PART_RE = re.compile(_PART)
_DECODE_LINE_RE = re.compile(r"\(at line (\d+), column \d+\)")


def _split_dotted(text: str) -> tuple[str, ...]:
    return tuple(p.strip("\"'") for p in _PART_RE.findall(text))


def locate_keys(text: str) -> dict[tuple[str, ...], int]:
    """Map each key path (table header parts + key parts) to its first 1-based line in ``text``."""
    lines: dict[tuple[str, ...], int] = {}
    table: tuple[str, ...] = ()
    in_multiline: str | None = None
    for number, raw in enumerate(text.splitlines(), start=1):
        if in_multiline is not None:
            if raw.count(in_multiline) % 2 == 1:
                in_multiline = None
            continue
        header = _HEADER_RE.match(raw)
        if header:
            table = _split_dotted(header.group(1))
            lines.setdefault(table, number)
            continue
        keyval = _KEYVAL_RE.match(raw)
        if keyval:
            path = table + _split_dotted(keyval.group(1))
            lines.setdefault(path, number)
            rest = raw[keyval.end() :]
            for quote in ('"""', "'''"):
                if rest.count(quote) % 2 == 1:
                    in_multiline = quote
                    break
    return lines


@dataclass(frozen=True)
class TomlDocument:
    """A parsed TOML file with the text it came from, able to say where a key is."""

    path: Path
    text: str
    data: dict
    _lines: dict[tuple[str, ...], int] = field(repr=False, compare=False, default_factory=dict)

    def line_of(self, *keys: str) -> int | None:
        """1-based line of the key path ``keys`` or, failing that, of its nearest parent."""
        path = tuple(keys)
        while path:
            if path in self._lines:
                return self._lines[path]
            path = path[:-1]
        return None

    def error(self, keys: tuple[str, ...] | list[str], problem: str) -> ConfigError:
        """A ``ConfigError`` for ``keys`` (joined with dots) with the key's line."""
        keys = tuple(keys)
        return ConfigError(self.path, ".".join(keys) or None, problem, self.line_of(*keys))


def parse_toml(text: str, path: str | Path = "<text>") -> TomlDocument:
    """Parse TOML ``text``; a syntax error becomes a ``ConfigError`` with tomllib's line."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        message = str(exc)
        found = _DECODE_LINE_RE.search(message)
        line = int(found.group(1)) if found else None
        problem = _DECODE_LINE_RE.sub("", message).strip()
        raise ConfigError(path, None, f"not valid TOML: {problem}", line) from None
    return TomlDocument(Path(path), text, data, locate_keys(text))


def read_toml(path: str | Path) -> TomlDocument:
    """Read and parse the TOML file at ``path`` (UTF-8); every failure is a ``ConfigError``."""
    p = Path(path)
    try:
        raw = p.read_bytes()
    except FileNotFoundError:
        raise ConfigError(p, None, "file not found") from None
    except IsADirectoryError:
        raise ConfigError(p, None, "is a directory, not a TOML file") from None
    except OSError as exc:
        raise ConfigError(p, None, f"cannot read: {exc.strerror or exc}") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise ConfigError(p, None, "not UTF-8 text", line) from None
    return parse_toml(text, p)
