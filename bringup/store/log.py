"""The session log: one SQLite file (through sqlite-utils) holding every session, attempt and event.

Use::

    log = SessionLog.open(args.db)            # None -> default file in the user's data dir
    sid = log.create_session(board=..., checklist=..., bench=..., serial="DHS24-0001", operator="ana")
    log.record_attempt(sid, stage_id="power-rails", step_id="logic-rail", ...)
    log.record_event(sid, kind="skip", stage_id=..., step_id=..., operator="ana", reason="no probe")
    log.verify_chain(sid).ok

Guarantees:

- every ``record_*`` call is one ``BEGIN IMMEDIATE ... COMMIT`` transaction: when it returns,
  the entry is on disk (``synchronous=FULL`` in WAL mode); a crash or ``kill -9`` at any moment
  leaves each entry either whole or absent;
- nothing logged is ever changed: attempts, metrics, waveforms, events and signatures are
  append-only (SQLite triggers refuse UPDATE and DELETE), a retake is a new row with the next
  ``attempt_no``;
- each entry carries a hash chain (see ``chain.py``) checked by :meth:`SessionLog.verify_chain`;
- a session's state (open, aborted, finished) and verdicts are worked out from its chained
  entries on every read and before every write (``derived.py``): the ``sessions`` row's copies
  are outside the chain and never believed, and :meth:`summary_disagreements` names an edit;
- values are converted to plain Python at this boundary (numpy scalars never reach SQLite).

Threads: one ``sqlite3`` connection opened with ``check_same_thread=False``, and every public
method holds the log's re-entrant lock, so a log opened on the UI thread may be used from a
worker thread (and from several threads, one call at a time). Other processes are serialised
by SQLite's own locking; a write lock held elsewhere for longer than ``busy_timeout_s`` raises
a ``StoreError`` ("locked") and writes nothing.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import json
import secrets
import sqlite3
import threading
from collections.abc import Iterator, Mapping
from pathlib import Path
from typing import Any

import sqlite_utils

from bringup.errors import StoreError
from bringup.store import chain
from bringup.store.chain_json import dumps, loads, now_utc, to_plain
from bringup.store.content import (
    attempt_content,
    metric_rows,
    name_text,
    required,
    time_text,
)
from bringup.store.derived import ENTRY_ROWS_SQL, Derived, derive
from bringup.store.entries import (
    ATTEMPT_OUTCOMES,
    EVENT_KINDS,
    FAILED_OUTCOMES,
)
from bringup.store.opening import connect, connect_read_only, default_db_path, translate
from bringup.store.reading import LogReading, listing_row
from bringup.store.waveforms import StoredWaveform, encode_waveform

__all__ = ["SessionLog"]

# Session ids: date + 4 characters without look-alikes (no 0/o, 1/l/i): short and typable.
_ID_ALPHABET = "23456789abcdefghjkmnpqrstuvwxyz"


def _attempt_columns(plain: dict[str, Any]) -> dict[str, Any]:
    """The attempt row's times, JSON columns and notes from its plain values."""
    return {
        "started_utc": plain["started_utc"],
        "finished_utc": plain["finished_utc"],
        **{f"{k}_json": dumps(plain[k]) for k in ("instruments", "settings", "metrics",
           "predictions", "verdicts")},
        "notes": plain["notes"],
        "extra_json": None if plain["extra"] is None else dumps(plain["extra"]),
    }  # fmt: skip


def _encoded_waveforms(
    waveforms: Mapping[str, StoredWaveform],
) -> dict[str, tuple[StoredWaveform, Any]]:
    """Each waveform with its compressed form, made before the write transaction starts so the
    lock is held only for the inserts; anything but a ``StoredWaveform`` is refused."""
    encoded = {}
    for name, waveform in waveforms.items():
        if not isinstance(waveform, StoredWaveform):
            raise StoreError(
                f"waveform {name!r}: expected a StoredWaveform, got {type(waveform).__name__}"
            )
        encoded[str(name)] = (waveform, encode_waveform(waveform))
    return encoded


