"""``bringup demo [--scenario NAME]``: the simulated bench and a new session on the demo board.

Starts the simulated scope, supply and thermometer in-process on free loopback ports, makes a
fresh log in a temporary folder and opens a session on the demo board at once. Quitting,
Ctrl+C, a closed terminal or a crash switch the simulated supply OFF and stop the bench.
"""

from __future__ import annotations

import argparse
import getpass
import os

__all__ = ["add_parser", "run", "demo_operator", "DEMO_TIME_SCALE"]

#: Simulated seconds per real second in the demo: a 20-minute soak takes about 12 s.
DEMO_TIME_SCALE = 100.0


def demo_operator() -> str:
    """The operator's name for the demo: $BRINGUP_OPERATOR, else the login name, else 'demo'."""
    name = os.environ.get("BRINGUP_OPERATOR", "").strip()
    if name:
        return name
    try:
        return getpass.getuser() or "demo"
    except (KeyError, OSError):
        return "demo"


def add_parser(subparsers: argparse._SubParsersAction) -> argparse.ArgumentParser:
    """Register ``demo``."""
    parser = subparsers.add_parser(
        "demo",
        help="simulated bench + a new session on the demo board, in a temporary log",
        description="Start the simulated bench on 127.0.0.1 and open a new session on the demo "
        "board in a fresh temporary log.",
    )
    parser.add_argument(
        "--scenario",
        default="healthy",
        metavar="NAME",
        help="what the simulated board does (healthy, weak-bootstrap, no-overdrive, slow-gate, "
        "hot-switch, sagging-rail; default healthy)",
    )
    parser.add_argument(
        "--serial", default="DHS24-0001", help="serial number (default %(default)s)"
    )
    parser.add_argument("--operator", default=None, help="operator (default: your login name)")
    parser.add_argument("--db", metavar="PATH", help="log file (default: a fresh temporary one)")
    parser.add_argument(
        "--bench",
        metavar="FILE",
        help="use the instruments of this bench file (e.g. one written by `bringup sim "
        "--bench-out`) instead of starting a simulated bench",
    )
    parser.set_defaults(func=run)
    return parser


def run(args: argparse.Namespace) -> int:
    """Run the demo until the operator quits; prints where the log was kept."""
    import sys
    import tempfile
    from pathlib import Path

    from bringup.tui.launch import Launcher
    from bringup.tui.run_app import run_app

    if args.db:
        db = Path(args.db)
    else:
        db = Path(tempfile.mkdtemp(prefix="bringup-demo-")) / "demo-log.sqlite"
    # a slower simulated clock than the runner's default, so the soak can be watched converging
    launcher = Launcher(db, sim_time_scale=DEMO_TIME_SCALE)
    status = run_app(
        launcher,
        open_new={
            "board": "demo",
            "checklist": None,
            "bench_file": args.bench,
            "scenario": args.scenario,
            "serial": args.serial,
            "operator": args.operator or demo_operator(),
        },
    )
    print(f"bringup demo: the supply is off; the log is {db}", file=sys.stderr)
    print(f"bringup demo: carry on later with: bringup open --db {db}", file=sys.stderr)
    return status
