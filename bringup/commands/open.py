"""``bringup open [--db PATH]`` (and ``bringup`` alone): the notebook's start screen."""

from __future__ import annotations

import argparse

__all__ = ["add_parser", "run"]


def add_parser(subparsers: argparse._SubParsersAction) -> argparse.ArgumentParser:
    """Register ``open``."""
    parser = subparsers.add_parser(
        "open",
        help="the notebook's start screen: start a new session or resume one",
        description="Open the bench notebook: start a new session (board, checklist, bench, "
        "serial, operator) or resume an unfinished one.",
    )
    parser.add_argument("--db", metavar="PATH", help="session log (default: your data directory)")
    parser.set_defaults(func=run)
    return parser


def run(args: argparse.Namespace) -> int:
    """Run the notebook until the operator quits; the supply is OFF on every way out."""
    from bringup.tui.launch import Launcher
    from bringup.tui.run_app import run_app

    launcher = Launcher(args.db)
    return run_app(launcher)
