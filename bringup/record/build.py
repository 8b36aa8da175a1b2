"""The record's content, built from one session of the log (schema ``bringup-record/2``).

Only what the log's hash chain covers goes into the content: the session's snapshot (board,
checklist, bench, serial, operator: the chain's genesis) and its attempts and events. The
listing caches of the ``sessions`` row (verdict, last activity) are left out, so that nothing
but a new logged entry can change a signed content. See ``SCHEMA.md`` beside this file.
"""

from __future__ import annotations

import base64
import zlib
from collections.abc import Callable
from typing import Any

import numpy as np

from bringup.record.compare import content_digest, seal_of
from bringup.record.schemas import RECORD_SCHEMA, REHEARSAL_OVERALL, content_as
from bringup.record.signing import open_item
from bringup.record.snapshot_reading import (
    bench_view,
    checklist_file,
    step_definitions,
    text_digest,
)
from bringup.store.content import WAVEFORM_SCALE_COLUMNS
from bringup.store.entries import AttemptRecord, EventRecord, SessionData

__all__ = ["RECORD_SCHEMA", "build_content", "assemble_record", "step_statuses", "stamp"]


#: Outcomes that accept a measurement (ILAC-G8 §4.2: inside the limits).
_ACCEPTED = ("pass", "conditional-pass")
_FAILED = ("fail", "conditional-fail")

#: (attempt, waveform name) -> (codes, description) for one stored waveform.
WaveformLoader = Callable[[AttemptRecord, str], np.ndarray]


def stamp(utc: str | None, offset: str | None) -> dict | None:
    """A record time: ``{"utc": "...Z", "offset": "+01:00"}`` (offset null when not logged)."""
    if not utc:
        return None
    return {"utc": utc, "offset": offset}


def _offset_of(data: SessionData) -> str | None:
    """The bench's UTC offset when the snapshot names it (bench or board ``utc_offset``)."""
    for snap in (data.bench or {}, data.board or {}):
        for key in ("utc_offset", "local_utc_offset"):
            value = snap.get(key) if isinstance(snap, dict) else None
            if isinstance(value, str):
                return value
    return None


def _metric(value: Any, unit: str = "") -> dict:
    """A metric or prediction as ``{"value", "unit"}``; a missing value carries a reason."""
    if isinstance(value, dict):
        entry = dict(value)
        entry.setdefault("unit", unit)
        if entry.get("value") is None:
            entry.setdefault("reason", "no value: not measured, or not a finite number")
        return entry
    if value is None:
        return {
            "value": None,
            "unit": unit,
            "reason": "no value: not measured, or not a finite number",
        }
    if isinstance(value, bool) or not isinstance(value, int | float):
        return {"value": value, "unit": unit}
    return {"value": value, "unit": unit}


def _targets(board: dict) -> dict:
    targets = board.get("targets") if isinstance(board, dict) else None
    return targets if isinstance(targets, dict) else {}


def _verdicts(attempt: AttemptRecord, targets: dict, metrics: dict) -> list[dict]:
    """Each verdict with the measured value, its unit and the guard band (ILAC-G8 §4.2: w = U
    under the guarded rule, 0 under simple acceptance)."""
    out = []
    for key in sorted(attempt.verdicts):
        raw = attempt.verdicts[key]
        entry = dict(raw) if isinstance(raw, dict) else {"outcome": raw}
        entry.setdefault("target", key)
        metric = metrics.get(key)
        if isinstance(metric, dict):
            entry.setdefault("value", metric.get("value"))
            entry.setdefault("unit", metric.get("unit", ""))
        if "guard_band" not in entry and isinstance(entry.get("uncertainty"), int | float):
            entry["guard_band"] = entry["uncertainty"] if entry.get("rule") == "guarded" else 0.0
        target = targets.get(entry.get("target")) or targets.get(key)
        if isinstance(target, dict) and "limit" not in entry:
            limit = {k: target.get(k) for k in ("min", "max") if target.get(k) is not None}
            if limit:
                entry["limit"] = limit
            entry.setdefault("label", target.get("label"))
        out.append(entry)
    return out


