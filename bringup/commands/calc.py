"""``bringup calc bootstrap|gate|losses``: the design equations from the command line.

Every option takes engineering notation with or without its unit ("40n", "40 nC", "4k7",
"25 kHz"). A unit that does not fit the option ("--qg 40 nF") is an error, and so is a unit
on a plain factor ("--margin 2V"). Negative values reach the value check ("--dv -1V": must
be > 0). Output: a table, or with ``--json`` one JSON object; a value that cannot be computed
is ``null`` and ``reasons`` says why. Every error names the options as typed: relations
between options (``--vpl`` below ``--vdrv``) are checked here before the design equations run,
and a result that leaves the float range (``1e300`` times ``1e300``) is refused in one line,
"values too large to compute: ...", never printed as ``inf``. Only the standard library is
imported at the top (start-up speed).
"""

from __future__ import annotations

import argparse
import math
import re
from collections.abc import Callable
from typing import TYPE_CHECKING

from bringup.errors import InputError

if TYPE_CHECKING:
    from bringup.analysis.design import GateTiming

__all__ = ["add_parser", "run"]

BOOTSTRAP_METHOD = (
    "Method: charge balance over the longest on-time (International Rectifier AN-978 / DT98-2; "
    "TI SLUA887): Q_total = Qg + Qls + (Iq + Ileak) * t_on,max, C_min = K * Q_total / dV, "
    "droop with --c = Q_total / C. For continuous switching TI SLUA887 takes one period "
    "(t = 1/f_sw, printed as the per-period charge when --fsw is given); AN-978 adds a 2x "
    "safety factor (--margin 2) and counts the charge per period. Size C above C_min: "
    "ceramic capacitors lose capacitance with DC bias."
)


def add_parser(subparsers: argparse._SubParsersAction) -> argparse.ArgumentParser:
    """Register ``calc`` and its sub-commands."""
    from bringup.commands.analyze import accept_negative_values  # standard library only

    parser = subparsers.add_parser(
        "calc",
        help="design equations: bootstrap capacitor, gate timing, losses and temperature",
        description="The design equations of a bootstrap high-side drive, each from its "
        "published source. Values in engineering notation (4.7u, 40 nC, 25 kHz, 4k7).",
    )
    sub = parser.add_subparsers(dest="calculation", metavar="CALCULATION", required=True)
    for add in (_add_bootstrap, _add_gate, _add_losses):
        calculation = add(sub)
        _json(calculation)
        calculation.set_defaults(func=run)
        accept_negative_values(calculation)
    return parser


def _add_bootstrap(sub: argparse._SubParsersAction) -> argparse.ArgumentParser:
    boot = sub.add_parser(
        "bootstrap",
        help="bootstrap capacitor: minimum C for an allowed droop, droop of a chosen C",
        description="Bootstrap capacitor sizing. " + BOOTSTRAP_METHOD,
    )
    boot.add_argument("--qg", required=True, metavar="Q", help="MOSFET total gate charge (C)")
    boot.add_argument(
        "--iq", required=True, metavar="I", help="floating-side quiescent current I_QBS (A)"
    )
    boot.add_argument(
        "--ileak",
        required=True,
        metavar="I",
        help="bootstrap diode reverse leakage plus capacitor leakage (A)",
    )
    boot.add_argument("--fsw", metavar="F", help="switching frequency (Hz)")
    boot.add_argument("--ton-max", metavar="T", help="longest on-time (s)")
    boot.add_argument(
        "--duty-max",
        metavar="D",
        help="largest duty cycle (0.95 or 95%%): t_on,max = D / f_sw, instead of --ton-max",
    )
    boot.add_argument("--dv", required=True, metavar="V", help="allowed droop of V_BS (V)")
    boot.add_argument("--qls", default="0", metavar="Q", help="level-shift charge per cycle (C)")
    boot.add_argument("--c", metavar="C", help="a chosen capacitor: print its droop (F)")
    boot.add_argument("--margin", default="1", metavar="K", help="safety factor K (default 1)")
    return boot


