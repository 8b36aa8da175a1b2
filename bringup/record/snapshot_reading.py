"""What a session's snapshots say, read for the record: the checklist file's tables (step
cautions, instructions, settings), the bench's instruments, and the files' identities.

The runner logs each file's text with the session; the record reads the same text, so what
it shows is what the operator ran with, not what is on disk today.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import tomllib
from typing import Any

from bringup.store.entries import AttemptRecord, rehearsal_bench

__all__ = ["bench_view", "calibration_state", "checklist_file", "step_definitions", "text_digest"]


def checklist_file(checklist: dict) -> dict:
    """The ``[checklist]`` table of the logged checklist text ({} when there is none)."""
    table = _file_tables(checklist).get("checklist")
    return table if isinstance(table, dict) else {}


def _file_tables(snapshot: dict) -> dict:
    """The tables of a snapshot's file text (the runner logs the file's text), {} if none."""
    text = snapshot.get("text") if isinstance(snapshot, dict) else None
    if not isinstance(text, str):
        return {}
    try:
        return _plain(tomllib.loads(text))
    except tomllib.TOMLDecodeError:
        return {}


def _plain(value: Any) -> Any:
    """TOML values as JSON values: dates and times become ISO 8601 text."""
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_plain(v) for v in value]
    if isinstance(value, _dt.date | _dt.time):
        return value.isoformat()
    return value


def step_definitions(checklist: dict) -> list[dict]:
    """Stages with their steps, each merged with its table in the checklist file's text
    (cautions, instructions, settings), so the record shows what the operator was told."""
    stages = checklist.get("stages") if isinstance(checklist, dict) else None
    if not isinstance(stages, list):
        return []
    tables = _file_tables(checklist).get("stages") or {}
    out = []
    for stage in stages:
        if not isinstance(stage, dict):
            continue
        table = tables.get(stage.get("id")) if isinstance(tables, dict) else None
        table = table if isinstance(table, dict) else {}
        step_tables = table.get("steps") if isinstance(table.get("steps"), dict) else {}
        merged = {k: v for k, v in table.items() if k != "steps"} | stage
        merged["steps"] = [
            (step_tables.get(step.get("id")) or {}) | step
            for step in stage.get("steps") or []
            if isinstance(step, dict)
        ]
        out.append(merged)
    return out


def calibration_state(due: Any, simulated: bool, started_utc: str | None) -> dict:
    """An instrument's calibration on the session's day (the UTC date it started):
    ``{"state", "on"}`` with state ``in-date`` (due on or after that day), ``past-due``,
    ``no-date`` (the bench file gives none), ``unreadable`` (a due date that is not a date) or
    ``simulated`` (no real instrument: nothing to calibrate)."""
    on = str(started_utc or "")[:10] or None
    if simulated:
        return {"state": "simulated", "on": on}
    if due is None:
        return {"state": "no-date", "on": on}
    try:
        due_day = _dt.date.fromisoformat(str(due))
        day = _dt.date.fromisoformat(on) if on else None
    except ValueError:
        return {"state": "unreadable", "on": on}
    if day is None:
        return {"state": "unreadable", "on": on}
    return {"state": "past-due" if day > due_day else "in-date", "on": on}


def bench_view(
    bench: dict | None, attempts: list[AttemptRecord], started_utc: str | None = None
) -> dict:
    """Each instrument with its *IDN? (as the attempts logged it), profile, probes, due date,
    certificate and calibration state on the session's day (``calibration_state``)."""
    bench = bench or {}
    simulated = rehearsal_bench(bench)
    idn: dict[str, str] = {}
    for a in attempts:
        for role, value in (a.instruments or {}).items():
            text = value.get("idn") if isinstance(value, dict) else value
            if isinstance(text, str):
                idn.setdefault(role, text)
    instruments = []
    roles = [r for r in ("scope", "supply", "thermometer") if isinstance(bench.get(r), dict)]
    roles += sorted(r for r in idn if r not in roles)
    for role in roles:
        conf = bench.get(role) if isinstance(bench.get(role), dict) else {}
        inst: dict[str, Any] = {"id": role, "idn": idn.get(role)}
        for key in ("resource", "profile", "calibration_due", "calibration_certificate"):
            inst[key] = conf.get(key)
        inst["calibration"] = calibration_state(conf.get("calibration_due"), simulated, started_utc)
        channels = conf.get("channels")
        if role == "scope" and not isinstance(channels, dict):
            used = _channels_from_settings(attempts)
            if used:
                inst["channels"] = used
        if isinstance(channels, dict):
            inst["channels"] = [
                {"id": str(n), **{k: v for k, v in sorted(c.items())}}
                for n, c in sorted(channels.items(), key=lambda kv: str(kv[0]))
                if isinstance(c, dict)
            ]
        instruments.append(inst)
    return {
        "simulated": simulated,
        "instruments": instruments,
        "other": {k: v for k, v in bench.items() if k not in roles},
    }


def text_digest(snapshot: dict) -> str | None:
    """SHA-256 of the logged file text: the file's identity when it states no version."""
    text = snapshot.get("text") if isinstance(snapshot, dict) else None
    return hashlib.sha256(text.encode("utf-8")).hexdigest() if isinstance(text, str) else None


def _channels_from_settings(attempts: list[AttemptRecord]) -> list[dict]:
    """Scope channels as the attempts' settings used them (channel, net, probe kind, ratio)."""
    seen: dict[str, dict] = {}
    for a in attempts:
        scope = (a.settings or {}).get("scope")
        channels = scope.get("channels") if isinstance(scope, dict) else None
        for ch in channels or []:
            if isinstance(ch, dict) and ch.get("channel") is not None:
                entry = {"id": str(ch["channel"]), "net": ch.get("net")}
                for key in ("probe", "probe_ratio"):
                    if ch.get(key) is not None:
                        entry[key] = ch[key]
                seen.setdefault(f"{entry['id']}:{entry['net']}", entry)
    return sorted(seen.values(), key=lambda c: (c["id"], str(c["net"])))
