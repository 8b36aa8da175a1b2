"""``bringup run``: a new session of one board serial number through one checklist.

``--auto`` runs every step without a UI (confirmations and typed readings from ``--answers
FILE``, or played by the simulated bench under ``--sim``; otherwise a step is refused and
logged as not run), prints each step's verdict and exits 0 when everything passed, 1 when
something did not, 2 on an error. Without ``--auto`` the notebook's session screen opens.
"""

from __future__ import annotations

import argparse
import os
import sys

from bringup.errors import InputError

__all__ = [
    "add_parser",
    "run",
    "add_bench_options",
    "add_scpi_log_option",
    "add_headless_options",
    "run_headless_cli",
    "check_db_option",
    "check_one_line",
]

#: Bounds of ``--time-scale`` (simulated seconds per real second): 1 is real time (slower would
#: make a soak longer than on a real bench); above 1e4 (a 20-minute soak in 0.12 s) the thermal
#: model outruns the soak's reading loop and too few readings are left to fit (a healthy board
#: fails its soak at 1e5).
MIN_TIME_SCALE, MAX_TIME_SCALE = 1.0, 1e4

SCENARIOS = ("healthy", "weak-bootstrap", "no-overdrive", "slow-gate", "hot-switch", "sagging-rail")
#: A half-bridge board's scenarios (``sim_instruments.half_bridge_scenarios``; healthy too).
HALF_BRIDGE_SCENARIOS = ("shoot-through", "long-dead-time", "no-refresh", "switch-node-spike")


def add_scpi_log_option(parser: argparse.ArgumentParser) -> None:
    """``--scpi-log FILE``: every line sent to and received from the instruments, timed."""
    parser.add_argument(
        "--scpi-log",
        metavar="FILE",
        help="append every SCPI line sent and received (binary blocks summarised), with UTC "
        "timestamps, to FILE",
    )


def add_bench_options(parser: argparse.ArgumentParser) -> None:
    """``--bench FILE | --sim [--scenario NAME] [--seed N]``."""
    group = parser.add_mutually_exclusive_group()
    group.add_argument("--bench", metavar="FILE", help="bench file naming the instruments")
    group.add_argument("--sim", action="store_true", help="a simulated bench on 127.0.0.1")
    parser.add_argument("--scenario", metavar="NAME", default=None,
                        help=f"simulated board behaviour with --sim: {', '.join(SCENARIOS)}; "
                        f"a half-bridge board: {', '.join(HALF_BRIDGE_SCENARIOS)} "
                        "(default healthy)")  # fmt: skip
    parser.add_argument(
        "--seed", type=int, default=0, help="simulated bench's noise seed (default 0)"
    )
    add_scpi_log_option(parser)
    parser.add_argument(
        "--time-scale",
        type=float,
        default=None,
        metavar="K",
        help="with --sim: simulated seconds per real second of the thermal model, 1 to 1e4 "
        "(default 1000 in the notebook: a 20-minute soak in 1.2 s; with --auto the bench's "
        "waits pass on the simulated clock alone, with no wall-clock wait)",
    )


def add_headless_options(parser: argparse.ArgumentParser) -> None:
    """``--db``, ``--auto``, ``--answers``, ``--json``."""
    parser.add_argument("--db", metavar="PATH", help="session log (default: your data directory)")
    parser.add_argument("--auto", action="store_true", help="run every step without a UI")
    parser.add_argument("--answers", metavar="FILE",
                        help="with --auto: confirmations and typed readings (TOML)")  # fmt: skip
    parser.add_argument("--json", action="store_true",
                        help="with --auto: print one JSON object with the verdicts at the end")  # fmt: skip


def add_parser(subparsers: argparse._SubParsersAction) -> argparse.ArgumentParser:
    """Register ``run``."""
    parser = subparsers.add_parser(
        "run",
        help="run a session: a board serial number through a checklist (headless with --auto)",
        description="Start a session for one board serial number through one checklist, on a "
        "bench file's instruments or a simulated bench. Exit status with --auto: 0 everything "
        "passed, 1 something failed or was not run, 2 an error.",
    )
    parser.add_argument("--board", metavar="FILE",
                        help="board file ('demo' = the shipped demo board, 'demo-half-bridge' "
                        "the shipped half-bridge; default with --sim: demo)")  # fmt: skip
    parser.add_argument("--checklist", metavar="FILE",
                        help="checklist file (default: the standard high-side bootstrap one; "
                        "'half-bridge-bootstrap' names the shipped half-bridge one)")  # fmt: skip
    add_bench_options(parser)
    parser.add_argument("--serial", metavar="SN", help="the board's serial number")
    parser.add_argument("--operator", metavar="NAME",
                        help="who runs the session (default: $BRINGUP_OPERATOR)")  # fmt: skip
    add_headless_options(parser)
    parser.set_defaults(func=run)
    return parser


