"""Connecting to the lab database, and every PostgreSQL error as one line naming the lab.

psycopg 3 (libpq underneath) is imported only in ``bringup.lab``: the bench's own commands never
load it, so a bench with no network, or without the lab's packages, works as before.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator
from typing import Any

from bringup.errors import LabError
from bringup.lab.config import LabTarget

__all__ = ["connect", "lab_errors", "one_line"]

#: Seconds to wait for the server to answer a connection (libpq ``connect_timeout``).
CONNECT_TIMEOUT_S = 10


def one_line(error: BaseException) -> str:
    """The first line of a driver message (libpq's own text, which never holds a password)."""
    text = str(error).strip()
    first = text.splitlines()[0].strip() if text else type(error).__name__
    return first.removeprefix("ERROR:").strip()


def connect(target: LabTarget) -> Any:
    """An autocommit connection to the lab (transactions are explicit); ``LabError`` in one
    line when the server is down, the name or password is refused, or the URL is wrong."""
    import psycopg

    try:
        return psycopg.connect(
            target.conninfo,
            autocommit=True,
            connect_timeout=CONNECT_TIMEOUT_S,
            application_name="bringup",
        )
    except psycopg.Error as error:
        raise LabError(f"lab {target.label}: cannot connect ({one_line(error)})") from None


@contextlib.contextmanager
def lab_errors(target: LabTarget, doing: str) -> Iterator[None]:
    """Turn any psycopg error raised inside into a one-line ``LabError`` saying ``doing``."""
    import psycopg

    try:
        yield
    except psycopg.Error as error:
        raise LabError(f"lab {target.label}: {doing} failed ({one_line(error)})") from None
