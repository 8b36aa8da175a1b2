"""The read side of the session log: listings, sessions, attempts, waveforms, chain checks.

``SessionLog`` inherits these methods; every one holds the log's lock and reads inside one
transaction, so it sees a consistent snapshot even while another process is writing.
"""

from __future__ import annotations

import contextlib
import json
import sqlite3
import threading
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import sqlite_utils

from bringup.errors import StoreError
from bringup.store import chain
from bringup.store.chain import ChainReport
from bringup.store.chain_json import dumps, loads
from bringup.store.content import (
    WAVEFORM_SCALE_COLUMNS,
    attempt_content_from_rows,
    attempt_record,
    event_content_from_row,
    event_record,
    signature_record,
)
from bringup.store.derived import (
    ENTRY_ROWS_SQL,
    Derived,
    checklist_layout,
    derive,
    disagreements,
)
from bringup.store.entries import (
    AttemptRecord,
    EventRecord,
    SessionData,
    SessionSummary,
    SignatureRecord,
    rehearsal_bench,
)
from bringup.store.opening import translate
from bringup.store.waveforms import StoredWaveform, codes_digest, decode_codes

__all__ = ["LogReading"]


class LogReading:
    """Read methods of ``SessionLog`` (see ``log.py`` for opening and writing)."""

    _conn: sqlite3.Connection
    _db: sqlite_utils.Database
    _path: Path
    _lock: threading.RLock

    @contextlib.contextmanager
    def _read(self) -> Iterator[None]:
        """A consistent snapshot for reads (one deferred transaction)."""
        with self._lock:
            if self._conn.in_transaction:  # nested in another read or a write: same snapshot
                yield
                return
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

    def resolve_session(self, text: str) -> str:
        """The full id of the session named by ``text`` (a whole id or a unique prefix)."""
        text = (text or "").strip()
        if not text:
            raise StoreError(f"{self._path}: no session id given")
        with self._read():
            exact = self._rows("SELECT id FROM sessions WHERE id = ?", [text])
            if exact:
                return exact[0]["id"]
            like = text.replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_") + "%"
            found = self._rows("SELECT id FROM sessions WHERE id LIKE ? ESCAPE '\\'", [like])
        if len(found) == 1:
            return found[0]["id"]
        if not found:
            raise StoreError(f"{self._path}: no session {text!r} in this log")
        raise StoreError(
            f"{self._path}: {text!r} matches {len(found)} sessions; type more of the id"
        )

    def latest_session(self) -> str:
        """The id of the session started last (newest ``created_utc``, then the last inserted)."""
        with self._read():
            rows = self._rows(
                "SELECT id FROM sessions ORDER BY created_utc DESC, rowid DESC LIMIT 1"
            )
        if not rows:
            raise StoreError(f"{self._path}: no sessions in this log")
        return rows[0]["id"]

    def _session_row(self, session_id: str) -> dict[str, Any]:
        rows = self._rows("SELECT * FROM sessions WHERE id = ?", [session_id])
        if not rows:
            raise StoreError(f"{self._path}: no session {session_id!r} in this log")
        return rows[0]

    def _chain_tail(self, session_id: str, genesis: str) -> tuple[int, str]:
        last = self._rows(
            "SELECT seq, chain_hash FROM attempts WHERE session_id = ? "
            "UNION ALL SELECT seq, chain_hash FROM events WHERE session_id = ? "
            "ORDER BY seq DESC LIMIT 1",
            [session_id, session_id],
        )
        return (last[0]["seq"], last[0]["chain_hash"]) if last else (0, genesis)

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

    def _derived_locked(self, row: dict[str, Any]) -> Derived:
        """The session's state and verdicts from its chained entries (see ``derived.py``)."""
        entries = self._rows(ENTRY_ROWS_SQL, [row["id"], row["id"]])
        return derive(row["created_utc"], loads(row["checklist_json"]), entries)

    def summary_disagreements(self, session_id: str) -> list[str]:
        """Each stored listing column of the session (state, verdict, stage verdicts, finish
        time) that says something other than its hash chain, one line each; ``[]`` when
        they agree. Those columns are outside the chain: a difference means they were edited
        (what bringup shows and decides is always taken from the chain)."""
        with self._read():
            row = self._session_row(session_id)
            found = disagreements(row, self._derived_locked(row))
        return [f"session {session_id}: summary column {line}" for line in found]

    def _checklist_texts(self, checklist_ids: set[str]) -> dict:
        """The checklist snapshot texts of every session without sending one text per
        session: ``{(_SHARED, checklist_id): text}`` for the text of the first session of each
        checklist id, and ``{session_id: text}`` for each session whose text differs from it
        (compared by SQLite)."""
        texts: dict = {}
        for cid in checklist_ids:
            first = self._rows(
                "SELECT checklist_json FROM sessions WHERE checklist_id IS ? ORDER BY id LIMIT 1",
                [cid],
            )
            shared = first[0]["checklist_json"]
            texts[_SHARED, cid] = shared
            for other in self._rows(
                "SELECT id, checklist_json FROM sessions "
                "WHERE checklist_id IS ? AND checklist_json IS NOT ?",
                [cid, shared],
            ):
                texts[other["id"]] = other["checklist_json"]
        return texts

    def _summary(self, row: dict[str, Any]) -> SessionSummary:
        entries = self._rows(ENTRY_ROWS_SQL, [row["id"], row["id"]])
        return self._summary_of(row, loads(row["checklist_json"]), entries)

    @staticmethod
    def _summary_of(
        row: dict[str, Any], checklist: Any, entries: list, layout: Any = None
    ) -> SessionSummary:
        """The summary of the ``sessions`` ``row`` from its chained ``entries`` (the rows of
        ``ENTRY_ROWS_SQL``, in chain order) and its parsed checklist snapshot (and that
        snapshot's ``checklist_layout``, when already worked out)."""
        derived = derive(row["created_utc"], checklist, entries, layout)
        progress, attempts = _progress(entries)
        return _make_summary(row, derived, progress, _count_steps(checklist), attempts)

    def sessions(self) -> list[SessionSummary]:
        """Every session, most recent activity first (state, verdicts and activity from each
        session's chain, not from the stored listing columns).

        A few queries for the whole log, whatever its size. The sessions' listing columns
        and, for each session, its latest ``listings`` row (its chain's summary, written with
        each entry) while that row still names the chain's head: the entry at its ``seq``
        has its ``chain_hash`` and none follows (SQLite checks it through the covering
        indexes). Any other session (a log written before schema 2) is replayed from its
        entries: every chained entry (two table scans), replayed session by session in chain
        order with ``derive`` as ``session()`` does, with the checklist snapshots read once
        per distinct text (sessions of one checklist share it: SQLite compares the others
        with it, and only a session whose snapshot differs sends its own). Only a ``finish``
        event's payload is read (the one ``derive`` opens)."""
        with self._read():
            cursor = self._db.conn.execute(_LISTED_SQL)
            names = [d[0] for d in cursor.description]
            summaries, slow, texts = [], [], _Texts()
            for values in cursor:
                row = dict(zip(names, values, strict=True))
                if row["l_state"] is None:
                    slow.append(row)
                else:
                    summaries.append(_summary_from_listing(row, texts))
            summaries.extend(self._replayed_locked(slow))
        summaries.sort(key=lambda s: s.id)
        summaries.sort(key=lambda s: s.last_activity_utc, reverse=True)
        return summaries

    def _replayed_locked(self, rows: list[dict[str, Any]]) -> list[SessionSummary]:
        """The summaries of the sessions ``rows`` replayed from their chained entries."""
        if not rows:
            return []
        wanted = {row["id"] for row in rows}
        texts = self._checklist_texts({row["checklist_id"] for row in rows})
        by_session: dict[str, list[dict[str, Any]]] = {}
        for sql in _ALL_ENTRIES_SQL:
            cursor = self._db.conn.execute(sql)
            columns = [d[0] for d in cursor.description]
            for values in cursor:
                entry = dict(zip(columns, values, strict=True))
                if entry["session_id"] in wanted:
                    by_session.setdefault(entry["session_id"], []).append(entry)
        for listed in by_session.values():
            listed.sort(key=lambda entry: entry["seq"])  # chain order
        parsed: dict[str, tuple[Any, Any]] = {}  # text -> (snapshot, layout)
        summaries = []
        for row in rows:
            text = texts.get(row["id"]) or texts[_SHARED, row["checklist_id"]]
            if text not in parsed:
                snapshot = loads(text)
                parsed[text] = (snapshot, checklist_layout(snapshot))
            snapshot, layout = parsed[text]
            entries_of = by_session.get(row["id"], [])
            summaries.append(self._summary_of(row, snapshot, entries_of, layout))
        return summaries

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
        """The waveform ``name`` of attempt ``attempt_id``: codes exactly as stored, and scale.

        The decoded samples are checked against their stored SHA-256: a damaged blob raises a
        ``StoreError`` instead of returning wrong samples (LZ4 itself carries no checksum).
        """
        with self._read():
            rows = self._rows(
                "SELECT * FROM waveforms WHERE attempt_id = ? AND name = ?", [attempt_id, name]
            )
        if not rows:
            raise StoreError(f"{self._path}: attempt {attempt_id} has no waveform {name!r}")
        row = rows[0]
        try:
            codes = decode_codes(bytes(row["data"]), row["codec"], row["dtype"], row["points"])
            if codes_digest(codes) != row["raw_sha256"]:
                raise ValueError(
                    "waveform blob is damaged (its samples do not match their SHA-256)"
                )
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

    def check_integrity(self) -> list[str]:
        """SQLite's structural check of the whole file (``PRAGMA quick_check``, at most 10 findings).

        Returns ``[]`` when the file is sound, else SQLite's one-line findings. It reads every
        page (about 0.1 s per 100 MB), so it is not run on every open: ``verify`` and exports
        may call it. Damage that stops the check itself is returned as its one finding.
        """
        with self._lock:
            try:
                rows = self._conn.execute("PRAGMA quick_check(10)").fetchall()
            except sqlite3.DatabaseError as error:  # too damaged for the check to finish
                return [str(error).strip() or type(error).__name__]
        findings = [str(row[0]) for row in rows]
        return [] if findings == ["ok"] else findings

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
    def signatures(self, session_id: str) -> list[SignatureRecord]:
        """The session's sign-offs in the order they were added."""
        with self._read():
            rows = self._rows(
                "SELECT * FROM signatures WHERE session_id = ? ORDER BY id", [session_id]
            )
            return [signature_record(row) for row in rows]