def _markers_from_views(extra: dict) -> dict[str, list[dict]]:
    """Plot markers from the runner's notes: named levels, reference-level crossings, the
    on-time window (``extra["views"]``, one per waveform, keyed by net)."""
    out: dict[str, list[dict]] = {}
    for view in extra.get("views") or []:
        if not isinstance(view, dict):
            continue
        marks: list[dict] = []
        for label, y in sorted((view.get("levels") or {}).items()):
            if isinstance(y, int | float):
                marks.append({"kind": "level", "label": str(label), "y": y})
        for c in view.get("crossings") or []:
            if isinstance(c, dict) and isinstance(c.get("time_s"), int | float):
                marks.append({"kind": "time", "label": str(c.get("name", "")), "t": c["time_s"]})
        window = view.get("window_s")
        if isinstance(window, list) and len(window) == 2:
            marks.append({"kind": "window", "label": "on-time", "t": window[0], "t_end": window[1]})
        for key in {view.get("net"), view.get("name")} - {None}:
            out.setdefault(str(key), marks)
    return out


def _waveforms(attempt: AttemptRecord, load: WaveformLoader) -> list[dict]:
    extra = attempt.extra or {}
    markers = extra.get("markers") if isinstance(extra.get("markers"), dict) else {}
    markers = {**_markers_from_views(extra), **markers}
    models = extra.get("models") if isinstance(extra.get("models"), dict) else {}
    titles = extra.get("titles") if isinstance(extra.get("titles"), dict) else {}
    out = []
    for name in sorted(attempt.waveforms):
        desc = dict(attempt.waveforms[name])
        codes = np.ascontiguousarray(load(attempt, name))
        codes = codes.astype(codes.dtype.newbyteorder("<"), copy=False)
        wave = {
            "name": name,
            # the store's scale columns plus the samples' digest: one list of what a wave is
            **{k: desc.get(k) for k in (*WAVEFORM_SCALE_COLUMNS, "raw_sha256")},
            "byte_order": "little",
            # zlib (RFC 1950) at level 9 inside base64: about a tenth of the plain codes' text
            "codes_zlib_b64": base64.b64encode(zlib.compress(codes.tobytes(), 9)).decode("ascii"),
        }
        if name in markers:
            wave["markers"] = markers[name]
        if name in models:
            wave["model"] = models[name]
        if name in titles:
            wave["title"] = titles[name]
        out.append(wave)
    return out


def _unit_of(metric: Any) -> str:
    return str(metric.get("unit") or "") if isinstance(metric, dict) else ""


def _attempt(a: AttemptRecord, offset: str | None, targets: dict, load: WaveformLoader) -> dict:
    extra = {k: v for k, v in (a.extra or {}).items() if k not in ("markers", "models", "titles")}
    metrics = {k: _metric(v) for k, v in sorted(a.metrics.items())}
    entry = {
        "number": a.attempt_no,
        "seq": a.seq,
        "operator": a.operator,
        "started": stamp(a.started_utc, offset),
        "ended": stamp(a.finished_utc, offset),
        "recorded": stamp(a.recorded_utc, offset),
        "outcome": a.outcome,
        "instruments": a.instruments,
        "settings": a.settings,
        "metrics": metrics,
        "predicted": {
            k: _metric(v, _unit_of(metrics.get(k))) for k, v in sorted(a.predictions.items())
        },
        "verdicts": _verdicts(a, targets, metrics),
        "notes": [a.notes] if a.notes else [],
        "waveforms": _waveforms(a, load),
        "log": {"content_hash": a.content_hash, "chain_hash": a.chain_hash},
    }
    if extra:
        entry["extra"] = extra
    return entry


def _event(e: EventRecord, offset: str | None) -> dict:
    entry = {
        "seq": e.seq,
        "kind": e.kind,
        "at": stamp(e.recorded_utc, offset),
        "by": e.operator,
        "text": e.reason,
        "log": {"content_hash": e.content_hash, "chain_hash": e.chain_hash},
    }
    if e.payload is not None:
        entry["payload"] = e.payload
    if e.stage_id:
        entry["stage"] = e.stage_id
    if e.step_id:
        entry["step"] = e.step_id
    return entry


def step_statuses(data: SessionData) -> dict[tuple[str, str], tuple[str, str | None]]:
    """(stage, step) -> (status, latest outcome) from the chain's entries in order.

    Status: "accepted" (pass / conditional pass), "rejected" (fail / conditional fail, no
    waiver), "waived" (a waiver after the failure), "skipped", "unfinished" (the last try
    could not judge: not-run, error). Steps with no entry are not in the map.
    """
    state: dict[tuple[str, str], tuple[str, str | None]] = {}
    for entry in data.timeline:
        key = (entry.stage_id, entry.step_id)
        if isinstance(entry, AttemptRecord):
            outcome = entry.outcome
            if outcome in _ACCEPTED:
                state[key] = ("accepted", outcome)
            elif outcome in _FAILED:
                state[key] = ("rejected", outcome)
            else:
                state[key] = ("unfinished", outcome)
        elif entry.kind == "waive" and entry.step_id:
            state[key] = ("waived", state.get(key, ("", None))[1])
        elif entry.kind == "skip" and entry.step_id:
            state[key] = ("skipped", state.get(key, ("", None))[1])
    return state


