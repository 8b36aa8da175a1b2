"""The error family every user-facing failure belongs to.

A ``BringupError`` carries a one-line message that names what was wrong and where
(file and line, option, instrument and command). The command line prints it and exits
with status 2; the TUI shows it in a message. Nothing else should reach a user.
"""

from __future__ import annotations


class BringupError(Exception):
    """Base of every error meant for the user: ``str(err)`` is one line."""

    exit_status = 2


class InputError(BringupError):
    """Bad input: a file, an option, a typed reading. Names the file/row or the option."""


class ConfigError(InputError):
    """A board, checklist, bench or profile file that does not validate.

    The message names the file, the key and (where TOML gives it) the line.
    """

    def __init__(self, path: object, key: str | None, problem: str, line: int | None = None):
        self.path = str(path)
        self.key = key
        self.problem = problem
        self.line = line
        where = self.path
        if line is not None:
            where += f":{line}"
        if key:
            where += f": {key}"
        super().__init__(f"{where}: {problem}")
