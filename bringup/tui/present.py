"""Turn the runner's records (``bringup.runner.results``) into what the screens show.

Pure formatting: no measurement, no storage. Every number is printed with its unit through
``format_quantity``; a value that could not be measured shows as "not measured".
"""

from __future__ import annotations

import dataclasses
from typing import Any

from bringup.analysis.quantities import format_quantity
from bringup.tui.views import (
    AttemptView,
    BudgetView,
    Energise,
    MetricRow,
    Progress,
    StepDetail,
    TraceView,
)

__all__ = [
    "metric_row",
    "budget_view",
    "attempt_view",
    "trace_view",
    "progress_view",
    "detail_view",
    "reading_label",
    "when_text",
    "reflow",
]

# suffix of a reading key -> unit ("supply_voltage_v" -> "V")
_SUFFIX_UNITS = {"_v": "V", "_a": "A", "_c": "degC", "_s": "s", "_w": "W", "_ohm": "ohm"}


def _q(value: float | None, unit: str) -> str:
    if value is None:
        return "not measured"
    return format_quantity(value, unit)


def _plus_minus(m: Any) -> str:
    """ " ± U" (the expanded uncertainty, k = 2, the decision used) beside a measured value."""
    u = getattr(m, "uncertainty", None)
    if m.measured is None or u is None or not u > 0:
        return ""
    # two significant digits at most: an uncertainty is not known better (GUM §7.2.6)
    return f" ± {format_quantity(u, m.unit, 2)}"


def _number(value: Any) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def _amount(value: Any, unit: str) -> str:
    """A budget's figure with its unit ("1" for a dimensionless input: a bare number)."""
    if not _number(value):
        return "—"
    return format_quantity(float(value), "" if unit in ("1", "") else unit, 3)


def _sensitivity(c: Any, unit: str, input_unit: str) -> str:
    """c_i with its unit: "1" when input and result share a unit, else "unit/input_unit"."""
    if not _number(c):
        return "—"
    if not input_unit or input_unit == unit:
        return f"{float(c):.4g}"
    per = unit if input_unit == "1" else f"{unit}/{input_unit}"
    return f"{float(c):.4g} {per}"


def budget_view(label: str, budget: Any) -> BudgetView | None:
    """A logged GUM budget (``Budget.to_dict()`` of ``bringup.analysis.uncertainty``) for the
    budget view; None when there is none or it is not a budget (an older log's entry)."""
    if not isinstance(budget, dict) or not _number(budget.get("expanded")):
        return None
    unit = str(budget.get("unit") or "")
    rows = []
    for c in budget.get("components") or []:
        if not isinstance(c, dict):
            continue
        in_unit = str(c.get("input_unit") or unit)
        evaluation = str(c.get("evaluation", ""))
        # "type B, rectangular" -> "B, rectangular": the type first, then how it was evaluated
        kind = evaluation[5:] if evaluation.lower().startswith("type ") else evaluation
        rows.append((str(c.get("name", "")), kind or str(c.get("type") or ""),
                     _amount(c.get("u_input", c.get("u")), in_unit),
                     _sensitivity(c.get("sensitivity", 1.0), unit, in_unit),
                     _amount(c.get("u"), unit)))  # fmt: skip
    k = budget.get("k")
    value = budget.get("value")
    title = (f"{label}: {_amount(value, unit)} ± {_amount(budget['expanded'], unit)}"
             f" (k = {k:g})" if _number(k) else f"{label}")  # fmt: skip
    return BudgetView(title=title, rows=tuple(rows), combined=_amount(budget.get("combined"), unit),
                      k=f"{k:g}" if _number(k) else "—", expanded=_amount(budget["expanded"], unit),
                      main=str(budget.get("main") or ""))  # fmt: skip


def _used(m: Any, view: BudgetView | None, budget: Any) -> BudgetView | None:
    """``view`` with the line saying which expanded uncertainty the decision used."""
    if view is None:
        return None
    u = getattr(m, "uncertainty", None)
    if m.outcome is None:
        used = "reported only: no decision is made with it"
    elif _number(u) and u > float(budget["expanded"]) * (1 + 1e-9):
        used = (f"the decision used U = {format_quantity(u, m.unit)}: the board file's declared "
                "uncertainty, larger than the computed one (ILAC-G8 guard band)")  # fmt: skip
    else:
        used = "the decision used this U as its guard band (ILAC-G8)"
    return dataclasses.replace(view, used=used)