StepKey = tuple[str, str]


def _entries_by_step(
    data: SessionData,
) -> tuple[dict[StepKey, list[AttemptRecord]], dict[StepKey, list[EventRecord]], list[EventRecord]]:
    """The attempts and events of each (stage, step), and the events of the whole session."""
    by_step: dict[StepKey, list[AttemptRecord]] = {}
    for a in data.attempts:
        by_step.setdefault((a.stage_id, a.step_id), []).append(a)
    step_events: dict[StepKey, list[EventRecord]] = {}
    session_events: list[EventRecord] = []
    for e in data.events:
        if e.step_id and e.stage_id:
            step_events.setdefault((e.stage_id, e.step_id), []).append(e)
        else:
            session_events.append(e)
    return by_step, step_events, session_events


def _stages(data: SessionData, checklist: dict, targets: dict, load: WaveformLoader) -> list[dict]:
    """The stages in checklist order, each step with its attempts and events; entries for steps
    the checklist snapshot does not list are kept in a last stage, never dropped."""
    offset = _offset_of(data)
    statuses = step_statuses(data)
    by_step, step_events, _ = _entries_by_step(data)

    def step(sid: str, tid: str, tdef: dict) -> dict:
        return _step(sid, tid, tdef, by_step, step_events, statuses, offset, targets, load)

    stages, known = [], set()
    for sdef in step_definitions(checklist):
        sid = str(sdef.get("id"))
        steps = []
        for tdef in sdef.get("steps") or []:
            if not isinstance(tdef, dict):
                continue
            tid = str(tdef.get("id"))
            known.add((sid, tid))
            steps.append(step(sid, tid, tdef))
        stage = {"id": sid, "title": sdef.get("title") or sdef.get("name") or sid, "steps": steps}
        cautions = sdef.get("cautions") or sdef.get("caution")
        if cautions:
            stage["cautions"] = [cautions] if isinstance(cautions, str) else list(cautions)
        stages.append(stage)
    strays = sorted({*by_step, *step_events} - known)
    if strays:
        stages.append({"id": "not-in-checklist", "title": "Entries for steps not in the checklist",
                       "steps": [step(s, t, {}) for s, t in strays]})  # fmt: skip
    return stages


def _operators(data: SessionData) -> list[str]:
    """Who measured: the session's operator and whoever logged attempts, skips and notes, in
    order of appearance (a waiver's name is a decision-maker's, shown with the waiver)."""
    operators: list[str] = []
    doers = (e.operator for e in data.timeline if getattr(e, "kind", "") != "waive")
    for name in [data.summary.operator, *doers]:
        if name and name not in operators:
            operators.append(name)
    return operators


def _session_state(data: SessionData) -> tuple[str, str | None]:
    """("open" | "aborted" | "finished", the UTC time of the finish or None) from the events."""
    state, ended = "open", None
    for e in data.events:
        if e.kind == "abort":
            state = "aborted"
        elif e.kind == "resume":
            state = "open"
        elif e.kind == "finish":
            state, ended = "finished", e.recorded_utc
    return state, ended


def _summary(stages: list[dict], rehearsal: bool) -> dict:
    """The overall outcome, the count of each step status, the open items and the exceptions
    (waivers and skips, each with who and why). What the steps' verdicts say (``passed``):
    accepting a board is a reviewer's signature, outside the content. A rehearsal (a simulated
    bench) that passed is ``rehearsed``: no board was measured."""
    counts: dict[str, int] = {}
    open_items, exceptions = [], []
    for stage in stages:
        for step in stage["steps"]:
            counts[step["status"]] = counts.get(step["status"], 0) + 1
            where = f"{stage['id']}/{step['id']}"
            item = open_item(stage["id"], step)
            if item is not None:
                open_items.append(item)
            elif step["status"] in ("waived", "skipped"):
                kind = {"waived": "waive", "skipped": "skip"}[step["status"]]
                ev = [e for e in step["events"] if e["kind"] == kind]
                why = ev[-1] if ev else {}
                exceptions.append(
                    f"{where}: {step['status']} by {why.get('by', '?')}: {why.get('text', '')}"
                )
    # A failure without a waiver is told first: it is the news, unfinished steps or not.
    if "rejected" in counts:
        overall = "rejected"
    elif any(k in counts for k in ("not-started", "unfinished")):
        overall = "incomplete"
    elif "waived" in counts or "skipped" in counts:
        overall = "passed-with-exceptions"
    else:
        # measured and judged: acceptance is a second person's signature, not this word
        overall = "passed"
    if rehearsal:
        overall = REHEARSAL_OVERALL.get(overall, overall)
    return {"overall": overall, "counts": counts, "open_items": open_items,
            "exceptions": exceptions}  # fmt: skip


