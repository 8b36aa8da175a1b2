"""Reopen a logged session: its board and checklist from the snapshot, every attempt replayed.

After a crash (even ``kill -9``) the log holds every attempt committed before it, whole; an
attempt that was running is simply absent and its step is run again on resume.
"""

from __future__ import annotations

from pathlib import Path

from bringup.runner.bench_source import BenchSource
from bringup.runner.file_snapshots import board_from_snapshot, checklist_from_snapshot
from bringup.runner.recording import attempt_from_record, views_from_record

__all__ = ["reopen", "load_views", "pick_session"]


def pick_session(log, session_id: str | None) -> str:
    """The session named by ``session_id`` (id or unique prefix), or with None the most
    recently active one that is not finished."""
    from bringup.runner.session import RunnerError

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


def reopen(cls, session_id: str | None, *, db_path: str | Path | None, bench: BenchSource | None,
           operator: str | None):  # fmt: skip
    """See ``SessionRunner.resume``."""
    from bringup.runner.session import RunnerError
    from bringup.store import SessionLog

    log = SessionLog.open(db_path, create=False)
    try:
        sid = pick_session(log, session_id)
        data = log.session(sid)
        if data.summary.finished:
            raise RunnerError(
                f"session {sid} is finished ({data.summary.verdict}): nothing to resume"
            )
        board = board_from_snapshot(data.board)
        checklist = checklist_from_snapshot(data.checklist)
        source = bench or BenchSource.from_description(data.bench)
        if source is None:
            raise RunnerError(
                f"session {sid}: the log does not say which bench it ran on; give --bench or --sim"
            )
        runner = cls(log=log, session_id=sid, board=board, checklist=checklist,
                     serial=data.summary.serial, operator=(operator or data.summary.operator),
                     bench=source)  # fmt: skip
        steps = {(s.stage_id, s.key): s for s in checklist.steps()}
        for entry in data.timeline:
            kind = getattr(entry, "kind", "attempt")
            step = steps.get((entry.stage_id, entry.step_id)) if entry.step_id else None
            if kind == "attempt" and step is not None:
                runner._state.add(attempt_from_record(entry, step))
            elif kind in ("skip", "waive") and step is not None:
                reason = entry.reason if kind == "skip" else f"{entry.reason} ({entry.operator})"
                runner._state.decide(step.id, "skipped" if kind == "skip" else "waived", reason)
        log.record_event(sid, kind="resume", operator=runner.operator,
                         reason=f"resumed at {runner.current_step() or 'the end'}")  # fmt: skip
        return runner
    except BaseException:
        log.close()
        raise


def load_views(log, session_id: str, attempt):
    """The plot views of a stored attempt (annotations over the stored raw samples)."""
    for record in log.attempts(session_id):
        if record.id == attempt.attempt_id:
            return views_from_record(log, record)
    return ()
