"""``bringup sign SESSION|--last --key PATH --role operator|reviewer [--db PATH]``: sign off a record."""

from __future__ import annotations

import argparse
from pathlib import Path

from bringup.commands.session_choice import add_session_choice, chosen_session


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    """Register ``sign``."""
    parser = subparsers.add_parser(
        "sign",
        help="sign off a session's record as operator or reviewer",
        description="Sign the canonical content of SESSION's record with your Ed25519 key "
        "and store the signature in the log. Refused while a step is unfinished or failed "
        "without a waiver (the refusal lists what is open), when the log's hash chain is "
        "broken, when this key already signed in this role, and when this key (or this "
        "signer's name) signed in the other role: a review needs a second person.",
    )
    add_session_choice(parser)
    parser.add_argument("--key", required=True, type=Path, metavar="PATH", help="private key")
    parser.add_argument("--role", required=True, choices=("operator", "reviewer"))
    parser.add_argument("--db", type=Path, metavar="PATH", help="the session log (SQLite)")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """Sign and report who signed what."""
    from bringup.record.from_log import open_log, sign_session
    from bringup.record.keys import key_id

    with open_log(args.db) as log:
        entry = sign_session(log, chosen_session(log, args), args.key, args.role)
    print(
        f"signed as {entry['role']} by {entry['name']} at {entry['signed_at']} "
        f"with key id {key_id(entry['key_fingerprint'])}"
    )
    return 0