def _add_gate(sub: argparse._SubParsersAction) -> argparse.ArgumentParser:
    gate = sub.add_parser(
        "gate",
        help="switching times from gate charge and drive current; RC pull-up rise time",
        description="Gate-charge switching times (TI SLUA618, Balogh, 'Fundamentals of MOSFET "
        "and IGBT Gate Driver Circuits'): plateau currents I_on = (V_drv - V_pl)/(R_source + "
        "R_g + R_g,int), I_off = V_pl/(R_sink + R_g + R_g,int); V_DS transition Q_gd/I, current "
        "transition Q_gs2/I. RC pull-up: 10-90 %% = R C ln 9. Give either group or both.",
    )
    gate.add_argument("--vdrv", metavar="V", help="driver supply / gate drive voltage (V)")
    gate.add_argument("--vpl", metavar="V", help="Miller plateau voltage (V)")
    gate.add_argument("--qgd", metavar="Q", help="gate-drain (Miller) charge (C)")
    gate.add_argument("--qgs2", metavar="Q", help="gate charge from threshold to plateau (C)")
    gate.add_argument("--r-source", metavar="R", help="driver pull-up (source) resistance")
    gate.add_argument("--r-sink", metavar="R", help="driver pull-down (sink) resistance")
    gate.add_argument("--rg", default="0", metavar="R", help="external gate resistor (ohm)")
    gate.add_argument("--rg-int", default="0", metavar="R", help="MOSFET internal gate resistance")
    gate.add_argument("--r-pullup", metavar="R", help="RC pull-up: the resistor (ohm)")
    gate.add_argument("--c-gate", metavar="C", help="RC pull-up: the capacitance it charges (F)")
    return gate


def _add_losses(sub: argparse._SubParsersAction) -> argparse.ArgumentParser:
    losses = sub.add_parser(
        "losses",
        help="switching, conduction and gate-drive losses; junction temperature",
        description="Losses of the switch: P_sw = 1/2 V I (t_r + t_f) f_sw (ST A5972D eq. 23), "
        "P_cond = I^2 R_DS(on) D, P_gate = Q_g V_drv f_sw (TI TPS40200-Q1; dissipated in the "
        "driver and gate resistors), T_J = T_A + (P_sw + P_cond) R_th. Each value is computed "
        "when its options are given.",
    )
    losses.add_argument("--vbus", metavar="V", help="switched voltage (V)")
    losses.add_argument("--iload", metavar="I", help="load current (A)")
    losses.add_argument("--fsw", metavar="F", help="switching frequency (Hz)")
    losses.add_argument("--tr", metavar="T", help="switching rise time (s)")
    losses.add_argument("--tf", metavar="T", help="switching fall time (s)")
    losses.add_argument("--rdson", metavar="R", help="R_DS(on) at the operating temperature")
    losses.add_argument("--duty", metavar="D", help="duty cycle (0.5 or 50%%)")
    losses.add_argument("--qg", metavar="Q", help="total gate charge (C)")
    losses.add_argument("--vdrv", metavar="V", help="gate drive voltage (V)")
    losses.add_argument("--rth", metavar="K/W", help="thermal resistance junction to reference")
    losses.add_argument("--tamb", metavar="degC", help="reference (ambient) temperature")
    return losses


def _json(p: argparse.ArgumentParser) -> None:
    p.add_argument("--json", action="store_true", help="print one JSON object")


def _q(args, attr: str, unit: str | None, *, positive: bool = False):
    """The option ``attr`` as an SI float (None if not given), errors naming the option.

    Every quantity here is >= 0 (a negative charge or resistance makes no sense); with
    ``positive`` it must be > 0.
    """
    from bringup.analysis.quantities import parse_quantity

    text = getattr(args, attr)
    if text is None:
        return None
    option = "--" + attr.replace("_", "-")
    value = parse_quantity(text, unit, where=option)
    if value < 0 or (positive and value == 0):
        raise InputError(f"{option}: must be {'> 0' if positive else '>= 0'}, got {text!r}")
    return value


def _factor(args, attr: str) -> float | None:
    """A plain factor > 0 (no unit: "--margin 2V" is refused, not read as 2)."""
    from bringup.analysis.quantities import parse_quantity_unit

    text = getattr(args, attr)
    if text is None:
        return None
    option = "--" + attr.replace("_", "-")
    value, unit = parse_quantity_unit(text, None, where=option)
    if unit is not None:
        raise InputError(f"{option}: a factor has no unit, got {text!r}")
    if not value > 0:
        raise InputError(f"{option}: must be > 0, got {text!r}")
    return value


ABSOLUTE_ZERO_C = -273.15


