"""``bringup capture``: one record from the bench's scope, saved with its scale and identity.

The scope is armed once, the record fetched and checked like every record of a run (point
count, code range, the instrument's own mean and peak-to-peak), then written as an ``.npz``
that ``bringup analyze`` reads: ``t`` (seconds from the trigger) and the volts named after the
net (or ``ch<N>``), beside ``meta_*`` arrays: the raw codes, the scale, the ``*IDN?`` answer,
the profile and the time. The supply is never spoken to.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from bringup.errors import InputError

__all__ = ["add_parser", "run"]


def add_parser(subparsers: argparse._SubParsersAction) -> argparse.ArgumentParser:
    """Register ``capture``."""
    parser = subparsers.add_parser(
        "capture",
        help="arm the scope once and save its record (never touches the supply)",
        description="Arm the bench's scope once, fetch one channel's record, check it and save "
        "it with its scale and the scope's identity for `bringup analyze`.",
    )
    parser.add_argument("--bench", metavar="FILE", required=True, help="bench file")
    which = parser.add_mutually_exclusive_group(required=True)
    which.add_argument("--channel", type=int, metavar="N", help="scope channel to fetch")
    which.add_argument("--net", metavar="NAME", help="the net whose wired channel to fetch")
    parser.add_argument("--points", type=int, metavar="N", help="record points (with --span)")
    parser.add_argument(
        "--span", metavar="S", help="record span in seconds, centred on the trigger (with --points)"
    )
    parser.add_argument(
        "--out",
        metavar="FILE.npz",
        default="capture.npz",
        help="where to save (default %(default)s)",
    )
    parser.add_argument(
        "--profiles", type=Path, metavar="DIR", help="folder of your own command profiles"
    )
    from bringup.commands.run import add_scpi_log_option

    add_scpi_log_option(parser)
    parser.set_defaults(func=run)
    return parser


def run(args: argparse.Namespace) -> int:
    import datetime as dt
    import os
    import tempfile

    import numpy as np

    from bringup.analysis.quantities import parse_quantity
    from bringup.commands.instruments import check_profiles_option
    from bringup.instruments.bench import load_bench
    from bringup.instruments.capture import capture

    check_profiles_option(args.profiles)
    out = Path(args.out)
    if out.suffix.lower() != ".npz":
        raise InputError(f"--out {out}: the file name must end in .npz")
    if not out.parent.is_dir():
        raise InputError(f"--out {out}: no folder {out.parent}")
    if args.points is not None and not 2 <= args.points <= 1_000_000_000:
        raise InputError(f"--points {args.points}: 2 or more")
    span = None
    if args.span is not None:
        span = parse_quantity(args.span, "s", where="--span")
        if not 0 < span < 1e4:
            raise InputError(f"--span {args.span}: a time above 0 s")
    config = load_bench(args.bench)
    got = capture(
        config,
        channel=args.channel,
        net=args.net,
        points=args.points,
        span_s=span,
        profiles_dir=args.profiles,
    )
    wf = got.waveform
    name = got.net or f"ch{got.channel}"
    arrays = {
        "t": wf.times(),
        name: wf.volts(),
        "meta_codes": wf.codes,
        "meta_scale": np.array([wf.y_increment, wf.y_origin, wf.x_increment, wf.x_origin]),
        "meta_identity": np.array(got.identity),
        "meta_profile": np.array(got.profile),
        "meta_source": np.array(f"{got.resource} {wf.source}"),
        "meta_utc": np.array(dt.datetime.now(dt.UTC).isoformat(timespec="seconds")),
    }
    # written beside the target and renamed: a reader never sees half a file
    fd, tmp = tempfile.mkstemp(prefix=".capture-", suffix=".npz", dir=out.parent)
    try:
        with os.fdopen(fd, "wb") as f:
            np.savez(f, **arrays)
        os.replace(tmp, out)
    except OSError as exc:
        Path(tmp).unlink(missing_ok=True)
        raise InputError(f"--out {out}: cannot write: {exc.strerror or exc}") from None
    volts = arrays[name]
    print(
        f"{out}: {wf.points} points of {name} ({wf.source}), {volts.min():.4g} V to "
        f"{volts.max():.4g} V, {wf.x_increment:.4g} s apart; scope {got.identity}"
    )
    return 0
