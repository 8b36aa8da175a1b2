"""A batch as JSON (``bringup batch --json``) and as text lines (the plain listing).

Values are SI in JSON (the column's ``unit``), formatted with their unit in text. Serials,
operator and signer names are shown through ``literal_text.visible`` in text (JSON carries
them as typed: its escaping is JSON's).
"""

from __future__ import annotations

import math
from typing import Any

from bringup.analysis.batch import (
    MIN_CAPABILITY_BOARDS,
    MIN_OUTLIER_BOARDS,
    MODIFIED_Z_CUTOFF,
    Distribution,
)
from bringup.analysis.quantities import format_quantity
from bringup.batch.collect import Batch, Column, Row
from bringup.literal_text import visible

__all__ = ["RULE_TEXT", "batch_json", "batch_lines", "limit_text", "signed_text"]

#: The outlier rule in words (shown under every table of the batch).
RULE_TEXT = (
    f"outlier: modified z-score |M| = |0.6745 (x - median) / MAD| > {MODIFIED_Z_CUTOFF:g} "
    "(Iglewicz and Hoaglin 1993) and farther from the median than the reading's "
    f"uncertainty, from {MIN_OUTLIER_BOARDS} boards; Cp/Cpk (NIST/SEMATECH e-Handbook 6.1.6) "
    f"from {MIN_CAPABILITY_BOARDS} boards, with 95 % intervals"
)


def _z(value: float) -> float | str:
    """A z-score for JSON: infinities as text (JSON has no infinity)."""
    return value if math.isfinite(value) else ("inf" if value > 0 else "-inf")


def limit_text(column: Column) -> str:
    """The column's limits in words: "22.8 V .. 25.2 V", "<= 200 ns", ">= 76 µs", "none"."""
    lo, hi, unit = column.lower, column.upper, column.unit
    if lo is not None and hi is not None:
        return f"{format_quantity(lo, unit)} .. {format_quantity(hi, unit)}"
    if hi is not None:
        return f"<= {format_quantity(hi, unit)}"
    if lo is not None:
        return f">= {format_quantity(lo, unit)}"
    return "none"


def signed_text(row: Row) -> str:
    """The shown session's sign-offs ("operator, reviewer") or "unsigned"."""
    roles = sorted({role for role, _ in row.signatures})
    return ", ".join(roles) if roles else "unsigned"


def _capability_json(d: Distribution) -> dict[str, Any] | None:
    c = d.capability
    if c is None:
        return None
    return {
        "n": c.n,
        "mean": c.mean,
        "std": c.std,
        "cp": c.cp,
        "cp_interval_95": list(c.cp_interval) if c.cp_interval else None,
        "cpu": c.cpu,
        "cpl": c.cpl,
        "cpk": c.cpk,
        "cpk_interval_95": list(c.cpk_interval),
    }


def _metric_json(batch: Batch, column: Column) -> dict[str, Any]:
    d = batch.stats.get(column.key)
    serials = batch.serials_of.get(column.key, ())
    out: dict[str, Any] = {
        "key": column.key,
        "stage": column.stage,
        "step": column.step,
        "metric": column.metric,
        "name": column.name,
        "label": column.label,
        "unit": column.unit,
        "limit": {"min": column.lower, "max": column.upper},
        "uncertainty": column.uncertainty,
        "limits_differ": column.limits_differ,
        "n": d.n if d else 0,
    }
    if d is not None:
        out.update(
            median=d.median,
            scaled_mad=d.scaled_mad,
            min=d.minimum,
            max=d.maximum,
            mad_zero=d.mad_zero,
            outliers=[s for s, flag in zip(serials, d.outliers, strict=True) if flag],
            capability=_capability_json(d),
        )
    return out


def _history_json(row: Row) -> list[dict[str, Any]]:
    sessions = []
    for summary in row.sessions:
        attempts = [
            {
                "attempt": h.attempt_id,
                "stage": h.stage,
                "step": h.step,
                "attempt_no": h.attempt_no,
                "outcome": h.outcome,
                "recorded": h.recorded_utc,
                "shown": h.shown,
                "values": h.values,
            }
            for h in row.history
            if h.session_id == summary.id
        ]
        sessions.append(
            {
                "session": summary.id,
                "created": summary.created_utc,
                "operator": summary.operator,
                "state": summary.state,
                "verdict": summary.verdict or "not-started",
                "bench": "simulated" if summary.rehearsal else "real",
                "shown": summary.id == row.summary.id,
                "attempts": attempts,
            }
        )
    return sessions