def _temperature(args, attr: str) -> float | None:
    """A temperature in °C, at or above absolute zero."""
    from bringup.analysis.quantities import parse_quantity

    text = getattr(args, attr)
    if text is None:
        return None
    option = "--" + attr.replace("_", "-")
    value = parse_quantity(text, "degC", where=option)
    if value < ABSOLUTE_ZERO_C:
        raise InputError(f"{option}: below absolute zero (-273.15 °C), got {text!r}")
    return value


def _fraction(args, attr: str):
    """A duty cycle: 0.95, or 95 %."""
    from bringup.analysis.quantities import parse_quantity_unit

    text = getattr(args, attr)
    if text is None:
        return None
    option = "--" + attr.replace("_", "-")
    value, unit = parse_quantity_unit(text, None, where=option)
    if unit == "%":
        value /= 100.0
    elif unit is not None:
        raise InputError(f"{option}: a duty cycle is a fraction or a percentage, got {text!r}")
    if not 0 <= value <= 1:
        raise InputError(f"{option}: must be between 0 and 1 (or 0-100 %), got {text!r}")
    return value


def run(args: argparse.Namespace) -> int:
    """Parse the options, compute, print."""
    {"bootstrap": _bootstrap, "gate": _gate, "losses": _losses}[args.calculation](args)
    return 0


# The design functions' parameter names and the options they come from: a check that fires
# inside ``bringup.analysis.design`` is reported with the option the user typed.
_OPTION_OF = {
    "qg_c": "--qg",
    "qls_c": "--qls",
    "iq_a": "--iq",
    "ileak_a": "--ileak",
    "t_on_max_s": "--ton-max",
    "dv_v": "--dv",
    "margin": "--margin",
    "fsw_hz": "--fsw",
    "v_drv_v": "--vdrv",
    "v_plateau_v": "--vpl",
    "r_source_ohm": "--r-source",
    "r_sink_ohm": "--r-sink",
    "r_gate_ohm": "--rg",
    "r_gate_int_ohm": "--rg-int",
    "q_gd_c": "--qgd",
    "q_gs2_c": "--qgs2",
    "v_v": "--vbus",
    "i_a": "--iload",
    "t_rise_s": "--tr",
    "t_fall_s": "--tf",
    "r_ds_on_ohm": "--rdson",
    "r_th_k_per_w": "--rth",
    "t_ref_c": "--tamb",
}


def _with_option_names(text: str) -> str:
    """A design check's message with its parameter names replaced by the options."""
    return re.sub(r"\b[a-z][a-z0-9_]*\b", lambda m: _OPTION_OF.get(m[0], m[0]), text)


def _computed(what: str, fn: Callable[..., float], *args: float, **kwargs: float) -> float:
    """``fn(*args)``, refused in one line naming ``what`` (the options it is computed from)
    when it leaves the float range; a design check is reported with option names."""
    try:
        value = fn(*args, **kwargs)
    except (OverflowError, ZeroDivisionError):
        value = math.inf
    except InputError as exc:
        text = str(exc)
        if "must be finite" in text:  # an intermediate value overflowed
            value = math.inf
        else:
            raise InputError(_with_option_names(text)) from None
    if not math.isfinite(value):
        raise InputError(f"values too large to compute: {what} is beyond the float range")
    return value


def _bootstrap(args) -> None:
    from bringup.analysis import design
    from bringup.commands.analyze import emit

    qg = _q(args, "qg", "C")
    iq = _q(args, "iq", "A")
    ileak = _q(args, "ileak", "A")
    qls = _q(args, "qls", "C")
    dv = _q(args, "dv", "V", positive=True)
    margin = _factor(args, "margin")
    fsw = _q(args, "fsw", "Hz", positive=True)
    c = _q(args, "c", "F", positive=True)
    duty = _fraction(args, "duty_max")
    t_on, source = _longest_on_time(args, duty, fsw)
    q = _computed(
        f"the charge over the longest on-time, --qg + --qls + (--iq + --ileak) x {source}",
        design.bootstrap_charge,
        qg,
        t_on,
        iq,
        ileak,
        qls,
    )
    _computed("C_min = --margin x charge / --dv", design.bootstrap_c_min, q, dv, margin)
    if c is not None:
        _computed("the droop with --c, charge / --c", design.bootstrap_droop, q, c)
    s = design.size_bootstrap(qg, iq, ileak, t_on, dv, qls_c=qls, c_f=c, margin=margin)
    reasons = {}
    if s.droop_v is None:
        reasons["droop_v"] = "give --c to predict the droop of a chosen capacitor"
    per_period = None
    if fsw is not None:
        per_period = _computed(
            "the charge per period, --qg + --qls + (--iq + --ileak) / --fsw",
            design.bootstrap_charge,
            qg,
            _computed("the period 1 / --fsw", lambda f: 1.0 / f, fsw),
            iq,
            ileak,
            qls,
        )
    else:
        reasons["charge_per_period_c"] = "give --fsw"
    result = {
        "charge_c": s.charge_c,
        "c_min_f": s.c_min_f,
        "droop_v": s.droop_v,
        "t_on_max_s": t_on,
        "charge_per_period_c": per_period,
        "terms_c": s.terms_c,
        "inputs": {
            "qg_c": qg,
            "qls_c": qls,
            "iq_a": iq,
            "ileak_a": ileak,
            "fsw_hz": fsw,
            "duty_max": duty,
            "dv_v": dv,
            "margin": margin,
            "c_f": c,
        },
        "method": BOOTSTRAP_METHOD,
        "reasons": reasons,
    }
    rows = _bootstrap_rows(s, t_on, source, margin, dv, c, per_period, reasons)
    emit(result, rows, args.json, "bootstrap capacitor (charge balance over the longest on-time)")


