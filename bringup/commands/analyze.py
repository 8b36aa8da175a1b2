"""``bringup analyze edges|droop|soak FILE``: measure a capture exported from a scope or logger.

Files: CSV (time in s in the first column, then signal columns; header row optional, ``#``
comments, comma or semicolon), ``.npy`` (N x 2: time, signal) or ``.npz`` (``t`` + channels).
Output: a table, or with ``--json`` one JSON object; a value that cannot be computed is
``null`` and ``reasons`` says why. Bad input: one line on stderr, exit status 2.

The module top level imports only the standard library: numpy, the analysis and (for
``soak``) scipy are imported inside ``run`` so that ``bringup analyze --help`` starts fast.
"""

from __future__ import annotations

import argparse
import json
import math
import sys

from bringup.errors import InputError

__all__ = ["add_parser", "run", "emit", "to_jsonable"]


def add_parser(subparsers: argparse._SubParsersAction) -> argparse.ArgumentParser:
    """Register ``analyze`` and its three sub-commands."""
    parser = subparsers.add_parser(
        "analyze",
        help="measure a capture file: edges, droop or thermal soak",
        description="Measure a capture exported from a scope or logger (CSV, .npy, .npz): the "
        "same numbers the notebook logs.",
    )
    sub = parser.add_subparsers(dest="analysis", metavar="ANALYSIS", required=True)

    edges = sub.add_parser(
        "edges",
        help="state levels, rise/fall times, overshoot, frequency, duty cycle (IEEE Std 181)",
        description="Transitions of a two-level waveform by IEEE Std 181-2011: state levels from "
        "the histogram (min/max for short or sparse records), reference levels, every "
        "transition with hysteresis, crossings by linear interpolation.",
    )
    _file_and_channel(edges)
    edges.add_argument(
        "--levels",
        default="10,50,90",
        metavar="LOW,MID,HIGH",
        help="reference levels in %% of amplitude (default %(default)s; 20,80 edges: 20,50,80)",
    )
    _json(edges)
    edges.set_defaults(func=run)

    droop = sub.add_parser(
        "droop",
        help="droop of a long on-pulse's flat top and the longest on-time to a floor",
        description="Fit a least-squares line to the settled flat top of the longest on-pulse "
        "(a high-side gate or V_BS over a long on-time) and extrapolate to the floor.",
    )
    _file_and_channel(droop)
    droop.add_argument(
        "--floor", required=True, metavar="V", help="lowest acceptable level, e.g. 8.2V (UVLO)"
    )
    droop.add_argument(
        "--settle",
        metavar="T",
        help="time after the rising edge to skip before fitting (default: found from the data)",
    )
    _json(droop)
    droop.set_defaults(func=run)

    soak = sub.add_parser(
        "soak",
        help="predict the final temperature of a thermal soak that has not settled",
        description="Fit T(t) = T_final - (T_final - T0) exp(-t/tau) to a temperature log "
        "(time in s, temperature in degC) and predict T_final and when it is reached.",
    )
    _file_and_channel(soak)
    soak.add_argument(
        "--band",
        default="1 K",
        metavar="K",
        help="settled when within this of T_final (default %(default)s)",
    )
    _json(soak)
    soak.set_defaults(func=run)
    return parser


def _file_and_channel(p: argparse.ArgumentParser) -> None:
    p.add_argument("file", metavar="FILE", help="capture file: .csv, .npy or .npz")
    p.add_argument("--channel", metavar="NAME", help="signal column (default: the first)")


def _json(p: argparse.ArgumentParser) -> None:
    p.add_argument("--json", action="store_true", help="print one JSON object")


# --- Output helpers (shared with ``bringup calc``) -----------------------------------------


