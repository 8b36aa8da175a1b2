"""What the HTML and PDF records show, derived from the record's content (no layout here).

Both renderers call these helpers so that the two files tell the same story: the summary,
the words used for each outcome, the design-vs-measured rows and the decoded waveforms.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from bringup.analysis.quantities import format_quantity
from bringup.record.schemas import waveform_codes
from bringup.record.svg import Marker

__all__ = [
    "STATUS_WORDS",
    "OUTCOME_WORDS",
    "REHEARSAL_MARK",
    "Trace",
    "comparison_rows",
    "decode_trace",
    "fmt_time",
    "fmt_value",
    "short_hash",
    "GENERAL_CAUTIONS",
    "design_rows",
    "soak_trace",
    "step_cautions",
    "zoom_trace",
    "probe_text",
    "checklist_label",
]

# Each word carries a symbol too, so no outcome is told by colour alone.
STATUS_WORDS = {
    "accepted": "[OK] passed",
    "waived": "[W] failed, waived",
    "skipped": "[S] skipped",
    "rejected": "[X] failed, open",
    "unfinished": "[..] unfinished",
    "not-started": "[ ] not started",
}
OUTCOME_WORDS = {
    "pass": "pass",
    "conditional-pass": "pass within guard band",
    "conditional-fail": "fail within guard band",
    "fail": "FAIL",
    "not-run": "not run",
    "error": "ERROR: could not complete",
    None: "no verdict",
}
#: what every page of a rehearsal's record says (PDF header and footer, HTML banner)
REHEARSAL_MARK = "REHEARSAL on a simulated bench: not a record of a board"
GENERAL_CAUTIONS = (
    "The bench carries hazardous voltage and stored energy: bus capacitors stay charged after "
    "the supply is off. Check they are discharged before touching the board.",
    "Follow your local electrical codes and your lab's licensed practice. Treat anything above "
    "60 V DC as hazardous.",
    "A floating gate-source node must not be probed with a ground-referenced probe: use a "
    "differential or isolated probe rated for the switch node's common mode.",
    "These verdicts support, and do not replace, engineering judgement.",
)


def short_hash(digest: str | None) -> str:
    """The first 16 hex digits of a digest, for page footers."""
    return (digest or "-")[:16]


def fmt_time(stamp: Any) -> str:
    """'2026-12-01 22:07:56 UTC (local UTC+01:00)' from a record time object, '-' if absent."""
    if not isinstance(stamp, dict) or not stamp.get("utc"):
        return "-"
    utc = str(stamp["utc"]).replace("T", " ").rstrip("Z")
    utc = utc.split(".")[0]
    offset = stamp.get("offset")
    return f"{utc} UTC" + (f" (local UTC{offset})" if offset else "")


def checklist_label(checklist: dict) -> str:
    """'NAME version V', or the file's digest when the checklist states no version."""
    name = checklist.get("name") or checklist.get("id") or "-"
    if checklist.get("version"):
        return f"{name}, version {checklist['version']}"
    digest = checklist.get("text_sha256")
    return f"{name} (no version stated; file SHA-256 {digest[:16]})" if digest else str(name)


def probe_text(channel: dict) -> str:
    """'CH1 vgs x10 differential' from a bench channel entry."""
    parts = [f"CH{channel.get('id')}", str(channel.get("net") or "-")]
    if isinstance(channel.get("probe_ratio"), int | float):
        parts.append(f"x{channel['probe_ratio']:g}")
    if channel.get("probe"):
        parts.append(str(channel["probe"]))
    return " ".join(parts)


def fmt_value(entry: Any, unit: str | None = None) -> str:
    """A metric entry ({value, unit, reason}) or a bare number as text with its unit."""
    if isinstance(entry, dict):
        value = entry.get("value")
        unit = entry.get("unit", unit) or ""
        if value is None:
            return "no value" + (f" ({entry['reason']})" if entry.get("reason") else "")
    else:
        value = entry
    if isinstance(value, bool) or not isinstance(value, int | float):
        return "-" if value is None else str(value)
    return format_quantity(float(value), unit or "")


