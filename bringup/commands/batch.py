"""``bringup batch [--board NAME|FILE] [--revision R] [--db PATH | --lab URL] [--json] [--html FILE]``: the
serials of one board revision side by side, per metric the spread across the batch, the
outliers and (from enough boards) Cp/Cpk. Reads the log only."""

from __future__ import annotations

import argparse
import contextlib
from collections.abc import Iterator
from pathlib import Path
from typing import Any

__all__ = ["add_parser", "board_choice", "open_reader", "run"]


def add_parser(subparsers: argparse._SubParsersAction) -> argparse.ArgumentParser:
    """Register ``batch``."""
    parser = subparsers.add_parser(
        "batch",
        help="compare the serials of one board revision: spread, outliers, capability",
        description="One row per serial of one board revision (progress, verdict, sign-offs, "
        "last activity, rehearsal or real bench), one column per judged metric, and per "
        "metric the median, the spread (MAD x 1.4826), min and max, the outliers (modified "
        "z-score above 3.5, Iglewicz and Hoaglin) and, from 20 boards, Cp/Cpk with 95 %% "
        "intervals. A serial measured again shows its latest session's latest judged "
        "attempts; --json carries the whole history. Reads the log only.",
    )
    parser.add_argument(
        "--board",
        metavar="NAME|FILE",
        help="the board's name as logged, or its board file (name and revision from the file); "
        "default: the only board in the log",
    )
    parser.add_argument(
        "--revision", metavar="R", help="the board revision (default: the only one)"
    )
    parser.add_argument("--db", metavar="PATH", help="session log (default: your data directory)")
    from bringup.commands.log_source import add_lab_option

    add_lab_option(parser)
    parser.add_argument("--json", action="store_true", help="one JSON object")
    parser.add_argument(
        "--html", metavar="FILE", help="also write a self-contained HTML report (no script)"
    )
    parser.set_defaults(func=run)
    return parser


@contextlib.contextmanager
def open_reader(args: argparse.Namespace) -> Iterator[tuple[Any, str]]:
    """The log the batch reads, and its name for messages: ``(reader, where)``.

    The one place that knows where sessions come from: the SQLite log of ``--db`` (read-only,
    never created), or with ``--lab`` the lab database (``bringup.lab.LabReading``: every
    bench's sessions, each chain re-checked on what was read). A reader is any object with
    ``LogReading``'s ``sessions()``, ``attempts(id)`` and ``signatures(id)``
    (``bringup.batch.collect.BatchReader``).
    """
    from bringup.commands.run import check_db_option
    from bringup.store import SessionLog, default_db_path

    check_db_option(args)
    if args.lab is not None:
        from bringup.commands.log_source import open_reader as open_source

        with open_source(args) as lab:
            yield lab, str(lab.path)
        return
    path = Path(args.db).expanduser() if args.db else default_db_path()
    with SessionLog.open(path, create=False, read_only=True) as log:
        yield log, str(path)


def board_choice(args: argparse.Namespace) -> tuple[str | None, str | None]:
    """(board name, revision) from ``--board``/``--revision``: a ``--board`` that is a file
    (an existing path, or one ending in ``.toml``) is read as a board file, giving its name
    and, unless ``--revision`` is given, its revision."""
    from bringup.errors import InputError

    board, revision = args.board, args.revision
    for option, value in (("--board", board), ("--revision", revision)):
        if value is not None and not value.strip():
            raise InputError(f"{option} {value!r}: empty (leave it out to take the only one)")
    if board is not None and (board.endswith(".toml") or Path(board).expanduser().is_file()):
        from bringup.boards import load_board

        loaded = load_board(Path(board).expanduser())
        return loaded.name, revision if revision is not None else loaded.revision
    return board, revision


def _write_html(batch, where: str, out: str) -> str:
    import os

    from bringup.batch.html import render_batch_html
    from bringup.errors import InputError

    path = Path(out).expanduser()
    if path.is_dir():
        raise InputError(f"--html {out}: is a directory; give a file name")
    tmp = path.with_name(path.name + ".part")
    try:
        tmp.write_text(render_batch_html(batch, where), encoding="utf-8")
        os.replace(tmp, path)  # never a half-written report under the final name
    except OSError as exc:
        raise InputError(f"--html {out}: cannot write ({exc.strerror})") from None
    return str(path)


def run(args: argparse.Namespace) -> int:
    """Collect the batch and print it (text or ``--json``); write ``--html``."""
    import json

    from bringup.batch.collect import collect_batch
    from bringup.batch.report import batch_json, batch_lines

    board, revision = board_choice(args)
    with open_reader(args) as (reader, where):
        batch = collect_batch(reader, board, revision, where)
    written = _write_html(batch, where, args.html) if args.html else None
    if args.json:
        print(json.dumps(batch_json(batch, where)))
        return 0
    print("\n".join(batch_lines(batch, where)))
    if written:
        print(f"{written}: HTML batch report")
    return 0
