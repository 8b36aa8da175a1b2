"""Reading the lab: the sessions asked for are copied into local SQLite snapshots and read there
by the log's own reader (``bringup.store.reading.LogReading``).

Why snapshots and not a second reader written in PostgreSQL's SQL: there is then one reading
code path. Listings, records, chain checks and batch statistics come from the same code whether
the session was read from a bench's log or from the lab, so an export from the lab is byte for
byte the export from the bench (its signatures still verify) and a fix to the reader fixes both.
The copy costs one pass over the rows (``benchmarks/bench_push.py`` measures it beside the push).

Each pushed log gets its own snapshot (a temporary file, removed on :meth:`LabReading.close`):
two benches' sessions may share a short id, and a log never holds two sessions with one id.
Sessions are copied when first asked for (a listing copies them all; ``export`` and ``verify``
only theirs), inside one read-only repeatable-read transaction, and every session copied is
chain-checked there (``verify_chain``: every field re-hashed, every waveform decoded). A
listing (:meth:`LabReading.sessions`: ``sessions``, ``batch``) is refused in one line while a
session it read does not hold; one session's reads are served as a bench's log serves them,
and its command checks the chain as it does on the bench (``export`` refuses it, ``verify``
names the entry and the field).

A session is addressed by its id (or a unique prefix), as in a bench's log; when two benches
hold the same id, by ``BENCH/ID`` (``sessions --lab`` lists the addresses). Listings give the
address as the session's id; the session's own records (``session()``) keep the id its chain
and its record were made with.
"""

from __future__ import annotations

import dataclasses
import shutil
import tempfile
from pathlib import Path
from typing import Any

from bringup.errors import LabError
from bringup.lab.config import LabTarget
from bringup.lab.connection import connect, lab_errors
from bringup.lab.schema import LAB_SCHEMA_VERSION, installed_version
from bringup.store import SessionLog
from bringup.store.copying import (
    ATTEMPT_COLUMNS,
    EVENT_COLUMNS,
    METRIC_COLUMNS,
    SESSION_COLUMNS,
    SIGNATURE_COLUMNS,
    WAVEFORM_COLUMNS,
    SessionRows,
    add_session_rows,
)

__all__ = ["LabReading", "LabSession", "COPY_GROUP"]

#: Sessions copied from the lab per transaction (a session with its waveforms is ~0.5 MB in
#: a simulated run; a real scope's records are larger).
COPY_GROUP = 20


@dataclasses.dataclass(frozen=True)
class LabSession:
    """One session the lab holds: the log it came from, its bench, its id and start time."""

    log_id: str
    bench: str
    id: str
    created_utc: str
    genesis_hash: str
    address: str = ""


def _addresses(found: list[LabSession]) -> list[LabSession]:
    """Each session's address: its id when no other log holds that id, else ``BENCH/ID``
    (``BENCH@LOGID8/ID`` when two logs share a bench name)."""
    benches: dict[str, set[str]] = {}
    ids: dict[str, int] = {}
    for s in found:
        benches.setdefault(s.bench, set()).add(s.log_id)
        ids[s.id] = ids.get(s.id, 0) + 1
    out = []
    for s in found:
        bench = s.bench if len(benches[s.bench]) == 1 else f"{s.bench}@{s.log_id[:8]}"
        out.append(dataclasses.replace(s, address=s.id if ids[s.id] == 1 else f"{bench}/{s.id}"))
    return out


