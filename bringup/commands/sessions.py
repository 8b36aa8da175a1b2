"""``bringup sessions [--db PATH | --lab URL] [--json] [--last]``: the sessions in the log (or
the lab database), most recent first."""

from __future__ import annotations

import argparse

__all__ = ["add_parser", "run"]


def add_parser(subparsers: argparse._SubParsersAction) -> argparse.ArgumentParser:
    """Register ``sessions``."""
    parser = subparsers.add_parser(
        "sessions",
        help="list the sessions in the log",
        description="List the sessions in the log: id, board, serial, progress, overall "
        "verdict (marked 'rehearsal' for a session on a simulated bench), last activity. "
        "Reads the log only; never changes it.",
    )
    parser.add_argument("--db", metavar="PATH", help="session log (default: your data directory)")
    from bringup.commands.log_source import add_lab_option

    add_lab_option(parser)
    parser.add_argument("--json", action="store_true", help="a JSON list of objects")
    parser.add_argument(
        "--last", action="store_true", help="only the session started last (what --last names)"
    )
    parser.set_defaults(func=run)
    return parser


def _row(s) -> dict:
    return {
        "id": s.id,
        "board": s.board_name,
        "revision": s.board_revision,
        "serial": s.serial,
        "operator": s.operator,
        "checklist": s.checklist_id,
        "state": s.state,
        "verdict": s.verdict or "not-started",
        # a simulated bench's session: a rehearsal, whatever its verdict; no board was measured
        "rehearsal": s.rehearsal,
        "bench": "simulated" if s.rehearsal else "real",
        "finished": s.finished,
        "steps_done": s.steps_done,
        "steps_total": s.steps_total,
        "progress": dict(s.progress),
        "attempts": s.attempts,
        "created": s.created_utc,
        "last_activity": s.last_activity_utc,
        # listing columns that disagree with the chain (an edit outside bringup); the values
        # above are the chain's
        "altered": list(s.altered),
    }


def run(args: argparse.Namespace) -> int:
    """Print the sessions (a table, or JSON with ``--json``)."""
    import json
    from pathlib import Path

    from bringup.commands.log_source import open_reader
    from bringup.commands.run import check_db_option
    from bringup.store import default_db_path

    check_db_option(args)
    path = Path(args.db).expanduser() if args.db else default_db_path()
    where = str(path)
    if args.lab is None and not path.exists():
        rows: list[dict] = []
    else:
        with open_reader(args) as log:
            where = str(log.path)
            rows = [_row(s) for s in log.sessions()]
            if args.lab is not None:  # which bench each came from
                for r in rows:
                    r["bench_name"] = log.bench_of(r["id"])
            if args.last and rows:
                latest = log.latest_session()
                rows = [r for r in rows if r["id"] == latest]
    if args.json:
        print(json.dumps(rows))
        return 0
    if not rows:
        print(f"no sessions in {where}")
        return 0
    lead = f"{'bench':<12} " if args.lab is not None else ""
    head = (
        lead
        + f"{'id':<12} {'board':<34} {'serial':<12} {'progress':>8}  {'verdict':<22} last activity"
    )
    print(head)
    for r in rows:
        total = r["steps_total"] if r["steps_total"] is not None else "?"
        board = f"{r['board']} rev {r['revision']}" if r["revision"] else r["board"]
        state = "" if r["state"] == "open" else f" ({r['state']})"
        if r["altered"]:
            names = ", ".join(line.split(":", 1)[0] for line in r["altered"])
            state += f" [summary columns edited outside bringup: {names}; shown from the chain]"
        verdict = f"rehearsal: {r['verdict']}" if r["rehearsal"] else r["verdict"]
        lead = f"{r['bench_name'][:12]:<12} " if args.lab is not None else ""
        print(f"{lead}{r['id']:<12} {board[:34]:<34} {r['serial']:<12} {r['steps_done']:>4}/{total:<3}  "
              f"{verdict:<22} {r['last_activity']}{state}")  # fmt: skip
    return 0