@dataclass(frozen=True)
class Trace:
    """A decoded waveform: time (seconds) and values (``unit``), with its markers and model."""

    name: str
    unit: str
    t: np.ndarray
    y: np.ndarray
    markers: tuple[Marker, ...]
    model: tuple[np.ndarray, np.ndarray, str] | None


def _array(wave: dict) -> np.ndarray:
    """The waveform's codes (any schema's encoding, ``schemas.waveform_codes``)."""
    return np.frombuffer(waveform_codes(wave), dtype=np.dtype(wave["dtype"]).newbyteorder("<"))


def _soak_model(model: dict, t: np.ndarray) -> tuple[np.ndarray, np.ndarray, str] | None:
    """First-order soak T(t) = T_inf - (T_inf - T_0) exp(-(t - t_0)/tau), per REFERENCES §5."""
    try:
        t_inf, t_init = float(model["final_value"]), float(model["initial_value"])
        tau, t0 = float(model["tau_s"]), float(model.get("start_s", t[0]))
    except (KeyError, TypeError, ValueError):
        return None
    if not (tau > 0 and math.isfinite(t_inf) and math.isfinite(t_init)):
        return None
    tt = np.linspace(t0, float(t[-1]), 200)
    yy = t_inf - (t_inf - t_init) * np.exp(-(tt - t0) / tau)
    label = (
        f"fit: final {format_quantity(t_inf, model.get('unit', ''))}, "
        f"tau {format_quantity(tau, 's')}"
    )
    return tt, yy, label


def decode_trace(wave: dict) -> Trace | None:
    """Decode a record waveform into a Trace; None if malformed.

    Values: ``codes * y_increment + y_origin``; times: ``index * x_increment + x_origin``
    (the scope preamble convention the log keeps, see ``bringup.store.waveforms``).
    """
    try:
        codes = _array(wave).astype(float)
        y = codes * float(wave["y_increment"]) + float(wave.get("y_origin", 0.0))
        t = float(wave.get("x_origin", 0.0)) + float(wave["x_increment"]) * np.arange(y.size)
    except (KeyError, TypeError, ValueError):
        return None
    markers = []
    for m in wave.get("markers") or []:
        if isinstance(m, dict) and m.get("kind") in ("level", "time", "window", "point"):
            markers.append(
                Marker(m["kind"], str(m.get("label", "")), m.get("t"), m.get("y"), m.get("t_end"))
            )
    model = wave.get("model")
    fit = _soak_model(model, t) if isinstance(model, dict) and t.size > 1 else None
    name = wave.get("title") or wave.get("name") or "waveform"
    return Trace(str(name), str(wave.get("y_unit", "")), t, y, tuple(markers), fit)


def design_rows(board: dict) -> list[list[str]]:
    """[name, value with unit] for each design value of the board (units from the board schema)."""
    from bringup.boards.board_file import DESIGN_UNITS, HALF_BRIDGE_UNITS

    rows = []
    for key, value in sorted((board.get("design") or {}).items()):
        unit = DESIGN_UNITS.get(key) or HALF_BRIDGE_UNITS.get(key, "")
        if unit == "" and isinstance(value, float) and key.startswith("duty"):
            rows.append([key, f"{value * 100:g} %"])
        else:
            rows.append([key, fmt_value(value, unit)])
    return rows


def zoom_trace(trace: Trace) -> Trace | None:
    """A close view of the first edge when its crossings are too close to see on the full
    record (a 1 ns edge in a 100 us record): the span of the first group of crossing markers
    widened on each side, with the markers that fall inside. None when no zoom is needed."""
    times = sorted(m.t for m in trace.markers if m.kind == "time" and m.t is not None)
    if not times or trace.t.size < 2:
        return None
    record = float(trace.t[-1] - trace.t[0])
    group = [t for t in times if t - times[0] <= 0.02 * record]
    span = group[-1] - group[0]
    if span > 0.05 * record:
        return None
    dt = record / (trace.t.size - 1)
    pad = max(2.0 * span, 40.0 * dt)
    lo, hi = group[0] - pad, group[-1] + pad
    keep = (trace.t >= lo) & (trace.t <= hi)
    if keep.sum() < 4:
        return None
    marks = tuple(
        m for m in trace.markers if m.kind == "level" or (m.t is not None and lo <= m.t <= hi)
    )
    return Trace(f"{trace.name}, first edge (close view)", trace.unit, trace.t[keep],
                 trace.y[keep], marks, None)  # fmt: skip


