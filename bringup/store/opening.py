"""Opening a log file safely: refuse (and leave untouched) what is locked, corrupt or newer.

Order of checks, each before anything is written to an existing file:

1. the first 16 bytes must be SQLite's magic string (a file of garbage is never opened);
2. the schema is read (``sqlite_master``, ``user_version``, ``application_id``): a damaged
   b-tree fails here; another program's database or a newer schema is refused;
3. only then is WAL turned on (a new file gets 64 KiB pages first: waveform blobs are big) and a
   write transaction taken with ``BEGIN IMMEDIATE``: if another process holds the write lock
   past the busy timeout, the log is reported locked; pending migrations run in that
   transaction.

Read-only (:func:`connect_read_only`, for ``sessions``, ``export`` and ``verify --db``, which
never write): steps 1 and 2 only, through SQLite's ``mode=ro``; nothing is switched, migrated or
locked for writing, so a reviewer's copy on a read-only share (or a file and folder without
write permission) is served. When SQLite cannot even keep its shared-memory index beside the
file (a read-only folder), the file is read as immutable, unless a ``-wal`` file beside it holds
entries not yet in the main file: those would be missed, so that is refused in one line.

Every ``sqlite3`` error is turned into a one-line ``StoreError`` by :func:`translate`.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

from bringup.errors import StoreError
from bringup.store.schema import APPLICATION_ID, current_version, migrate

__all__ = ["default_db_path", "connect", "connect_read_only", "translate"]

_MAGIC = b"SQLite format 3\x00"
_PAGE_SIZE = 65536


def default_db_path() -> Path:
    """``bringup.db`` in the user's data directory (platformdirs), e.g. ``~/.local/share/bringup``."""
    import platformdirs

    return Path(platformdirs.user_data_dir("bringup", appauthor=False)) / "bringup.db"


def translate(error: sqlite3.Error, path: Path | str) -> StoreError:
    """A one-line ``StoreError`` for a ``sqlite3`` error on the log at ``path``."""
    text = str(error).strip().splitlines()[0] if str(error).strip() else type(error).__name__
    lowered = text.lower()
    if "locked" in lowered or "busy" in lowered:
        return StoreError(
            f"{path}: the log is locked by another process (is another bringup writing to it?); "
            "try again when it has finished"
        )
    if "not a database" in lowered or "malformed" in lowered or "corrupt" in lowered:
        return StoreError(
            f"{path}: the log is corrupt ({text}); it was left untouched: keep a copy and "
            "restore it from a backup"
        )
    if "readonly" in lowered or "unable to open" in lowered or "disk i/o" in lowered:
        return StoreError(f"{path}: cannot write the log ({text})")
    return StoreError(f"{path}: SQLite error: {text}")


def _check_magic(path: Path) -> None:
    try:
        with path.open("rb") as handle:
            head = handle.read(len(_MAGIC))
    except OSError as error:
        raise StoreError(f"{path}: cannot read the log ({error.strerror or error})") from None
    if head != _MAGIC:
        raise StoreError(
            f"{path}: not a SQLite database (corrupt, or another kind of file); it was left untouched"
        )


def connect(path: Path, *, create: bool, busy_timeout_s: float) -> sqlite3.Connection:
    """Open ``path`` as a bringup log, migrating it to the current schema; see module docstring.

    The connection is in driver autocommit mode (``isolation_level=None``: transactions are
    explicit ``BEGIN IMMEDIATE``/``COMMIT``), has ``foreign_keys=ON`` and ``synchronous=FULL``
    (a committed attempt survives a power cut, not only a killed process), and may be used
    from another thread than its creator (``check_same_thread=False``; the caller serialises
    use with a lock).
    """
    existing = path.exists() and path.stat().st_size > 0
    if not existing and not create:
        raise StoreError(f"{path}: no session log there (give --db the path of an existing log)")
    if existing:
        _check_magic(path)
    else:
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as error:
            raise StoreError(
                f"{path}: cannot create the log's folder ({error.strerror or error})"
            ) from None
    try:
        conn = sqlite3.connect(
            str(path), timeout=busy_timeout_s, isolation_level=None, check_same_thread=False
        )
    except sqlite3.Error as error:
        raise translate(error, path) from None
    try:
        _prepare(conn, path)
    except sqlite3.Error as error:
        conn.close()
        raise translate(error, path) from None
    except StoreError:
        conn.close()
        raise
    return conn