def _longest_on_time(args, duty: float | None, fsw: float | None) -> tuple[float, str]:
    """The longest on-time in seconds, from --ton-max or from --duty-max / --fsw (exactly one
    of the two ways), and which options gave it."""
    from bringup.analysis import design

    if duty == 0:
        raise InputError(f"--duty-max: must be > 0, got {args.duty_max!r} (no on-time)")
    t_on = _q(args, "ton_max", "s", positive=True)
    if t_on is not None and duty is not None:
        raise InputError(
            "give the longest on-time once: --ton-max, or --duty-max with --fsw, not both"
        )
    if t_on is not None:
        return t_on, "--ton-max"
    if duty is None or fsw is None:
        raise InputError("give --ton-max, or --duty-max with --fsw, for the longest on-time")
    t_on = _computed("the longest on-time --duty-max / --fsw", design.on_time_at_duty, duty, fsw)
    return t_on, "--duty-max / --fsw"


def _bootstrap_rows(
    s, t_on: float, source: str, margin: float, dv: float, c: float | None,
    per_period: float | None, reasons: dict,
) -> list[tuple[str, str]]:  # fmt: skip
    """The printed table of ``calc bootstrap``: on-time, charge and its terms, C_min, droop."""
    from bringup.commands.analyze import format_value as fq

    t = s.terms_c
    rows = [
        ("longest on-time", f"{fq(t_on, 's')}  (from {source})"),
        (
            "charge over it",
            f"{fq(s.charge_c, 'C')}  (gate {fq(t['gate'], 'C')}, level shift "
            f"{fq(t['level_shift'], 'C')}, quiescent {fq(t['quiescent'], 'C')}, leakage "
            f"{fq(t['leakage'], 'C')})",
        ),
        ("C_min", f"{fq(s.c_min_f, 'F')}  (K = {margin:g}, dV = {fq(dv, 'V')})"),
        ("droop with C", fq(s.droop_v, "V") if c is not None else f"n/a ({reasons['droop_v']})"),
    ]
    if per_period is not None:
        rows.append(("charge per period", f"{fq(per_period, 'C')}  (TI SLUA887 form, 1/f_sw)"))
    return rows


