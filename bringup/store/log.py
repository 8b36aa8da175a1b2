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
import secrets
import sqlite3
import threading
from collections.abc import Iterator, Mapping
from pathlib import Path
from typing import Any

import sqlite_utils

from bringup.store import chain
from bringup.store.canonical import dumps, loads, now_utc, to_plain
from bringup.store.chain import ChainReport
from bringup.store.content import (
    WAVEFORM_SCALE_COLUMNS,
    attempt_content,
    attempt_content_from_rows,
    attempt_record,
    event_content_from_row,
    event_record,
    metric_rows,
    required,
    signature_record,
    time_text,
)
from bringup.store.entries import (
    ATTEMPT_OUTCOMES,
    EVENT_KINDS,
    FAILED_OUTCOMES,
    AttemptRecord,
    EventRecord,
    SessionData,
    SessionSummary,
    SignatureRecord,
)
from bringup.store.errors import StoreError
from bringup.store.opening import connect, default_db_path, translate
from bringup.store.waveforms import StoredWaveform, codes_digest, decode_codes, encode_waveform

__all__ = ["SessionLog"]

# Session ids: date + 4 characters without look-alikes (no 0/o, 1/l/i): short and typable.
_ID_ALPHABET = "23456789abcdefghjkmnpqrstuvwxyz"


