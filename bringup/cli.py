"""Command-line entry point: parses, dispatches, prints. No domain logic here."""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

from bringup import __version__
from bringup.commands import COMMANDS
from bringup.errors import BringupError

_OWN_OPTIONS = ("-h", "--help", "--version")


class _Parser(argparse.ArgumentParser):
    """argparse that reports bad options in one line with exit status 2 (its default)."""

    def error(self, message: str) -> None:  # type: ignore[override]
        self.exit(2, f"{self.prog}: error: {message}\n")


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """The whole parser, or with ``only`` a parser that knows just that command (the one on
    the command line: importing every command module costs more than ``calc`` itself)."""
    parser = _Parser(
        prog="bringup",
        description="Terminal lab notebook for gate-drive bring-up. "
        "With no command, opens the notebook's start screen.",
    )
    parser.add_argument("--version", action="version", version=f"bringup {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name in COMMANDS if only is None else (only,):
        try:
            module = importlib.import_module(f"bringup.commands.{name}")
        except ModuleNotFoundError as exc:
            if exc.name != f"bringup.commands.{name}":
                raise
            continue  # command not built yet
        module.add_parser(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser(argv[0] if argv and argv[0] in COMMANDS else None)
    # `bringup --db PATH` means the start screen on that log: options before any command
    # belong to `open` unless they are the program's own.
    if argv and argv[0].startswith("-") and argv[0] not in _OWN_OPTIONS:
        if "open" in sub_names(parser):
            argv = ["open", *argv]
    args = parser.parse_args(argv)
    if args.command is None:
        if "open" in sub_names(parser):
            args = parser.parse_args(["open"])
        else:
            parser.print_help()
            return 0
    try:
        if getattr(args, "scpi_log", None):
            from bringup.instruments.scpi_log import use_process_log

            use_process_log(args.scpi_log)
        return int(args.func(args) or 0)
    except BringupError as exc:
        print(f"bringup: error: {exc}", file=sys.stderr)
        return exc.exit_status
    except KeyboardInterrupt:
        print("bringup: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 1


def sub_names(parser: argparse.ArgumentParser) -> set[str]:
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            return set(action.choices)
    return set()


if __name__ == "__main__":
    sys.exit(main())
