"""Collect a batch from a session reader: which sessions, which readings, which statistics.

What a row shows, for a serial measured more than once (a retake after rework):

- the **shown session** is the serial's session started last among those with at least one
  judged attempt (the latest session when none has one): a new session after rework replaces
  the old one as a whole, so values from before the rework never mix with values after it;
- within it, each step's **latest judged attempt** (outcome pass, conditional-pass,
  conditional-fail or fail; an attempt that was not run or ended in an error holds no
  reading to trust), and that attempt's value of each metric it judged;
- every attempt of every session of the serial stays in the row's ``history``.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any, Protocol

from bringup.analysis.batch import Distribution, distribution
from bringup.errors import InputError
from bringup.store.entries import AttemptRecord, SessionSummary, SignatureRecord

__all__ = [
    "JUDGED_OUTCOMES",
    "Batch",
    "BatchReader",
    "Column",
    "HistoryAttempt",
    "Reading",
    "Row",
    "collect_batch",
]

#: Attempt outcomes that carry a judged reading (ILAC-G8 outcomes, see analysis/verdict.py).
JUDGED_OUTCOMES = ("pass", "conditional-pass", "conditional-fail", "fail")


class BatchReader(Protocol):
    """The read methods a batch needs: those of the SQLite log's ``LogReading``."""

    def sessions(self) -> list[SessionSummary]: ...

    def attempts(self, session_id: str) -> list[AttemptRecord]: ...

    def signatures(self, session_id: str) -> list[SignatureRecord]: ...


@dataclass(frozen=True)
class Column:
    """One judged metric of one step. ``key`` is ``stage.step.metric``; ``name`` is what a
    table shows (the metric, with its step when several steps judge a metric of that name).
    Limits and uncertainty (SI, ``unit``) as the shown readings were judged against;
    ``limits_differ`` when some shown reading was judged against other limits."""

    key: str
    stage: str
    step: str
    metric: str
    name: str
    label: str
    unit: str
    lower: float | None
    upper: float | None
    uncertainty: float | None
    limits_differ: bool = False


@dataclass(frozen=True)
class Reading:
    """One metric's value from one attempt (SI), with the verdict it got then."""

    value: float
    outcome: str
    uncertainty: float | None
    session_id: str
    attempt_id: int
    attempt_no: int
    recorded_utc: str
    limit: tuple[float | None, float | None]


@dataclass(frozen=True)
class HistoryAttempt:
    """One attempt of a serial's history: where, when, its outcome and its metric values."""

    session_id: str
    attempt_id: int
    stage: str
    step: str
    attempt_no: int
    outcome: str
    recorded_utc: str
    values: dict[str, float]
    shown: bool


@dataclass(frozen=True)
class Row:
    """One serial: the shown session's summary and signatures, its readings by column key,
    every session of the serial (oldest first) and every attempt of them."""

    serial: str
    summary: SessionSummary
    sessions: tuple[SessionSummary, ...]
    signatures: tuple[tuple[str, str], ...]  # (role, name) of the shown session's sign-offs
    readings: dict[str, Reading]
    history: tuple[HistoryAttempt, ...]

    @property
    def retaken(self) -> bool:
        """More than one session, or a step attempted more than once."""
        steps = [(h.session_id, h.stage, h.step) for h in self.history]
        return len(self.sessions) > 1 or len(steps) != len(set(steps))


@dataclass(frozen=True)
class Batch:
    """Rows (by serial), columns (checklist order) and each column's statistics over the
    serials that have a reading (``serials_of[key]`` in the order of ``stats[key]``)."""

    board: str
    revision: str | None
    rows: tuple[Row, ...]
    columns: tuple[Column, ...]
    stats: dict[str, Distribution]
    serials_of: dict[str, tuple[str, ...]]
    notes: tuple[str, ...] = field(default=())

    @cached_property
    def _index(self) -> tuple[dict[str, Row], dict[str, dict[str, int]]]:
        """Rows by serial, and each column's position of each serial (built once: a report
        asks for every cell, and a search per cell would make a large batch quadratic)."""
        rows = {r.serial: r for r in self.rows}
        where = {
            key: {s: i for i, s in enumerate(serials)} for key, serials in self.serials_of.items()
        }
        return rows, where

    def cell(self, serial: str, key: str) -> tuple[Reading, float, bool] | None:
        """(reading, modified z-score, outlier) of ``serial`` in column ``key``, or None."""
        rows, where = self._index
        row = rows.get(serial)
        if row is None or key not in row.readings or key not in self.stats:
            return None
        i = where[key][serial]
        d = self.stats[key]
        return row.readings[key], d.z_scores[i], d.outliers[i]

    def outliers_of(self, serial: str) -> list[str]:
        """The column keys where ``serial`` is flagged."""
        _, where = self._index
        return [
            key
            for key, d in self.stats.items()
            if serial in where[key] and d.outliers[where[key][serial]]
        ]


