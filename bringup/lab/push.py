"""``push``: copy a bench's log into the lab database, append-only, checking every chain first.

For each session of the log, oldest first:

1. where the lab already is (its last chain position and hash, its last sign-off): a session
   the lab holds up to the log's own last entry and sign-off is skipped without being read
   (pushing twice sends nothing);
2. otherwise its hash chain is verified in the log (``SessionLog.verify_chain``: every field
   re-hashed, waveforms decoded): a broken chain is refused, naming the session and the entry,
   and nothing of it is sent;
3. in one lab transaction, under a lock on that session (``pg_advisory_xact_lock``, so two
   pushes of one log at once send each entry once): the lab's position is read again, the
   log's chain hash at that position must be the lab's (else the two have parted: refused),
   then the snapshot (for a new session), the entries after that position up to the one
   verified, their metric and waveform rows, and the new sign-offs are inserted. The server's
   trigger checks that each entry extends the chain.

A session is sent whole or not at all: a push killed at any moment leaves the lab as it was
after the last committed session, and the next push carries on from there.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from bringup.errors import LabError
from bringup.lab.config import LabTarget
from bringup.lab.connection import lab_errors
from bringup.lab.schema import LAB_SCHEMA_VERSION, ensure_schema, installed_version
from bringup.store.copying import (
    ATTEMPT_COLUMNS,
    EVENT_COLUMNS,
    METRIC_COLUMNS,
    SESSION_COLUMNS,
    SIGNATURE_COLUMNS,
    WAVEFORM_COLUMNS,
    Position,
    SessionRows,
    log_identity,
    positions,
    session_rows,
)

__all__ = ["PushReport", "push_log", "lab_positions"]


@dataclass
class PushReport:
    """What a push did: ``sent`` (session id, entries, sign-offs) per session sent, how many
    were ``unchanged`` (already whole in the lab), ``refused`` (one line each), the log's
    identity and the bench name it has in the lab."""

    bench: str
    log_id: str | None = None
    sent: list[tuple[str, int, int]] = field(default_factory=list)
    unchanged: int = 0
    refused: list[str] = field(default_factory=list)


def _insert_sql(table: str, columns: tuple[str, ...], returning: str = "") -> str:
    names = ", ".join(columns)
    marks = ", ".join(["%s"] * len(columns))
    return f"INSERT INTO bringup.{table} ({names}) VALUES ({marks}){returning}"


_POSITIONS_SQL = """
WITH tails AS (
    SELECT DISTINCT ON (session_id) session_id, seq, chain_hash FROM (
        SELECT session_id, seq, chain_hash FROM bringup.attempts WHERE log_id = %(log)s
        UNION ALL
        SELECT session_id, seq, chain_hash FROM bringup.events WHERE log_id = %(log)s
    ) AS e ORDER BY session_id, seq DESC
), signed AS (
    SELECT session_id, max(local_id) AS top FROM bringup.signatures
    WHERE log_id = %(log)s GROUP BY session_id
)
SELECT s.id, coalesce(t.seq, 0), coalesce(t.chain_hash, s.genesis_hash), coalesce(g.top, 0),
       s.genesis_hash
FROM bringup.sessions AS s
LEFT JOIN tails AS t ON t.session_id = s.id
LEFT JOIN signed AS g ON g.session_id = s.id
WHERE s.log_id = %(log)s AND (%(sid)s::text IS NULL OR s.id = %(sid)s::text)
"""


def lab_positions(conn: Any, log_id: str, session_id: str | None = None) -> dict[str, Position]:
    """How far the lab holds each session of the log ``log_id`` (or just ``session_id``)."""
    rows = conn.execute(_POSITIONS_SQL, {"log": log_id, "sid": session_id}).fetchall()
    return {sid: Position(seq, head, top) for sid, seq, head, top, _ in rows}


def _register(conn: Any, target: LabTarget, log_id: str, bench: str) -> str:
    """Record the log under ``bench`` at its first push; the name it has in the lab."""
    with lab_errors(target, "registering this bench's log"):
        conn.execute(
            "INSERT INTO bringup.logs (log_id, bench) VALUES (%s, %s) "
            "ON CONFLICT (log_id) DO NOTHING",
            [log_id, bench],
        )
        return conn.execute(
            "SELECT bench FROM bringup.logs WHERE log_id = %s", [log_id]
        ).fetchone()[0]


def _prepare_lab(conn: Any, target: LabTarget) -> None:
    """The lab's tables, created at the first push; a newer version of them is refused."""
    with lab_errors(target, "creating the lab tables"):
        ensure_schema(conn)
        version = installed_version(conn)
    if version is not None and version > LAB_SCHEMA_VERSION:
        raise LabError(
            f"lab {target.label}: its tables are version {version}, this bringup knows up to "
            f"{LAB_SCHEMA_VERSION}: upgrade bringup to push there"
        )