def metric_row(m: Any, budget: Any = None) -> MetricRow:
    """A ``MetricResult`` as a table row (margin signed: + inside the limits), with its GUM
    budget when one was computed."""
    if m.margin is None:
        margin = "—"
    else:
        sign = "+" if m.margin >= 0 else "−"
        margin = sign + format_quantity(abs(m.margin), m.unit)
    reason = " ".join(x for x in (m.reason, m.disagreement) if x)
    return MetricRow(
        label=m.label,
        measured=_q(m.measured, m.unit) + _plus_minus(m),
        predicted="—" if m.predicted is None else format_quantity(m.predicted, m.unit),
        limits=m.limit.describe() if m.limit is not None else "(reported)",
        margin=margin,
        verdict=m.outcome or "reported",
        reason=reason,
        budget=_used(m, budget_view(m.label, budget), budget),
    )


def trace_view(w: Any) -> TraceView:
    """A ``WaveformView`` with its levels, crossings and on-time window (amperes on a current
    net)."""
    from bringup.checklist.catalogue import CURRENT_NETS

    crossings = tuple(
        (f"{c.name}{'↑' if c.direction.startswith('r') else '↓'}", float(c.time_s))
        for c in w.crossings
    )
    return TraceView(
        title=f"{w.name} ({w.net})" if w.net and w.net not in w.name else w.name,
        t=w.times(),
        v=w.volts,
        unit="A" if w.net in CURRENT_NETS else "V",
        levels=tuple((name, float(v)) for name, v in w.levels.items()),
        crossings=crossings,
        window=tuple(w.window_s) if w.window_s is not None else None,
    )


def when_text(utc: str) -> str:
    """'2026-12-01 22:10:04' from an ISO 8601 UTC time ('' stays '')."""
    return utc.replace("T", " ").split(".")[0].removesuffix("Z").removesuffix("+00:00")


def diagnosis_line(diagnosis: dict) -> str:
    """The diagnosis in one line for the result view: the most likely part, its evidence and
    the check to make at the bench ("" when the attempt has none)."""
    notes = "; ".join(diagnosis.get("notes") or [])
    causes = diagnosis.get("causes") or []
    if not causes:
        return notes
    first = causes[0]
    evidence = "; ".join(first.get("evidence") or [])
    parts = [notes, str(diagnosis.get("summary", "")), evidence,
             f"check: {first.get('check', '')}"]  # fmt: skip
    if len(causes) > 1:
        parts.append(f"also possible: {causes[1].get('title', '')}")
    return " — ".join(p for p in parts if p)


def attempt_view(a: Any) -> AttemptView:
    """An ``AttemptResult`` for the result table, the plot and the history."""
    findings = [m.disagreement for m in a.metrics if getattr(m, "disagreement", None)]
    # the likely part at fault, first cause first (bringup.analysis.diagnosis)
    findings.append(diagnosis_line(getattr(a, "diagnosis", None) or {}))
    message = " · ".join(x for x in (a.message, *a.warnings, *findings) if x)
    traces = tuple(trace_view(w) for w in a.waveforms)
    if a.soak is not None and a.soak.times_s:
        traces = (soak_trace(a.soak), *traces)
    return AttemptView(
        number=a.attempt_no,
        verdict=a.state,
        when=when_text(a.finished_utc or a.started_utc),
        operator=a.operator,
        metrics=tuple(
            metric_row(m, (getattr(a, "budgets", None) or {}).get(m.id)) for m in a.metrics
        ),  # fmt: skip
        traces=traces,
        notes=tuple(n for n in a.notes.splitlines() if n.strip()) if a.notes else (),
        message=message,
    )


def soak_trace(soak: Any) -> TraceView:
    """The temperature log as a trace (°C against seconds), with the limit and prediction."""
    import numpy as np

    levels: list[tuple[str, float]] = []
    if soak.limit_c is not None:
        levels.append(("limit", float(soak.limit_c)))
    if soak.predicted_final_c is not None:
        levels.append(("→ final", float(soak.predicted_final_c)))
    return TraceView(
        title="heatsink temperature",
        t=np.asarray(soak.times_s, dtype=float),
        v=np.asarray(soak.temperatures_c, dtype=float),
        unit="degC",
        levels=tuple(levels),
    )


def reading_label(key: str) -> tuple[str, str]:
    """('supply voltage', 'V') from 'supply_voltage_v'."""
    for suffix, unit in _SUFFIX_UNITS.items():
        if key.endswith(suffix):
            return key[: -len(suffix)].replace("_", " "), unit
    return key.replace("_", " "), ""


def _phase_text(phase: str, message: str) -> str:
    """'acquiring: 3 traces acquired'; the phase once when the message only repeats it."""
    if not message or message.strip().lower() == phase.strip().lower():
        return phase
    if message.lower().startswith(phase.lower()):
        return message
    return f"{phase}: {message}"


