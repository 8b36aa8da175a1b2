"""The log's schema and its migrations, from the first release on.

The schema version is SQLite's own ``PRAGMA user_version`` (a header field any SQLite tool
shows) and the file is marked as a bringup log with ``PRAGMA application_id``. Migration *n*
takes a database from version *n - 1* to *n*; each runs in the caller's write transaction
together with the ``user_version`` bump, so a crash leaves either the old or the new schema.

Schema 1, in brief (every ``*_json`` column holds strict JSON; ``*_utc`` columns ISO 8601 UTC):

- ``sessions``: one board serial through one checklist: id, serial, operator, board name and
  revision, checklist id, the board/checklist/bench snapshots as JSON, ``genesis_hash`` (the
  chain's first link: SHA-256 of the snapshot), and a copy of the state and verdicts for
  SQLite tools (outside the chain: never read back, see ``derived.py``).
- ``attempts``: one try of one step: ``seq`` (position in the session's chain, shared with
  events), ``attempt_no`` (1, 2, ... per step), who, when, instruments (``*IDN?``), settings,
  metrics, predictions, verdicts, outcome, notes, ``field_hashes_json``, ``content_hash``,
  ``chain_hash``. Append-only (triggers refuse UPDATE and DELETE).
- ``metrics``: (attempt_id, name, value REAL, unit): every numeric metric as a row, so
  ``SELECT value FROM metrics WHERE name = 'rise_time_s'`` works in any SQLite tool.
- ``waveforms``: (attempt_id, name): raw codes compressed (see ``waveforms.py``) plus scale.
- ``events``: skip, waive, note, go-back, abort, resume, finish: chained like attempts.
- ``signatures``: sign-offs added by the record (not part of the chain: they seal its head).

Schema 2 adds ``listings`` (each session's summary as of each chained entry, tied to it by
``seq`` and ``chain_hash``; append-only) and covering indexes for the session listing.

Schema 3 adds ``signatures.statement_json``: what else the signer's statement covered (the
meaning of the signature and the signer's local UTC offset, 21 CFR Part 11 §11.50); null for a
sign-off made before, whose signature covers neither.
"""

from __future__ import annotations

import sqlite3
from collections.abc import Callable

__all__ = ["APPLICATION_ID", "CURRENT_VERSION", "MIGRATIONS", "current_version", "migrate"]

#: ``PRAGMA application_id`` of a bringup log: the ASCII bytes "BRGL".
APPLICATION_ID = 0x4252474C

_APPEND_ONLY = ("attempts", "metrics", "waveforms", "events", "signatures")


def _to_version_1(conn: sqlite3.Connection) -> None:
    """The first release's schema."""
    statements = [
        f"PRAGMA application_id = {APPLICATION_ID}",
        """CREATE TABLE sessions (
            id TEXT PRIMARY KEY,
            created_utc TEXT NOT NULL,
            serial TEXT NOT NULL,
            operator TEXT NOT NULL,
            board_name TEXT NOT NULL,
            board_revision TEXT,
            checklist_id TEXT NOT NULL,
            board_json TEXT NOT NULL,
            checklist_json TEXT NOT NULL,
            bench_json TEXT,
            genesis_hash TEXT NOT NULL,
            state TEXT NOT NULL DEFAULT 'open' CHECK (state IN ('open', 'aborted', 'finished')),
            verdict TEXT,
            stage_verdicts_json TEXT,
            last_activity_utc TEXT NOT NULL,
            finished_utc TEXT
        )""",
        """CREATE TABLE attempts (
            id INTEGER PRIMARY KEY,
            session_id TEXT NOT NULL REFERENCES sessions(id),
            seq INTEGER NOT NULL,
            stage_id TEXT NOT NULL,
            step_id TEXT NOT NULL,
            attempt_no INTEGER NOT NULL,
            operator TEXT NOT NULL,
            started_utc TEXT NOT NULL,
            finished_utc TEXT NOT NULL,
            recorded_utc TEXT NOT NULL,
            outcome TEXT NOT NULL,
            instruments_json TEXT NOT NULL,
            settings_json TEXT NOT NULL,
            metrics_json TEXT NOT NULL,
            predictions_json TEXT NOT NULL,
            verdicts_json TEXT NOT NULL,
            notes TEXT NOT NULL DEFAULT '',
            extra_json TEXT,
            field_hashes_json TEXT NOT NULL,
            content_hash TEXT NOT NULL,
            chain_hash TEXT NOT NULL,
            UNIQUE (session_id, seq),
            UNIQUE (session_id, stage_id, step_id, attempt_no)
        )""",
        "CREATE INDEX attempts_by_step ON attempts (session_id, stage_id, step_id)",
        """CREATE TABLE metrics (
            attempt_id INTEGER NOT NULL REFERENCES attempts(id),
            name TEXT NOT NULL,
            value REAL,
            unit TEXT NOT NULL DEFAULT '',
            PRIMARY KEY (attempt_id, name)
        )""",
        """CREATE TABLE waveforms (
            attempt_id INTEGER NOT NULL REFERENCES attempts(id),
            name TEXT NOT NULL,
            dtype TEXT NOT NULL,
            points INTEGER NOT NULL,
            x_increment REAL NOT NULL,
            x_origin REAL NOT NULL,
            y_increment REAL NOT NULL,
            y_origin REAL NOT NULL,
            y_unit TEXT NOT NULL,
            x_unit TEXT NOT NULL,
            codec TEXT NOT NULL,
            stored_bytes INTEGER NOT NULL,
            raw_sha256 TEXT NOT NULL,
            data BLOB NOT NULL,
            PRIMARY KEY (attempt_id, name)
        )""",
        """CREATE TABLE events (
            id INTEGER PRIMARY KEY,
            session_id TEXT NOT NULL REFERENCES sessions(id),
            seq INTEGER NOT NULL,
            kind TEXT NOT NULL,
            stage_id TEXT,
            step_id TEXT,
            operator TEXT NOT NULL,
            reason TEXT NOT NULL DEFAULT '',
            payload_json TEXT,
            recorded_utc TEXT NOT NULL,
            field_hashes_json TEXT NOT NULL,
            content_hash TEXT NOT NULL,
            chain_hash TEXT NOT NULL,
            UNIQUE (session_id, seq)
        )""",
        """CREATE TABLE signatures (
            id INTEGER PRIMARY KEY,
            session_id TEXT NOT NULL REFERENCES sessions(id),
            name TEXT NOT NULL,
            role TEXT NOT NULL,
            signed_utc TEXT NOT NULL,
            public_key BLOB NOT NULL,
            fingerprint TEXT NOT NULL,
            signature BLOB NOT NULL,
            content_digest TEXT NOT NULL,
            recorded_utc TEXT NOT NULL
        )""",
    ]
    for table in _APPEND_ONLY:
        for action in ("UPDATE", "DELETE"):
            statements.append(
                f"CREATE TRIGGER {table}_no_{action.lower()} BEFORE {action} ON {table} "
                f"BEGIN SELECT RAISE(ABORT, '{table} are append-only: nothing logged is changed'); END"
            )
    # A session's snapshot is the chain's genesis: it never changes either; only the cached
    # state, verdicts and last-activity columns may be updated.
    statements.append(
        "CREATE TRIGGER sessions_snapshot_fixed BEFORE UPDATE OF id, created_utc, serial, operator, "
        "board_name, board_revision, checklist_id, board_json, checklist_json, bench_json, "
        "genesis_hash ON sessions BEGIN SELECT RAISE(ABORT, 'a session snapshot is never changed'); END"
    )
    statements.append(
        "CREATE TRIGGER sessions_no_delete BEFORE DELETE ON sessions "
        "BEGIN SELECT RAISE(ABORT, 'sessions are append-only: nothing logged is changed'); END"
    )
    for sql in statements:
        conn.execute(sql)


