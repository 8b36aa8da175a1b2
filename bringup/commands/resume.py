"""``bringup resume [SESSION]``: continue a half-finished session at its first unfinished step.

Every attempt committed before an interruption (even a ``kill -9``) is reloaded from the log;
the session's board and checklist come from its snapshot. ``--auto`` as for ``bringup run``.
"""

from __future__ import annotations

import argparse
import sys

from bringup.errors import InputError

__all__ = ["add_parser", "run"]


def add_parser(subparsers: argparse._SubParsersAction) -> argparse.ArgumentParser:
    """Register ``resume``."""
    from bringup.commands.run import add_bench_options, add_headless_options

    parser = subparsers.add_parser(
        "resume",
        help="continue a half-finished session",
        description="Continue a session at its first unfinished step (default: the most "
        "recently active unfinished session). The bench is the one it started on unless "
        "--bench or --sim says otherwise.",
    )
    parser.add_argument(
        "session", nargs="?", metavar="SESSION", help="session id (or a unique prefix)"
    )
    add_bench_options(parser)
    parser.add_argument("--operator", metavar="NAME", help="who carries on (default: as logged)")
    add_headless_options(parser)
    parser.set_defaults(func=run)
    return parser


def run(args: argparse.Namespace) -> int:
    """Resume headless (``--auto``) or in the notebook."""
    from bringup.commands.run import (
        bench_source,
        check_headless_options,
        check_one_line,
        run_headless_cli,
    )

    check_headless_options(args)
    if args.operator is not None:
        check_one_line("--operator", args.operator)
    if args.session is not None and not args.session.strip():
        raise InputError(
            f"SESSION {args.session!r}: an empty session id "
            "(leave it out to resume the most recent unfinished session)"
        )
    source = bench_source(args)
    if not args.auto:
        try:
            from bringup.tui.launch import Launcher
            from bringup.tui.run_app import run_app
        except ImportError:
            print("bringup resume: the notebook screen is not in this build; use --auto",
                  file=sys.stderr)  # fmt: skip
            return 2
        from bringup.runner.resuming import pick_session
        from bringup.store import SessionLog

        with SessionLog.open(args.db, create=False) as log:
            session_id = pick_session(log, args.session)
        return run_app(Launcher(args.db), resume=session_id)
    from bringup.runner import SessionRunner

    book = _answers(args) if args.answers else None
    runner = SessionRunner.resume(args.session, db_path=args.db, bench=source,
                                  operator=args.operator)  # fmt: skip
    with runner:
        return run_headless_cli(runner, args, book)


def _answers(args: argparse.Namespace):
    """The ``--answers`` file read and checked against the session's own checklist (from its
    snapshot) before the session is reopened: a bad answer changes nothing in the log."""
    from bringup.runner.answers import load_answers
    from bringup.runner.file_snapshots import checklist_from_snapshot
    from bringup.runner.resuming import pick_session
    from bringup.store import SessionLog

    with SessionLog.open(args.db, create=False) as log:
        checklist = checklist_from_snapshot(log.session(pick_session(log, args.session)).checklist)
    return load_answers(args.answers, checklist)
