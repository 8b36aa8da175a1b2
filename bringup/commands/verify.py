"""``bringup verify RECORD [--db PATH | --lab URL] [--key PUB ...]``: check a signed record (JSON, or the
HTML or PDF record carrying it)."""

from __future__ import annotations

import argparse
from pathlib import Path


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    """Register ``verify``."""
    parser = subparsers.add_parser(
        "verify",
        help="check a record's signatures, content and (with --db) the log behind it",
        description="Check a record (the .json file, or the .html or .pdf record, which carry "
        "it embedded: then also that every visible page is exactly what the embedded record "
        "renders, so an edited page is named): its canonical form, its content against its seal, "
        "every signature, and with --db (or --lab) that the log's hash chain is intact, ends at the "
        "record's chain head and holds the same content, and that the session's stored state "
        "and verdict agree with its chain. Exit 0 only when all of it holds; "
        "otherwise one line per finding and exit 1.",
    )
    parser.add_argument("record", type=Path, metavar="RECORD", help="a .json, .html or .pdf record")
    parser.add_argument("--db", type=Path, metavar="PATH", help="the session log to compare with")
    from bringup.commands.log_source import add_lab_option

    add_lab_option(parser)
    parser.add_argument(
        "--key",
        type=Path,
        action="append",
        default=[],
        metavar="PUB",
        help="a trusted public key file (repeatable); each signature must come from one of them",
    )
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """Print the findings (or what holds) and return 0 only when nothing was found."""
    from bringup.record.keys import load_public_key
    from bringup.record.schemas import is_rehearsal
    from bringup.record.verify import check_rendering, read_carried, verify_record

    trusted = [load_public_key(p) for p in args.key]
    carried = read_carried(args.record)
    record, data = carried.record, carried.data
    compared = None  # where the log compared with came from
    if args.db is not None or args.lab is not None:
        from bringup.commands.log_source import open_reader, source_name

        with open_reader(args) as log:
            compared = source_name(args, log)
            if args.lab is not None:  # two benches may hold the record's id: its genesis picks
                log.pin_record(record.get("content"))
            findings = verify_record(record, data, log=log, trusted=trusted)
    else:
        findings = verify_record(record, data, trusted=trusted)
    findings += check_rendering(carried)
    if findings:
        for line in findings:
            print(f"CHANGED: {line}")
        print(f"{args.record}: does NOT hold ({len(findings)} finding(s))")
        return 1
    _say_what_holds(args, record)
    if carried.kind != "json":
        print(
            f"pages: every page of the {carried.kind.upper()} is what its embedded record renders"
        )
    if is_rehearsal(record["content"]):
        print("bench: SIMULATED, a rehearsal: no board was measured")
    else:
        print("bench: real instruments")
    _say_bench(record["content"])
    if compared is not None:
        print(f"{compared}: chain intact, head matches, content matches, summary matches")
    if not trusted:
        print("note: no --key given, so the signers' keys were not checked against trusted keys")
    return 0


def _say_what_holds(args: argparse.Namespace, record: dict) -> None:
    """The record holds: its digest, its outcome as the signatures make it, and each
    signature's signer, meaning, time and key id (21 CFR Part 11 §11.50)."""
    from bringup.record.sign_off import sign_off_state

    state = sign_off_state(record)
    digest = record.get("seal", {}).get("content_sha256", "")
    print(f"{args.record}: holds; content SHA-256 {digest}")
    print(f"outcome: {state.headline}")
    for role, meaning, name, when, key, _ in state.rows:
        print(f"signed: {name} as {role} ({meaning}) at {when}, key id {key}")


def _say_bench(content: dict) -> None:
    """Each instrument's calibration state and where the probes were moved."""
    from bringup.record.document import calibration_lines, channel_moves

    for line in calibration_lines(content):
        print(f"calibration: {line}")
    print(f"probes: {channel_moves(content)}")