def to_jsonable(obj):
    """Plain JSON types: numpy scalars to Python, tuples to lists, non-finite floats to None."""
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [to_jsonable(v) for v in obj]
    if hasattr(obj, "item") and not isinstance(obj, str | bytes):
        obj = obj.item()
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def emit(result: dict, rows: list[tuple[str, str]], as_json: bool, title: str) -> None:
    """Print ``result`` as one JSON object, or ``rows`` (label, text) as a table."""
    if getattr(sys.stdout, "encoding", "utf-8").lower().replace("-", "") not in ("utf8", "utf16"):
        try:  # an ASCII terminal: print "?" for µ, Ω, ° rather than fail
            sys.stdout.reconfigure(errors="replace")  # type: ignore[union-attr]
        except (AttributeError, ValueError):
            pass
    if as_json:
        print(json.dumps(to_jsonable(result), allow_nan=False, ensure_ascii=False))
        return
    print(title)
    width = max(len(label) for label, _ in rows)
    for label, text in rows:
        print(f"  {label:<{width}}  {text}")


def shown(value, unit: str, reasons: dict, key: str, digits: int = 4) -> str:
    """A table cell: the value in engineering notation, or "n/a (reason)"."""
    from bringup.analysis.quantities import format_quantity

    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        why = reasons.get(key)
        return f"n/a ({why})" if why else "n/a"
    return format_quantity(value, unit, digits)


# --- The analyses --------------------------------------------------------------------------


def _parse_levels(text: str) -> tuple[float, float, float]:
    parts = [p.strip().rstrip("%") for p in text.split(",")]
    try:
        values = tuple(float(p) for p in parts)
    except ValueError:
        values = ()
    if len(values) == 2:  # "20,80": the middle reference at 50 %
        values = (values[0], 50.0, values[1])
    if len(values) != 3 or not 0 < values[0] < values[1] < values[2] < 100:
        raise InputError(
            f"--levels: expected three rising percentages between 0 and 100 like 10,50,90, "
            f"got {text!r}"
        )
    return values  # type: ignore[return-value]


def run(args: argparse.Namespace) -> int:
    """Read the file, run the analysis, print."""
    from bringup.analysis.errors import AnalysisError
    from bringup.capture_files import read_capture

    if args.analysis == "edges":
        levels = _parse_levels(args.levels)  # check options before reading a large file
    capture = read_capture(args.file)
    channel, y = capture.channel(args.channel)
    try:
        if args.analysis == "edges":
            _edges(args, capture, channel, y, levels)
        elif args.analysis == "droop":
            _droop(args, capture, channel, y)
        else:
            _soak(args, capture, channel, y)
    except AnalysisError as exc:
        raise InputError(f"{capture.path}: channel {channel}: {exc}") from None
    sys.stdout.flush()
    return 0


def _header(capture, channel: str, extra: str = "") -> str:
    return f"{capture.path}, channel {channel}: {capture.t_s.size} samples{extra}"


def _edges(args, capture, channel, y, levels) -> None:
    from bringup.analysis.edges import measure_edges
    from bringup.analysis.quantities import format_quantity

    t0, dt = capture.sampling()
    m = measure_edges(y, dt, t0, levels)
    r = m.reasons
    result = {"file": capture.path, "channel": channel, **m.to_dict()}

    def q(key, unit, digits=4):
        return shown(getattr(m, key), unit, r, key, digits)

    def pct(key):
        value = getattr(m, key)
        return f"{value:.2f} %" if value is not None else shown(None, "", r, key)

    rows = [
        ("low level", f"{q('low_level_v', 'V')}  ({m.level_method})"),
        ("high level", q("high_level_v", "V")),
        ("amplitude", q("amplitude_v", "V")),
        (
            "reference levels",
            ", ".join(
                f"{p:g} % = {format_quantity(v, 'V')}"
                for p, v in zip(m.reference_levels_pct, m.reference_levels_v, strict=True)
            ),
        ),
        ("edges", f"{m.edges} ({m.rising_edges} rising, {m.falling_edges} falling)"),
        ("rise time", _spread(m, "rise_time", q)),
        ("fall time", _spread(m, "fall_time", q)),
        ("overshoot", f"{pct('overshoot_pct')}" + _worst(m.overshoot_max_pct)),
        ("undershoot", f"{pct('undershoot_pct')}" + _worst(m.undershoot_max_pct)),
        ("pulse width", q("pulse_width_s", "s")),
        ("period", q("period_s", "s")),
        ("frequency", q("frequency_hz", "Hz")),
        (
            "duty cycle",
            f"{m.duty_cycle * 100:.2f} %" if m.duty_cycle is not None else q("duty_cycle", ""),
        ),
        (
            "mean",
            q("mean_v", "V")
            + (f"  (whole periods {q('cycle_mean_v', 'V')})" if m.cycle_mean_v is not None else ""),
        ),
        ("min / max", f"{q('min_v', 'V')} / {q('max_v', 'V')}"),
    ]
    emit(result, rows, args.json, _header(capture, channel, f", {format_quantity(dt, 's')} apart"))


