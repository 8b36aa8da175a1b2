"""``bringup instruments``: check that each instrument of a bench file answers.

Opens each instrument by its explicit resource string, prints its ``*IDN?``, which profiles
match it, and whether its error queue is empty. ``--discover`` lists VISA resources, which
sends broadcast traffic beyond this machine: it runs only when asked.
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
        "--discover",
        action="store_true",
        help="also list VISA resources (broadcasts on your network; only when you ask)",
    )
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

            if Supply(session).output_is_on():
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


def run(args: argparse.Namespace) -> int:
    from bringup.instruments.bench import ROLES, load_bench, profile_for_role
    from bringup.instruments.profiles import all_profiles

    bench_path = args.bench or Path("bench.toml")
    if args.bench is None and not bench_path.is_file():
        raise InputError("no bench file: pass --bench FILE (or put bench.toml here)")
    config = load_bench(bench_path)
    profiles = all_profiles(args.profiles)
    healthy = True
    if config.simulated:
        print(f"{config.path}: simulated bench ([simulation] enabled)")
    for role in ROLES:
        entry = config.instruments[role]
        try:
            profile = profile_for_role(config, role, args.profiles)
        except BringupError as exc:
            print(f"{role}: {entry.resource}\n  problem   {exc}")
            healthy = False
            continue
        lines, ok = _check_one(role, entry, profile, profiles)
        healthy &= ok
        print("\n".join(lines))
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