class LabReading:
    """The lab's sessions through ``LogReading``'s public methods (see the module docstring).
    Open with :meth:`open`; close with :meth:`close` (or ``with``)."""

    def __init__(self, conn: Any, target: LabTarget, index: list[LabSession]) -> None:
        """Use :meth:`open`."""
        self._conn = conn
        self._target = target
        self._index = index
        self._by_address = {s.address: s for s in index}
        self._folder = Path(tempfile.mkdtemp(prefix="bringup-lab-"))
        self._snapshots: dict[str, SessionLog] = {}
        self._copied: dict[tuple[str, str], str | None] = {}  # -> chain problem, or None
        self._attempt_log: dict[int, str] = {}  # a snapshot's attempt id (the lab's) -> log
        self._pinned: dict[str, str] = {}  # a bare id -> the address a record named

    @classmethod
    def open(cls, target: LabTarget) -> LabReading:
        """Connect and read the lab's index of sessions; ``LabError`` in one line if the lab
        cannot be reached or holds no bringup tables."""
        conn = connect(target)
        try:
            with lab_errors(target, "reading the sessions it holds"):
                version = installed_version(conn)
                if version is None:
                    raise LabError(
                        f"lab {target.label}: no bringup tables there yet (a bench's "
                        "`bringup push --lab` creates them)"
                    )
                if version > LAB_SCHEMA_VERSION:
                    raise LabError(
                        f"lab {target.label}: its tables are version {version}, this bringup "
                        f"reads up to {LAB_SCHEMA_VERSION}: upgrade bringup to read them"
                    )
                rows = conn.execute(
                    "SELECT s.log_id, l.bench, s.id, s.created_utc, s.genesis_hash "
                    "FROM bringup.sessions AS s "
                    "JOIN bringup.logs AS l USING (log_id) ORDER BY s.created_utc, s.pushed, s.id"
                ).fetchall()
        except BaseException:
            conn.close()
            raise
        return cls(conn, target, _addresses([LabSession(*row) for row in rows]))

    @property
    def path(self) -> str:
        """What messages name: the lab (never its password)."""
        return f"lab {self._target.label}"

    def close(self) -> None:
        """Close the snapshots and the connection, and remove the snapshots (twice is safe)."""
        for snapshot in self._snapshots.values():
            snapshot.close()
        self._snapshots.clear()
        self._conn.close()
        shutil.rmtree(self._folder, ignore_errors=True)

    def __enter__(self) -> LabReading:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # ------------------------------------------------------------ addressing
    def lab_sessions(self) -> list[LabSession]:
        """Every session the lab holds (no rows copied), oldest first."""
        return list(self._index)

    def bench_of(self, address: str) -> str:
        """The bench name of the session at ``address`` (as ``resolve_session`` gives it)."""
        return self._locate(address).bench

    def resolve_session(self, text: str) -> str:
        """The address of the session named by ``text``: an id or a unique prefix of one, or
        ``BENCH/ID`` (the bench's name, or a prefix of its log's identity, then an id or
        prefix). ``LabError`` for none or several (naming them)."""
        text = (text or "").strip()
        if not text:
            raise LabError(f"{self.path}: no session id given")
        if text in self._by_address:
            return text
        if text in self._pinned:
            return self._pinned[text]
        pool, wanted = self._index, text
        if "/" in text:
            bench, wanted = text.split("/", 1)
            pool = [s for s in pool if bench in (s.bench, s.address.split("/")[0])
                    or (len(bench) >= 4 and s.log_id.startswith(bench))]  # fmt: skip
        found = [s for s in pool if s.id == wanted] or [s for s in pool if s.id.startswith(wanted)]
        if len(found) == 1:
            return found[0].address
        if not found:
            raise LabError(f"{self.path}: no session {text!r} in the lab")
        names = ", ".join(sorted(s.address if "/" in s.address else s.id for s in found)[:6])
        raise LabError(
            f"{self.path}: {text!r} matches {len(found)} sessions ({names}); name one as "
            "BENCH/ID or type more of the id"
        )

    def pin_record(self, content: object) -> None:
        """Let a record's bare session id name the lab session it was exported from (its
        genesis hash picks it when two benches hold that id), so that ``verify --lab``
        compares a record with its own session. A record naming no such session changes
        nothing (the comparison then says what is missing)."""
        session = content.get("session") if isinstance(content, dict) else None
        log = content.get("log") if isinstance(content, dict) else None
        sid = session.get("id") if isinstance(session, dict) else None
        genesis = log.get("genesis_hash") if isinstance(log, dict) else None
        found = [s for s in self._index if s.id == sid and s.genesis_hash == genesis]
        if isinstance(sid, str) and len(found) == 1:
            self._pinned[sid] = found[0].address

    def latest_session(self) -> str:
        """The address of the session started last in the lab."""
        if not self._index:
            raise LabError(f"{self.path}: no sessions in the lab")
        return max(self._index, key=lambda s: s.created_utc).address

    def _locate(self, text: str) -> LabSession:
        return self._by_address[self.resolve_session(text)]

    # --------------------------------------------------------------- copying
    def _snapshot(self, log_id: str) -> SessionLog:
        if log_id not in self._snapshots:
            snapshot = SessionLog.open(self._folder / f"{log_id[:16]}.db", create=True)
            # a throwaway copy: no journal file and no waiting for the disk (a crash loses
            # nothing: the lab still holds every row); measured 2.7 s -> 1.8 s for 20 sessions
            snapshot._conn.execute("PRAGMA journal_mode = MEMORY")
            snapshot._conn.execute("PRAGMA synchronous = OFF")
            bench = next(s.bench for s in self._index if s.log_id == log_id)
            # what the snapshot's own messages name: the lab and the bench, not a temporary file
            snapshot._path = f"lab {self._target.label}, bench {bench}"  # type: ignore[assignment]
            self._snapshots[log_id] = snapshot
        return self._snapshots[log_id]

    def _copy(self, wanted: list[LabSession]) -> None:
        """Copy the ``wanted`` sessions not copied yet into their logs' snapshots, at most
        ``COPY_GROUP`` sessions per read-only repeatable-read transaction (so a large lab is
        never held in memory whole; a push commits a session whole, so each one is read as
        one consistent state), then chain-check each one there."""
        missing = [s for s in wanted if (s.log_id, s.id) not in self._copied]
        for start in range(0, len(missing), COPY_GROUP):
            by_log: dict[str, list[str]] = {}
            for s in missing[start : start + COPY_GROUP]:
                by_log.setdefault(s.log_id, []).append(s.id)
            with lab_errors(self._target, "reading sessions"), self._conn.transaction():
                self._conn.execute("SET TRANSACTION ISOLATION LEVEL REPEATABLE READ, READ ONLY")
                fetched = {
                    log_id: _fetch(self._conn, log_id, ids) for log_id, ids in by_log.items()
                }
            for log_id, sessions in fetched.items():
                self._keep(log_id, sessions)

    def _keep(self, log_id: str, sessions: list[SessionRows]) -> None:
        """Write copied sessions into the log's snapshot and chain-check each one there."""
        snapshot = self._snapshot(log_id)
        for rows in sessions:
            add_session_rows(snapshot, rows)
            self._attempt_log.update({a["id"]: log_id for a in rows.attempts})
            report = snapshot.verify_chain(rows.session_id)
            self._copied[log_id, rows.session_id] = None if report.ok else report.problem

    def _reader(self, text: str) -> tuple[SessionLog, str]:
        """The snapshot holding the session at ``text`` (copied now if it was not) and the
        session's own id."""
        found = self._locate(text)
        self._copy([found])
        return self._snapshots[found.log_id], found.id

    # ----------------------------------------------- LogReading's public reads
    def sessions(self) -> list:
        """Every session in the lab (``SessionSummary``, id = its address), most recent
        activity first; all of them copied and chain-checked (a broken one is refused)."""
        self._copy(self._index)
        broken = [p for p in self._copied.values() if p is not None]
        if broken:
            raise LabError(f"{self.path}: {broken[0]} ({len(broken)} session(s) do not hold)")
        address = {(s.log_id, s.id): s.address for s in self._index}
        summaries = []
        for log_id, snapshot in self._snapshots.items():
            for summary in snapshot.sessions():
                summaries.append(dataclasses.replace(summary, id=address[log_id, summary.id]))
        summaries.sort(key=lambda s: s.id)
        summaries.sort(key=lambda s: s.last_activity_utc, reverse=True)
        return summaries

    def session(self, text: str) -> Any:
        """``SessionData`` of the session (its summary keeps the session's own id)."""
        snapshot, sid = self._reader(text)
        return snapshot.session(sid)

    def attempts(self, text: str, stage_id: str | None = None, step_id: str | None = None) -> list:
        """The session's attempts in logged order (ids are the lab's attempt numbers)."""
        snapshot, sid = self._reader(text)
        return snapshot.attempts(sid, stage_id, step_id)

    def events(self, text: str) -> list:
        """The session's events in logged order."""
        snapshot, sid = self._reader(text)
        return snapshot.events(sid)

    def signatures(self, text: str) -> list:
        """The session's sign-offs in the order they were added at the bench."""
        snapshot, sid = self._reader(text)
        return snapshot.signatures(sid)

    def latest_outcomes(self, text: str) -> dict:
        """Each step's latest outcome (``LogReading.latest_outcomes``)."""
        snapshot, sid = self._reader(text)
        return snapshot.latest_outcomes(sid)

    def summary_disagreements(self, text: str) -> list[str]:
        """Always ``[]`` in the lab: its listing columns are worked out from the copied chain
        (a bench's own edited columns are not pushed: they are not part of any record)."""
        snapshot, sid = self._reader(text)
        return snapshot.summary_disagreements(sid)

    def chain_head(self, text: str) -> str:
        """The session's last chain hash."""
        snapshot, sid = self._reader(text)
        return snapshot.chain_head(sid)

    def verify_chain(self, text: str) -> Any:
        """The session's ``ChainReport``, re-hashed on what was read from the lab."""
        snapshot, sid = self._reader(text)
        return snapshot.verify_chain(sid)

    def load_waveform(self, attempt_id: int, name: str) -> Any:
        """A waveform of an attempt read before (by its id in ``attempts``)."""
        log_id = self._attempt_log.get(attempt_id)
        if log_id is None:
            raise LabError(f"{self.path}: attempt {attempt_id} was not read from the lab")
        return self._snapshots[log_id].load_waveform(attempt_id, name)

    def check_integrity(self) -> list[str]:
        """SQLite's check of every snapshot (the server keeps its own pages)."""
        return [line for s in self._snapshots.values() for line in s.check_integrity()]


