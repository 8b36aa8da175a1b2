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

#: Simulated seconds per real second in the demo: the standard soak's 8-minute minimum takes
#: 24 s and its 20 minutes at most a minute, so a person can watch the prediction and its band
#: narrow and press t once it has settled (the header shows "clock ×20").
DEMO_TIME_SCALE = 20.0


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
        default=None,
        metavar="NAME",
        help="what the simulated board does (healthy, weak-bootstrap, no-overdrive, slow-gate, "
        "hot-switch, sagging-rail; default healthy); not with --bench",
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
    from bringup.commands.run import add_scpi_log_option

    add_scpi_log_option(parser)
    parser.set_defaults(func=run)
    return parser


def check_options(args: argparse.Namespace) -> None:
    """Refuse a bad option before the notebook takes the terminal: one ``InputError`` line.

    Checks the scenario name against the simulator's scenarios, ``$BRINGUP_PROFILES`` (a
    folder, when set), ``--bench`` (the file and the profile each instrument names, without
    opening any instrument), ``--db`` (a file in an existing folder), the serial against the
    demo board's pattern and the operator's name.
    """
    from pathlib import Path

    from bringup.errors import InputError

    if args.scenario is not None:
        from sim_instruments.scenarios import SCENARIOS

        if args.bench:
            raise InputError(
                f"--scenario {args.scenario}: only for the simulated bench, not with --bench"
            )
        if args.scenario not in SCENARIOS:
            raise InputError(f"--scenario {args.scenario}: unknown (one of {', '.join(SCENARIOS)})")
    from bringup.commands.instruments import check_profiles_option

    # $BRINGUP_PROFILES: where every bench's profiles are looked up, the simulated one's too
    check_profiles_option(None)
    if args.bench:
        from bringup.instruments.bench import ROLES, load_bench, profile_for_role

        bench = Path(args.bench).expanduser()
        if not bench.is_file():
            what = "not a file" if bench.exists() else "no such file"
            raise InputError(f"--bench {args.bench}: {what}")
        config = load_bench(bench)
        for role in ROLES:
            profile_for_role(config, role, None)
    if args.db:
        db = Path(args.db).expanduser()
        if db.is_dir():
            raise InputError(f"--db {args.db}: is a directory; give the log file's name")
        if not db.parent.is_dir():
            raise InputError(f"--db {args.db}: no such folder {db.parent} for the log")
    if args.operator is not None and (
        not args.operator.strip() or len(args.operator.strip().splitlines()) != 1
    ):
        raise InputError(f"--operator {args.operator!r}: a one-line, non-empty name is needed")
    from bringup.boards.board_file import load_board

    try:
        load_board("demo").check_serial(args.serial)
    except InputError as exc:
        raise InputError(f"--serial: {exc}") from None


def run(args: argparse.Namespace) -> int:
    """Run the demo until the operator quits; prints where the log was kept.

    Every option is checked first (``check_options``): a bad one is one line on stderr and
    exit status 2, and the notebook never starts.
    """
    import sys
    import tempfile
    from pathlib import Path

    check_options(args)

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
            "scenario": args.scenario or "healthy",
            "serial": args.serial,
            "operator": args.operator or demo_operator(),
        },
    )
    # the notebook has already printed the exact command that carries on (with this --db)
    print(f"bringup demo: the supply is off; the log is {db}", file=sys.stderr)
    return status
