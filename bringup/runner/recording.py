"""Attempts to and from the session log (``bringup.store``): one transaction per attempt.

Stored per attempt: instrument identities, the settings sent, raw waveforms (the instrument's
codes plus scale), metrics with units, predictions, verdicts with limits and margins, the state,
the operator and times; in ``extra`` the message, warnings, the plot annotations (levels,
crossings, windows) and analysis details, so a resumed session shows the same attempt.
"""

from __future__ import annotations

import dataclasses
import threading

import numpy as np

from bringup.analysis.verdict import Limit
from bringup.checklist.model import Step
from bringup.runner.analyses import AnalysisOutput
from bringup.runner.results import AttemptResult, Crossing, MetricResult, SoakProgress, WaveformView

__all__ = ["Recorder", "now_utc", "attempt_from_record", "views_from_record"]


def now_utc() -> str:
    """The time now, ISO 8601 UTC with milliseconds."""
    import datetime as dt

    return dt.datetime.now(dt.UTC).isoformat(timespec="milliseconds").replace("+00:00", "Z")


def _limit_dict(limit: Limit | None) -> dict | None:
    return None if limit is None else {"min": limit.min, "max": limit.max, "unit": limit.unit}


def _view_note(view: WaveformView) -> dict:
    return {
        "name": view.name,
        "net": view.net,
        "levels": dict(view.levels),
        "crossings": [dataclasses.asdict(c) for c in view.crossings],
        "window_s": list(view.window_s) if view.window_s else None,
    }


def _verdicts(result: AttemptResult) -> dict:
    """Judged metrics -> outcome, margin, reason, limit, uncertainty, rule, disagreement."""
    return {
        m.id: {
            "outcome": m.outcome,
            "margin": m.margin,
            "reason": m.reason,
            "limit": _limit_dict(m.limit),
            "uncertainty": m.uncertainty,
            "rule": m.rule,
            "disagreement": m.disagreement,
        }
        for m in result.metrics
        if m.judged
    }


def _stored_waveforms(raw: dict) -> dict:
    """Raw records by net (the instrument's codes plus scale) as the store keeps them."""
    from bringup.checklist.catalogue import CURRENT_NETS
    from bringup.store.waveforms import StoredWaveform

    return {
        net: StoredWaveform(
            codes=np.asarray(wf.codes),
            # The store maps a -0.0 from the instrument to 0.0 itself (SQLite keeps no negative
            # zero, and a scale that read back differently would break the hash chain).
            x_increment=wf.x_increment,
            x_origin=wf.x_origin,
            y_increment=wf.y_increment,
            y_origin=wf.y_origin,
            # a current probe's channel reads amperes (its ratio is in A/V)
            y_unit="A" if net in CURRENT_NETS else "V",
            meta={"net": net, "source": wf.source},
        )
        for net, wf in raw.items()
    }


def _extra(step: Step, result: AttemptResult, out: AnalysisOutput) -> dict:
    """What a resumed session needs to show the attempt as it ran: message, warnings, plot
    annotations, reported metrics, analysis details, the soak's log."""
    extra = {
        "state": result.state,
        "message": result.message,
        "warnings": list(result.warnings),
        "step": step.id,
        "views": [_view_note(v) for v in result.waveforms],
        "reported": {
            m.id: {
                "label": m.label,
                "reason": m.reason,
                "disagreement": m.disagreement,
                "uncertainty": m.uncertainty,
            }
            for m in result.metrics
            if not m.judged
        },
        "details": out.details,
    }
    if result.fault:
        extra["fault"] = result.fault
    if result.absorbed:
        extra["absorbed"] = list(result.absorbed)
    if result.soak is not None:
        extra["soak"] = dataclasses.asdict(result.soak)
    return extra


