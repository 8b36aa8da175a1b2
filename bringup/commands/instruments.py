"""``bringup instruments``: check that each instrument of a bench file answers.

Opens each instrument by its explicit resource string, prints its ``*IDN?``, which profiles
match it, and whether its error queue is empty. ``--check`` goes further: every operation of
every profile is tried in a way that cannot energise anything (``bringup.instruments.check``)
and a table (or ``--json``) says what works, what is declared absent and what failed, with the
SCPI line sent and the reply. ``--discover`` lists VISA resources, which sends broadcast
traffic beyond this machine: it runs only when asked.
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path
from typing import TYPE_CHECKING

from bringup.errors import BringupError, InputError

if TYPE_CHECKING:
    from bringup.instruments.bench import InstrumentEntry
    from bringup.instruments.profiles import Profile


def add_parser(subparsers: argparse._SubParsersAction) -> None:
    """Register ``instruments``."""
    parser = subparsers.add_parser(
        "instruments",
        help="check that each instrument of a bench file answers",
        description="Open each instrument of a bench file by its resource string, print its "
        "*IDN?, the profiles that match it, and whether its error queue is empty.",
    )
    parser.add_argument(
        "--bench", type=Path, metavar="FILE", help="bench file (default: ./bench.toml)"
    )
    parser.add_argument(
        "--profiles", type=Path, metavar="DIR", help="folder of your own command profiles"
    )
    parser.add_argument(
        "--check",
        action="store_true",
        help="try every operation each profile declares, never switching the supply on, and "
        "print what works, what is declared absent and what failed (with the SCPI line)",
    )
    parser.add_argument(
        "--json", action="store_true", help="with --check: one JSON object instead of the table"
    )
    parser.add_argument(
        "--discover",
        action="store_true",
        help="also list VISA resources (broadcasts on your network; only when you ask)",
    )
    from bringup.commands.run import add_scpi_log_option

    add_scpi_log_option(parser)
    parser.set_defaults(func=run)


def _check_one(
    role: str, entry: InstrumentEntry, profile: Profile, profiles: dict[str, Profile]
) -> tuple[list[str], bool]:
    """Lines to print for one instrument and whether it is healthy."""
    from bringup.instruments import faults
    from bringup.instruments.profiles import matching_profiles
    from bringup.instruments.visa import InstrumentSession

    lines = [f"{role}: {entry.resource} (profile {profile.name})"]
    session = InstrumentSession(role, entry.resource, profile)
    ok = True
    try:
        session.open()
        start = time.monotonic()
        identity = session.ask("identify")
        took_ms = (time.monotonic() - start) * 1000
        lines.append(f"  *IDN?     {identity}")
        lines.append(f"  answers   yes, in {took_ms:.1f} ms")
        fits = matching_profiles(identity, [p for p in profiles.values() if p.kind == role])
        if profile.matches(identity):
            lines.append(f"  profile   {profile.name} matches")
        else:
            ok = False
            others = ", ".join(fits) if fits else "none"
            lines.append(f"  profile   {profile.name} does NOT match (profiles that do: {others})")
        try:
            session.check_errors(None)
            lines.append("  errors    queue empty")
        except faults.InstrumentError as exc:
            ok = False
            lines.append(f"  errors    {exc.code},{exc.text!r} was queued")
        if role == "supply":
            from bringup.instruments.supply import Supply

            supply = Supply(session, channel=entry.channel or 1)  # the board's output
            if supply.output_is_on():
                lines.append("  output    ON: the board is powered (left as found)")
            else:
                lines.append("  output    OFF")
        if entry.calibration_due is not None:
            import datetime as dt

            late = " (OVERDUE)" if entry.calibration_overdue(dt.date.today()) else ""
            lines.append(f"  calibration due {entry.calibration_due.isoformat()}{late}")
    except BringupError as exc:
        ok = False
        lines.append(f"  problem   {exc}")
    finally:
        session.close()
    return lines, ok


def check_profiles_option(profiles: Path | None) -> None:
    """Refuse a ``--profiles`` (or ``$BRINGUP_PROFILES``) that is not a folder, in one line."""
    import os

    from bringup.instruments.profiles import PROFILES_ENV

    if profiles is not None:
        where, folder = f"--profiles {profiles}", Path(profiles)
    elif os.environ.get(PROFILES_ENV):
        where, folder = f"{PROFILES_ENV}={os.environ[PROFILES_ENV]}", Path(os.environ[PROFILES_ENV])
    else:
        return
    if folder.is_dir():
        return
    if folder.exists():
        raise InputError(f"{where}: not a folder (a folder of profile .toml files is expected)")
    raise InputError(f"{where}: no such folder of profiles")


def run(args: argparse.Namespace) -> int:
    """Check every instrument of the bench file; 0 when all answer as their profiles expect.

    Every option and file (``--profiles``, the bench file, each instrument's profile) is
    checked before any instrument is opened: a bad one is one line and exit status 2.
    """
    from bringup.instruments.bench import ROLES, load_bench, profile_for_role
    from bringup.instruments.profiles import all_profiles

    check_profiles_option(args.profiles)
    bench_path = args.bench or Path("bench.toml")
    if args.bench is None and not bench_path.is_file():
        raise InputError("no bench file: pass --bench FILE (or put bench.toml here)")
    if args.json and not args.check:
        raise InputError("--json goes with --check")
    if args.check and args.discover:
        raise InputError("--check and --discover: one at a time")
    config = load_bench(bench_path)
    profiles = all_profiles(args.profiles)
    # A profile the bench file names but no folder holds is a configuration error (the file's
    # line and key), not an instrument that failed to answer.
    chosen = {role: profile_for_role(config, role, args.profiles) for role in ROLES}
    from bringup.locks import lock_resources

    # A bench another process is using is not queried (a *CLS here would clear its errors,
    # --check writes settings back): its resources are locked first, as a run does.
    locks = lock_resources((role, config.instruments[role].resource) for role in ROLES)
    try:
        if args.check:
            return _check_operations(config, chosen, args.json)
        healthy = True
        if config.simulated:
            print(f"{config.path}: simulated bench ([simulation] enabled)")
        for role in ROLES:
            lines, ok = _check_one(role, config.instruments[role], chosen[role], profiles)
            healthy &= ok
            print("\n".join(lines))
    finally:
        locks.release()
    if config.channels:
        wiring = ", ".join(
            f"CH{w.channel}={w.net} ({w.probe_ratio:g}:1)" for w in config.channels.values()
        )
        print(f"scope wiring: {wiring}")
    if args.discover:
        from bringup.instruments.visa import discover_resources

        print("VISA resources found (broadcast listing, as asked):")
        for name in discover_resources() or ("(none)",):
            print(f"  {name}")
    print("all instruments answer" if healthy else "some instruments need attention")
    return 0 if healthy else 1


def _check_operations(config, chosen: dict[str, Profile], as_json: bool) -> int:
    """``--check``: a table (or JSON) of every operation of every instrument; 0 when none failed."""
    import json

    from bringup.instruments.bench import ROLES
    from bringup.instruments.check import FAILED, check_instrument

    report = {}
    healthy = True
    for role in ROLES:
        rows = check_instrument(config, role, chosen[role])
        healthy &= not any(row.status == FAILED for row in rows)
        report[role] = (config.instruments[role], chosen[role], rows)
    if as_json:
        out = {
            "bench": str(config.path),
            "healthy": healthy,
            "instruments": {
                role: {
                    "resource": entry.resource,
                    "profile": profile.name,
                    "profile_file": str(profile.path),
                    "operations": [row.as_dict() for row in rows],
                }
                for role, (entry, profile, rows) in report.items()
            },
        }
        print(json.dumps(out))
        return 0 if healthy else 1
    for role, (entry, profile, rows) in report.items():
        print(f"{role}: {entry.resource} (profile {profile.name}, {profile.path})")
        width = max(len(row.operation) for row in rows)
        for row in rows:
            detail = []
            if row.sent is not None:
                detail.append(f"sent {row.sent!r}")
            if row.reply is not None:
                detail.append(f"reply {row.reply!r}")
            if row.note:
                detail.append(row.note)
            print(f"  {row.operation:<{width}}  {row.status:<9}  {'; '.join(detail)}")
    counts = {}
    for _, _, rows in report.values():
        for row in rows:
            counts[row.status] = counts.get(row.status, 0) + 1
    summary = ", ".join(f"{n} {status}" for status, n in sorted(counts.items()))
    print(f"{summary}: " + ("every declared operation works" if healthy else "some failed"))
    return 0 if healthy else 1