def _board_label(name: str, revision: str | None) -> str:
    return f"{name!r} rev {revision!r}" if revision else repr(name)


def select_sessions(
    summaries: Sequence[SessionSummary], board: str | None, revision: str | None, where: str
) -> tuple[str, str | None, list[SessionSummary]]:
    """The sessions of one board and revision: (board name, revision, sessions).

    ``board`` matches the board name exactly (then case-insensitively); with no ``board`` the
    log must hold one board (and with no ``revision``, one revision of it). Raises
    ``InputError`` naming what was wrong and what the log holds."""
    if not summaries:
        raise InputError(f"{where}: no sessions in this log")
    held = sorted({(s.board_name, s.board_revision or "") for s in summaries})
    listing = ", ".join(_board_label(n, r or None) for n, r in held)
    chosen = list(summaries)
    if board is not None:
        chosen = [s for s in summaries if s.board_name == board] or [
            s for s in summaries if s.board_name.casefold() == board.casefold()
        ]
        if not chosen:
            raise InputError(f"{where}: no sessions of board {board!r} (the log holds {listing})")
    if revision is not None:
        chosen = [s for s in chosen if (s.board_revision or "") == revision]
        if not chosen:
            of = f"board {board!r}" if board is not None else "any board"
            raise InputError(
                f"{where}: no sessions of {of} at revision {revision!r} (the log holds {listing})"
            )
    pairs = sorted({(s.board_name, s.board_revision or "") for s in chosen})
    if len(pairs) > 1:
        names = ", ".join(_board_label(n, r or None) for n, r in pairs)
        raise InputError(
            f"{where}: sessions of {len(pairs)} boards or revisions ({names}); "
            "choose one with --board and --revision"
        )
    name, rev = pairs[0]
    return name, rev or None, chosen


