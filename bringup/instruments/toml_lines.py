"""Reading the instrument layer's TOML files with line numbers for error messages.

``tomllib`` gives values but no positions, so errors about a key would not say where it is.
``TomlSource`` keeps the text and finds the line of a table header or of a key inside a
table by a plain scan of the lines (enough for the hand-written profile and bench files).
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path
from typing import Any

from bringup.errors import ConfigError

_HEADER = re.compile(r"^\s*\[\s*([^\[\]]+?)\s*\]\s*(#.*)?$")
_KEY = re.compile(r"^\s*(\"[^\"]*\"|'[^']*'|[A-Za-z0-9_\-]+)\s*=")


def _split_dotted(name: str) -> tuple[str, ...]:
    parts = []
    for part in re.findall(r"\"[^\"]*\"|'[^']*'|[^.]+", name):
        parts.append(part.strip().strip("\"'"))
    return tuple(parts)


class TomlSource:
    """A parsed TOML file that can say on which line a table or key sits."""

    def __init__(self, path: Path, text: str):
        self.path = path
        self.text = text
        try:
            self.data: dict[str, Any] = tomllib.loads(text)
        except tomllib.TOMLDecodeError as exc:
            found = re.search(r"\(at line (\d+)", str(exc))
            line = int(found.group(1)) if found else None
            problem = str(exc).split(" (at line")[0]
            raise ConfigError(path, None, f"not valid TOML: {problem}", line) from None
        self._lines = text.splitlines()

    @classmethod
    def read(cls, path: Path) -> TomlSource:
        """Read and parse ``path``; a missing or unreadable file is a ``ConfigError``."""
        try:
            text = path.read_text(encoding="utf-8")
        except FileNotFoundError:
            raise ConfigError(path, None, "file not found") from None
        except (OSError, UnicodeDecodeError) as exc:
            raise ConfigError(path, None, f"cannot read: {exc}") from None
        return cls(path, text)

    def line_of(self, table: tuple[str, ...], key: str | None = None) -> int | None:
        """1-based line of ``[table]`` (``key`` None) or of ``key = ...`` inside it; a key
        that is itself a table is found by its header ``[table.key]``."""
        found = self._scan(table, key)
        if key is not None and (found is None or found == self._scan(table, None)):
            return self._scan((*table, key), None) or found
        return found

    def _scan(self, table: tuple[str, ...], key: str | None) -> int | None:
        current: tuple[str, ...] = ()
        table_line: int | None = None
        for number, raw in enumerate(self._lines, start=1):
            header = _HEADER.match(raw)
            if header and not raw.lstrip().startswith("[["):
                current = _split_dotted(header.group(1))
                if current == table:
                    table_line = number
                    if key is None:
                        return number
                continue
            if key is None or current != table:
                # a dotted key at top level such as ``a.b = 1`` is not used in our files
                continue
            match = _KEY.match(raw)
            if match and match.group(1).strip("\"'") == key:
                return number
        return table_line

    def error(self, table: tuple[str, ...], key: str | None, problem: str) -> ConfigError:
        """A ``ConfigError`` naming ``table.key`` and its line (the table's if the key is absent)."""
        dotted = ".".join((*table, key) if key else table) or None
        return ConfigError(self.path, dotted, problem, self.line_of(table, key))