# The ``sessions`` columns a listing shows or checks (not the snapshots: see
# ``_checklist_texts``).
def _rehearsal_of(row: dict[str, Any]) -> bool:
    """True when the session's bench snapshot is a simulated bench's (``rehearsal_bench``):
    from the listing's ``rehearsal`` column, or the whole row's ``bench_json``."""
    if "rehearsal" in row:
        return bool(row["rehearsal"])
    try:
        return rehearsal_bench(loads(row.get("bench_json") or "null"))
    except ValueError:
        return False


_LISTING_COLUMNS = (
    "sessions.id AS id, created_utc, board_name, board_revision, serial, operator, "
    "checklist_id, sessions.state AS state, sessions.verdict AS verdict, "
    "sessions.stage_verdicts_json AS stage_verdicts_json, "
    "sessions.finished_utc AS finished_utc, "
    # a session on a simulated bench is a rehearsal (the rule of ``rehearsal_bench``)
    "(CASE WHEN json_valid(bench_json) THEN (json_extract(bench_json, '$.kind') IS 'simulated' "
    "OR json_extract(bench_json, '$.simulation.enabled') IS 1) ELSE 0 END) AS rehearsal"
)
_SHARED = object()  # key of a checklist id's shared snapshot text in ``_checklist_texts``
# Each session's listing columns with its latest ``listings`` row (as ``l_*``; NULL when it
# has none), kept only while that row names the chain's head: the entry at its seq (the
# genesis at seq 0) has its chain hash, and no entry follows it.
_LISTED_SQL = (
    f"SELECT {_LISTING_COLUMNS}, l.state AS l_state, l.verdict AS l_verdict, "
    "l.stage_verdicts_json AS l_stage_verdicts_json, l.finished_utc AS l_finished_utc, "
    "l.last_activity_utc AS l_last_activity_utc, l.progress_json AS l_progress_json, "
    "l.attempts AS l_attempts, l.steps_total AS l_steps_total "
    # the covering indexes: the listing never reads a row's snapshots (before its other
    # columns in the row: every overflow page of them would be read)
    "FROM sessions INDEXED BY sessions_listing "
    "LEFT JOIN (SELECT session_id, MAX(seq) AS seq FROM listings GROUP BY session_id) h "
    "ON h.session_id = sessions.id "
    "LEFT JOIN listings l ON l.session_id = h.session_id AND l.seq = h.seq "
    "AND l.chain_hash IS COALESCE("
    "(SELECT a.chain_hash FROM attempts a INDEXED BY attempts_heads "
    "WHERE a.session_id = l.session_id AND a.seq = l.seq), "
    "(SELECT e.chain_hash FROM events e INDEXED BY events_heads "
    "WHERE e.session_id = l.session_id AND e.seq = l.seq), "
    "CASE WHEN l.seq = 0 THEN sessions.genesis_hash END) "
    "AND NOT EXISTS (SELECT 1 FROM attempts a WHERE a.session_id = l.session_id AND a.seq > l.seq) "
    "AND NOT EXISTS (SELECT 1 FROM events e WHERE e.session_id = l.session_id AND e.seq > l.seq) "
    "ORDER BY sessions.id"
)
# ``ENTRY_ROWS_SQL``'s columns for every session at once: each table read in its stored order
# (a scan; ordering by session would look every row up through the index), grouped by
# session and put in chain order in Python. An event's payload only where ``derive`` reads it
# (a finish event).
_ALL_ENTRIES_SQL = (
    "SELECT session_id, seq, 'attempt' AS kind, stage_id, step_id, outcome, "
    "NULL AS payload_json, recorded_utc FROM attempts",
    "SELECT session_id, seq, kind, stage_id, step_id, NULL AS outcome, "
    "CASE kind WHEN 'finish' THEN payload_json END AS payload_json, recorded_utc FROM events",
)