def progress_view(p: Any) -> Progress:
    """A runner ``Progress`` event as the live panel shows it."""
    readings = []
    for key, value in p.readings.items():
        label, unit = reading_label(key)
        readings.append((label, format_quantity(value, unit) if unit else f"{value:.4g}"))
    soak = p.soak
    predicted, settled, soak_t, soak_temp = "", False, (), ()
    if soak is not None:
        soak_t, soak_temp = tuple(soak.times_s), tuple(soak.temperatures_c)
        settled = bool(soak.settled)
        if soak.predicted_final_c is not None:
            predicted = format_quantity(soak.predicted_final_c, "degC")
            notes = []
            if soak.predicted_sigma_c is not None:
                # the fit's expanded uncertainty (k = 2): the band the plot draws
                predicted += f" ± {format_quantity(2 * soak.predicted_sigma_c, 'K', 2)}"
                notes.append("k = 2, from the fit alone")
            if soak.limit_c is not None:
                notes.append(f"limit {format_quantity(soak.limit_c, 'degC')}")
            if notes:
                predicted += f" ({'; '.join(notes)})"
    return Progress(
        soak_limit_c=soak.limit_c if soak is not None else None,
        soak_final_c=soak.predicted_final_c if soak is not None else None,
        soak_sigma_c=soak.predicted_sigma_c if soak is not None else None,
        fraction=p.fraction,
        text=_phase_text(p.phase, p.message),
        readings=tuple(readings),
        soak_t=soak_t,
        soak_temp=soak_temp,
        predicted_final=predicted,
        settled=settled,
    )


def _channel_settings(plan: Any) -> list[tuple[str, str, str]]:
    rows: list[tuple[str, str, str]] = []
    settings = plan.settings if isinstance(plan.settings, dict) else {}
    scope = settings.get("scope") or {}
    if scope.get("points"):
        rows.append(
            (
                "scope",
                "record",
                f"{scope['points']:,} points over {format_quantity(scope['duration_s'], 's')}, "
                f"pre-trigger {format_quantity(scope.get('pretrigger_s', 0.0), 's')}",
            )
        )
    trigger = scope.get("trigger") or {}
    if trigger:
        rows.append(
            (
                "scope",
                f"trigger on {trigger['net']}",
                f"{trigger.get('slope', 'positive')} edge at "
                f"{format_quantity(trigger['level_v'], 'V')}",
            )
        )
    for ch in plan.channels:
        bw = ", 20 MHz limit" if ch.bandwidth_limit else ""
        rows.append(
            (
                "scope",
                f"CH{ch.channel} on {ch.net} ({ch.probe})",
                f"{format_quantity(ch.range_v, 'V')} full scale, offset "
                f"{format_quantity(ch.offset_v, 'V')}, {ch.coupling}{bw}",
            )
        )
    supply = settings.get("supply") or {}
    if supply.get("ovp_v"):
        rows.append(("supply", "over-voltage protection", format_quantity(supply["ovp_v"], "V")))
    pwm = settings.get("pwm") or {}
    if pwm:
        duty = pwm.get("duty")
        state = "on" if pwm.get("enabled") else "off"
        rows.append(("board", "PWM (by hand)", state + (f", duty {duty:.0%}" if duty else "")))
    return rows


def reflow(text: str) -> str:
    """Join the hard-wrapped lines of a TOML multi-line string; blank lines stay paragraphs."""
    paragraphs = [" ".join(p.split()) for p in text.strip().split("\n\n")]
    return "\n\n".join(p for p in paragraphs if p)


def detail_view(plan: Any, state: str, soak: bool) -> StepDetail:
    """A ``StepPlan`` (plus the step's state) as the step brief."""
    instructions = reflow(plan.instructions)
    if plan.hands:
        instructions += "\n\nBy hand:\n" + "\n".join(
            f"  {i}. {h}" for i, h in enumerate(plan.hands, 1)
        )
    if plan.warnings:
        instructions += "\n\n" + "\n".join(f"Note: {w}" for w in plan.warnings)
    energise = None
    if plan.energise is not None:
        e = plan.energise
        energise = Energise(e.voltage_v, e.current_limit_a, tuple(e.ramp_v), e.prompt, e.hazard,
                            tuple(e.unmet_gates))  # fmt: skip
    kind = "soak" if soak else ("reading" if plan.reading_prompt else "waveform")
    return StepDetail(
        id=plan.step_id,
        stage_id=plan.stage_id,
        title=plan.title,
        state=state,
        instructions=instructions,
        cautions=tuple(reflow(c) for c in plan.cautions),
        settings=tuple(_channel_settings(plan)),
        energise=energise,
        kind=kind,
        reading_prompt=plan.reading_prompt or "",
        reading_unit=plan.reading_unit or "",
        confirm=plan.confirm or "",
    )
