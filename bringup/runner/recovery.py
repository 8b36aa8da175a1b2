"""After an unclean stop: which step was running on this bench, and what the supply was doing.

A step logs an ``energise`` event just before its supply output goes ON, and its attempt once
the output is OFF again. An ``energise`` event with no later attempt of its step means the
process stopped while the step ran: a SIGKILL, a crash, a power cut of the computer. No software
of that process could switch the supply off; the next opening of the bench does.

When a bench is opened for a session (``find_interrupted`` then ``record_recovery``):

- every such dangling step of this session, and of the log's other unfinished sessions whose
  step ran on this bench's supply (same VISA resource), gets an interrupted attempt (outcome
  ``not-run``, saying so) so that it is part of the record;
- when the instrument layer found the output ON (``FoundOn``: volts, amps), a ``found-on``
  event on the most recently interrupted session says at what voltage and current it was found
  and that it was switched off (on this session when none is found), and one line is returned
  for the operator.

A step whose process is still alive on this host is left alone: it is running, not interrupted.
"""

from __future__ import annotations

import os
import socket
from collections.abc import Callable
from dataclasses import dataclass

from bringup.errors import BringupError

__all__ = ["Interrupted", "find_interrupted", "record_recovery", "energise_payload"]


def energise_payload(supply_resource: str, settings: dict) -> dict:
    """What the ``energise`` event carries: the supply's resource, the supply settings of the
    step, and the process (host, pid) that switches it on."""
    return {
        "supply": supply_resource,
        "settings": settings,
        "host": socket.gethostname(),
        "pid": os.getpid(),
    }


@dataclass(frozen=True)
class Interrupted:
    """A step that was running (its supply ON) when its process stopped."""

    session_id: str
    stage_id: str
    step_key: str
    operator: str
    energised_utc: str
    payload: dict


def _alive_elsewhere(payload: dict) -> bool:
    """True when the process that energised is another one still running on this host."""
    pid = payload.get("pid")
    if payload.get("host") != socket.gethostname() or not isinstance(pid, int):
        return False
    if pid == os.getpid():
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True  # someone else's process with that id: alive
    return True


def _dangling(data) -> list[Interrupted]:
    """The session's ``energise`` events that no later attempt of the same step closed."""
    open_steps: dict[tuple[str, str], Interrupted] = {}
    for entry in data.timeline:
        kind = getattr(entry, "kind", "attempt")
        key = (entry.stage_id, entry.step_id)
        if kind == "energise" and entry.step_id:
            open_steps[key] = Interrupted(data.id, entry.stage_id, entry.step_id, entry.operator,
                                          entry.recorded_utc, dict(entry.payload or {}))  # fmt: skip
        elif kind == "attempt":
            open_steps.pop(key, None)
    return [i for i in open_steps.values() if not _alive_elsewhere(i.payload)]


def find_interrupted(log, session_id: str, supply_resource: str) -> list[Interrupted]:
    """Dangling steps of ``session_id`` (any bench) and of the log's other unfinished sessions
    that ran on ``supply_resource``, oldest first."""
    found: list[Interrupted] = []
    for summary in log.sessions():
        if summary.finished:
            continue
        for step in _dangling(log.session(summary.id)):
            if summary.id == session_id or step.payload.get("supply") == supply_resource:
                found.append(step)
    return sorted(found, key=lambda i: i.energised_utc)


def _interrupted_attempt(log, step: Interrupted, now_utc: str, supply_note: str) -> None:
    message = (
        "not run: interrupted: the process stopped while the step ran (killed, crashed or the "
        f"computer lost power){supply_note}"
    )
    settings = step.payload.get("settings")
    log.record_attempt(
        step.session_id,
        stage_id=step.stage_id,
        step_id=step.step_key,
        operator=step.operator,
        started_utc=step.energised_utc,
        finished_utc=now_utc,
        instruments={},
        settings=settings if isinstance(settings, dict) else {},
        metrics={},
        predictions={},
        verdicts={},
        outcome="not-run",
        notes="",
        waveforms={},
        extra={
            "state": "not-run",
            "message": message,
            "warnings": [],
            "step": f"{step.stage_id}.{step.step_key}",
            "views": [],
            "reported": {},
            "details": {},
            "interrupted": True,
        },  # fmt: skip
    )


def record_recovery(log, session_id: str, operator: str, interrupted: list[Interrupted],
                    found_on, supply_resource: str, now_utc: str,
                    lock_session: Callable[[str], object] | None = None) -> list[str]:  # fmt: skip
    """Log what ``find_interrupted`` and the bench's opening found (see the module doc);
    returns the lines to show the operator (the found-ON line first).

    ``lock_session(session_id)``: takes this process's write lock on another session of the
    log (``bringup.locks.lock_session``; one session, one writer) and returns it; a session
    another process holds is left to that process."""
    held: dict[str, object] = {}
    refused: set[str] = set()
    for step in interrupted:
        sid = step.session_id
        if sid == session_id or lock_session is None or sid in held or sid in refused:
            continue
        try:
            held[sid] = lock_session(sid)
        except BringupError:
            refused.add(sid)  # another live process writes it: it recovers it itself
    try:
        usable = [i for i in interrupted if i.session_id not in refused]
        return _record(log, session_id, operator, usable, found_on, supply_resource, now_utc)
    finally:
        for lock in held.values():
            lock.release()  # type: ignore[attr-defined]


def _record(log, session_id: str, operator: str, interrupted: list[Interrupted], found_on,
            supply_resource: str, now_utc: str) -> list[str]:  # fmt: skip
    found_text = found_on.describe() if found_on is not None else None
    lines: list[str] = []
    for step in interrupted:
        note = ""
        if step is interrupted[-1]:  # the last one to run: the supply was left as it left it
            note = (
                f"; the supply output was found ON ({found_text}) and switched off when the "
                "bench was next opened"
                if found_text
                else "; the supply output was found OFF when the bench was next opened"
            )
        _interrupted_attempt(log, step, now_utc, note)
    if found_on is not None:
        last = interrupted[-1] if interrupted else None
        where = (
            f"; step {last.stage_id}.{last.step_key} of session {last.session_id} was running "
            "when its process stopped"
            if last is not None
            else ""
        )
        line = (
            f"The supply output was found ON at {found_text} on opening the bench "
            f"({supply_resource}){where}: switched off, confirmed."
        )
        target = last.session_id if last is not None else session_id
        log.record_event(target, kind="found-on", operator=operator, reason=line,
                         stage_id=last.stage_id if last else None,
                         step_id=last.step_key if last else None,
                         payload={"volts": found_on.volts, "amps": found_on.amps,
                                  "supply": supply_resource,
                                  "opened_by_session": session_id})  # fmt: skip
        lines.append(line)
    for step in interrupted:
        lines.append(
            f"Step {step.stage_id}.{step.step_key} of session {step.session_id} was interrupted "
            f"(energised at {step.energised_utc}): logged as an interrupted attempt."
        )
    return lines
