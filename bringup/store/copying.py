"""A session's stored rows, exactly as stored, out of one log and into another.

The lab database (``bringup.lab``) copies a bench's sessions row by row: every column as the
bench stored it, so each entry re-hashes to the same chain on the other side and a record
exported there is byte for byte the one exported at the bench. This module is the SQLite side
of that copy: :func:`session_rows` reads what comes after a point already copied (entries after
a chain position, sign-offs after a row id), :func:`add_session_rows` writes such rows into a
log (a lab reader's local snapshot), and :func:`log_identity` names the log they came from.

Row ids are not part of any hash (``content.py``: an attempt's content names its session and
chain position, never its row id), so the copy may number attempts, events and sign-offs anew;
metrics and waveforms follow their attempt by its chain position (``seq``).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from bringup.errors import StoreError
from bringup.store.reading import LogReading

__all__ = [
    "SESSION_COLUMNS",
    "ATTEMPT_COLUMNS",
    "METRIC_COLUMNS",
    "WAVEFORM_COLUMNS",
    "EVENT_COLUMNS",
    "SIGNATURE_COLUMNS",
    "SessionRows",
    "session_rows",
    "add_session_rows",
    "log_identity",
    "positions",
    "Position",
]

#: The ``sessions`` columns that are the session's snapshot (hashed into its genesis). The
#: listing columns (state, verdict, ...) are a copy of what the chain says and are not copied:
#: the receiving log works them out from the copied chain.
SESSION_COLUMNS = (
    "id", "created_utc", "serial", "operator", "board_name", "board_revision", "checklist_id",
    "board_json", "checklist_json", "bench_json", "genesis_hash",
)  # fmt: skip
#: An attempt's columns (its row id aside).
ATTEMPT_COLUMNS = (
    "seq", "stage_id", "step_id", "attempt_no", "operator", "started_utc", "finished_utc",
    "recorded_utc", "outcome", "instruments_json", "settings_json", "metrics_json",
    "predictions_json", "verdicts_json", "notes", "extra_json", "field_hashes_json",
    "content_hash", "chain_hash",
)  # fmt: skip
#: A metric row's columns besides its attempt (named by the attempt's ``seq``).
METRIC_COLUMNS = ("name", "value", "unit")
#: A waveform row's columns besides its attempt.
WAVEFORM_COLUMNS = (
    "name", "dtype", "points", "x_increment", "x_origin", "y_increment", "y_origin", "y_unit",
    "x_unit", "codec", "stored_bytes", "raw_sha256", "data",
)  # fmt: skip
#: An event's columns (its row id aside).
EVENT_COLUMNS = (
    "seq", "kind", "stage_id", "step_id", "operator", "reason", "payload_json", "recorded_utc",
    "field_hashes_json", "content_hash", "chain_hash",
)  # fmt: skip
#: A sign-off's columns (its row id aside; ``local_id`` is the row id in the log it came from).
SIGNATURE_COLUMNS = (
    "name", "role", "signed_utc", "public_key", "fingerprint", "signature", "content_digest",
    "recorded_utc", "statement_json",
)  # fmt: skip


@dataclass
class SessionRows:
    """Rows of one session: its snapshot (``session``, or None when only later rows are
    carried), chained attempts and events, each attempt's ``metrics`` and ``waveforms`` keyed
    by the attempt's ``seq``, and sign-offs (each with ``local_id``, its row id where it was
    read). Values are as stored: text, numbers, bytes."""

    session_id: str
    session: dict[str, Any] | None = None
    attempts: list[dict[str, Any]] = field(default_factory=list)
    metrics: dict[int, list[dict[str, Any]]] = field(default_factory=dict)
    waveforms: dict[int, list[dict[str, Any]]] = field(default_factory=dict)
    events: list[dict[str, Any]] = field(default_factory=list)
    signatures: list[dict[str, Any]] = field(default_factory=list)

    def entries(self) -> int:
        """How many chained entries (attempts and events) these rows carry."""
        return len(self.attempts) + len(self.events)

    def is_empty(self) -> bool:
        """True when there is nothing to copy: no snapshot, entry or sign-off."""
        return self.session is None and not self.entries() and not self.signatures


def _select(log: LogReading, table: str, columns: tuple[str, ...], where: str, params: list):
    sql = f"SELECT {', '.join(columns)} FROM {table} WHERE {where}"
    return [dict(row) for row in log._rows(sql, params)]


def session_rows(
    log: LogReading,
    session_id: str,
    *,
    after_seq: int = 0,
    after_signature: int = 0,
    up_to_seq: int | None = None,
    with_snapshot: bool = True,
) -> SessionRows:
    """The rows of ``session_id`` in ``log`` after chain position ``after_seq`` (and up to
    ``up_to_seq``: what was verified, when entries may be logged meanwhile) and after
    sign-off row id ``after_signature``, read in one transaction (one consistent snapshot)."""
    top = 2**62 if up_to_seq is None else up_to_seq
    with log._read():
        log._session_row(session_id)  # an unknown session is a StoreError
        rows = SessionRows(session_id)
        if with_snapshot:
            rows.session = _select(log, "sessions", SESSION_COLUMNS, "id = ?", [session_id])[0]
        attempts = _select(
            log, "attempts", ("id", *ATTEMPT_COLUMNS),
            "session_id = ? AND seq > ? AND seq <= ? ORDER BY seq", [session_id, after_seq, top],
        )  # fmt: skip
        for attempt in attempts:
            row_id, seq = attempt.pop("id"), attempt["seq"]
            rows.metrics[seq] = _select(
                log, "metrics", METRIC_COLUMNS, "attempt_id = ? ORDER BY name", [row_id]
            )
            rows.waveforms[seq] = _select(
                log, "waveforms", WAVEFORM_COLUMNS, "attempt_id = ? ORDER BY name", [row_id]
            )
        rows.attempts = attempts
        rows.events = _select(
            log, "events", EVENT_COLUMNS, "session_id = ? AND seq > ? AND seq <= ? ORDER BY seq",
            [session_id, after_seq, top],
        )  # fmt: skip
        rows.signatures = _select(
            log, "signatures", ("id AS local_id", *SIGNATURE_COLUMNS),
            "session_id = ? AND id > ? ORDER BY id", [session_id, after_signature],
        )  # fmt: skip
    return rows


def add_session_rows(log: Any, rows: SessionRows) -> None:
    """Write ``rows`` into the writable ``log`` (a ``SessionLog``) in one transaction, as they
    are; then its listing columns are worked out from the copied chain, as after any write.

    The rows must continue what the log holds of the session (its snapshot first); the log's
    own rules still hold (nothing logged is changed: triggers refuse it)."""
    sid = rows.session_id
    with log._write():
        if rows.session is not None:
            log._db["sessions"].insert(
                {**rows.session, "state": "open", "last_activity_utc": rows.session["created_utc"]}
            )
        for attempt in rows.attempts:  # an "id" given (a lab's number) is kept
            attempt_id = log._db["attempts"].insert({**attempt, "session_id": sid}).last_pk
            metrics = rows.metrics.get(attempt["seq"], [])
            if metrics:
                log._db["metrics"].insert_all({**m, "attempt_id": attempt_id} for m in metrics)
            for wave in rows.waveforms.get(attempt["seq"], []):
                log._db["waveforms"].insert({**wave, "attempt_id": attempt_id})
        for event in rows.events:
            log._db["events"].insert({**event, "session_id": sid})
        for signature in rows.signatures:
            plain = {k: signature[k] for k in SIGNATURE_COLUMNS}
            log._db["signatures"].insert({**plain, "session_id": sid})
        log._refresh_listing(log._session_row(sid))


@dataclass(frozen=True)
class Position:
    """How far a session goes: its last chain position ``seq`` (0 before any entry), the chain
    hash there (the genesis hash at 0) and the highest sign-off row id (0: none)."""

    seq: int
    chain_hash: str
    signature: int


def positions(log: LogReading) -> dict[str, Position]:
    """Every session's :class:`Position`, oldest session first (a few queries, no decoding)."""
    with log._read():
        sessions = log._rows("SELECT id, genesis_hash FROM sessions ORDER BY created_utc, rowid")
        tails = log._rows(
            "SELECT session_id, seq, chain_hash FROM ("
            "SELECT session_id, seq, chain_hash FROM attempts UNION ALL "
            "SELECT session_id, seq, chain_hash FROM events) "
            "WHERE (session_id, seq) IN (SELECT session_id, max(seq) FROM "
            "(SELECT session_id, seq FROM attempts UNION ALL SELECT session_id, seq FROM events) "
            "GROUP BY session_id)"
        )
        signed = log._rows("SELECT session_id, max(id) AS top FROM signatures GROUP BY session_id")
    tail = {row["session_id"]: (row["seq"], row["chain_hash"]) for row in tails}
    top = {row["session_id"]: row["top"] for row in signed}
    return {
        row["id"]: Position(*tail.get(row["id"], (0, row["genesis_hash"])), top.get(row["id"], 0))
        for row in sessions
    }


def log_identity(log: LogReading) -> str | None:
    """The log's own name in a lab: the genesis hash of the first session it ever held (a
    SHA-256 of that session's snapshot: its id, creation time, serial, board...), or None for
    a log with no session yet.

    Sessions are never deleted and the first one never changes, so a log keeps this identity
    for its whole life, wherever the file is copied, and two logs started apart never share
    it. It lets a lab keep two benches' sessions apart even when their short ids are equal."""
    with log._read():
        first = log._rows("SELECT genesis_hash FROM sessions ORDER BY created_utc, rowid LIMIT 1")
    if not first:
        return None
    value = first[0]["genesis_hash"]
    if not isinstance(value, str) or not value:
        raise StoreError(f"{log._path}: the first session has no genesis hash")
    return value
