"""One bench, one process; one session, one writer: operating-system locks on small files.

Two ``bringup`` processes on one bench switch the supply off under each other and read each
other's waveforms; two on one session interleave its attempts. So each process takes, before it
sends anything to an instrument or writes anything to a session:

- a lock per instrument resource (``lock_resources``), in the **instrument lock folder**:
  ``$BRINGUP_LOCK_DIR`` when set (point every user of a shared bench at one folder), else
  ``bringup`` in the user's runtime folder (``$XDG_RUNTIME_DIR/bringup``, e.g.
  ``/run/user/1000/bringup``), else ``bringup-locks-<uid>`` in the temporary folder;
- a lock per session it writes (``lock_session``), in ``<log file>.locks/`` beside the log, so
  that every process writing that log sees it whoever runs it.

The lock is ``flock(LOCK_EX | LOCK_NB)`` on the file (BSD locks, Linux ``flock(2)``): the kernel
drops it when the holding process ends however it ends (``kill -9`` included), so a lock is
never left held by a dead process. The holder writes its PID, command line and start time into
the file and clears them when it lets go; a record still there when the next process takes the
lock means the last holder died without letting go, and the new holder reports it
(``Held.took_over_from``). A refused process gets ``InUse``: one line naming the resource or
session, the holder's PID and command, exit status 2. Lock files are left in place (removing a
lock file another process may be opening would let two hold "the" lock).

Resource strings are compared in a normal form (``resource_key``): case and spaces ignored,
``TCPIP0::`` = ``TCPIP::``, ``GPIB0::`` = ``GPIB::``, ``::inst0::INSTR`` = ``::INSTR``.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import fcntl
import hashlib
import json
import os
import re
import shlex
import sys
import tempfile
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path

from bringup.errors import BringupError

__all__ = [
    "InUse",
    "Held",
    "LockSet",
    "lock_dir",
    "resource_key",
    "lock_resources",
    "lock_session",
    "session_lock_dir",
]

ENV_LOCK_DIR = "BRINGUP_LOCK_DIR"


class InUse(BringupError):
    """Another live process holds the lock: one line naming what, the holder's PID and command."""


@dataclass
class Held:
    """One lock this process holds (released by :meth:`release`, or by the kernel at exit)."""

    what: str  # "supply TCPIP::10.0.0.7::5025::SOCKET", "session 261204-7kqm"
    path: Path
    fd: int
    #: the record a previous holder left when it died without letting go, or None
    took_over_from: dict | None = None

    def release(self) -> None:
        """Clear the holder record and let go (safe to call twice)."""
        if self.fd < 0:
            return
        fd, self.fd = self.fd, -1
        try:
            with contextlib.suppress(OSError):
                os.ftruncate(fd, 0)
            with contextlib.suppress(OSError):
                fcntl.flock(fd, fcntl.LOCK_UN)
        finally:
            os.close(fd)


@dataclass
class LockSet:
    """Several locks taken together; released together, in reverse order."""

    held: list[Held] = field(default_factory=list)

    @property
    def took_over(self) -> list[tuple[str, dict]]:
        """``(what, record)`` for each lock whose previous holder died without letting go."""
        return [(h.what, h.took_over_from) for h in self.held if h.took_over_from]

    def release(self) -> None:
        """Let go of every lock (safe to call twice)."""
        while self.held:
            self.held.pop().release()


def lock_dir() -> Path:
    """The instrument lock folder (see the module docstring); not created here."""
    chosen = os.environ.get(ENV_LOCK_DIR, "").strip()
    if chosen:
        return Path(chosen).expanduser()
    runtime = os.environ.get("XDG_RUNTIME_DIR", "").strip()
    if runtime and Path(runtime).is_dir():
        return Path(runtime) / "bringup"
    user = Path(f"/run/user/{os.getuid()}")
    if user.is_dir():
        return user / "bringup"
    return Path(tempfile.gettempdir()) / f"bringup-locks-{os.getuid()}"


def session_lock_dir(db_path: Path) -> Path:
    """``<log file>.locks`` beside the log."""
    return db_path.with_name(db_path.name + ".locks")


def resource_key(resource: str) -> str:
    """A VISA resource string in the normal form used to compare them (module docstring)."""
    key = re.sub(r"\s+", "", resource).upper()
    key = re.sub(r"^(TCPIP|GPIB|USB|ASRL|VXI|GPIB-VXI)0::", r"\1::", key)
    return re.sub(r"::INST0::INSTR$", "::INSTR", key)


