"""``bringup analyze edges|droop|soak FILE``: measure a capture exported from a scope or logger.

Files: CSV (time in s in the first column, then signal columns; header row optional, ``#``
comments, comma or semicolon), ``.npy`` (N x 2: time, signal) or ``.npz`` (``t`` + channels).
Output: a table, or with ``--json`` one JSON object; a value that cannot be computed is
``null`` and ``reasons`` says why. Bad input: one line on stderr, exit status 2.

The analyses run under ``numpy.errstate`` (overflow, division by zero and invalid operations
raise) with Python's RuntimeWarnings raised too: a record whose arithmetic overflows is refused
with one line ("values too large to measure") rather than printing numpy warnings and an
infinite level. Samples at or above the SCPI overrange value 9.9E37 are refused when the file
is read (``bringup.captures.files``).

The module top level imports only the standard library: numpy, the analysis and (for
``soak``) scipy are imported inside ``run`` so that ``bringup analyze --help`` starts fast.
"""

from __future__ import annotations

import argparse
import contextlib
import json
import math
import re
import sys
import warnings
from collections.abc import Iterator

from bringup.errors import InputError

__all__ = [
    "add_parser",
    "run",
    "emit",
    "to_jsonable",
    "accept_negative_values",
    "refuse_overflow",
    "numeric_guard",
]

# argparse reads "-1V" (not a plain number) as an unknown option, so "--dv -1V" fails with
# "expected one argument" before the value check can say "must be > 0". These parsers have
# no option that starts with a digit, so anything that starts like a negative number is a value.
_NEGATIVE_VALUE = re.compile(r"^-\.?\d")


def accept_negative_values(parser: argparse.ArgumentParser) -> None:
    """Let ``parser`` take "-1V", "-2.5 mA", "-.5" as option values (argparse's own matcher
    accepts only plain negative numbers). Safe because no option of ours starts with a digit."""
    parser._negative_number_matcher = _NEGATIVE_VALUE  # type: ignore[attr-defined]


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
    accept_negative_values(edges)
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
    accept_negative_values(droop)
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
    accept_negative_values(soak)
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
    if (getattr(sys.stdout, "encoding", None) or "utf-8").lower().replace("-", "") not in (
        "utf8",
        "utf16",
    ):
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


def format_value(value: float | None, unit: str, digits: int = 4) -> str:
    """``format_quantity``, but a magnitude of 1e15 or more in scientific notation ("1e+299 s"):
    unprefixed units (s above 1 s, °C, %) would otherwise print every digit of a huge value."""
    from bringup.analysis.quantities import format_quantity

    if value is not None and math.isfinite(value) and abs(value) >= 1e15:
        unit_text = format_quantity(1.0, unit)[1:]  # " s", " °C", " Ω" or ""
        return f"{value:.{digits}g}{unit_text}"
    return format_quantity(value, unit, digits)