def _progress(entries: list) -> tuple[dict[str, int], int]:
    """Steps counted by their latest entry (an attempt's outcome, or a skip or waiver after
    it), and the number of attempts, from a session's chained entries in chain order."""
    latest: dict[tuple[str, str], str] = {}
    attempts = 0
    for entry in entries:
        kind = entry["kind"]
        if kind == "attempt":
            attempts += 1
            latest[(entry["stage_id"], entry["step_id"])] = entry["outcome"]
        elif kind in ("skip", "waive"):
            latest[(entry["stage_id"], entry["step_id"])] = (
                "skipped" if kind == "skip" else "waived"
            )
    progress: dict[str, int] = {}
    for outcome in latest.values():
        progress[outcome] = progress.get(outcome, 0) + 1
    return progress, attempts


def listing_row(checklist: Any, entries: list, derived: Derived) -> dict[str, Any]:
    """A ``listings`` row's summary columns: what ``sessions()`` shows of a session, from its
    chained ``entries`` (``ENTRY_ROWS_SQL``'s, in chain order), its checklist snapshot and
    ``derive``'s result. The dicts as plain JSON in their order (stages as the checklist lists
    them); outside the chain, like every listing column, and tied to it by its row."""
    progress, attempts = _progress(entries)
    stages = derived.stage_verdicts
    return {
        "state": derived.state,
        "verdict": derived.verdict,
        "stage_verdicts_json": None if stages is None else json.dumps(stages),
        "finished_utc": derived.finished_utc,
        "last_activity_utc": derived.last_activity_utc,
        "progress_json": json.dumps(progress),
        "attempts": attempts,
        "steps_total": _count_steps(checklist),
    }


