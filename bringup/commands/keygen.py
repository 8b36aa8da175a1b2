"""``bringup keygen --name NAME --out PATH``: an Ed25519 key pair for signing records."""

from __future__ import annotations

import argparse
from pathlib import Path


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    """Register ``keygen``."""
    parser = subparsers.add_parser(
        "keygen",
        help="make an Ed25519 key pair for signing records",
        description="Make an Ed25519 key pair for one person: the private key at PATH "
        "(readable by its owner only) and the public key at PATH.pub. Never overwrites.",
    )
    parser.add_argument("--name", required=True, help="the key owner's name, as signatures show it")
    parser.add_argument("--out", required=True, type=Path, metavar="PATH", help="private key file")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """Write the key pair and print where it went and its fingerprint."""
    from bringup.record.keys import generate_key_pair, key_id

    pair = generate_key_pair(args.name, args.out)
    print(f"New signing key for {pair.name}, key id {key_id(pair.public.fingerprint)}.")
    print(f"  Sign with {args.out}: only you can read it; never hand it on.")
    print(f"  Hand out {args.out}.pub: whoever checks your records needs it.")
    print("Records show the key id beside your signature.")
    return 0