def check_one_line(option: str, value: str) -> None:
    """Refuse a name or serial number with a control character (a newline breaks the session
    header and the record): one line naming ``option``."""
    from bringup.boards.board_file import control_character

    bad = control_character(value)
    if bad is not None:
        raise InputError(
            f"{option} {value!r}: contains the control character {bad} (one line of text)"
        )


def check_db_option(args: argparse.Namespace) -> None:
    """``--db ""`` is refused: an empty path must not quietly mean the default log."""
    if args.db is not None and not args.db.strip():
        raise InputError(f"--db {args.db!r}: an empty path (leave --db out for the default log)")


def check_headless_options(args: argparse.Namespace) -> None:
    """``--json`` and ``--answers`` only make sense with ``--auto``; the bench options are in
    range; ``--db`` is not empty."""
    check_db_option(args)
    if args.json and not args.auto:
        raise InputError("--json: only with --auto (the notebook screen shows the verdicts)")
    if args.answers and not args.auto:
        raise InputError("--answers: only with --auto (the notebook asks the operator)")
    if args.scenario is not None and not args.sim:
        raise InputError("--scenario: only with --sim")
    if args.time_scale is not None and not args.sim:
        raise InputError("--time-scale: only with --sim")
    if args.time_scale is not None and not MIN_TIME_SCALE <= args.time_scale <= MAX_TIME_SCALE:
        raise InputError(
            f"--time-scale {args.time_scale:g}: must lie between {MIN_TIME_SCALE:g} (real time) "
            f"and {MAX_TIME_SCALE:g} simulated seconds per real second"
        )
    if args.seed < 0:
        raise InputError(f"--seed {args.seed}: must be a non-negative integer")
    known = SCENARIOS + HALF_BRIDGE_SCENARIOS
    if args.scenario is not None and args.scenario not in known:
        raise InputError(f"--scenario {args.scenario}: unknown (one of {', '.join(known)})")


def bench_source(args: argparse.Namespace):
    """The ``BenchSource`` named by ``--bench``/``--sim`` (None when neither was given)."""
    from pathlib import Path

    from bringup.runner import BenchSource
    from bringup.runner.bench_source import UNPACED

    if args.sim:
        if args.time_scale is not None:
            return BenchSource.simulated(args.scenario or "healthy", args.seed, args.time_scale)
        if getattr(args, "auto", False):
            # nobody watches a headless run: the bench's waits pass on the simulated clock only
            return BenchSource.simulated(args.scenario or "healthy", args.seed, UNPACED)
        return BenchSource.simulated(args.scenario or "healthy", args.seed)
    if args.bench:
        path = Path(args.bench).expanduser()
        if not path.is_file():
            raise InputError(f"--bench {args.bench}: no such file")
        return BenchSource.from_file(path)
    return None


def _say(line: str, file=None) -> None:
    """Print one line; a terminal or pipe that is gone (SIGHUP, a closed pipe) is no error."""
    try:
        print(line, file=file or sys.stderr, flush=True)
    except (OSError, ValueError):
        pass


def run_headless_cli(runner, args: argparse.Namespace, book=None) -> int:
    """Run ``runner``'s unfinished steps headless, print progress and verdicts; exit status:
    0 everything passed, 1 the board failed or a step was not run, 2 an instrument fault
    ended a step, 128 + N when signal N stopped the run (130 for SIGINT, 129 for SIGHUP).

    Every terminating signal switches the supply off at once, logs the interrupted attempt
    and an ``abort`` event naming the signal (``bringup.runner.stop_signals``); a closed
    output pipe does the same (SIGPIPE). ``book``: the ``--answers`` file already read and
    checked (``load_answers``) before the session was created or resumed; read here when not
    given."""
    from bringup.runner.answers import load_answers
    from bringup.runner.stop_signals import SignalGuard, SignalStop

    if book is None and args.answers:
        book = load_answers(args.answers, runner.checklist)
    guard = SignalGuard(lambda stop: runner.executor.stop_now(interrupting=True))
    try:
        with guard:
            return _headless(runner, args, book)
    except SignalStop as stop:
        return _stopped(runner, stop.reason, stop.exit_status)
    except BrokenPipeError:
        import os
        import signal

        # further writes to the closed pipe would fail again at exit: send them nowhere
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        from bringup.runner.stop_signals import WHY

        return _stopped(runner, f"SIGPIPE: {WHY['SIGPIPE']}", 128 + signal.SIGPIPE)