class _Texts:
    """Each distinct JSON text of the listing parsed once (sessions of one checklist mostly end
    in a few shapes), handed out as a copy; a stage-verdicts text also as the log writes it in
    the ``sessions`` column (canonical), so that an unedited column is compared as text."""

    def __init__(self) -> None:
        self._parsed: dict[str, Any] = {}
        self._canonical: dict[str, str] = {}

    def value(self, text: str | None) -> Any:
        if text is None:
            return None
        if text not in self._parsed:
            self._parsed[text] = json.loads(text)
        return dict(self._parsed[text])

    def canonical(self, text: str | None) -> str | None:
        if text is None:
            return None
        if text not in self._canonical:
            self._canonical[text] = dumps(json.loads(text))
        return self._canonical[text]


def _summary_from_listing(row: dict[str, Any], texts: _Texts) -> SessionSummary:
    """A session's summary from its current ``listings`` row (columns ``l_*`` of ``row``)."""
    stage_text = row["l_stage_verdicts_json"]
    derived = Derived(row["l_state"], row["l_verdict"], texts.value(stage_text),
                      row["l_finished_utc"], row["l_last_activity_utc"])  # fmt: skip
    return _make_summary(row, derived, texts.value(row["l_progress_json"]), row["l_steps_total"],
                         row["l_attempts"], texts.canonical(stage_text))  # fmt: skip


def _make_summary(
    row: dict[str, Any],
    derived: Derived,
    progress: dict[str, int],
    steps_total: int | None,
    attempts: int,
    stage_verdicts_text: str | None = None,
) -> SessionSummary:
    return SessionSummary(
        id=row["id"],
        created_utc=row["created_utc"],
        board_name=row["board_name"],
        board_revision=row["board_revision"],
        serial=row["serial"],
        operator=row["operator"],
        checklist_id=row["checklist_id"],
        state=derived.state,
        verdict=derived.verdict,
        stage_verdicts=derived.stage_verdicts,
        progress=progress,
        steps_total=steps_total,
        attempts=attempts,
        last_activity_utc=derived.last_activity_utc,
        altered=tuple(disagreements(row, derived, stage_verdicts_text)),
        rehearsal=_rehearsal_of(row),
    )


def _count_steps(checklist: Any) -> int | None:
    """Number of steps in a checklist snapshot shaped ``{"stages": [{"steps": [...]}, ...]}``."""
    stages = checklist.get("stages") if isinstance(checklist, dict) else None
    if not isinstance(stages, list):
        return None
    return sum(len(stage.get("steps") or []) for stage in stages if isinstance(stage, dict))
