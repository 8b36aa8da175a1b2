"""The lab database's tables (PostgreSQL, schema ``bringup``): the benches' logs, append-only.

One row per pushed log (``logs``: the log's identity, see ``store.copying.log_identity``, and
the bench's name), then the log's rows as the bench stored them, keyed by that identity and
the session's own id, so two benches' sessions never collide even when their short ids are
equal. Every column is copied verbatim (times stay ISO text, JSON stays its canonical text,
blobs stay bytes): each entry re-hashes to the same chain in the lab as on the bench.

What the server itself refuses, whoever connects:

- any UPDATE, DELETE or TRUNCATE of any of these tables (triggers, as the bench log's own);
- an attempt or event that does not extend its session's chain: its ``seq`` must be the next
  one and its ``chain_hash`` must be SHA-256(previous chain hash + its content hash), the link
  of ``store/chain.py`` (a trigger; the field hashes behind the content hash need the log's
  canonical JSON and are checked by the pushing bench and by every reader).

A lab can go further with privileges: let an administrator own the tables (run the first push
as that role) and give the benches' role ``GRANT USAGE ON SCHEMA bringup`` and
``GRANT SELECT, INSERT ON ALL TABLES IN SCHEMA bringup`` only (the triggers hold for the
owner too; privileges also keep a bench from dropping them).
"""

from __future__ import annotations

from typing import Any

__all__ = ["LAB_SCHEMA_VERSION", "ensure_schema"]

#: The version of these tables, stored in ``bringup.lab_version``.
LAB_SCHEMA_VERSION = 1

# One key for pg_advisory_xact_lock while the tables are created (two first pushes at once).
_SETUP_LOCK = 0x4252474C

_TABLES = (
    """CREATE TABLE bringup.lab_version (
        version integer NOT NULL,
        created timestamptz NOT NULL DEFAULT now()
    )""",
    """CREATE TABLE bringup.logs (
        log_id text PRIMARY KEY CHECK (log_id ~ '^[0-9a-f]{64}$'),
        bench text NOT NULL CHECK (bench <> ''),
        first_pushed timestamptz NOT NULL DEFAULT now()
    )""",
    """CREATE TABLE bringup.sessions (
        log_id text NOT NULL REFERENCES bringup.logs (log_id),
        id text NOT NULL,
        created_utc text NOT NULL,
        serial text NOT NULL,
        operator text NOT NULL,
        board_name text NOT NULL,
        board_revision text,
        checklist_id text NOT NULL,
        board_json text NOT NULL,
        checklist_json text NOT NULL,
        bench_json text,
        genesis_hash text NOT NULL,
        pushed timestamptz NOT NULL DEFAULT now(),
        PRIMARY KEY (log_id, id)
    )""",
    """CREATE TABLE bringup.attempts (
        lab_id bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
        log_id text NOT NULL,
        session_id text NOT NULL,
        seq integer NOT NULL CHECK (seq > 0),
        stage_id text NOT NULL,
        step_id text NOT NULL,
        attempt_no integer NOT NULL,
        operator text NOT NULL,
        started_utc text NOT NULL,
        finished_utc text NOT NULL,
        recorded_utc text NOT NULL,
        outcome text NOT NULL,
        instruments_json text NOT NULL,
        settings_json text NOT NULL,
        metrics_json text NOT NULL,
        predictions_json text NOT NULL,
        verdicts_json text NOT NULL,
        notes text NOT NULL,
        extra_json text,
        field_hashes_json text NOT NULL,
        content_hash text NOT NULL,
        chain_hash text NOT NULL,
        pushed timestamptz NOT NULL DEFAULT now(),
        FOREIGN KEY (log_id, session_id) REFERENCES bringup.sessions (log_id, id),
        UNIQUE (log_id, session_id, seq)
    )""",
    """CREATE TABLE bringup.metrics (
        attempt bigint NOT NULL REFERENCES bringup.attempts (lab_id),
        name text NOT NULL,
        value double precision,
        unit text NOT NULL,
        PRIMARY KEY (attempt, name)
    )""",
    """CREATE TABLE bringup.waveforms (
        attempt bigint NOT NULL REFERENCES bringup.attempts (lab_id),
        name text NOT NULL,
        dtype text NOT NULL,
        points bigint NOT NULL,
        x_increment double precision NOT NULL,
        x_origin double precision NOT NULL,
        y_increment double precision NOT NULL,
        y_origin double precision NOT NULL,
        y_unit text NOT NULL,
        x_unit text NOT NULL,
        codec text NOT NULL,
        stored_bytes bigint NOT NULL,
        raw_sha256 text NOT NULL,
        data bytea NOT NULL,
        PRIMARY KEY (attempt, name)
    )""",
    """CREATE TABLE bringup.events (
        lab_id bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
        log_id text NOT NULL,
        session_id text NOT NULL,
        seq integer NOT NULL CHECK (seq > 0),
        kind text NOT NULL,
        stage_id text,
        step_id text,
        operator text NOT NULL,
        reason text NOT NULL,
        payload_json text,
        recorded_utc text NOT NULL,
        field_hashes_json text NOT NULL,
        content_hash text NOT NULL,
        chain_hash text NOT NULL,
        pushed timestamptz NOT NULL DEFAULT now(),
        FOREIGN KEY (log_id, session_id) REFERENCES bringup.sessions (log_id, id),
        UNIQUE (log_id, session_id, seq)
    )""",
    """CREATE TABLE bringup.signatures (
        lab_id bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
        log_id text NOT NULL,
        session_id text NOT NULL,
        local_id bigint NOT NULL,
        name text NOT NULL,
        role text NOT NULL,
        signed_utc text NOT NULL,
        public_key bytea NOT NULL,
        fingerprint text NOT NULL,
        signature bytea NOT NULL,
        content_digest text NOT NULL,
        recorded_utc text NOT NULL,
        statement_json text,
        pushed timestamptz NOT NULL DEFAULT now(),
        FOREIGN KEY (log_id, session_id) REFERENCES bringup.sessions (log_id, id),
        UNIQUE (log_id, local_id)
    )""",
)