def _number(value: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    return float(value) if math.isfinite(value) else None


def _limit(verdict: dict[str, Any]) -> tuple[float | None, float | None]:
    limit = verdict.get("limit") if isinstance(verdict.get("limit"), dict) else {}
    return _number(limit.get("min")), _number(limit.get("max"))


def _readings_of(attempt: AttemptRecord) -> dict[str, tuple[Reading, dict[str, Any]]]:
    """The judged metrics of a judged attempt: ``{metric: (Reading, metric description)}``."""
    found: dict[str, tuple[Reading, dict[str, Any]]] = {}
    if attempt.outcome not in JUDGED_OUTCOMES:
        return found
    for metric, verdict in (attempt.verdicts or {}).items():
        described = (attempt.metrics or {}).get(metric)
        if not isinstance(verdict, dict) or not isinstance(described, dict):
            continue
        value = _number(described.get("value"))
        if value is None:  # a reading the tool could not trust is not a value
            continue
        reading = Reading(
            value=value,
            outcome=str(verdict.get("outcome", "")),
            uncertainty=_number(verdict.get("uncertainty")),
            session_id=attempt.session_id,
            attempt_id=attempt.id,
            attempt_no=attempt.attempt_no,
            recorded_utc=attempt.recorded_utc,
            limit=_limit(verdict),
        )
        found[metric] = (reading, described)
    return found


@dataclass
class _Columns:
    """Columns in the order first seen, with each one's description."""

    seen: dict[tuple[str, str, str], dict[str, Any]] = field(default_factory=dict)

    def add(self, stage: str, step: str, metric: str, described: dict[str, Any]) -> None:
        self.seen.setdefault((stage, step, metric), described)


def _row(
    serial: str,
    sessions: list[SessionSummary],
    attempts: dict[str, list[AttemptRecord]],
    reader: BatchReader,
    columns: _Columns,
) -> Row:
    """The row of one serial (``sessions`` oldest first)."""
    judged = [s for s in sessions if any(a.outcome in JUDGED_OUTCOMES for a in attempts[s.id])]
    shown = (judged or sessions)[-1]
    latest: dict[tuple[str, str], AttemptRecord] = {}
    for attempt in attempts[shown.id]:  # logged order: a later judged attempt replaces
        if attempt.outcome in JUDGED_OUTCOMES:
            latest[(attempt.stage_id, attempt.step_id)] = attempt
    shown_ids = {a.id for a in latest.values()}
    readings: dict[str, Reading] = {}
    history: list[HistoryAttempt] = []
    for session in sessions:
        for attempt in attempts[session.id]:
            found = _readings_of(attempt)
            for metric, (reading, described) in found.items():
                columns.add(attempt.stage_id, attempt.step_id, metric, described)
                if attempt.id in shown_ids:
                    readings[f"{attempt.stage_id}.{attempt.step_id}.{metric}"] = reading
            history.append(
                HistoryAttempt(
                    session_id=session.id,
                    attempt_id=attempt.id,
                    stage=attempt.stage_id,
                    step=attempt.step_id,
                    attempt_no=attempt.attempt_no,
                    outcome=attempt.outcome,
                    recorded_utc=attempt.recorded_utc,
                    values={m: r.value for m, (r, _) in found.items()},
                    shown=attempt.id in shown_ids,
                )
            )
    signatures = tuple((s.role, s.name) for s in reader.signatures(shown.id))
    return Row(serial, shown, tuple(sessions), signatures, readings, tuple(history))


def _make_columns(columns: _Columns, rows: Iterable[Row]) -> list[Column]:
    """One ``Column`` per (stage, step, metric) seen, limits from the latest shown reading."""
    rows = sorted(rows, key=lambda r: r.summary.last_activity_utc, reverse=True)
    counts: dict[str, int] = {}
    for _, _, metric in columns.seen:
        counts[metric] = counts.get(metric, 0) + 1
    made = []
    for (stage, step, metric), described in columns.seen.items():
        key = f"{stage}.{step}.{metric}"
        shown = [r.readings[key] for r in rows if key in r.readings]
        limit = shown[0].limit if shown else (None, None)
        made.append(
            Column(
                key=key,
                stage=stage,
                step=step,
                metric=metric,
                name=metric if counts[metric] == 1 else f"{metric} ({step})",
                label=str(described.get("label") or metric),
                unit=str(described.get("unit") or ""),
                lower=limit[0],
                upper=limit[1],
                uncertainty=shown[0].uncertainty if shown else None,
                limits_differ=any(r.limit != limit for r in shown),
            )
        )
    return made


def collect_batch(
    reader: BatchReader,
    board: str | None = None,
    revision: str | None = None,
    where: str = "log",
) -> Batch:
    """The batch of ``board`` (a board name) at ``revision`` from ``reader``.

    Reads only ``reader.sessions()``, ``reader.attempts(id)`` and ``reader.signatures(id)``.
    ``where`` names the log in error messages. Raises ``InputError`` for an empty log, an
    unknown board or a revision without sessions.
    """
    name, rev, chosen = select_sessions(reader.sessions(), board, revision, where)
    by_serial: dict[str, list[SessionSummary]] = {}
    for summary in sorted(chosen, key=lambda s: (s.created_utc, s.id)):
        by_serial.setdefault(summary.serial, []).append(summary)
    columns = _Columns()
    rows = []
    for serial in sorted(by_serial):
        # one serial's attempts at a time: a row keeps only its readings and a short
        # history, so a log of thousands of sessions is never held in memory whole
        attempts = {s.id: reader.attempts(s.id) for s in by_serial[serial]}
        rows.append(_row(serial, by_serial[serial], attempts, reader, columns))
    made = _make_columns(columns, rows)
    stats: dict[str, Distribution] = {}
    serials_of: dict[str, tuple[str, ...]] = {}
    for column in made:
        have = [r for r in rows if column.key in r.readings]
        if not have:
            continue
        readings = [r.readings[column.key] for r in have]
        stats[column.key] = distribution(
            [x.value for x in readings],
            column.lower,
            column.upper,
            floors=[x.uncertainty or 0.0 for x in readings],
        )
        serials_of[column.key] = tuple(r.serial for r in have)
    notes = _notes(rows, made)
    return Batch(name, rev, tuple(rows), tuple(made), stats, serials_of, notes)


def _notes(rows: Sequence[Row], columns: Sequence[Column]) -> tuple[str, ...]:
    """What a reader of the batch must know before trusting its statistics."""
    notes = []
    kinds = {r.summary.rehearsal for r in rows}
    if kinds == {True, False}:
        notes.append(
            "the batch mixes rehearsals (simulated bench) with real benches: "
            "the statistics take both"
        )
    for column in columns:
        if column.limits_differ:
            notes.append(
                f"{column.name}: judged against different limits in different sessions "
                "(the limits shown are the latest session's)"
            )
    return tuple(notes)