class Recorder:
    """One session's side of the log (``bringup.store.SessionLog``): attempts and events in,
    stored attempts' waveforms out. Safe to use from several threads (one lock)."""

    def __init__(self, log, session_id: str, session_lock=None) -> None:
        """``session_lock``: this process's hold on the session (``bringup.locks.Held``): one
        session, one writer; let go when the log is closed."""
        self.log = log
        self.session_id = session_id
        self._lock = threading.RLock()
        self._session_lock = session_lock

    @property
    def lock(self) -> threading.RLock:
        """Held around every use of the log."""
        return self._lock

    def store(
        self, step: Step, result: AttemptResult, raw: dict, out: AnalysisOutput
    ) -> AttemptResult:
        """Log ``result`` (with the raw records ``raw`` by net) in one transaction and return
        it with its row id."""
        metrics = {
            m.id: {"value": m.measured, "unit": m.unit, "label": m.label} for m in result.metrics
        }
        predictions = {m.id: m.predicted for m in result.metrics if m.predicted is not None}
        with self._lock:
            attempt_id = self.log.record_attempt(
                self.session_id,
                stage_id=step.stage_id,
                step_id=step.key,
                operator=result.operator,
                started_utc=result.started_utc,
                finished_utc=result.finished_utc,
                instruments=result.instruments,
                settings=result.settings,
                metrics=metrics,
                predictions=predictions,
                verdicts=_verdicts(result),
                outcome=result.state,
                notes=result.notes,
                waveforms=_stored_waveforms(raw),
                extra=_extra(step, result, out),
            )
        return dataclasses.replace(result, attempt_id=attempt_id)

    def event(self, kind: str, operator: str, **fields) -> int:
        """Log an event (``SessionLog.record_event``: skip, waive, note, go-back, abort, ...)."""
        with self._lock:
            return self.log.record_event(self.session_id, kind=kind, operator=operator, **fields)

    def update_listing(self, verdict: str, stage_verdicts: dict[str, str]) -> None:
        """The session's cached verdicts, for listings."""
        with self._lock:
            self.log.set_session_state(
                self.session_id, verdict=verdict, stage_verdicts=stage_verdicts
            )

    def views_of(self, attempt: AttemptResult) -> tuple[WaveformView, ...]:
        """The plot views of a stored attempt (annotations over the stored raw samples)."""
        with self._lock:
            for record in self.log.attempts(self.session_id):
                if record.id == attempt.attempt_id:
                    return views_from_record(self.log, record)
        return ()

    def close(self) -> None:
        """Close the log, then let go of the session."""
        with self._lock:
            try:
                self.log.close()
            finally:
                if self._session_lock is not None:
                    self._session_lock.release()


def attempt_from_record(record, step: Step) -> AttemptResult:
    """Rebuild an ``AttemptResult`` (without waveform samples) from a stored attempt."""
    extra = record.extra or {}
    reported = extra.get("reported") or {}
    metrics: list[MetricResult] = []
    for metric_id, m in (record.metrics or {}).items():
        value = m.get("value") if isinstance(m, dict) else m
        unit = m.get("unit", "") if isinstance(m, dict) else ""
        label = m.get("label", metric_id) if isinstance(m, dict) else metric_id
        v = (record.verdicts or {}).get(metric_id)
        p = (record.predictions or {}).get(metric_id)
        if v:
            lim = v.get("limit") or {}
            limit = Limit(lim.get("min"), lim.get("max"), lim.get("unit", unit)) if lim else None
            metrics.append(MetricResult(metric_id, label, unit, value, p, limit, v.get("uncertainty"),
                                        v.get("rule"), v.get("outcome"), v.get("margin"),
                                        v.get("reason"), v.get("disagreement")))  # fmt: skip
        else:
            r = reported.get(metric_id, {})
            metrics.append(MetricResult(metric_id, label, unit, value, p,
                                        uncertainty=r.get("uncertainty"), reason=r.get("reason"),
                                        disagreement=r.get("disagreement")))  # fmt: skip
    soak = None
    if extra.get("soak"):
        s = extra["soak"]
        soak = SoakProgress(tuple(s["times_s"]), tuple(s["temperatures_c"]),
                            s.get("predicted_final_c"), s.get("predicted_sigma_c"),
                            s.get("time_constant_s"), bool(s.get("settled")), s.get("limit_c"))  # fmt: skip
    state = extra.get("state") or record.outcome
    return AttemptResult(
        step_id=step.id,
        stage_id=step.stage_id,
        attempt_no=record.attempt_no,
        state=state,
        metrics=tuple(metrics),
        waveforms=(),
        instruments={k: str(v) for k, v in (record.instruments or {}).items()},
        settings=record.settings or {},
        operator=record.operator,
        started_utc=record.started_utc,
        finished_utc=record.finished_utc,
        notes=record.notes or "",
        message=extra.get("message", ""),
        warnings=tuple(extra.get("warnings") or ()),
        attempt_id=record.id,
        soak=soak,
        fault=str(extra.get("fault") or ""),
        absorbed=tuple(extra.get("absorbed") or ()),
        diagnosis=dict((extra.get("details") or {}).get("diagnosis") or {}),
        budgets=dict((extra.get("details") or {}).get("budgets") or {}),
    )


def views_from_record(log, record) -> tuple[WaveformView, ...]:
    """The attempt's plot views: stored annotations over the stored raw samples."""
    from bringup.runner.analyses import Trace, _view

    extra = record.extra or {}
    views = []
    for note in extra.get("views") or []:
        name = note["net"] if note["net"] in record.waveforms else None
        if name is None:
            continue
        stored = log.load_waveform(record.id, name)
        volts = stored.codes.astype(np.float64) * stored.y_increment + stored.y_origin
        trace = Trace(note["net"], volts, stored.x_increment, stored.x_origin)
        crossings = [Crossing(**c) for c in note.get("crossings") or []]
        window = tuple(note["window_s"]) if note.get("window_s") else None
        views.append(_view(note["name"], trace, note.get("levels") or {}, crossings, window))
    return tuple(views)