_APPEND_ONLY = (
    "lab_version", "logs", "sessions", "attempts", "metrics", "waveforms", "events", "signatures",
)  # fmt: skip

_REFUSE = """CREATE FUNCTION bringup.refuse_change() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION 'bringup lab: % is append-only: nothing pushed is changed or removed',
        TG_TABLE_NAME USING ERRCODE = 'insufficient_privilege';
END $$"""

# The chain link of store/chain.py: chain_hash = SHA-256(previous chain hash || content hash)
# as hex text, the previous one being the session's genesis hash for its first entry. Attempts
# and events share one numbering (seq), so both tables are looked at; the advisory lock keeps
# two pushes of one session in line (a push takes the same lock first).
_LINK = """CREATE FUNCTION bringup.check_link() RETURNS trigger LANGUAGE plpgsql AS $$
DECLARE
    last_seq integer;
    previous text;
BEGIN
    PERFORM pg_advisory_xact_lock(hashtext(NEW.log_id || '/' || NEW.session_id));
    SELECT t.seq, t.chain_hash INTO last_seq, previous FROM (
        SELECT seq, chain_hash FROM bringup.attempts
            WHERE log_id = NEW.log_id AND session_id = NEW.session_id
        UNION ALL
        SELECT seq, chain_hash FROM bringup.events
            WHERE log_id = NEW.log_id AND session_id = NEW.session_id
    ) AS t ORDER BY t.seq DESC LIMIT 1;
    IF last_seq IS NULL THEN
        last_seq := 0;
        SELECT genesis_hash INTO previous FROM bringup.sessions
            WHERE log_id = NEW.log_id AND id = NEW.session_id;
    END IF;
    IF NEW.seq <> last_seq + 1 THEN
        RAISE EXCEPTION 'bringup lab: session %: entry % does not follow entry % (a chain is kept whole)',
            NEW.session_id, NEW.seq, last_seq USING ERRCODE = 'integrity_constraint_violation';
    END IF;
    IF NEW.chain_hash <> encode(sha256(convert_to(previous || NEW.content_hash, 'UTF8')), 'hex') THEN
        RAISE EXCEPTION 'bringup lab: session %: entry % does not link to entry %',
            NEW.session_id, NEW.seq, last_seq USING ERRCODE = 'integrity_constraint_violation';
    END IF;
    RETURN NEW;
END $$"""


def _statements() -> list[str]:
    statements = ["CREATE SCHEMA IF NOT EXISTS bringup", *_TABLES, _REFUSE, _LINK]
    for table in _APPEND_ONLY:
        statements += [
            f"CREATE TRIGGER {table}_append_only BEFORE UPDATE OR DELETE ON bringup.{table} "
            "FOR EACH ROW EXECUTE FUNCTION bringup.refuse_change()",
            f"CREATE TRIGGER {table}_no_truncate BEFORE TRUNCATE ON bringup.{table} "
            "FOR EACH STATEMENT EXECUTE FUNCTION bringup.refuse_change()",
        ]
    for table in ("attempts", "events"):
        statements.append(
            f"CREATE TRIGGER {table}_chain_link BEFORE INSERT ON bringup.{table} "
            "FOR EACH ROW EXECUTE FUNCTION bringup.check_link()"
        )
    statements.append(f"INSERT INTO bringup.lab_version (version) VALUES ({LAB_SCHEMA_VERSION})")
    return statements


def installed_version(conn: Any) -> int | None:
    """The lab tables' version in this database, or None when there are none yet."""
    found = conn.execute("SELECT to_regclass('bringup.lab_version') IS NOT NULL").fetchone()[0]
    if not found:
        return None
    row = conn.execute("SELECT max(version) FROM bringup.lab_version").fetchone()
    return None if row is None else row[0]


def ensure_schema(conn: Any) -> bool:
    """Create the lab tables when the database has none (one transaction, under an advisory
    lock so that two benches' first pushes do not both try). Returns True when it created
    them. A newer version of the tables is refused by the caller (``installed_version``).

    ``conn`` is in autocommit mode: the lock is taken in a statement of its own, so the check
    after it runs in a new transaction, which sees tables another push committed meanwhile
    (inside one transaction the catalog seen after an advisory lock may be older)."""
    if installed_version(conn) is not None:
        return False
    conn.execute("SELECT pg_advisory_lock(%s)", [_SETUP_LOCK])
    try:
        if installed_version(conn) is not None:  # the other bench made them meanwhile
            return False
        with conn.transaction():
            for sql in _statements():
                conn.execute(sql)
    finally:
        conn.execute("SELECT pg_advisory_unlock(%s)", [_SETUP_LOCK])
    return True