class SessionLog:
    """The bench log in one SQLite file. Create with :meth:`open`; close with :meth:`close`."""

    def __init__(self, conn: sqlite3.Connection, path: Path) -> None:
        """Use :meth:`open`."""
        self._conn = conn
        self._db = sqlite_utils.Database(conn, execute_plugins=False)
        self._path = path
        self._lock = threading.RLock()

    # ----------------------------------------------------------------- opening
    @classmethod
    def open(
        cls, path: str | Path | None = None, *, create: bool = True, busy_timeout_s: float = 5.0
    ) -> SessionLog:
        """Open (or with ``create`` make) the log at ``path``; ``None`` = :func:`default_db_path`.

        Raises ``StoreError`` (one line, the file left untouched) when the file is locked by
        another process for longer than ``busy_timeout_s`` seconds, is not a SQLite database
        or is damaged, is another program's database, or was written by a newer bringup.
        With ``create=False`` a missing file is an error instead of a new empty log.
        """
        resolved = Path(path).expanduser() if path is not None else default_db_path()
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

    @contextlib.contextmanager
    def _read(self) -> Iterator[None]:
        """A consistent snapshot for reads (one deferred transaction)."""
        with self._lock:
            try:
                self._conn.execute("BEGIN")
                try:
                    yield
                finally:
                    self._conn.execute("COMMIT")
            except sqlite3.Error as error:
                raise translate(error, self._path) from None

    def _rows(self, sql: str, params: tuple | list = ()) -> list[dict[str, Any]]:
        return list(self._db.query(sql, params))

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
        serial = required(serial, "serial number")
        operator = required(operator, "operator")
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
        return session_id

    def _new_session_id(self) -> str:
        day = _dt.datetime.now(_dt.UTC).strftime("%y%m%d")
        for _ in range(100):
            candidate = day + "-" + "".join(secrets.choice(_ID_ALPHABET) for _ in range(4))
            if not self._rows("SELECT 1 FROM sessions WHERE id = ?", [candidate]):
                return candidate
        raise StoreError(f"{self._path}: could not find a free session id for {day}")

    def resolve_session(self, text: str) -> str:
        """The full id of the session named by ``text`` (a whole id or a unique prefix)."""
        text = (text or "").strip()
        with self._read():
            exact = self._rows("SELECT id FROM sessions WHERE id = ?", [text])
            if exact:
                return exact[0]["id"]
            like = text.replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_") + "%"
            found = self._rows("SELECT id FROM sessions WHERE id LIKE ? ESCAPE '\\'", [like])
        if len(found) == 1 and text:
            return found[0]["id"]
        if not found:
            raise StoreError(f"{self._path}: no session {text!r} in this log")
        raise StoreError(
            f"{self._path}: {text!r} matches {len(found)} sessions; type more of the id"
        )

    def _session_row(self, session_id: str) -> dict[str, Any]:
        rows = self._rows("SELECT * FROM sessions WHERE id = ?", [session_id])
        if not rows:
            raise StoreError(f"{self._path}: no session {session_id!r} in this log")
        return rows[0]

    def set_session_state(
        self,
        session_id: str,
        *,
        verdict: str | None = None,
        stage_verdicts: Mapping[str, str] | None = None,
    ) -> None:
        """Store the runner's current overall and per-stage verdicts for listings.

        A cache for ``sessions()``, not part of the hash chain: the verdict that counts is the
        one in the finish event's payload. ``None`` leaves a value as it is.
        """
        with self._write():
            self._session_row(session_id)
            changes: dict[str, Any] = {"last_activity_utc": now_utc()}
            if verdict is not None:
                changes["verdict"] = str(verdict)
            if stage_verdicts is not None:
                changes["stage_verdicts_json"] = dumps(dict(stage_verdicts))
            self._db["sessions"].update(session_id, changes)

    # ----------------------------------------------------------------- entries
    def _chain_tail(self, session_id: str, genesis: str) -> tuple[int, str]:
        last = self._rows(
            "SELECT seq, chain_hash FROM attempts WHERE session_id = ? "
            "UNION ALL SELECT seq, chain_hash FROM events WHERE session_id = ? "
            "ORDER BY seq DESC LIMIT 1",
            [session_id, session_id],
        )
        return (last[0]["seq"], last[0]["chain_hash"]) if last else (0, genesis)

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
        operator = required(operator, "operator")
        if outcome not in ATTEMPT_OUTCOMES:
            raise StoreError(
                f"attempt outcome {outcome!r} is not one of {', '.join(ATTEMPT_OUTCOMES)}"
            )
        try:
            plain = {
                "started_utc": time_text(started_utc, "started_utc"),
                "finished_utc": time_text(finished_utc, "finished_utc"),
                "instruments": to_plain(dict(instruments)),
                "settings": to_plain(dict(settings)),
                "metrics": to_plain(dict(metrics)),
                "predictions": to_plain(dict(predictions)),
                "verdicts": to_plain(dict(verdicts)),
                "notes": str(notes or ""),
                "extra": None if extra is None else to_plain(dict(extra)),
            }
        except TypeError as error:
            raise StoreError(f"attempt of step {stage_id}/{step_id}: {error}") from None
        table_rows = metric_rows(plain["metrics"])
        encoded = {}
        for name, waveform in (waveforms or {}).items():
            if not isinstance(waveform, StoredWaveform):
                raise StoreError(
                    f"waveform {name!r}: expected a StoredWaveform, got {type(waveform).__name__}"
                )
            encoded[str(name)] = (waveform, encode_waveform(waveform))
        with self._write():
            session = self._session_row(session_id)
            if session["state"] == "finished":
                raise StoreError(
                    f"session {session_id} is finished: no more attempts can be logged"
                )
            seq, previous = self._chain_tail(session_id, session["genesis_hash"])
            seq += 1
            attempt_no = (
                1
                + self._rows(
                    "SELECT count(*) AS n FROM attempts WHERE session_id = ? AND stage_id = ? AND step_id = ?",
                    [session_id, stage_id, step_id],
                )[0]["n"]
            )
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
            attempt_id = (
                self._db["attempts"]
                .insert(
                    {
                        "session_id": session_id,
                        "seq": seq,
                        "stage_id": stage_id,
                        "step_id": step_id,
                        "attempt_no": attempt_no,
                        "operator": operator,
                        "started_utc": plain["started_utc"],
                        "finished_utc": plain["finished_utc"],
                        "recorded_utc": recorded,
                        "outcome": outcome,
                        "instruments_json": dumps(plain["instruments"]),
                        "settings_json": dumps(plain["settings"]),
                        "metrics_json": dumps(plain["metrics"]),
                        "predictions_json": dumps(plain["predictions"]),
                        "verdicts_json": dumps(plain["verdicts"]),
                        "notes": plain["notes"],
                        "extra_json": None if plain["extra"] is None else dumps(plain["extra"]),
                        "field_hashes_json": dumps(hashes),
                        "content_hash": digest,
                        "chain_hash": chain.link(previous, digest),
                    }
                )
                .last_pk
            )
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
            self._db["sessions"].update(
                session_id, {"last_activity_utc": recorded, "state": "open"}
            )
        return int(attempt_id)

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
          failure (waive it or retake it instead: a failure is never hidden by a skip);
        - ``waive``: a step whose latest outcome is ``fail`` or ``conditional-fail``, with a
          ``reason``; ``operator`` is the name of the person who waives it;
        - ``note``, ``go-back`` (``stage_id`` = the stage gone back to), ``abort``,
          ``resume``: free; abort marks the session "aborted", resume "open";
        - ``finish``: marks the session finished; ``payload`` should carry the final
          ``{"verdict": ..., "stages": {stage_id: verdict}}`` (stored in the chain and cached
          for listings). After finish only notes are accepted.
        """
        if kind not in EVENT_KINDS:
            raise StoreError(f"event kind {kind!r} is not one of {', '.join(EVENT_KINDS)}")
        operator = required(operator, "name" if kind == "waive" else "operator")
        reason = str(reason or "").strip()
        try:
            payload_plain = None if payload is None else to_plain(dict(payload))
        except TypeError as error:
            raise StoreError(f"{kind} event: {error}") from None
        if kind in ("skip", "waive"):
            stage_id = required(stage_id, "stage id")
            step_id = required(step_id, "step id")
            if not reason:
                raise StoreError(f"a {kind} of step {stage_id}/{step_id} needs a reason")
        with self._write():
            session = self._session_row(session_id)
            if session["state"] == "finished" and kind != "note":
                raise StoreError(f"session {session_id} is finished: only notes can be added")
            if kind in ("skip", "waive"):
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
            event_id = (
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
            changes: dict[str, Any] = {"last_activity_utc": recorded}
            if kind == "abort":
                changes["state"] = "aborted"
            elif kind == "resume":
                changes["state"] = "open"
            elif kind == "finish":
                changes.update(state="finished", finished_utc=recorded)
                if payload_plain and payload_plain.get("verdict") is not None:
                    changes["verdict"] = str(payload_plain["verdict"])
                if payload_plain and isinstance(payload_plain.get("stages"), dict):
                    changes["stage_verdicts_json"] = dumps(payload_plain["stages"])
            self._db["sessions"].update(session_id, changes)
        return int(event_id)

    # ---------------------------------------------------------------- reading
    def _latest_outcomes_locked(self, session_id: str) -> dict[tuple[str, str], str]:
        rows = self._rows(
            "SELECT seq, stage_id, step_id, outcome FROM attempts WHERE session_id = ? "
            "UNION ALL SELECT seq, stage_id, step_id, "
            "CASE kind WHEN 'skip' THEN 'skipped' ELSE 'waived' END FROM events "
            "WHERE session_id = ? AND kind IN ('skip', 'waive') ORDER BY seq",
            [session_id, session_id],
        )
        return {(row["stage_id"], row["step_id"]): row["outcome"] for row in rows}

    def latest_outcomes(self, session_id: str) -> dict[tuple[str, str], str]:
        """``{(stage_id, step_id): outcome}`` of each step's latest entry, in first-seen order.

        The outcome is the latest attempt's (``ATTEMPT_OUTCOMES``) or ``"skipped"``/``"waived"``
        when a skip or waive came after it. Steps never attempted are absent.
        """
        with self._read():
            self._session_row(session_id)
            return self._latest_outcomes_locked(session_id)

    def _summary(self, row: dict[str, Any]) -> SessionSummary:
        latest = self._latest_outcomes_locked(row["id"])
        progress: dict[str, int] = {}
        for outcome in latest.values():
            progress[outcome] = progress.get(outcome, 0) + 1
        attempts = self._rows(
            "SELECT count(*) AS n FROM attempts WHERE session_id = ?", [row["id"]]
        )
        return SessionSummary(
            id=row["id"],
            created_utc=row["created_utc"],
            board_name=row["board_name"],
            board_revision=row["board_revision"],
            serial=row["serial"],
            operator=row["operator"],
            checklist_id=row["checklist_id"],
            state=row["state"],
            verdict=row["verdict"],
            stage_verdicts=loads(row["stage_verdicts_json"]),
            progress=progress,
            steps_total=_count_steps(loads(row["checklist_json"])),
            attempts=attempts[0]["n"],
            last_activity_utc=row["last_activity_utc"],
        )

    def sessions(self) -> list[SessionSummary]:
        """Every session, most recent activity first."""
        with self._read():
            rows = self._rows("SELECT * FROM sessions ORDER BY last_activity_utc DESC, id")
            return [self._summary(row) for row in rows]

    def _waveform_descriptions(self, attempt_id: int) -> dict[str, dict[str, Any]]:
        columns = ", ".join((*WAVEFORM_SCALE_COLUMNS, "raw_sha256", "codec", "stored_bytes"))
        rows = self._rows(
            f"SELECT name, {columns} FROM waveforms WHERE attempt_id = ? ORDER BY name",
            [attempt_id],
        )
        return {row.pop("name"): row for row in rows}

    def attempts(
        self, session_id: str, stage_id: str | None = None, step_id: str | None = None
    ) -> list[AttemptRecord]:
        """The session's attempts in logged order, optionally of one stage or one step."""
        where, params = "session_id = ?", [session_id]
        if stage_id is not None:
            where, params = where + " AND stage_id = ?", [*params, stage_id]
        if step_id is not None:
            where, params = where + " AND step_id = ?", [*params, step_id]
        with self._read():
            self._session_row(session_id)
            rows = self._rows(f"SELECT * FROM attempts WHERE {where} ORDER BY seq", params)
            return [attempt_record(row, self._waveform_descriptions(row["id"])) for row in rows]

    def events(self, session_id: str) -> list[EventRecord]:
        """The session's events in logged order."""
        with self._read():
            self._session_row(session_id)
            rows = self._rows(
                "SELECT * FROM events WHERE session_id = ? ORDER BY seq", [session_id]
            )
            return [event_record(row) for row in rows]

    def session(self, session_id: str) -> SessionData:
        """The session's snapshots, summary, attempts, events and signatures."""
        with self._read():
            row = self._session_row(session_id)
            return SessionData(
                summary=self._summary(row),
                board=loads(row["board_json"]),
                checklist=loads(row["checklist_json"]),
                bench=loads(row["bench_json"]),
                genesis_hash=row["genesis_hash"],
                attempts=self.attempts(session_id),
                events=self.events(session_id),
                signatures=self.signatures(session_id),
            )

    def load_waveform(self, attempt_id: int, name: str) -> StoredWaveform:
        """The waveform ``name`` of attempt ``attempt_id``: codes exactly as stored, and scale."""
        with self._read():
            rows = self._rows(
                "SELECT * FROM waveforms WHERE attempt_id = ? AND name = ?", [attempt_id, name]
            )
        if not rows:
            raise StoreError(f"{self._path}: attempt {attempt_id} has no waveform {name!r}")
        row = rows[0]
        try:
            codes = decode_codes(bytes(row["data"]), row["codec"], row["dtype"], row["points"])
        except ValueError as error:
            raise StoreError(
                f"{self._path}: waveform {name!r} of attempt {attempt_id}: {error}"
            ) from None
        return StoredWaveform(
            codes=codes,
            x_increment=row["x_increment"],
            x_origin=row["x_origin"],
            y_increment=row["y_increment"],
            y_origin=row["y_origin"],
            y_unit=row["y_unit"],
            x_unit=row["x_unit"],
        )

    # ------------------------------------------------------------- the chain
    def chain_head(self, session_id: str) -> str:
        """The last stored chain hash of the session (its genesis hash before any entry)."""
        with self._read():
            session = self._session_row(session_id)
            return self._chain_tail(session_id, session["genesis_hash"])[1]

    def verify_chain(self, session_id: str) -> ChainReport:
        """Re-hash every entry of the session (waveforms decoded and re-digested) and check links.

        Returns a ``ChainReport``; it never raises for a mismatch (only for an unknown session
        or an unreadable file).
        """
        with self._read():
            session = self._session_row(session_id)
            genesis_content = {
                "kind": "session",
                "id": session["id"],
                "created_utc": session["created_utc"],
                "serial": session["serial"],
                "operator": session["operator"],
                "board_name": session["board_name"],
                "board_revision": session["board_revision"],
                "checklist_id": session["checklist_id"],
                "board": loads(session["board_json"]),
                "checklist": loads(session["checklist_json"]),
                "bench": loads(session["bench_json"]),
            }
            entries: list[chain.ChainEntry] = []
            for row in self._rows("SELECT * FROM attempts WHERE session_id = ?", [session_id]):
                metrics = self._rows("SELECT * FROM metrics WHERE attempt_id = ?", [row["id"]])
                waveforms = {}
                for wave in self._rows("SELECT * FROM waveforms WHERE attempt_id = ?", [row["id"]]):
                    description = {key: wave[key] for key in WAVEFORM_SCALE_COLUMNS}
                    try:
                        codes = decode_codes(
                            bytes(wave["data"]), wave["codec"], wave["dtype"], wave["points"]
                        )
                        description["raw_sha256"] = codes_digest(codes)
                    except ValueError as error:
                        description["raw_sha256"] = f"unreadable: {error}"
                    waveforms[wave["name"]] = description
                entries.append(
                    chain.ChainEntry(
                        "attempts",
                        row["id"],
                        row["seq"],
                        attempt_content_from_rows(row, metrics, waveforms),
                        loads(row["field_hashes_json"]),
                        row["content_hash"],
                        row["chain_hash"],
                    )  # fmt: skip
                )
            for row in self._rows("SELECT * FROM events WHERE session_id = ?", [session_id]):
                entries.append(
                    chain.ChainEntry(
                        "events",
                        row["id"],
                        row["seq"],
                        event_content_from_row(row),
                        loads(row["field_hashes_json"]),
                        row["content_hash"],
                        row["chain_hash"],
                    )  # fmt: skip
                )
        return chain.check_chain(
            session_id, session["genesis_hash"], chain.genesis_hash(genesis_content), entries
        )

    # ------------------------------------------------------------ signatures
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
    ) -> int:
        """Store a sign-off of the session (made by the record); returns its row id.

        The log stores it as given (raw key and signature bytes); checking it is the record's
        job. Signatures are append-only and are accepted on finished sessions.
        """
        name = required(name, "signer's name")
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
                    }
                )
                .last_pk
            )
        return int(row_id)

    def signatures(self, session_id: str) -> list[SignatureRecord]:
        """The session's sign-offs in the order they were added."""
        with self._read():
            rows = self._rows(
                "SELECT * FROM signatures WHERE session_id = ? ORDER BY id", [session_id]
            )
            return [signature_record(row) for row in rows]


def _count_steps(checklist: Any) -> int | None:
    """Number of steps in a checklist snapshot shaped ``{"stages": [{"steps": [...]}, ...]}``."""
    stages = checklist.get("stages") if isinstance(checklist, dict) else None
    if not isinstance(stages, list):
        return None
    return sum(len(stage.get("steps") or []) for stage in stages if isinstance(stage, dict))
