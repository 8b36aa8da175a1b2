"""``bringup push [--lab URL|NAME|env] [--db PATH] [--bench-name NAME]``: copy the bench's log
into the lab database (``bringup.lab.push``)."""

from __future__ import annotations

import argparse
import os
import sys

from bringup.errors import InputError

__all__ = ["add_parser", "run"]


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    """Register ``push``."""
    from bringup.commands.log_source import LAB_HELP

    parser = subparsers.add_parser(
        "push",
        help="copy this bench's sessions to the lab database (append-only)",
        description="Copy every session of the bench's log (snapshots, attempts, metrics, "
        "waveforms, events, sign-offs) to the lab's PostgreSQL database. Each session's hash "
        "chain is checked first: a broken one is refused, named, and not sent. What the lab "
        "already holds is not sent again; a push cut short carries on where it stopped. The "
        "lab keeps every row as pushed: it refuses changes and removals. Exit 0 when every "
        "session is in the lab, 1 when one was refused, 2 on an error (no lab, no log).",
    )
    parser.add_argument(
        "--lab", metavar="URL|NAME", help=LAB_HELP + " (default: $BRINGUP_LAB_URL when set)"
    )
    parser.add_argument("--db", metavar="PATH", help="the bench's log (default: your data folder)")
    parser.add_argument(
        "--bench-name",
        metavar="NAME",
        help="this bench's name in the lab, kept from its first push (default: the lab config's "
        "`bench`, else $BRINGUP_BENCH_NAME, else this computer's name)",
    )
    parser.set_defaults(func=run)


def _bench_name(args: argparse.Namespace, configured: str | None) -> str:
    import socket

    from bringup.names import control_character

    name = (args.bench_name or configured or os.environ.get("BRINGUP_BENCH_NAME") or "").strip()
    name = name or socket.gethostname() or "bench"
    if "/" in name or control_character(name) is not None:
        raise InputError(f"--bench-name {name!r}: one line of text without '/' (it names sessions)")
    return name


def run(args: argparse.Namespace) -> int:
    """Push and say what was sent, what was there already and what was refused."""
    from bringup.commands.run import check_db_option
    from bringup.lab import push_log, resolve_lab
    from bringup.lab.connection import connect
    from bringup.record.from_log import open_log

    check_db_option(args)
    lab = args.lab
    if lab is None:
        if not os.environ.get("BRINGUP_LAB_URL"):
            raise InputError("--lab: which lab? give --lab URL|NAME or set $BRINGUP_LAB_URL")
        lab = "env"
    target = resolve_lab(lab)
    bench = _bench_name(args, target.bench)

    def said(session_id: str, entries: int, signatures: int) -> None:
        print(f"sent {session_id}: {entries} entries, {signatures} sign-offs", flush=True)

    with open_log(args.db, read_only=True) as log:
        conn = connect(target)
        try:
            report = push_log(log, conn, target, bench, on_sent=said)
        finally:
            conn.close()
    for line in report.refused:
        print(f"refused: {line}", file=sys.stderr)
    entries = sum(n for _, n, _ in report.sent)
    print(
        f"lab {target.label}: bench {report.bench}: {len(report.sent)} session(s) sent "
        f"({entries} entries), {report.unchanged} already there, {len(report.refused)} refused"
    )
    return 1 if report.refused else 0