def _stopped(runner, reason: str, status: int) -> int:
    """After a signal: supply off (confirmed or not), the abort event naming it, one line."""
    off = runner.abort(reason)
    _say(f"bringup: stopped by {reason}: {off.text()}; session {runner.session_id} can be "
         "resumed")  # fmt: skip
    return status


def _headless(runner, args: argparse.Namespace, book) -> int:
    import json

    from bringup.runner.headless import run_headless
    from bringup.runner.reporting import PASSING, attempt_lines, summary_json

    out = sys.stderr if args.json else sys.stdout
    total = len(runner.checklist.steps())
    index = {s.id: i for i, s in enumerate(runner.checklist.steps(), start=1)}
    print(f"session {runner.session_id}: {runner.board.name} rev {runner.board.revision}, "
          f"serial {runner.serial}, operator {runner.operator}", file=out, flush=True)  # fmt: skip
    runner.bench()  # an unreachable bench is an error (exit 2), not a list of not-run steps
    for notice in runner.bench_notices:  # an output found ON, a step found interrupted
        _say(f"bringup: {notice}")
    results = []

    def show(result) -> None:
        results.append(result)
        for line in attempt_lines(index[result.step_id], total, result):
            print(line, file=out, flush=True)

    verdict = run_headless(runner, book, on_result=show)
    summary = summary_json(runner, results)
    stages = ", ".join(f"{s['id']} {s['verdict']}" for s in summary["stages"])
    print(f"session {runner.session_id}: {verdict} ({stages})", file=out, flush=True)
    if args.json:
        print(json.dumps(summary), flush=True)
    faulted = [r for r in results if r.fault]
    if faulted:  # the bench failed, not (as far as anyone knows) the board
        first = faulted[0]
        _say(f"bringup: error: instrument fault in step {first.step_id}: {first.fault} "
             "(the supply output is off)")  # fmt: skip
        return 2
    return 0 if verdict in PASSING else 1


def run(args: argparse.Namespace) -> int:
    """Create the session and run it headless (``--auto``) or in the notebook."""
    check_headless_options(args)
    source = bench_source(args)
    if source is None:
        raise InputError("give --bench FILE (your instruments) or --sim (a simulated bench)")
    board = args.board or ("demo" if args.sim else None)
    if board is None:
        raise InputError("--board FILE is needed with --bench ('demo' names the demo board)")
    operator = (args.operator or os.environ.get("BRINGUP_OPERATOR", "")).strip()
    if not operator:
        raise InputError("--operator NAME: who runs the session (or set $BRINGUP_OPERATOR)")
    if not args.serial:
        raise InputError("--serial SN: the board's serial number")
    check_one_line("--operator", operator)
    check_one_line("--serial", args.serial)
    if not args.auto:
        return _notebook(args, board, operator)
    from bringup.boards.board_file import load_board
    from bringup.checklist.load import load_checklist
    from bringup.runner import SessionRunner

    board_file = load_board(board)
    checklist = load_checklist(args.checklist)
    book = None
    if args.answers:  # every answer read and checked against its step before anything is created
        from bringup.runner.answers import load_answers

        book = load_answers(args.answers, checklist)
    runner = SessionRunner.create(board=board_file, checklist=checklist, serial=args.serial,
                                  operator=operator, bench=source, db_path=args.db)  # fmt: skip
    with runner:
        return run_headless_cli(runner, args, book)


def _notebook(args: argparse.Namespace, board: str, operator: str) -> int:
    try:
        from bringup.tui.launch import Launcher
        from bringup.tui.run_app import run_app
    except ImportError:
        print("bringup run: the notebook screen is not in this build; use --auto", file=sys.stderr)
        return 2
    launcher = Launcher(args.db)
    return run_app(launcher, open_new={
        "board": board,
        "checklist": args.checklist,
        "bench_file": args.bench,
        "scenario": args.scenario if args.sim else None,
        "serial": args.serial,
        "operator": operator,
    })  # fmt: skip