def _uri(path: Path, query: str) -> str:
    """A ``file:`` URI for ``path`` (RFC 8089; ``?`` and ``#`` in names escaped)."""
    from urllib.parse import quote

    return f"file:{quote(str(path.resolve()))}?{query}"


def connect_read_only(path: Path, *, busy_timeout_s: float) -> sqlite3.Connection:
    """Open the existing log at ``path`` for reading only; see the module docstring.

    Raises ``StoreError`` as :func:`connect` does (missing, not SQLite, another program's,
    newer schema), and for a log of an older schema (it must be upgraded by a writer first).
    """
    if not (path.exists() and path.stat().st_size > 0):
        raise StoreError(f"{path}: no session log there (give --db the path of an existing log)")
    _check_magic(path)
    try:
        conn = _open_checked(path, _uri(path, "mode=ro"), busy_timeout_s)
    except sqlite3.OperationalError as error:
        text = str(error).lower()
        if "readonly" not in text and "unable to open" not in text:
            raise translate(error, path) from None
        wal = path.with_name(path.name + "-wal")
        if wal.exists() and wal.stat().st_size > 0:
            raise StoreError(
                f"{path}: read-only, and {wal.name} beside it holds entries not yet in the main "
                "file that cannot be read without write access to the folder; copy the log "
                "with its -wal file to a writable folder, or open it once with write access"
            ) from None
        try:
            conn = _open_checked(path, _uri(path, "mode=ro&immutable=1"), busy_timeout_s)
        except sqlite3.Error as again:
            raise translate(again, path) from None
    except sqlite3.Error as error:
        raise translate(error, path) from None
    return conn


def _open_checked(path: Path, uri: str, busy_timeout_s: float) -> sqlite3.Connection:
    conn = sqlite3.connect(
        uri, uri=True, timeout=busy_timeout_s, isolation_level=None, check_same_thread=False
    )
    try:
        tables, version = _check_schema(conn, path)
        if tables == 0:
            raise StoreError(f"{path}: an empty SQLite database, not a bringup log")
        if version < current_version():
            raise StoreError(
                f"{path}: written by an older bringup (log schema {version}); open it once "
                "with write access to upgrade it, then read it read-only"
            )
    except BaseException:
        conn.close()
        raise
    return conn


def _check_schema(conn: sqlite3.Connection, path: Path) -> tuple[int, int]:
    """Refuse another program's database or a newer schema; (tables, schema version)."""
    conn.execute("PRAGMA foreign_keys = ON")
    tables = conn.execute("SELECT count(*) FROM sqlite_master").fetchone()[0]
    version = conn.execute("PRAGMA user_version").fetchone()[0]
    app_id = conn.execute("PRAGMA application_id").fetchone()[0]
    newest = current_version()
    if tables and app_id != APPLICATION_ID:
        raise StoreError(f"{path}: a SQLite database but not a bringup log; it was left untouched")
    if version > newest:
        raise StoreError(
            f"{path}: written by a newer bringup (log schema {version}; this one reads up to "
            f"{newest}); it was left untouched: upgrade bringup to open it"
        )
    return tables, version


def _prepare(conn: sqlite3.Connection, path: Path) -> None:
    tables, _ = _check_schema(conn, path)
    newest = current_version()
    if tables == 0:
        conn.execute(f"PRAGMA page_size = {_PAGE_SIZE}")
    mode = conn.execute("PRAGMA journal_mode").fetchone()[0]
    if str(mode).lower() != "wal":
        mode = conn.execute("PRAGMA journal_mode = WAL").fetchone()[0]
        if str(mode).lower() != "wal":
            raise StoreError(f"{path}: cannot switch the log to WAL mode (got {mode!r})")
    conn.execute("PRAGMA synchronous = FULL")
    conn.execute("BEGIN IMMEDIATE")
    try:
        current = conn.execute("PRAGMA user_version").fetchone()[
            0
        ]  # another process may have migrated
        if current > newest:
            raise StoreError(f"{path}: written by a newer bringup (log schema {current})")
        if current < newest:
            try:
                migrate(conn, current)
            except sqlite3.Error as error:
                raise StoreError(
                    f"{path}: upgrading the log from schema {current} to {newest} failed "
                    f"({str(error).strip()}); it was left at schema {current}"
                ) from None
        conn.execute("COMMIT")
    except BaseException:
        conn.execute("ROLLBACK")
        raise
