"""Where a reading command reads sessions from: the bench's log (``--db PATH``) or the lab
database (``--lab URL|NAME|env``, ``bringup.lab``). Both give an object with the log reader's
public methods (``LogReading``), so the command's own code is the same for both.

Standard library only at the top level (``tests/unit/test_startup.py``): psycopg is imported
only when ``--lab`` is given.
"""

from __future__ import annotations

import argparse
from typing import Any

from bringup.errors import InputError

__all__ = ["add_lab_option", "open_reader", "source_name"]

LAB_HELP = (
    "read from the lab database instead of the bench's log: a PostgreSQL URL without a "
    "password (libpq finds it in PGPASSWORD or ~/.pgpass), 'env' ($BRINGUP_LAB_URL) or a lab "
    "name from the lab config file"
)


def add_lab_option(parser: argparse.ArgumentParser) -> None:
    """Add ``--lab URL|NAME|env`` (an alternative to ``--db``)."""
    parser.add_argument("--lab", metavar="URL|NAME", help=LAB_HELP)


def open_reader(args: argparse.Namespace) -> Any:
    """The reader ``args`` name, to use in a ``with`` block: ``LabReading`` for ``--lab``,
    else the log opened read-only (``--db``, or the default log). Never creates anything."""
    lab = getattr(args, "lab", None)
    if lab is not None:
        from bringup.lab import LabReading, resolve_lab

        target = resolve_lab(lab)  # first: a password typed there is the thing to say
        if getattr(args, "db", None) is not None:
            raise InputError("--db and --lab: give one (the bench's log or the lab database)")
        return LabReading.open(target)
    from bringup.record.from_log import open_log

    return open_log(args.db, read_only=True)


def source_name(args: argparse.Namespace, reader: Any) -> str:
    """How messages name where the sessions came from: ``log PATH`` or ``lab ...``."""
    if getattr(args, "lab", None) is not None:
        return str(reader.path)
    return f"log {reader.path}"