def soak_trace(attempt: dict) -> Trace | None:
    """The thermal soak's readings (``extra.soak`` as the runner logs them) with the fitted
    first-order curve, or None when the attempt has no soak."""
    soak = (attempt.get("extra") or {}).get("soak")
    if not isinstance(soak, dict):
        return None
    try:
        t = np.asarray(soak["times_s"], dtype=float)
        y = np.asarray(soak["temperatures_c"], dtype=float)
    except (KeyError, TypeError, ValueError):
        return None
    if t.size < 2 or t.size != y.size:
        return None
    markers: list[Marker] = []
    if isinstance(soak.get("limit_c"), int | float):
        markers.append(Marker("level", f"limit {format_quantity(soak['limit_c'], 'degC')}",
                              y=float(soak["limit_c"])))  # fmt: skip
    fit = None
    final, tau = soak.get("predicted_final_c"), soak.get("time_constant_s")
    if isinstance(final, int | float) and isinstance(tau, int | float):
        model = {"final_value": final, "initial_value": float(y[0]), "tau_s": tau,
                 "start_s": float(t[0]), "unit": "degC"}  # fmt: skip
        fit = _soak_model(model, t)
        sigma = soak.get("predicted_sigma_c")
        if fit is not None and isinstance(sigma, int | float):
            fit = (fit[0], fit[1], fit[2] + f" (+/- {format_quantity(sigma, 'degC')})")
    return Trace("heatsink temperature (soak)", "degC", t, y, tuple(markers), fit)


def step_cautions(stage: dict) -> list[tuple[str, str]]:
    """(where, text) for every caution of a stage and its steps, without repeats."""
    seen: set[str] = set()
    out = []
    for where, items in [(stage.get("title") or stage.get("id"), stage.get("cautions"))] + [
        (step.get("title") or step.get("id"), step.get("cautions"))
        for step in stage.get("steps") or []
    ]:
        for text in items or []:
            if text not in seen:
                seen.add(text)
                out.append((str(where), str(text)))
    return out


def final_attempt(step: dict) -> dict | None:
    """The attempt that decided the step (the last one), or None."""
    attempts = step.get("attempts") or []
    return attempts[-1] if attempts else None


def comparison_rows(content: dict) -> list[dict]:
    """Design-vs-measured rows: every predicted value with the measured value of the same name,
    each named as a person reads it (the step's title, the metric's logged label).

    Deviation is (measured - predicted) / |predicted| in percent, from each step's last attempt.
    """
    rows = []
    for stage in content.get("stages", []):
        for step in stage.get("steps", []):
            attempt = final_attempt(step)
            if not attempt:
                continue
            metrics = attempt.get("metrics") or {}
            notes = {
                v.get("target"): v.get("disagreement")
                for v in attempt.get("verdicts") or []
                if v.get("disagreement")
            }
            reported = (attempt.get("extra") or {}).get("reported") or {}
            for key, r in reported.items():
                if isinstance(r, dict) and r.get("disagreement"):
                    notes.setdefault(key, r["disagreement"])
            for name, pred in sorted((attempt.get("predicted") or {}).items()):
                measured = metrics.get(name)
                pv = pred.get("value") if isinstance(pred, dict) else pred
                mv = measured.get("value") if isinstance(measured, dict) else None
                deviation = None
                if isinstance(pv, int | float) and isinstance(mv, int | float) and pv != 0:
                    deviation = 100.0 * (mv - pv) / abs(pv)
                label = measured.get("label") if isinstance(measured, dict) else None
                rows.append(
                    {
                        "where": str(step.get("title") or f"{stage.get('id')}/{step.get('id')}"),
                        "quantity": str(label or name),
                        "predicted": fmt_value(pred),
                        "basis": pred.get("basis", "") if isinstance(pred, dict) else "",
                        "measured": fmt_value(measured) if measured is not None else "-",
                        "deviation": "-" if deviation is None else f"{deviation:+.1f} %",
                        "note": str(notes.get(name) or ""),
                    }
                )
    return rows
