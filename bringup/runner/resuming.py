"""Reopen a logged session: its board and checklist from the snapshot, every attempt replayed.

After a crash (even ``kill -9``) the log holds every attempt committed before it, whole; an
attempt that was running is simply absent and its step is run again on resume.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from bringup.boards.board_file import Board
from bringup.checklist.model import Checklist
from bringup.runner.bench_source import BenchSource
from bringup.runner.file_snapshots import board_from_snapshot, checklist_from_snapshot
from bringup.runner.recording import attempt_from_record
from bringup.runner.state import RunnerError, SessionState

__all__ = ["Reopened", "reopen", "replay", "pick_session"]


def pick_session(log, session_id: str | None) -> str:
    """The session named by ``session_id`` (id or unique prefix), or with None the most
    recently active one that is not finished."""
    if session_id is not None:
        if not session_id.strip():
            raise RunnerError(
                "an empty session id (give none to resume the most recent unfinished session)"
            )
        return log.resolve_session(session_id)
    for summary in log.sessions():  # most recent activity first
        if not summary.finished:
            return summary.id
    raise RunnerError(f"{log.path}: no unfinished session to resume")


@dataclass
class Reopened:
    """A logged session, ready to be carried on: the open log and what the snapshot says."""

    log: object  # bringup.store.SessionLog, open; the caller closes it
    session_id: str
    board: Board
    checklist: Checklist
    serial: str
    operator: str
    bench: BenchSource
    timeline: tuple
    session_lock: object = None  # bringup.locks.Held: this process writes the session


def reopen(
    session_id: str | None,
    *,
    db_path: str | Path | None,
    bench: BenchSource | None,
    operator: str | None,
) -> Reopened:
    """Open the log and read the session to resume (see ``SessionRunner.resume``): refused
    when another process writes it (``bringup.locks.InUse``, before anything is logged or
    sent), when it is finished or the log does not say which bench it ran on."""
    from bringup.locks import lock_session
    from bringup.store import SessionLog

    log = SessionLog.open(db_path, create=False)
    held = None
    try:
        sid = pick_session(log, session_id)
        held = lock_session(log.path, sid)  # one session, one writer: read it once locked
        data = log.session(sid)
        if data.summary.finished:
            raise RunnerError(
                f"session {sid} is finished ({data.summary.verdict}): nothing to resume"
            )
        source = bench or BenchSource.from_description(data.bench)
        if source is None:
            raise RunnerError(
                f"session {sid}: the log does not say which bench it ran on; give --bench or --sim"
            )
        return Reopened(log, sid, board_from_snapshot(data.board),
                        checklist_from_snapshot(data.checklist), data.summary.serial,
                        operator or data.summary.operator, source, tuple(data.timeline),
                        held)  # fmt: skip
    except BaseException:
        log.close()
        if held is not None:
            held.release()
        raise


def replay(timeline, checklist: Checklist, state: SessionState) -> None:
    """Replay the logged attempts, skips and waivers of ``timeline`` into ``state``."""
    steps = {(s.stage_id, s.key): s for s in checklist.steps()}
    for entry in timeline:
        kind = getattr(entry, "kind", "attempt")
        step = steps.get((entry.stage_id, entry.step_id)) if entry.step_id else None
        if step is None:
            continue
        if kind == "attempt":
            state.add(attempt_from_record(entry, step))
        elif kind in ("skip", "waive"):
            reason = entry.reason if kind == "skip" else f"{entry.reason} ({entry.operator})"
            state.decide(step.id, "skipped" if kind == "skip" else "waived", reason)