def _gate(args) -> None:
    from bringup.analysis import design
    from bringup.commands.analyze import emit
    from bringup.commands.analyze import format_value as fq

    timing_opts = {"vdrv": "V", "vpl": "V", "qgd": "C", "r_source": "ohm", "r_sink": "ohm"}
    given = {k: getattr(args, k) is not None for k in timing_opts}
    rc_given = {"r_pullup": args.r_pullup is not None, "c_gate": args.c_gate is not None}
    if not any(given.values()) and not any(rc_given.values()):
        raise InputError(
            "give the gate-charge options (--vdrv --vpl --qgd --r-source --r-sink) "
            "or an RC pull-up (--r-pullup --c-gate), or both"
        )
    reasons: dict[str, str] = {}
    result: dict = {}
    rows: list[tuple[str, str]] = []
    if any(given.values()):
        missing = ["--" + k.replace("_", "-") for k, v in given.items() if not v]
        if missing:
            raise InputError(f"gate-charge timing also needs {' '.join(missing)}")
        g = _gate_timing(args)
        result.update(g.to_dict())
        if g.t_current_on_s is None:
            reasons["t_current_on_s"] = reasons["t_current_off_s"] = "give --qgs2"
        rows += [
            ("turn-on plateau current", f"{fq(g.i_on_a, 'A')}  (through {fq(g.r_on_ohm, 'ohm')})"),
            (
                "turn-off plateau current",
                f"{fq(g.i_off_a, 'A')}  (through {fq(g.r_off_ohm, 'ohm')})",
            ),
            ("V_DS fall at turn-on", fq(g.t_vds_on_s, "s")),
            ("V_DS rise at turn-off", fq(g.t_vds_off_s, "s")),
            (
                "current rise (Q_gs2)",
                fq(g.t_current_on_s, "s") if g.t_current_on_s is not None else "n/a (give --qgs2)",
            ),
            (
                "current fall (Q_gs2)",
                fq(g.t_current_off_s, "s")
                if g.t_current_off_s is not None
                else "n/a (give --qgs2)",
            ),
        ]
    else:
        for key in ("i_on_a", "i_off_a", "t_vds_on_s", "t_vds_off_s"):
            result[key] = None
            reasons[key] = "give --vdrv --vpl --qgd --r-source --r-sink"
    if any(rc_given.values()):
        if not all(rc_given.values()):
            missing = ["--" + k.replace("_", "-") for k, v in rc_given.items() if not v]
            raise InputError(f"the RC pull-up rise time also needs {' '.join(missing)}")
        r = _q(args, "r_pullup", "ohm", positive=True)
        c = _q(args, "c_gate", "F", positive=True)
        result["rc_rise_time_s"] = _computed(
            "the RC rise time --r-pullup x --c-gate x ln 9", design.rc_rise_time, r, c
        )
        rows.append(
            (
                "RC pull-up 10-90 %",
                f"{fq(result['rc_rise_time_s'], 's')}  (R C ln 9, {fq(r, 'ohm')} x {fq(c, 'F')})",
            )
        )
    else:
        result["rc_rise_time_s"] = None
        reasons["rc_rise_time_s"] = "give --r-pullup and --c-gate"
    result["reasons"] = reasons
    emit(result, rows, args.json, "gate timing")


def _gate_timing(args: argparse.Namespace) -> GateTiming:
    """``design.gate_timing`` from the options, every relation checked by option name."""
    from bringup.analysis import design
    from bringup.commands.analyze import format_value as fq

    vdrv = _q(args, "vdrv", "V", positive=True)
    vpl = _q(args, "vpl", "V", positive=True)
    r_source = _q(args, "r_source", "ohm")
    r_sink = _q(args, "r_sink", "ohm")
    rg = _q(args, "rg", "ohm")
    rg_int = _q(args, "rg_int", "ohm")
    qgd = _q(args, "qgd", "C")
    qgs2 = _q(args, "qgs2", "C")
    if vpl >= vdrv:
        raise InputError(
            f"--vpl {fq(vpl, 'V')} must be below --vdrv {fq(vdrv, 'V')}: the gate would never "
            "leave the Miller plateau"
        )
    for name, r in (("--r-source", r_source), ("--r-sink", r_sink)):
        _computed(f"{name} + --rg + --rg-int", lambda a, b, c: a + b + c, r, rg, rg_int)
        if not r + rg + rg_int > 0:
            raise InputError(
                f"{name} + --rg + --rg-int is 0 Ω: the gate loop needs a resistance > 0 "
                "(the plateau current would be infinite)"
            )
    i_on = _computed(
        "the turn-on plateau current (--vdrv - --vpl) / (--r-source + --rg + --rg-int)",
        lambda: (vdrv - vpl) / (r_source + rg + rg_int),
    )
    i_off = _computed(
        "the turn-off plateau current --vpl / (--r-sink + --rg + --rg-int)",
        lambda: vpl / (r_sink + rg + rg_int),
    )
    for name, i in (("turn-on", i_on), ("turn-off", i_off)):
        if i == 0:  # (--vdrv - --vpl) tiny over a huge resistance: 0 A in floating point
            raise InputError(
                f"values too small to compute: the {name} plateau current is 0 A in floating "
                "point (check --vdrv, --vpl and the gate loop resistances)"
            )
    for name, q in (("--qgd", qgd), ("--qgs2", qgs2)):
        if q is not None:
            _computed(
                f"the switching time {name} / the plateau current",
                lambda q_c, i_a: q_c / i_a,
                q,
                min(i_on, i_off),
            )
    try:
        return design.gate_timing(vdrv, vpl, r_source, r_sink, rg, rg_int, qgd, qgs2)
    except InputError as exc:
        raise InputError(_with_option_names(str(exc))) from None


