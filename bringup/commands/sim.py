"""``bringup sim``: serve the simulated scope, supply and thermometer on 127.0.0.1.

Prints the three VISA resource strings, optionally writes a bench file that points at them,
and serves until Ctrl-C or SIGTERM; then turns the simulated supply OFF, closes every
connection and exits 0.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from bringup.errors import InputError

__all__ = ["add_parser", "run", "load_design"]


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser(
        "sim",
        help="serve the simulated scope, supply and thermometer on 127.0.0.1",
        description="Serve the simulated bench (scope, supply, thermometer) on 127.0.0.1 "
        "until Ctrl-C or SIGTERM.",
    )
    parser.add_argument(
        "--board",
        default="demo",
        metavar="FILE",
        help='board file whose [design] the model uses ("demo" = the demo board, the default)',
    )
    parser.add_argument("--scenario", default="healthy", help="scenario name (default healthy)")
    parser.add_argument("--seed", type=int, default=0, help="random seed (default 0)")
    parser.add_argument(
        "--port-base",
        type=int,
        default=0,
        metavar="P",
        help="scope on P, supply on P+1, thermometer on P+2; 0 = free ports (default)",
    )
    parser.add_argument(
        "--bench-out", metavar="PATH", help="write a bench file pointing at the servers"
    )
    parser.add_argument(
        "--dialect",
        action="append",
        default=[],
        metavar="KIND=NAME",
        help="speak another instrument family's dialect, e.g. scope=tenfield, scope=outpre, "
        "supply=triple, supply=select, "
        "thermometer=dmm, thermometer=logger (repeatable; default each kind's own)",
    )
    parser.set_defaults(func=run)


def parse_dialects(options: list[str]) -> dict[str, str]:
    """``["supply=triple", ...]`` -> ``{"supply": "triple"}``; a bad one is one line naming it."""
    from sim_instruments.bench import DIALECTS

    chosen: dict[str, str] = {}
    for option in options:
        kind, sep, name = option.partition("=")
        kind, name = kind.strip(), name.strip()
        if not sep or kind not in DIALECTS or name not in DIALECTS[kind]:
            known = "; ".join(f"{k}={'|'.join(v)}" for k, v in DIALECTS.items())
            raise InputError(f"--dialect {option!r}: expected KIND=NAME, one of {known}")
        if kind in chosen and chosen[kind] != name:
            raise InputError(f"--dialect {option!r}: {kind} is already {chosen[kind]!r}")
        chosen[kind] = name
    return chosen


def load_design(board: str | Path = "demo") -> dict[str, float]:
    """The board file's ``[design]`` values as SI floats (``"demo"`` = the demo board)."""
    from bringup.boards.board_file import load_board

    return dict(load_board(board).design)


def run(args: argparse.Namespace) -> int:
    import signal
    import threading

    from sim_instruments.bench import start_bench

    if not 0 <= args.port_base <= 65533:
        raise InputError(f"--port-base {args.port_base}: a TCP port 1-65533, or 0 for free ports")
    if args.seed < 0:
        raise InputError(f"--seed {args.seed}: must be a non-negative integer")
    dialects = parse_dialects(args.dialect)
    design = load_design(args.board)
    try:
        bench = start_bench(
            design,
            scenario=args.scenario,
            seed=args.seed,
            port_base=args.port_base,
            dialects=dialects,
        )
    except ValueError as exc:
        raise InputError(f"--scenario {args.scenario!r}: {exc}") from None
    except OSError as exc:
        raise InputError(
            f"--port-base {args.port_base}: cannot listen on 127.0.0.1: {exc.strerror or exc}"
        ) from None
    stop = threading.Event()
    # Ctrl-C, SIGTERM and a closed terminal all end the same way: supply OFF, servers closed.
    stopping = [signal.SIGINT, signal.SIGTERM] + (
        [signal.SIGHUP] if hasattr(signal, "SIGHUP") else []
    )
    previous = {sig: signal.signal(sig, lambda signum, frame: stop.set()) for sig in stopping}
    try:
        if args.bench_out:
            path = Path(args.bench_out)
            try:
                path.write_text(bench.bench_file_text(), encoding="utf-8")
            except OSError as exc:
                raise InputError(f"--bench-out {path}: cannot write: {exc.strerror}") from None
        print(f"simulated bench, scenario {bench.scenario!r}, seed {args.seed}:")
        for name, resource in bench.resources.items():
            print(f"  {name:<12} {resource}")
        if args.bench_out:
            print(f"bench file: {args.bench_out}")
        print("serving on 127.0.0.1; Ctrl-C or SIGTERM stops.", flush=True)
        try:
            while not stop.wait(0.25):  # short waits so Ctrl-C is seen promptly
                pass
        except KeyboardInterrupt:
            pass
    finally:
        bench.stop()  # supply output OFF first, then every connection closed
        for sig, handler in previous.items():
            signal.signal(sig, handler)
    print("simulated bench stopped (supply output OFF).", flush=True)
    return 0
