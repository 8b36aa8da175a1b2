"""How a command names the session it works on: ``SESSION`` (an id or a unique prefix) or
``--last`` (the session started last in the log), so a script can chain ``run``, ``sign`` and
``export`` without copying an id by hand.

Imported by the ``export``, ``sign`` and ``sessions`` commands; standard library only at the top
level (``tests/unit/test_startup.py``).
"""

from __future__ import annotations

import argparse

__all__ = ["add_session_choice", "chosen_session"]


def add_session_choice(parser: argparse.ArgumentParser) -> None:
    """Add ``SESSION`` and ``--last``: exactly one of the two must be given."""
    group = parser.add_mutually_exclusive_group(required=True)
    group.add_argument(
        "session", nargs="?", metavar="SESSION", help="session id (or a unique prefix)"
    )
    group.add_argument(
        "--last",
        action="store_true",
        help="the session started last in the log, instead of SESSION",
    )


def chosen_session(log, args: argparse.Namespace) -> str:
    """The session text to resolve: the latest session's id with ``--last``, else SESSION."""
    return log.latest_session() if args.last else args.session