def _file_name(text: str) -> str:
    """A safe, readable, unique file name for ``text``."""
    readable = re.sub(r"[^A-Za-z0-9.-]+", "_", text).strip("_")[:60]
    return f"{readable}-{hashlib.sha256(text.encode()).hexdigest()[:12]}.lock"


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # another user's live process
        return True
    return True


def _command_line() -> str:
    """This process as a person would type it (``bringup run ...``): one line of at most 200
    characters (``/proc/self/cmdline`` where there is one, else ``sys.argv``)."""
    try:
        argv = Path("/proc/self/cmdline").read_bytes().decode(errors="replace").split("\0")
        argv = [a for a in argv if a != ""] or list(sys.argv)
    except OSError:
        argv = list(sys.argv)
    if len(argv) >= 3 and argv[1:3] == ["-m", "bringup"]:
        argv = ["bringup", *argv[3:]]
    elif argv:
        argv[0] = Path(argv[0]).name or argv[0]
    text = " ".join(shlex.quote(a) if a.isprintable() and a.strip() == a else repr(a)
                    for a in argv)  # fmt: skip
    text = " ".join(text.split()) or f"PID {os.getpid()}"
    return text if len(text) <= 200 else text[:197] + "..."


def _read_record(fd: int) -> dict | None:
    try:
        os.lseek(fd, 0, os.SEEK_SET)
        data = os.read(fd, 4096)
    except OSError:
        return None
    if not data.strip():
        return None
    try:
        record = json.loads(data.decode("utf-8", errors="replace"))
    except ValueError:
        return None
    return record if isinstance(record, dict) and isinstance(record.get("pid"), int) else None


def _describe(record: dict | None) -> str:
    if record is None:
        return "another process (it left no record of itself)"
    pid = record["pid"]
    command = str(record.get("command") or "?")
    since = str(record.get("since_utc") or "?")
    text = f"PID {pid} ({command}, since {since})"
    if not _alive(pid):
        text += "; that PID is no longer running, so a process it started still holds the lock"
    return text


def _take(what: str, folder: Path, name: str) -> Held:
    """Take the lock on ``folder/name`` for ``what`` or raise ``InUse`` (``BringupError`` when
    the folder or file cannot be used)."""
    try:
        folder.mkdir(parents=True, exist_ok=True, mode=0o700)
    except OSError as error:
        raise BringupError(
            f"lock folder {folder}: cannot create it ({error.strerror or error}); set "
            f"{ENV_LOCK_DIR} to a folder you can write"
        ) from None
    path = folder / name
    try:
        fd = os.open(path, os.O_RDWR | os.O_CREAT | os.O_CLOEXEC, 0o644)
    except OSError as error:
        raise BringupError(
            f"lock file {path}: cannot open it ({error.strerror or error}); set "
            f"{ENV_LOCK_DIR} to a folder you can write"
        ) from None
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except BlockingIOError:
        holder = _read_record(fd)
        os.close(fd)
        raise InUse(
            f"{what} is in use by {_describe(holder)}: one process per bench and per session; "
            f"stop that one first (lock {path})"
        ) from None
    except OSError as error:
        os.close(fd)
        raise BringupError(
            f"lock file {path}: cannot lock it ({error.strerror or error})"
        ) from None
    previous = _read_record(fd)
    record = {
        "pid": os.getpid(),
        "command": _command_line(),
        "since_utc": _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "what": what,
    }
    data = (json.dumps(record) + "\n").encode()
    os.ftruncate(fd, 0)
    os.pwrite(fd, data, 0)
    took_over = previous if previous is not None and previous["pid"] != os.getpid() else None
    return Held(what, path, fd, took_over)


def lock_resources(resources: Iterable[tuple[str, str]], folder: Path | None = None) -> LockSet:
    """Lock each ``(role, resource)`` (e.g. ``("supply", "TCPIP::10.0.0.7::5025::SOCKET")``) in
    the instrument lock folder, in a fixed order (sorted by normal form, so two processes never
    each hold one and wait for the other); all or none. ``InUse`` names the first one held."""
    folder = folder if folder is not None else lock_dir()
    taken = LockSet()
    unique: dict[str, str] = {}
    for role, resource in resources:
        unique.setdefault(resource_key(resource), f"{role} {resource}")
    try:
        for key in sorted(unique):
            taken.held.append(_take(unique[key], folder, _file_name(key)))
    except BaseException:
        taken.release()
        raise
    return taken


def lock_session(db_path: Path, session_id: str) -> Held:
    """Lock ``session_id`` of the log at ``db_path`` for writing (``<log>.locks/``)."""
    return _take(f"session {session_id} of {db_path}", session_lock_dir(db_path),
                 _file_name(f"session-{session_id}"))  # fmt: skip