class SessionLog(LogReading):
    """The bench log in one SQLite file. Create with :meth:`open`; close with :meth:`close`."""

    def __init__(self, conn: sqlite3.Connection, path: Path) -> None:
        """Use :meth:`open`."""
        self._conn = conn
        self._db = sqlite_utils.Database(conn, execute_plugins=False)
        self._path = path
        self._lock = threading.RLock()
        self._read_only = False

    # ----------------------------------------------------------------- opening
    @classmethod
    def open(
        cls,
        path: str | Path | None = None,
        *,
        create: bool = True,
        busy_timeout_s: float = 5.0,
        read_only: bool = False,
    ) -> SessionLog:
        """Open (or with ``create`` make) the log at ``path``; ``None`` = :func:`default_db_path`.

        Raises ``StoreError`` (one line, the file left untouched) when the file is locked by
        another process for longer than ``busy_timeout_s`` seconds, is not a SQLite database
        or is damaged, is another program's database, or was written by a newer bringup.
        With ``create=False`` a missing file is an error instead of a new empty log.

        ``read_only``: for commands that never write (listing, export, verify): the existing
        file is opened with SQLite's ``mode=ro`` and nothing is switched or migrated, so a log
        on a read-only share or without write permission is served (``opening.py``); every
        write method then raises ``StoreError``.
        """
        resolved = Path(path).expanduser() if path is not None else default_db_path()
        if read_only:
            log = cls(connect_read_only(resolved, busy_timeout_s=busy_timeout_s), resolved)
            log._read_only = True
            return log
        return cls(connect(resolved, create=create, busy_timeout_s=busy_timeout_s), resolved)

    @property
    def path(self) -> Path:
        """The database file."""
        return self._path

    def close(self) -> None:
        """Close the connection (safe to call twice)."""
        with self._lock:
            with contextlib.suppress(sqlite3.Error):
                self._conn.close()

    def __enter__(self) -> SessionLog:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @contextlib.contextmanager
    def _write(self) -> Iterator[None]:
        """One write transaction; any failure rolls it back and becomes a ``StoreError``."""
        if self._read_only:
            raise StoreError(f"{self._path}: the log was opened read-only; nothing was written")
        with self._lock:
            try:
                self._conn.execute("BEGIN IMMEDIATE")
            except sqlite3.Error as error:
                raise translate(error, self._path) from None
            try:
                yield
                self._conn.execute("COMMIT")
            except BaseException as error:
                with contextlib.suppress(sqlite3.Error):
                    self._conn.execute("ROLLBACK")
                if isinstance(error, sqlite3.Error):
                    raise translate(error, self._path) from None
                raise

    # ---------------------------------------------------------------- sessions
    def create_session(
        self,
        *,
        board: Mapping[str, Any],
        checklist: Mapping[str, Any],
        bench: Mapping[str, Any] | None,
        serial: str,
        operator: str,
    ) -> str:
        """Start a session for board ``serial``; returns its short id (e.g. ``"261201-7kqm"``).

        ``board``, ``checklist`` and ``bench`` are the loaded files as plain dicts: they are
        stored as JSON so the record is self-contained. The board's name is taken from
        ``board["board"]["name"]`` (or ``board["name"]``), the checklist's id from
        ``checklist["id"]`` (or ``checklist["checklist"]["id"]``).
        """
        serial = name_text(serial, "serial number")
        operator = name_text(operator, "operator")
        try:
            board_plain = to_plain(dict(board))
            checklist_plain = to_plain(dict(checklist))
            bench_plain = None if bench is None else to_plain(dict(bench))
        except TypeError as error:
            raise StoreError(f"session snapshot: {error}") from None
        board_info = (
            board_plain.get("board") if isinstance(board_plain.get("board"), dict) else board_plain
        )
        board_name = str(board_info.get("name") or "unnamed board")
        revision = board_info.get("revision")
        checklist_info = checklist_plain.get("checklist")
        checklist_id = checklist_plain.get("id") or (
            checklist_info.get("id") if isinstance(checklist_info, dict) else None
        )
        created = now_utc()
        with self._write():
            session_id = self._new_session_id()
            content = {
                "kind": "session",
                "id": session_id,
                "created_utc": created,
                "serial": serial,
                "operator": operator,
                "board_name": board_name,
                "board_revision": None if revision is None else str(revision),
                "checklist_id": str(checklist_id or "unnamed checklist"),
                "board": board_plain,
                "checklist": checklist_plain,
                "bench": bench_plain,
            }
            self._db["sessions"].insert(
                {
                    "id": session_id,
                    "created_utc": created,
                    "serial": serial,
                    "operator": operator,
                    "board_name": content["board_name"],
                    "board_revision": content["board_revision"],
                    "checklist_id": content["checklist_id"],
                    "board_json": dumps(board_plain),
                    "checklist_json": dumps(checklist_plain),
                    "bench_json": None if bench_plain is None else dumps(bench_plain),
                    "genesis_hash": chain.genesis_hash(content),
                    "state": "open",
                    "last_activity_utc": created,
                }
            )
            self._refresh_listing(self._session_row(session_id))
        return session_id

    def _new_session_id(self) -> str:
        day = _dt.datetime.now(_dt.UTC).strftime("%y%m%d")
        for _ in range(100):
            candidate = day + "-" + "".join(secrets.choice(_ID_ALPHABET) for _ in range(4))
            if not self._rows("SELECT 1 FROM sessions WHERE id = ?", [candidate]):
                return candidate
        raise StoreError(f"{self._path}: could not find a free session id for {day}")

    def set_session_state(
        self,
        session_id: str,
        *,
        verdict: str | None = None,
        stage_verdicts: Mapping[str, str] | None = None,
    ) -> None:
        """Rewrite the session's listing columns from its chain (``derived.py``).

        Every ``record_*`` call already does this in its own transaction; the columns are a
        copy for SQLite tools, never read back. ``verdict`` and ``stage_verdicts`` (the
        caller's view) are accepted for older callers and not stored: what the chain says is.
        """
        del verdict, stage_verdicts
        with self._write():
            self._refresh_listing(self._session_row(session_id))

    def _refresh_listing(self, row: dict[str, Any]) -> Derived:
        """Inside a write: store the chain's state, verdicts and times in the listing columns,
        and the session's summary as of its chain's head in ``listings`` (schema 2)."""
        entries = self._rows(ENTRY_ROWS_SQL, [row["id"], row["id"]])
        checklist = loads(row["checklist_json"])
        derived = derive(row["created_utc"], checklist, entries)
        seq, head = self._chain_tail(row["id"], row["genesis_hash"])
        # once per head: rewriting the columns without a new entry adds nothing here
        columns = {"session_id": row["id"], "seq": seq, "chain_hash": head,
                   **listing_row(checklist, entries, derived)}  # fmt: skip
        self._conn.execute(
            f"INSERT OR IGNORE INTO listings ({', '.join(columns)}) "
            f"VALUES ({', '.join('?' * len(columns))})",
            list(columns.values()),
        )
        self._db["sessions"].update(
            row["id"],
            {
                "state": derived.state,
                "verdict": derived.verdict,
                "stage_verdicts_json": None
                if derived.stage_verdicts is None
                else dumps(derived.stage_verdicts),
                "finished_utc": derived.finished_utc,
                "last_activity_utc": derived.last_activity_utc,
            },
        )
        return derived

    def _chained_state(self, session: dict[str, Any]) -> str:
        """The session's state as its chain says (never the editable ``state`` column)."""
        return self._derived_locked(session).state

    # ----------------------------------------------------------------- entries
    def record_attempt(
        self,
        session_id: str,
        *,
        stage_id: str,
        step_id: str,
        operator: str,
        started_utc: str | _dt.datetime,
        finished_utc: str | _dt.datetime,
        instruments: Mapping[str, Any],
        settings: Mapping[str, Any],
        metrics: Mapping[str, Any],
        predictions: Mapping[str, Any],
        verdicts: Mapping[str, Any],
        outcome: str,
        notes: str = "",
        waveforms: Mapping[str, StoredWaveform] | None = None,
        extra: Mapping[str, Any] | None = None,
    ) -> int:
        """Log one attempt of one step in one transaction; returns the attempt's row id.

        ``metrics`` maps a name to a number (or None) or to ``{"value": number, "unit": "V",
        ...}``; each numeric metric also becomes a row of the ``metrics`` table (value REAL,
        unit). Non-finite numbers are stored as null. ``outcome`` is one of
        ``ATTEMPT_OUTCOMES``. Times are ISO 8601 text or aware datetimes (stored as UTC text).
        ``waveforms`` are compressed before the transaction starts, so the write lock is
        held only for the inserts. A retake gets the next ``attempt_no``; nothing is replaced.
        """
        stage_id = required(stage_id, "stage id")
        step_id = required(step_id, "step id")
        operator = name_text(operator, "operator")
        if outcome not in ATTEMPT_OUTCOMES:
            raise StoreError(
                f"attempt outcome {outcome!r} is not one of {', '.join(ATTEMPT_OUTCOMES)}"
            )
        plain = _plain_attempt(
            f"attempt of step {stage_id}/{step_id}",
            started_utc=started_utc,
            finished_utc=finished_utc,
            instruments=instruments,
            settings=settings,
            metrics=metrics,
            predictions=predictions,
            verdicts=verdicts,
            notes=notes,
            extra=extra,
        )
        table_rows = metric_rows(plain["metrics"])
        encoded = _encoded_waveforms(waveforms or {})
        with self._write():
            session = self._session_row(session_id)
            if self._chained_state(session) == "finished":
                raise StoreError(
                    f"session {session_id} is finished: no more attempts can be logged"
                )
            attempt_id = self._insert_attempt_locked(
                session_id,
                session,
                stage_id,
                step_id,
                operator,
                outcome,
                plain,
                table_rows,
                encoded,
            )
            self._insert_attempt_details(int(attempt_id), table_rows, encoded)
            self._refresh_listing(session)
        return int(attempt_id)

    def _insert_attempt_locked(
        self,
        session_id: str,
        session: dict[str, Any],
        stage_id: str,
        step_id: str,
        operator: str,
        outcome: str,
        plain: dict[str, Any],
        table_rows: list[tuple[str, float | None, str]],
        encoded: dict[str, tuple[StoredWaveform, Any]],
    ) -> int:
        """The chained attempt row (next ``seq`` and ``attempt_no``, its field hashes and
        links); inside the write transaction. Returns its row id."""
        seq, previous = self._chain_tail(session_id, session["genesis_hash"])
        seq += 1
        attempt_no = self._next_attempt_no(session_id, stage_id, step_id)
        recorded = now_utc()
        waveform_rows = {
            name: {**waveform.scale(), "raw_sha256": blob.raw_sha256}
            for name, (waveform, blob) in encoded.items()
        }
        content = attempt_content(
            session_id, seq, stage_id, step_id, attempt_no, operator, recorded, outcome,
            plain, table_rows, waveform_rows,
        )  # fmt: skip
        hashes = chain.field_hashes(content)
        digest = chain.content_hash(hashes)
        row = {
            "session_id": session_id,
            "seq": seq,
            "stage_id": stage_id,
            "step_id": step_id,
            "attempt_no": attempt_no,
            "operator": operator,
            "recorded_utc": recorded,
            "outcome": outcome,
            **_attempt_columns(plain),
            "field_hashes_json": dumps(hashes),
            "content_hash": digest,
            "chain_hash": chain.link(previous, digest),
        }
        return self._db["attempts"].insert(row).last_pk

    def _next_attempt_no(self, session_id: str, stage_id: str, step_id: str) -> int:
        """1 + the attempts already logged for this step (a retake never replaces one)."""
        done = self._rows(
            "SELECT count(*) AS n FROM attempts WHERE session_id = ? AND stage_id = ? "
            "AND step_id = ?",
            [session_id, stage_id, step_id],
        )[0]["n"]
        return 1 + done

    def _insert_attempt_details(
        self,
        attempt_id: int,
        table_rows: list[tuple[str, float | None, str]],
        encoded: dict[str, tuple[StoredWaveform, Any]],
    ) -> None:
        """The attempt's metrics table rows and its compressed waveforms (inside its transaction;
        the chained attempt row already carries their values and digests)."""
        if table_rows:
            self._db["metrics"].insert_all(
                {"attempt_id": attempt_id, "name": n, "value": v, "unit": u}
                for n, v, u in table_rows
            )
        for name, (waveform, blob) in encoded.items():
            self._db["waveforms"].insert(
                {
                    "attempt_id": attempt_id,
                    "name": name,
                    **{k: v for k, v in waveform.scale().items()},
                    "codec": blob.codec,
                    "stored_bytes": len(blob.data),
                    "raw_sha256": blob.raw_sha256,
                    "data": blob.data,
                }
            )

    def record_event(
        self,
        session_id: str,
        *,
        kind: str,
        operator: str,
        stage_id: str | None = None,
        step_id: str | None = None,
        reason: str = "",
        payload: Mapping[str, Any] | None = None,
    ) -> int:
        """Log an event in one transaction (chained like attempts); returns its row id.

        Kinds (``EVENT_KINDS``) and their rules:

        - ``skip``: a step, with a ``reason``; refused for a step whose latest outcome is a
          failure (waive it or retake it instead: a failure is never hidden by a skip) and
          for a step the checklist snapshot marks ``"gate": true`` (a safety gate);
        - ``waive``: a step whose latest outcome is ``fail`` or ``conditional-fail``, with a
          ``reason``; ``operator`` is the name of the person who waives it, who must not be
          the session's operator nor the ``payload``'s ``recorded_by`` (a waiver is a second
          person's decision);
        - ``note``, ``go-back`` (``stage_id`` = the stage gone back to), ``abort``,
          ``resume``: free; abort marks the session "aborted", resume "open";
        - ``energise`` (a step, just before its supply output goes ON; ``payload`` names the
          supply, the settings and the process), ``found-on`` (the output was found ON when
          the bench was opened again; ``reason`` says at what voltage and current): free;
        - ``finish``: marks the session finished; ``payload`` should carry the final
          ``{"verdict": ..., "stages": {stage_id: verdict}}`` (chained: the finished session's
          verdicts are read from it). After finish only notes are accepted (finished as the
          chain says, whatever the ``state`` column holds).
        """
        if kind not in EVENT_KINDS:
            raise StoreError(f"event kind {kind!r} is not one of {', '.join(EVENT_KINDS)}")
        operator = name_text(operator, "name" if kind == "waive" else "operator")
        reason = str(reason or "").strip()
        payload_plain = _plain_payload(kind, payload)
        if kind in ("skip", "waive"):
            stage_id = required(stage_id, "stage id")
            step_id = required(step_id, "step id")
            if not reason:
                raise StoreError(f"a {kind} of step {stage_id}/{step_id} needs a reason")
        with self._write():
            session = self._session_row(session_id)
            self._check_event_locked(
                session_id, session, kind, operator, stage_id, step_id, payload_plain
            )
            event_id = self._insert_event_locked(
                session_id, session, kind, operator, stage_id, step_id, reason, payload_plain
            )
            self._refresh_listing(session)
        return int(event_id)

    def _check_event_locked(
        self,
        session_id: str,
        session: dict[str, Any],
        kind: str,
        operator: str,
        stage_id: str | None,
        step_id: str | None,
        payload_plain: Any,
    ) -> None:
        """The event's refusals (inside the write transaction, so the chain cannot change):
        a finished session takes only notes, a waiver needs a second person, only a failed
        step is waived, a failed step or a safety gate is never skipped."""
        if self._chained_state(session) == "finished" and kind != "note":
            raise StoreError(f"session {session_id} is finished: only notes can be added")
        if kind == "waive":
            _check_waiver(session_id, operator, session["operator"], payload_plain)
        if kind in ("skip", "waive"):
            self._check_skip_or_waive_locked(session_id, kind, stage_id, step_id)
        if kind == "skip" and _is_gate(loads(session["checklist_json"]), stage_id, step_id):
            raise StoreError(
                f"step {stage_id}/{step_id} is a safety gate: it cannot be skipped; run "
                "it (a failure may then be waived by someone other than the operator)"
            )

    def _insert_event_locked(
        self,
        session_id: str,
        session: dict[str, Any],
        kind: str,
        operator: str,
        stage_id: str | None,
        step_id: str | None,
        reason: str,
        payload_plain: Any,
    ) -> int:
        """The chained event row (next ``seq``, its field hashes and link); inside the write
        transaction. Returns its row id."""
        seq, previous = self._chain_tail(session_id, session["genesis_hash"])
        seq += 1
        recorded = now_utc()
        content = {
            "kind": kind,
            "session_id": session_id,
            "seq": seq,
            "stage_id": stage_id,
            "step_id": step_id,
            "operator": operator,
            "reason": reason,
            "payload": payload_plain,
            "recorded_utc": recorded,
        }
        hashes = chain.field_hashes(content)
        digest = chain.content_hash(hashes)
        return (
            self._db["events"]
            .insert(
                {
                    "session_id": session_id,
                    "seq": seq,
                    "kind": kind,
                    "stage_id": stage_id,
                    "step_id": step_id,
                    "operator": operator,
                    "reason": reason,
                    "payload_json": None if payload_plain is None else dumps(payload_plain),
                    "recorded_utc": recorded,
                    "field_hashes_json": dumps(hashes),
                    "content_hash": digest,
                    "chain_hash": chain.link(previous, digest),
                }
            )
            .last_pk
        )

    def _check_skip_or_waive_locked(
        self, session_id: str, kind: str, stage_id: str, step_id: str
    ) -> None:
        """Only a failed step is waived; a failed step is never skipped (its failure would be
        hidden). Called inside the write transaction, so the latest outcome cannot change."""
        latest = self._latest_outcomes_locked(session_id).get((stage_id, step_id))
        if kind == "waive" and latest not in FAILED_OUTCOMES:
            raise StoreError(
                f"step {stage_id}/{step_id} cannot be waived: only a failed step can be "
                f"(its latest outcome is {latest or 'nothing yet'})"
            )
        if kind == "skip" and latest in FAILED_OUTCOMES:
            raise StoreError(
                f"step {stage_id}/{step_id} failed ({latest}): waive it with a reason "
                "and a name, or retake it; a failed step is not skipped"
            )

    def add_signature(
        self,
        session_id: str,
        *,
        name: str,
        role: str,
        signed_utc: str | _dt.datetime,
        public_key: bytes,
        fingerprint: str,
        signature: bytes,
        content_digest: str,
        statement: dict | None = None,
    ) -> int:
        """Store a sign-off of the session (made by the record); returns its row id.

        The log stores it as given (raw key and signature bytes, and ``statement``: the further
        fields the signature covers, such as its meaning); checking it is the record's job.
        Signatures are append-only and are accepted on finished sessions.
        """
        name = name_text(name, "signer's name")
        role = required(role, "signer's role")
        if not isinstance(public_key, (bytes, bytearray)) or not isinstance(
            signature, (bytes, bytearray)
        ):
            raise StoreError("a signature's public key and signature must be bytes")
        with self._write():
            self._session_row(session_id)
            row_id = (
                self._db["signatures"]
                .insert(
                    {
                        "session_id": session_id,
                        "name": name,
                        "role": role,
                        "signed_utc": time_text(signed_utc, "signed_utc"),
                        "public_key": bytes(public_key),
                        "fingerprint": required(fingerprint, "key fingerprint"),
                        "signature": bytes(signature),
                        "content_digest": required(content_digest, "content digest"),
                        "recorded_utc": now_utc(),
                        "statement_json": None
                        if statement is None
                        else json.dumps(statement, sort_keys=True, ensure_ascii=False),
                    }
                )
                .last_pk
            )
        return int(row_id)