def shown(value, unit: str, reasons: dict, key: str, digits: int = 4) -> str:
    """A table cell: the value in engineering notation, or "n/a (reason)"."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        why = reasons.get(key)
        return f"n/a ({why})" if why else "n/a"
    return format_value(value, unit, digits)


def refuse_overflow(values: dict, what: str, path: str = "") -> None:
    """InputError naming the first infinite float among ``values`` (nested dicts and lists).

    NaN is left alone: a value that cannot be computed is NaN/None with a reason. An infinity
    from finite inputs is an overflow, refused as "values too large to measure".
    """
    for key, value in values.items():
        name = f"{path}.{key}" if path else str(key)
        if isinstance(value, dict):
            refuse_overflow(value, what, name)
        elif isinstance(value, list | tuple):
            refuse_overflow(dict(enumerate(value)), what, name)
        elif isinstance(value, float) and math.isinf(value):
            raise InputError(f"{what}: values too large to measure: {name} overflows to {value}")


@contextlib.contextmanager
def numeric_guard(what: str) -> Iterator[None]:
    """Run numpy arithmetic with every floating-point problem raised, reported in one line.

    Overflow (and Python's OverflowError) -> "values too large to measure"; division by zero
    or an invalid operation (inf - inf, 0/0) and numpy's RuntimeWarnings ("Mean of empty
    slice") -> "cannot measure". Underflow to 0 is harmless (a decayed exponential) and ignored.
    """
    import numpy as np

    try:
        with np.errstate(all="raise", under="ignore"), warnings.catch_warnings():
            warnings.simplefilter("error", RuntimeWarning)
            yield
    except (FloatingPointError, OverflowError, RuntimeWarning) as exc:
        text = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        if isinstance(exc, OverflowError) or "overflow" in text:
            raise InputError(f"{what}: values too large to measure ({text})") from None
        raise InputError(f"{what}: cannot measure this record ({text})") from None


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
    from bringup.captures.files import read_capture
    from bringup.errors import AnalysisError

    if args.analysis == "edges":
        levels = _parse_levels(args.levels)  # check options before reading a large file
    elif args.analysis == "droop":
        floor, settle = _droop_options(args)
    else:
        band = _parse_band(args.band)
    capture = read_capture(args.file)
    channel, y = capture.channel(args.channel)
    where = f"{capture.path}: channel {channel}"
    try:
        with numeric_guard(where):
            if args.analysis == "edges":
                _edges(args, capture, channel, y, levels)
            elif args.analysis == "droop":
                _droop(args, capture, channel, y, floor, settle)
            else:
                _soak(args, capture, channel, y, band)
    except AnalysisError as exc:
        raise InputError(f"{where}: {exc}") from None
    sys.stdout.flush()
    return 0


def _header(capture, channel: str, extra: str = "") -> str:
    return f"{capture.path}, channel {channel}: {capture.t_s.size} samples{extra}"


def _edges(args, capture, channel, y, levels) -> None:
    from bringup.analysis.edges import measure_edges

    format_quantity = format_value

    t0, dt = capture.sampling()
    m = measure_edges(y, dt, t0, levels)
    r = m.reasons
    result = {"file": capture.path, "channel": channel, **m.to_dict()}
    refuse_overflow(result, f"{capture.path}: channel {channel}")

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


def _droop_options(args) -> tuple[float, float | None]:
    """``--floor`` (V) and ``--settle`` (s, None for "found from the data")."""
    from bringup.analysis.quantities import parse_quantity

    floor = parse_quantity(args.floor, "V", where="--floor")
    settle = None if args.settle is None else parse_quantity(args.settle, "s", where="--settle")
    if settle is not None and settle < 0:
        raise InputError(f"--settle: must be >= 0, got {args.settle!r}")
    return floor, settle


def _droop(args, capture, channel, y, floor: float, settle: float | None) -> None:
    from bringup.analysis.droop import measure_droop

    t0, dt = capture.sampling()
    m = measure_droop(y, dt, floor, t0, settle_s=settle)
    r = m.reasons
    result = {"file": capture.path, "channel": channel, **m.to_dict()}
    refuse_overflow(result, f"{capture.path}: channel {channel}")

    def q(key, unit):
        return shown(getattr(m, key), unit, r, key)

    x = m.extrapolation
    # NaN is truthy: only a finite ratio is printed.
    ext = f"  ({x:.1f}x the observed on-time)" if x is not None and math.isfinite(x) else ""
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
    except InputError as in_kelvin:
        try:  # a difference written in °C is the same number of K
            band = parse_quantity(text, "degC", where="--band")
        except InputError:
            raise in_kelvin from None  # the option is in K: say so, not °C
    if not band > 0:
        raise InputError(f"--band: must be > 0 K, got {text!r}")
    return band


def _fixed(value: float, decimals: int) -> str:
    """``value`` with ``decimals`` decimals, or 6 significant digits once it is 1e9 or more
    (a fixed-point time constant of a log with absurd times would run to dozens of digits)."""
    return f"{value:.{decimals}f}" if abs(value) < 1e9 else f"{value:.6g}"


ABSOLUTE_ZERO_C = -273.15


def _soak(args, capture, channel, y, band: float) -> None:
    import numpy as np

    from bringup.analysis.soak import fit_soak

    cold = np.flatnonzero(y < ABSOLUTE_ZERO_C)
    if cold.size:
        i = int(cold[0])
        raise InputError(
            f"{capture.path}: {capture.where(i)}: channel {channel}: {float(y[i]):.6g} °C is "
            "below absolute zero (-273.15 °C): not a temperature in °C"
        )
    f = fit_soak(np.asarray(capture.t_s, dtype=np.float64), y, band_k=band)
    result = {"file": capture.path, "channel": channel, **f.to_dict()}
    refuse_overflow(result, f"{capture.path}: channel {channel}")
    rows = [
        (
            "final temperature",
            f"{_fixed(f.final_c, 2)} °C +/- {_fixed(f.final_c_uncertainty, 2)} K (k = 2)",
        ),
        ("start temperature", f"{_fixed(f.start_c, 2)} °C"),
        ("time constant", f"{_fixed(f.tau_s, 1)} s +/- {_fixed(f.tau_uncertainty_s, 1)} s"),
        (
            "settled",
            f"at t = {_fixed(f.settle_time_s, 0)} s (within {f.band_k:g} K)"
            + (
                f", {_fixed(f.settle_in_s, 0)} s after the last sample"
                if f.settle_in_s > 0
                else ", already"
            ),
        ),
        (
            "data",
            f"{f.samples} samples, {f.taus_covered:.2f} tau, residual {_fixed(f.residual_rms_c, 3)} K rms",
        ),
    ]
    rows += [("warning", w) for w in f.warnings]
    emit(result, rows, args.json, _header(capture, channel))
