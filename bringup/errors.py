"""The error family every user-facing failure belongs to, in one place for every package.

``InputError`` and ``ConfigError`` for what the user supplies, ``AnalysisError`` for data the
measurement core cannot measure, ``StoreError`` for the session log, ``LabError`` for the shared
lab database (the instrument faults live with the instruments, in ``bringup.instruments.faults``).

A ``BringupError`` carries a one-line message that names what was wrong and where (file and
line, option, instrument and command). The command line prints it and exits with status 2; the
TUI shows it in a message. Nothing else should reach a user.
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


class AnalysisError(InputError):
    """The data cannot be measured: too few samples, one level only, no edge, no fit.

    Raised by the measurement core (``bringup.analysis``). ``str(err)`` is one line saying what
    is missing. Callers add where the data came from (the CLI prefixes the file name; the runner
    records it as the step's reason).
    """


class StoreError(BringupError):
    """The session log cannot do what was asked: locked, corrupt, newer schema, a refused entry.

    Raised by ``bringup.store``. ``str(err)`` is one line naming the database file (or the
    session) and the problem. When it is raised while opening, the file has not been modified.
    """


class LabError(StoreError):
    """The lab database cannot do what was asked: unreachable, refused login, a refused push.

    A ``StoreError``: the lab is a log too, and code that reads "a log" (the record's checks)
    treats both alike.

    Raised by ``bringup.lab``. ``str(err)`` is one line naming the lab (user, host, port and
    database: never a password) and the problem. The bench's own log is never changed by it.
    """