def _check_waiver(session_id: str, name: str, operator: str, payload: Any) -> None:
    """Refuse a waiver given in the session operator's (or the recording operator's) name."""
    from bringup.names import same_person

    recorded_by = payload.get("recorded_by") if isinstance(payload, dict) else None
    for who in (operator, recorded_by):
        if isinstance(who, str) and same_person(name, who):
            raise StoreError(
                f"session {session_id}: {name!r} runs this session and cannot waive its "
                "failures: a waiver is given by someone else (their name)"
            )


def _is_gate(checklist: Any, stage_id: str, step_id: str) -> bool:
    """True when the session's checklist snapshot marks the step ``gate`` (a safety gate)."""
    stages = checklist.get("stages") if isinstance(checklist, dict) else None
    for stage in stages if isinstance(stages, list) else ():
        if isinstance(stage, dict) and stage.get("id") == stage_id:
            for step in stage.get("steps") or ():
                if isinstance(step, dict) and step.get("id") == step_id:
                    return step.get("gate") is True
    return False


def _plain_attempt(
    what: str,
    *,
    started_utc: str | _dt.datetime,
    finished_utc: str | _dt.datetime,
    instruments: Mapping[str, Any],
    settings: Mapping[str, Any],
    metrics: Mapping[str, Any],
    predictions: Mapping[str, Any],
    verdicts: Mapping[str, Any],
    notes: str,
    extra: Mapping[str, Any] | None,
) -> dict[str, Any]:
    """An attempt's fields as plain JSON-able values (times as UTC text); a value that cannot
    be stored is a ``StoreError`` starting with ``what``."""
    try:
        return {
            "started_utc": time_text(started_utc, "started_utc"),
            "finished_utc": time_text(finished_utc, "finished_utc"),
            **{k: to_plain(dict(v)) for k, v in (("instruments", instruments),
               ("settings", settings), ("metrics", metrics), ("predictions", predictions),
               ("verdicts", verdicts))},
            "notes": str(notes or ""),
            "extra": None if extra is None else to_plain(dict(extra)),
        }  # fmt: skip
    except TypeError as error:
        raise StoreError(f"{what}: {error}") from None


def _plain_payload(kind: str, payload: Mapping[str, Any] | None) -> Any:
    """An event's payload as plain JSON-able values (or None); else a ``StoreError``."""
    try:
        return None if payload is None else to_plain(dict(payload))
    except TypeError as error:
        raise StoreError(f"{kind} event: {error}") from None
