"""A session's state and verdicts, worked out from its chained entries on every read.

The ``sessions`` row keeps a copy of the state, the verdicts, the finish time and the last
activity for SQLite tools (``SELECT verdict FROM sessions``), but those columns are outside
the hash chain: an ``UPDATE`` changes them without breaking a link. So nothing bringup decides
or shows is taken from them. :func:`derive` replays the chained entries instead:

- **state**: "finished" once a ``finish`` event is in the chain (nothing but notes may follow
  it); otherwise "aborted" when the latest of attempts, ``abort`` and ``resume`` events is an
  abort, else "open";
- **verdict** and **stage verdicts**: a finished session's are those its ``finish`` event
  carries (chained when it was logged); an unfinished session's are summed up from each
  step's latest entry (an attempt's outcome, or "skipped"/"waived" after a skip or waiver)
  over the checklist snapshot's steps, worst first, as the runner does
  (``bringup.runner.results.worst_state``; a test keeps the two orders equal);
- **last activity**: the latest entry's ``recorded_utc`` (the creation time before any).

:func:`disagreements` names each stored column that says something else: ``verify --db`` and
``bringup sessions`` report them.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

from bringup.store.chain_json import loads

__all__ = [
    "Derived",
    "SEVERITY",
    "checklist_layout",
    "derive",
    "disagreements",
    "worst",
    "ENTRY_ROWS_SQL",
]

#: Worst first. "error" (an attempt that could not complete) ranks with "not-run".
SEVERITY = (
    "fail",
    "conditional-fail",
    "not-run",
    "error",
    "in-progress",
    "not-started",
    "skipped",
    "waived",
    "conditional-pass",
    "pass",
)

_RANK = {state: k for k, state in enumerate(SEVERITY)}
_UNKNOWN_RANK = _RANK["not-run"]

#: Every chained entry of one session in chain order (bind the session id twice).
ENTRY_ROWS_SQL = (
    "SELECT seq, 'attempt' AS kind, stage_id, step_id, outcome, NULL AS payload_json, "
    "recorded_utc FROM attempts WHERE session_id = ? "
    "UNION ALL SELECT seq, kind, stage_id, step_id, NULL, payload_json, recorded_utc "
    "FROM events WHERE session_id = ? ORDER BY seq"
)


@dataclass(frozen=True)
class Derived:
    """What the chain says about a session (see the module docstring)."""

    state: str  # "open", "aborted", "finished"
    verdict: str | None  # None: nothing logged and no checklist steps to count
    stage_verdicts: dict[str, str] | None
    finished_utc: str | None
    last_activity_utc: str


def worst(states: Iterable[str]) -> str:
    """The worst of ``states`` by ``SEVERITY``; "not-started" for none; "in-progress" for a mix
    of finished and not-started steps with nothing worse (begun, not done). Unknown states rank
    as "not-run" (never better than a known one)."""
    listed = list(states)
    if not listed:
        return "not-started"
    found = min(listed, key=lambda state: _RANK.get(state, _UNKNOWN_RANK))
    if found == "not-started" and any(s != "not-started" for s in listed):
        return "in-progress"
    return found


def _checklist_steps(checklist: Any) -> list[tuple[str, list[str]]] | None:
    """``[(stage_id, [step_key, ...]), ...]`` from a snapshot ``{"stages": [{"id", "steps"}]}``."""
    stages = checklist.get("stages") if isinstance(checklist, dict) else None
    if not isinstance(stages, list):
        return None
    out = []
    for stage in stages:
        if not isinstance(stage, dict):
            continue
        steps = [str(step.get("id")) for step in stage.get("steps") or [] if isinstance(step, dict)]
        out.append((str(stage.get("id")), steps))
    return out


def checklist_layout(checklist: Any) -> list[tuple[str, list[str]]] | None:
    """What ``derive`` reads of a checklist snapshot (stage ids and step ids): worked out once
    and passed as ``layout`` when many sessions share one checklist (``sessions()``)."""
    return _checklist_steps(checklist)


def derive(
    created_utc: str,
    checklist: Any,
    rows: Iterable[Mapping[str, Any]],
    layout: list[tuple[str, list[str]]] | None = None,
) -> Derived:
    """Replay ``rows`` (``ENTRY_ROWS_SQL``'s, in chain order) over the checklist snapshot
    (or its ``checklist_layout``, given as ``layout``)."""
    state, finish, last = "open", None, created_utc
    latest: dict[tuple[str, str], str] = {}
    for row in rows:
        kind = row["kind"]
        last = row["recorded_utc"] or last
        key = (row["stage_id"], row["step_id"])
        if kind == "attempt":
            latest[key] = row["outcome"]
            if state != "finished":
                state = "open"
        elif kind in ("skip", "waive") and row["step_id"]:
            latest[key] = "skipped" if kind == "skip" else "waived"
        elif kind == "abort" and state != "finished":
            state = "aborted"
        elif kind == "resume" and state != "finished":
            state = "open"
        elif kind == "finish" and finish is None:
            state, finish = "finished", row
    if finish is not None:
        payload = loads(finish["payload_json"]) or {}
        payload = payload if isinstance(payload, dict) else {}
        stages = payload.get("stages")
        verdict = payload.get("verdict")
        return Derived(
            state="finished",
            verdict=None if verdict is None else str(verdict),
            stage_verdicts={str(k): str(v) for k, v in stages.items()}
            if isinstance(stages, dict)
            else None,
            finished_utc=finish["recorded_utc"],
            last_activity_utc=last,
        )
    if layout is None:
        layout = _checklist_steps(checklist)
    if layout is None:
        return Derived(state, worst(latest.values()) if latest else None, None, None, last)
    stage_verdicts = {
        stage: worst([latest.get((stage, step), "not-started") for step in steps])
        for stage, steps in layout
    }
    every = [latest.get((stage, step), "not-started") for stage, steps in layout for step in steps]
    return Derived(state, worst(every), stage_verdicts, None, last)


def disagreements(
    row: Mapping[str, Any], derived: Derived, stage_verdicts_text: str | None = None
) -> list[str]:
    """Each stored listing column of the ``sessions`` ``row`` that says something other than the
    chain, as ``"verdict: stored 'pass', the chain says 'fail'"``. A column never written
    (NULL verdicts of a session nothing was logged in) is not a disagreement.
    ``stage_verdicts_text``: the stage verdicts as the log writes them in their column, when
    known; a column holding exactly that text agrees without being parsed."""
    found = []

    def differs(name: str, stored: Any, chained: Any) -> None:
        if stored != chained:
            found.append(f"{name}: stored {stored!r}, the chain says {chained!r}")

    differs("state", row["state"], derived.state)
    if row["verdict"] is not None:
        differs("verdict", row["verdict"], derived.verdict)
    stored = row["stage_verdicts_json"]
    if stored is not None and (stage_verdicts_text is None or stored != stage_verdicts_text):
        differs("stage verdicts", loads(stored), derived.stage_verdicts)
    differs("finished_utc", row["finished_utc"], derived.finished_utc)
    return found