def _losses(args) -> None:
    from bringup.commands.analyze import emit
    from bringup.commands.analyze import format_value as fq

    v = {
        "vbus": _q(args, "vbus", "V"),
        "iload": _q(args, "iload", "A"),
        "fsw": _q(args, "fsw", "Hz"),
        "tr": _q(args, "tr", "s"),
        "tf": _q(args, "tf", "s"),
        "rdson": _q(args, "rdson", "ohm"),
        "duty": _fraction(args, "duty"),
        "qg": _q(args, "qg", "C"),
        "vdrv": _q(args, "vdrv", "V"),
        "rth": _q(args, "rth", "K/W"),
        "tamb": _temperature(args, "tamb"),
    }
    reasons: dict[str, str] = {}
    out = _loss_terms(v, reasons)
    if all(out[k] is None for k in ("p_switching_w", "p_conduction_w", "p_gate_w")):
        raise InputError(
            "nothing to compute: give --vbus --iload --tr --tf --fsw (switching), "
            "--iload --rdson --duty (conduction) or --qg --vdrv --fsw (gate drive)"
        )
    result = {**out, "inputs": {f"{k}": val for k, val in v.items()}, "reasons": reasons}

    def cell(key: str, unit: str) -> str:
        return fq(out[key], unit) if out[key] is not None else f"n/a ({reasons[key]})"

    t_j = out["t_junction_c"]
    rows = [
        ("switching loss", cell("p_switching_w", "W")),
        ("conduction loss", cell("p_conduction_w", "W")),
        ("MOSFET total", cell("p_mosfet_w", "W")),
        ("gate drive (in the driver)", cell("p_gate_w", "W")),
        (
            "junction temperature",
            f"{t_j:.1f} °C" if t_j is not None else f"n/a ({reasons['t_junction_c']})",
        ),
    ]
    emit(result, rows, args.json, "losses and temperature")


def _loss_terms(v: dict[str, float | None], reasons: dict[str, str]) -> dict[str, float | None]:
    """Each loss (W) and the junction temperature (degC) the given inputs allow; for each one
    they do not, ``reasons`` says which options are missing."""
    from bringup.analysis import design

    def need(key: str, *names: str) -> bool:
        missing = [f"--{n}" for n in names if v[n] is None]
        if missing:
            reasons[key] = "give " + " ".join(missing)
        return not missing

    out: dict = dict.fromkeys(
        ("p_switching_w", "p_conduction_w", "p_gate_w", "p_mosfet_w", "t_junction_c")
    )
    if need("p_switching_w", "vbus", "iload", "tr", "tf", "fsw"):
        out["p_switching_w"] = _computed(
            "the switching loss 1/2 x --vbus x --iload x (--tr + --tf) x --fsw",
            design.switching_loss,
            v["vbus"],
            v["iload"],
            v["tr"],
            v["tf"],
            v["fsw"],
        )
    if need("p_conduction_w", "iload", "rdson", "duty"):
        out["p_conduction_w"] = _computed(
            "the conduction loss --iload^2 x --rdson x --duty",
            design.conduction_loss,
            v["iload"],
            v["rdson"],
            v["duty"],
        )
    if need("p_gate_w", "qg", "vdrv", "fsw"):
        out["p_gate_w"] = _computed(
            "the gate-drive loss --qg x --vdrv x --fsw",
            design.gate_drive_loss,
            v["qg"],
            v["vdrv"],
            v["fsw"],
        )
    if out["p_switching_w"] is not None and out["p_conduction_w"] is not None:
        out["p_mosfet_w"] = _computed(
            "the MOSFET loss (switching + conduction)",
            lambda a, b: a + b,
            out["p_switching_w"],
            out["p_conduction_w"],
        )
        if need("t_junction_c", "rth", "tamb"):
            out["t_junction_c"] = _computed(
                "the junction temperature --tamb + MOSFET loss x --rth",
                design.junction_temperature,
                out["p_mosfet_w"],
                v["rth"],
                v["tamb"],
            )
    else:
        reasons["p_mosfet_w"] = "needs the switching and the conduction loss"
        reasons["t_junction_c"] = "needs the MOSFET loss (switching + conduction)"
    return out