def _spread(m, name: str, q) -> str:
    if getattr(m, f"{name}_s") is None:
        return q(f"{name}_s", "s")
    return f"{q(f'{name}_s', 's')}  (min {q(f'{name}_min_s', 's')}, max {q(f'{name}_max_s', 's')})"


def _worst(value) -> str:
    return f"  (worst {value:.2f} %)" if value is not None else ""


def _droop(args, capture, channel, y) -> None:
    from bringup.analysis.droop import measure_droop
    from bringup.analysis.quantities import parse_quantity

    floor = parse_quantity(args.floor, "V", where="--floor")
    settle = None if args.settle is None else parse_quantity(args.settle, "s", where="--settle")
    if settle is not None and settle < 0:
        raise InputError(f"--settle: must be >= 0, got {args.settle!r}")
    t0, dt = capture.sampling()
    m = measure_droop(y, dt, floor, t0, settle_s=settle)
    r = m.reasons
    result = {"file": capture.path, "channel": channel, **m.to_dict()}

    def q(key, unit):
        return shown(getattr(m, key), unit, r, key)

    ext = f"  ({m.extrapolation:.1f}x the observed on-time)" if m.extrapolation else ""
    rows = [
        ("on-time", f"{q('on_time_s', 's')}  ({m.window})"),
        ("settled after", q("settle_s", "s")),
        ("start level", q("start_v", "V")),
        ("end level", q("end_v", "V")),
        ("droop", q("droop_v", "V")),
        (
            "droop rate",
            f"{q('droop_rate_v_per_s', 'V/s')} +/- {q('droop_rate_uncertainty_v_per_s', 'V/s')}",
        ),
        ("floor", q("floor_v", "V")),
        ("longest on-time", q("t_on_max_s", "s") + ext),
        ("fit residual", f"{q('residual_rms_v', 'V')} rms"),
    ]
    emit(result, rows, args.json, _header(capture, channel))


def _parse_band(text: str) -> float:
    from bringup.analysis.quantities import parse_quantity

    try:
        band = parse_quantity(text, "K", where="--band")
    except InputError:
        band = parse_quantity(text, "degC", where="--band")  # a difference in °C is in K
    if not band > 0:
        raise InputError(f"--band: must be > 0 K, got {text!r}")
    return band


def _soak(args, capture, channel, y) -> None:
    from bringup.analysis.soak import fit_soak

    band = _parse_band(args.band)
    f = fit_soak(capture.t_s, y, band_k=band)
    result = {"file": capture.path, "channel": channel, **f.to_dict()}
    rows = [
        ("final temperature", f"{f.final_c:.2f} °C +/- {f.final_c_uncertainty:.2f} K (k = 2)"),
        ("start temperature", f"{f.start_c:.2f} °C"),
        ("time constant", f"{f.tau_s:.1f} s +/- {f.tau_uncertainty_s:.1f} s"),
        (
            "settled",
            f"at t = {f.settle_time_s:.0f} s (within {f.band_k:g} K)"
            + (
                f", {f.settle_in_s:.0f} s after the last sample"
                if f.settle_in_s > 0
                else ", already"
            ),
        ),
        (
            "data",
            f"{f.samples} samples, {f.taus_covered:.2f} tau, residual {f.residual_rms_c:.3f} K rms",
        ),
    ]
    rows += [("warning", w) for w in f.warnings]
    emit(result, rows, args.json, _header(capture, channel))
