"""Plain-text lines and the JSON summary of a headless run (no UI: strings only)."""

from __future__ import annotations

from bringup.analysis.quantities import format_quantity
from bringup.runner.results import AttemptResult
from bringup.runner.session import SessionRunner

__all__ = ["attempt_lines", "diagnosis_lines", "summary_json", "PASSING"]

#: Overall states that count as "everything passed" for the exit status.
PASSING = ("pass", "conditional-pass", "waived")


def attempt_lines(index: int, total: int, result: AttemptResult) -> list[str]:
    """One line for the step's verdict, then one per judged metric, then warnings."""
    head = f"[{index}/{total}] {result.step_id:<32} {result.state}"
    lines = [head + (f"  ({result.message})" if result.message else "")]
    for m in result.metrics:
        if not m.judged:
            continue
        value = format_quantity(m.measured, m.unit)
        if m.uncertainty is not None and m.measured is not None:
            value += f" ± {format_quantity(m.uncertainty, m.unit)}"
        limit = m.limit.describe() if m.limit else ""
        margin = f", margin {format_quantity(m.margin, m.unit)}" if m.margin is not None else ""
        pred = f", design {format_quantity(m.predicted, m.unit)}" if m.predicted is not None else ""
        lines.append(f"        {m.id:<26} {value:>12}  {m.outcome:<16} limit {limit}{margin}{pred}")
        if m.disagreement:
            lines.append(f"        ! {m.id}: {m.disagreement}")
    for warning in result.warnings:
        lines.append(f"        ! {warning}")
    for fault in result.absorbed:
        lines.append(f"        ! fault got past: {fault}")
    lines.extend(f"        {line}" for line in diagnosis_lines(result.diagnosis))
    return lines


def diagnosis_lines(diagnosis: dict) -> list[str]:
    """A stored diagnosis (``AttemptResult.diagnosis``) as plain lines: its notes, then each
    cause ranked, its evidence and the check to make at the bench."""
    if not diagnosis:
        return []
    lines = [f"? diagnosis: {n}" for n in diagnosis.get("notes") or ()]
    for k, cause in enumerate(diagnosis.get("causes") or (), 1):
        lines.append(f"? cause {k}: {cause.get('title', '')}")
        lines.extend(f"      {e}" for e in cause.get("evidence") or ())
        lines.append(f"      check: {cause.get('check', '')}")
    return lines


def _plain(value: float | None) -> float | None:
    """A JSON number (numpy scalars are floats of another type)."""
    return None if value is None else float(value)


def summary_json(runner: SessionRunner, results: list[AttemptResult] | None = None) -> dict:
    """``{"session": ID, "verdict": ..., "stages": [{"id": ..., "verdict": ...}, ...],
    "attempts": [...]}``; ``attempts`` lists ``results`` (this run's attempts): step, attempt
    number, state, message, the instrument ``fault`` that ended it ("" if none), the faults
    ``absorbed`` by a retry or a switch-off during it, the ``diagnosis`` of a failed step
    (None when there is none) and its ``metrics`` (measured value with its expanded
    uncertainty U, k = 2, the one the decision used; None where there is none)."""
    return {
        "session": runner.session_id,
        "verdict": runner.verdict(),
        "stages": [{"id": s.stage_id, "verdict": s.state} for s in runner.stages()],
        "attempts": [
            {
                "step": r.step_id,
                "attempt": r.attempt_no,
                "state": r.state,
                "message": r.message,
                "fault": r.fault,
                "absorbed": list(r.absorbed),
                "diagnosis": r.diagnosis or None,
                "metrics": [
                    {
                        "id": m.id,
                        "unit": m.unit,
                        "measured": _plain(m.measured),
                        "uncertainty": _plain(m.uncertainty),
                        "outcome": m.outcome,
                    }
                    for m in r.metrics
                ],
            }  # fmt: skip
            for r in results or ()
        ],
    }
