"""The one error the session log raises: a ``BringupError`` with a one-line message."""

from __future__ import annotations

from bringup.errors import BringupError

__all__ = ["StoreError"]


class StoreError(BringupError):
    """The log cannot do what was asked: locked, corrupt, newer schema, a refused entry.

    ``str(err)`` is one line naming the database file (or the session) and the problem.
    When it is raised while opening, the file has not been modified.
    """
