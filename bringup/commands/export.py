"""``bringup export SESSION|--last --format html|pdf|json [--out PATH] [--db PATH | --lab URL]``:
the record."""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

from bringup.commands.session_choice import add_session_choice, chosen_session
from bringup.errors import InputError

FORMATS = ("json", "html", "pdf")


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    """Register ``export``."""
    parser = subparsers.add_parser(
        "export",
        help="write a session's bring-up record (JSON, HTML or PDF)",
        description="Write the bring-up record of SESSION: JSON (canonical, versioned, what "
        "is signed and verified), HTML (one self-contained, printable file) or PDF. "
        "Exporting the same session twice gives the same bytes. The log's hash chain is "
        "checked first: when an entry was changed after logging, the export is refused "
        "(exit 2, one line naming the entry and field; `bringup verify --db` shows the rest).",
    )
    add_session_choice(parser)
    parser.add_argument("--format", choices=FORMATS, default="json", help="default: json")
    parser.add_argument(
        "--out",
        metavar="PATH",
        help="file to write ('-' for standard output; default record-SESSION.FORMAT here)",
    )
    parser.add_argument("--db", type=Path, metavar="PATH", help="the session log (SQLite)")
    from bringup.commands.log_source import add_lab_option

    add_lab_option(parser)
    parser.set_defaults(func=run)


def render(record: dict, fmt: str) -> bytes:
    """The bytes of ``record`` in ``fmt``."""
    if fmt == "json":
        from bringup.record.verify import record_bytes

        return record_bytes(record)
    if fmt == "html":
        from bringup.record.export_html import render_html

        return render_html(record).encode("utf-8")
    from bringup.record.export_pdf import render_pdf

    return render_pdf(record)


def run(args: argparse.Namespace) -> int:
    """Build the record from the log and write it."""
    from bringup.commands.log_source import open_reader
    from bringup.record.from_log import record_from_log

    with open_reader(args) as log:
        record = record_from_log(log, chosen_session(log, args))
    data = render(record, args.format)
    session_id = record["content"]["session"]["id"]
    if args.out == "-":
        sys.stdout.buffer.write(data)
        sys.stdout.flush()
        return 0
    out = Path(args.out) if args.out else Path(f"record-{session_id}.{args.format}")
    if out.is_dir():
        raise InputError(f"--out {out}: is a directory; give a file name")
    tmp = out.with_name(out.name + ".part")
    try:
        tmp.write_bytes(data)
        os.replace(tmp, out)  # never leaves a half-written record under the final name
    except OSError as exc:
        raise InputError(f"--out {out}: cannot write ({exc.strerror})") from None
    digest = record["seal"]["content_sha256"]
    print(f"{out}: {args.format} record of session {session_id}, content SHA-256 {digest}")
    return 0