def push_log(
    log: Any,
    conn: Any,
    target: LabTarget,
    bench: str,
    on_sent: Callable[[str, int, int], None] | None = None,
) -> PushReport:
    """Push every session of ``log`` (an open ``SessionLog``) to the lab on ``conn``; see the
    module docstring. ``on_sent(session_id, entries, signatures)`` after each session sent."""
    log_id = log_identity(log)
    report = PushReport(bench=bench, log_id=log_id)
    if log_id is None:
        return report
    _prepare_lab(conn, target)
    report.bench = _register(conn, target, log_id, bench)
    with lab_errors(target, "reading what the lab holds"):
        there = lab_positions(conn, log_id)
    for session_id, here in positions(log).items():
        held = there.get(session_id)
        if held is not None and held.seq == here.seq and held.signature >= here.signature:
            if held.chain_hash != here.chain_hash:
                report.refused.append(_parted(session_id, held.seq))
            else:
                report.unchanged += 1
            continue
        problem, rows = _send_session(log, conn, target, log_id, session_id)
        if problem is not None:
            report.refused.append(problem)
        elif rows is None:  # another push of this log sent it meanwhile
            report.unchanged += 1
        else:
            report.sent.append((session_id, rows.entries(), len(rows.signatures)))
            if on_sent is not None:
                on_sent(session_id, rows.entries(), len(rows.signatures))
    return report


def _parted(session_id: str, seq: int) -> str:
    return (
        f"session {session_id}: the lab's copy and this log differ at entry {seq} (another "
        "log with the same first session? a log restored from an old copy?); nothing sent"
    )


def _send_session(
    log: Any, conn: Any, target: LabTarget, log_id: str, session_id: str
) -> tuple[str | None, SessionRows | None]:
    """Verify the session's chain here, then send what the lab lacks in one transaction.
    Returns (a refusal, None), (None, the rows sent) or (None, None) when the lab already
    holds it all (another push of the same log got there first)."""
    verified = log.verify_chain(session_id)
    if not verified.ok:
        return f"{verified.problem} (field {verified.field}); the session was not sent", None
    with lab_errors(target, f"pushing session {session_id}"), conn.transaction():
        conn.execute("SELECT pg_advisory_xact_lock(hashtext(%s))", [f"{log_id}/{session_id}"])
        held = lab_positions(conn, log_id, session_id).get(session_id)
        if held is not None and held.seq > verified.entries:
            return (
                f"session {session_id}: the lab holds {held.seq} entries, this log "
                f"{verified.entries}; nothing sent",
                None,
            )
        if held is not None and _chain_hash_at(log, session_id, held.seq) != held.chain_hash:
            return _parted(session_id, held.seq), None
        rows = session_rows(
            log,
            session_id,
            after_seq=held.seq if held else 0,
            after_signature=held.signature if held else 0,
            up_to_seq=verified.entries,
            with_snapshot=held is None,
        )
        if rows.is_empty():
            return None, None
        _insert_rows(conn, log_id, rows)
    return None, rows


def _chain_hash_at(log: Any, session_id: str, seq: int) -> str:
    """The log's chain hash at entry ``seq`` of the session (its genesis hash at 0)."""
    if seq == 0:
        return log.session(session_id).genesis_hash
    rows = session_rows(
        log, session_id, after_seq=seq - 1, up_to_seq=seq, after_signature=2**62,
        with_snapshot=False,
    )  # fmt: skip
    entries = [*rows.attempts, *rows.events]
    return entries[0]["chain_hash"] if entries else ""


def _insert_rows(conn: Any, log_id: str, rows: SessionRows) -> None:
    """Insert ``rows`` (already checked) in chain order: attempts and events share ``seq``."""
    sid = rows.session_id
    cursor = conn.cursor()
    if rows.session is not None:
        cursor.execute(
            _insert_sql("sessions", ("log_id", *SESSION_COLUMNS)),
            [log_id, *(rows.session[c] for c in SESSION_COLUMNS)],
        )
    chained = [("attempt", row) for row in rows.attempts] + [("event", row) for row in rows.events]
    chained.sort(key=lambda item: item[1]["seq"])
    attempt_sql = _insert_sql(
        "attempts", ("log_id", "session_id", *ATTEMPT_COLUMNS), " RETURNING lab_id"
    )
    event_sql = _insert_sql("events", ("log_id", "session_id", *EVENT_COLUMNS))
    for kind, row in chained:
        if kind == "event":
            cursor.execute(event_sql, [log_id, sid, *(row[c] for c in EVENT_COLUMNS)])
            continue
        cursor.execute(attempt_sql, [log_id, sid, *(row[c] for c in ATTEMPT_COLUMNS)])
        lab_id = cursor.fetchone()[0]
        metrics = rows.metrics.get(row["seq"], [])
        if metrics:
            cursor.executemany(
                _insert_sql("metrics", ("attempt", *METRIC_COLUMNS)),
                [[lab_id, *(m[c] for c in METRIC_COLUMNS)] for m in metrics],
            )
        waves = rows.waveforms.get(row["seq"], [])
        if waves:
            cursor.executemany(
                _insert_sql("waveforms", ("attempt", *WAVEFORM_COLUMNS)),
                [[lab_id, *(w[c] for c in WAVEFORM_COLUMNS)] for w in waves],
            )
    if rows.signatures:
        cursor.executemany(
            _insert_sql("signatures", ("log_id", "session_id", "local_id", *SIGNATURE_COLUMNS)),
            [[log_id, sid, s["local_id"], *(s[c] for c in SIGNATURE_COLUMNS)]
             for s in rows.signatures],
        )  # fmt: skip