def _serial_json(batch: Batch, row: Row) -> dict[str, Any]:
    s = row.summary
    values = {}
    for column in batch.columns:
        cell = batch.cell(row.serial, column.key)
        if cell is None:
            continue
        reading, z, outlier = cell
        values[column.key] = {
            "value": reading.value,
            "outcome": reading.outcome,
            "uncertainty": reading.uncertainty,
            "z": _z(z),
            "outlier": outlier,
            "session": reading.session_id,
            "attempt": reading.attempt_id,
            "attempt_no": reading.attempt_no,
            "recorded": reading.recorded_utc,
        }
    return {
        "serial": row.serial,
        "session": s.id,
        "operator": s.operator,
        "state": s.state,
        "verdict": s.verdict or "not-started",
        "rehearsal": s.rehearsal,
        "bench": "simulated" if s.rehearsal else "real",
        "steps_done": s.steps_done,
        "steps_total": s.steps_total,
        "last_activity": s.last_activity_utc,
        "signatures": [{"role": role, "name": name} for role, name in row.signatures],
        "retaken": row.retaken,
        "outliers": batch.outliers_of(row.serial),
        "values": values,
        "history": _history_json(row),
    }


def batch_json(batch: Batch, where: str) -> dict[str, Any]:
    """The batch as one JSON-ready object (see README's batch section for its shape)."""
    return {
        "board": batch.board,
        "revision": batch.revision,
        "log": where,
        "rule": {
            "outlier": "modified z-score (Iglewicz and Hoaglin 1993)",
            "cutoff": MODIFIED_Z_CUTOFF,
            "floor": "the reading's expanded uncertainty",
            "min_boards_outlier": MIN_OUTLIER_BOARDS,
            "min_boards_capability": MIN_CAPABILITY_BOARDS,
            "text": RULE_TEXT,
        },
        "metrics": [_metric_json(batch, column) for column in batch.columns],
        "serials": [_serial_json(batch, row) for row in batch.rows],
        "notes": list(batch.notes),
    }


def _serial_lines(batch: Batch) -> list[str]:
    lines = [
        f"{'serial':<16} {'bench':<9} {'progress':>8}  {'verdict':<17} {'signed':<18} "
        f"{'last activity':<27} outliers"
    ]
    for row in batch.rows:
        s = row.summary
        total = s.steps_total if s.steps_total is not None else "?"
        keys = set(batch.outliers_of(row.serial))
        flagged = [c.name for c in batch.columns if c.key in keys]
        retake = f" (retaken: {len(row.sessions)} sessions)" if row.retaken else ""
        state = "" if s.state == "open" else f" ({s.state})"
        lines.append(
            f"{visible(row.serial):<16} {'rehearsal' if s.rehearsal else 'real':<9} "
            f"{s.steps_done:>4}/{total:<3}  {(s.verdict or 'not-started') + state:<17} "
            f"{signed_text(row):<18} {s.last_activity_utc:<27} "
            f"{', '.join(flagged) or '-'}{retake}"
        )
    return lines


def _metric_lines(batch: Batch) -> list[str]:
    lines = [
        f"{'metric':<30} {'n':>3} {'median':>11} {'spread':>11} {'min':>11} {'max':>11} "
        f"{'limit':<22} {'Cpk':<22} outliers"
    ]
    for column in batch.columns:
        d = batch.stats.get(column.key)
        if d is None:
            continue
        u = column.unit
        cap = d.capability
        cpk = (
            f"{cap.cpk:.2f} ({cap.cpk_interval[0]:.2f}..{cap.cpk_interval[1]:.2f})"
            if cap is not None
            else f"n < {MIN_CAPABILITY_BOARDS}"
            if d.n < MIN_CAPABILITY_BOARDS
            else "-"
        )
        serials = batch.serials_of[column.key]
        flagged = [visible(s) for s, f in zip(serials, d.outliers, strict=True) if f]
        lines.append(
            f"{column.name:<30} {d.n:>3} {format_quantity(d.median, u):>11} "
            f"{format_quantity(d.scaled_mad, u):>11} {format_quantity(d.minimum, u):>11} "
            f"{format_quantity(d.maximum, u):>11} {limit_text(column):<22} {cpk:<22} "
            f"{', '.join(flagged) or '-'}"
        )
    return lines


def _finding_lines(batch: Batch) -> list[str]:
    lines = []
    for column in batch.columns:
        d = batch.stats.get(column.key)
        if d is None:
            continue
        for serial in batch.serials_of[column.key]:
            reading, z, outlier = batch.cell(serial, column.key)
            if not outlier:
                continue
            u = column.unit
            lines.append(
                f"  {visible(serial)} {column.name}: {format_quantity(reading.value, u)} "
                f"({reading.outcome}), M = {z:+.1f} against median "
                f"{format_quantity(d.median, u)}, spread {format_quantity(d.scaled_mad, u)}"
            )
    return lines


def batch_lines(batch: Batch, where: str) -> list[str]:
    """The batch as text: serials, metrics, then each flagged value, then notes."""
    revision = f" rev {visible(batch.revision)}" if batch.revision else ""
    lines = [
        f"batch: {visible(batch.board)}{revision}, {len(batch.rows)} serials, "
        f"{len(batch.columns)} judged metrics ({visible(where)})",
        *_serial_lines(batch),
        "",
        *_metric_lines(batch),
        "spread = MAD x 1.4826 (a standard deviation for normal data); " + RULE_TEXT,
    ]
    findings = _finding_lines(batch)
    if findings:
        lines += ["", "outliers:", *findings]
    lines += [f"note: {note}" for note in batch.notes]
    return lines