def _to_version_2(conn: sqlite3.Connection) -> None:
    """The session listing without a replay of every session's chain on every read.

    ``listings``: one row per chained entry (and one at ``seq`` 0 for a new session), written
    in the entry's own transaction: the session's summary as the chain says it after that
    entry (state, verdict, stage verdicts in the checklist's order, finish and last-activity
    times, progress by latest outcome in first-seen order, attempts, steps in the checklist),
    tied to the entry by its ``seq`` and ``chain_hash``. Append-only like the log. ``sessions()`` uses a
    session's latest row only while it still names the chain's head (the entry at its ``seq``
    has its ``chain_hash`` and none follows); any other session is replayed as before, so a
    log written before this schema lists as it did. Covering indexes give the listing's
    columns and each chain's head without reading the rows' snapshots."""
    statements = [
        """CREATE TABLE listings (
            session_id TEXT NOT NULL REFERENCES sessions(id),
            seq INTEGER NOT NULL,
            chain_hash TEXT NOT NULL,
            state TEXT NOT NULL,
            verdict TEXT,
            stage_verdicts_json TEXT,
            finished_utc TEXT,
            last_activity_utc TEXT NOT NULL,
            progress_json TEXT NOT NULL,
            attempts INTEGER NOT NULL,
            steps_total INTEGER,
            PRIMARY KEY (session_id, seq)
        )""",
        "CREATE INDEX attempts_heads ON attempts (session_id, seq, chain_hash)",
        "CREATE INDEX events_heads ON events (session_id, seq, chain_hash)",
        "CREATE INDEX sessions_listing ON sessions (id, created_utc, board_name, board_revision, "
        "serial, operator, checklist_id, state, verdict, stage_verdicts_json, finished_utc, "
        "last_activity_utc, bench_json, genesis_hash)",
    ]
    for action in ("UPDATE", "DELETE"):
        statements.append(
            f"CREATE TRIGGER listings_no_{action.lower()} BEFORE {action} ON listings "
            "BEGIN SELECT RAISE(ABORT, 'listings are append-only: nothing logged is changed'); END"
        )
    for sql in statements:
        conn.execute(sql)


def _to_version_3(conn: sqlite3.Connection) -> None:
    """A sign-off's statement beyond name, role and time (meaning, local offset)."""
    conn.execute("ALTER TABLE signatures ADD COLUMN statement_json TEXT")


#: ``MIGRATIONS[n - 1]`` takes a database from version n - 1 to n.
MIGRATIONS: list[Callable[[sqlite3.Connection], None]] = [
    _to_version_1,
    _to_version_2,
    _to_version_3,
]
CURRENT_VERSION = len(MIGRATIONS)


def current_version() -> int:
    """The schema version this bringup writes: the number of migrations it knows."""
    return len(MIGRATIONS)


def migrate(conn: sqlite3.Connection, from_version: int) -> int:
    """Apply every migration after ``from_version``, inside the caller's transaction.

    Returns the new version. The caller holds a write transaction (``BEGIN IMMEDIATE``), so the
    schema change and the ``user_version`` bump commit together or not at all.
    """
    target = current_version()
    for version in range(from_version + 1, target + 1):
        MIGRATIONS[version - 1](conn)
        conn.execute(f"PRAGMA user_version = {version}")
    return target