def _fetch(conn: Any, log_id: str, ids: list[str]) -> list[SessionRows]:
    """The rows of sessions ``ids`` of log ``log_id``, as ``SessionRows`` (attempt ids are the
    lab's numbers, so they are unique across every snapshot)."""
    params = {"log": log_id, "ids": ids}
    out: dict[str, SessionRows] = {}
    for values in conn.execute(
        f"SELECT {', '.join(SESSION_COLUMNS)} FROM bringup.sessions "
        "WHERE log_id = %(log)s AND id = ANY(%(ids)s) ORDER BY created_utc, pushed",
        params,
    ):
        row = dict(zip(SESSION_COLUMNS, values, strict=True))
        out[row["id"]] = SessionRows(row["id"], session=row)
    seq_of: dict[int, tuple[str, int]] = {}
    for values in conn.execute(
        f"SELECT lab_id, session_id, {', '.join(ATTEMPT_COLUMNS)} FROM bringup.attempts "
        "WHERE log_id = %(log)s AND session_id = ANY(%(ids)s) ORDER BY seq",
        params,
    ):
        row = dict(zip(("id", "session_id", *ATTEMPT_COLUMNS), values, strict=True))
        sid = row.pop("session_id")
        seq_of[row["id"]] = (sid, row["seq"])
        out[sid].attempts.append(row)
    for table, columns, into in (
        ("metrics", METRIC_COLUMNS, "metrics"),
        ("waveforms", WAVEFORM_COLUMNS, "waveforms"),
    ):
        for values in conn.execute(
            f"SELECT x.attempt, {', '.join('x.' + c for c in columns)} FROM bringup.{table} AS x "
            "JOIN bringup.attempts AS a ON a.lab_id = x.attempt "
            "WHERE a.log_id = %(log)s AND a.session_id = ANY(%(ids)s) ORDER BY x.attempt, x.name",
            params,
        ):
            sid, seq = seq_of[values[0]]
            row = dict(zip(columns, values[1:], strict=True))
            getattr(out[sid], into).setdefault(seq, []).append(row)
    _fetch_events_and_signatures(conn, params, out)
    return list(out.values())


def _fetch_events_and_signatures(conn: Any, params: dict, out: dict[str, SessionRows]) -> None:
    for values in conn.execute(
        f"SELECT session_id, {', '.join(EVENT_COLUMNS)} FROM bringup.events "
        "WHERE log_id = %(log)s AND session_id = ANY(%(ids)s) ORDER BY seq",
        params,
    ):
        out[values[0]].events.append(dict(zip(EVENT_COLUMNS, values[1:], strict=True)))
    for values in conn.execute(
        f"SELECT session_id, local_id, {', '.join(SIGNATURE_COLUMNS)} FROM bringup.signatures "
        "WHERE log_id = %(log)s AND session_id = ANY(%(ids)s) ORDER BY local_id",
        params,
    ):
        columns = ("local_id", *SIGNATURE_COLUMNS)
        out[values[0]].signatures.append(dict(zip(columns, values[1:], strict=True)))