def _board(data: SessionData, board_snap: dict, targets: dict) -> dict:
    """The board part: identity from the session, the rest from the logged board file."""
    board_info = board_snap.get("board") if isinstance(board_snap.get("board"), dict) else {}
    design = board_snap.get("design")
    return {
        "name": data.summary.board_name,
        "revision": data.summary.board_revision,
        "description": board_info.get("description"),
        "serial_pattern": board_info.get("serial_pattern"),
        "text_sha256": text_digest(board_snap),
        "design": design if isinstance(design, dict) else {},
        "targets": targets,
        "other": {k: v for k, v in board_snap.items() if k not in ("board", "design", "targets")},
    }


def _checklist(data: SessionData, checklist: dict) -> dict:
    """The checklist part: its id, name, version and description, and the file's digest."""
    table = checklist_file(checklist)
    return {
        "id": data.summary.checklist_id,
        "name": checklist.get("name") or checklist.get("title") or data.summary.checklist_id,
        "version": checklist.get("version") or table.get("version"),
        "description": table.get("description"),
        "text_sha256": text_digest(checklist),
        "snapshot": {k: v for k, v in checklist.items() if k != "stages"},
    }


def build_content(data: SessionData, load: WaveformLoader) -> dict:
    """The record's content for ``data`` (see SCHEMA.md); ``load`` reads a waveform's codes."""
    offset = _offset_of(data)
    summary = data.summary
    board_snap = data.board if isinstance(data.board, dict) else {}
    targets = _targets(board_snap)
    checklist = data.checklist if isinstance(data.checklist, dict) else {}
    stages = _stages(data, checklist, targets, load)
    state, ended = _session_state(data)
    timeline = data.timeline
    last = timeline[-1].recorded_utc if timeline else summary.created_utc
    bench = bench_view(data.bench, data.attempts, summary.created_utc)
    return {
        "session": {
            "id": summary.id,
            "serial": summary.serial,
            "operator": summary.operator,
            "operators": _operators(data),
            "state": state,
            "started": stamp(summary.created_utc, offset),
            "ended": stamp(ended or last, offset),
            "finished": ended is not None,
            "rehearsal": bool(bench["simulated"]),
        },
        "board": _board(data, board_snap, targets),
        "checklist": _checklist(data, checklist),
        "bench": bench,
        "stages": stages,
        "events": [_event(e, offset) for e in _entries_by_step(data)[2]],
        "summary": _summary(stages, bool(bench["simulated"])),
        "log": {
            "chain_head": data.chain_head,
            "genesis_hash": data.genesis_hash,
            "entries": len(timeline),
            "utc_offset_logged": offset is not None,
        },
    }


def _step(
    sid: str,
    tid: str,
    tdef: dict,
    by_step: dict,
    step_events: dict,
    statuses: dict,
    offset: str | None,
    targets: dict,
    load: WaveformLoader,
) -> dict:
    status, outcome = statuses.get((sid, tid), ("not-started", None))
    step = {
        "id": tid,
        "title": tdef.get("title") or tdef.get("name") or tid,
        "status": status,
        "outcome": outcome,
        "attempts": [_attempt(a, offset, targets, load) for a in by_step.get((sid, tid), [])],
        "events": [_event(e, offset) for e in step_events.get((sid, tid), [])],
    }
    cautions = tdef.get("cautions")
    if cautions:
        step["cautions"] = [cautions] if isinstance(cautions, str) else list(cautions)
    if isinstance(tdef.get("instructions"), str):
        step["instructions"] = tdef["instructions"].strip()
    skip = ("id", "title", "name", "cautions", "instructions")
    definition = {k: v for k, v in tdef.items() if k not in skip}
    if definition:
        step["definition"] = definition
    return step


def assemble_record(content: dict, signatures: list[dict], schema: str = RECORD_SCHEMA) -> dict:
    """The exported record: schema, content (as ``schema`` holds it: ``content_as``), seal
    (diagnostic digests) and signatures."""
    content = content_as(content, schema)
    return {
        "schema": schema,
        "content": content,
        "seal": seal_of(content),
        "signatures": sorted(signatures, key=lambda s: (s.get("signed_at", ""), s.get("role", ""))),
    }


__all__ += ["content_digest"]
