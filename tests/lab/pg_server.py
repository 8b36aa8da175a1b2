"""A throwaway PostgreSQL server from the installed binaries, for the lab tests and
``benchmarks/bench_push.py``: a temporary folder owned by the ``postgres`` user (``initdb``
refuses root), 127.0.0.1 only at a free port, the superuser on the folder's unix socket only,
the ``bench`` role by password (SCRAM-SHA-256) over TCP."""

from __future__ import annotations

import glob
import os
import secrets
import shutil
import socket
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path

BENCH_ROLE = "bench"


class NoServer(Exception):
    """No PostgreSQL binaries here, or initdb failed (the message says which)."""


def _binaries() -> Path | None:
    given = os.environ.get("BRINGUP_PG_BIN")
    if given and (Path(given) / "initdb").exists():
        return Path(given)
    found = sorted(glob.glob("/usr/lib/postgresql/*/bin/initdb"), key=_version_key)
    return Path(found[-1]).parent if found else None


def _version_key(path: str) -> tuple[int, ...]:
    version = Path(path).parts[-3]
    return tuple(int(p) for p in version.split(".") if p.isdigit())


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


@dataclass(frozen=True)
class LabServer:
    """The running server: where it listens, the folder of its unix socket (for the
    superuser) and the bench role's password (for everything a test runs as a bench)."""

    host: str
    port: int
    socket_dir: str
    bench_password: str
    bin: Path

    def admin(self, dbname: str = "postgres"):
        """A superuser connection (autocommit) over the unix socket."""
        import psycopg

        return psycopg.connect(
            host=self.socket_dir, port=self.port, user="postgres", dbname=dbname, autocommit=True
        )

    def url(self, dbname: str, user: str = BENCH_ROLE) -> str:
        """The database's URL over TCP, without a password."""
        return f"postgresql://{user}@{self.host}:{self.port}/{dbname}"


def _as_postgres(*command: str, cwd: str) -> subprocess.CompletedProcess:
    runner = [] if os.geteuid() != 0 else ["runuser", "-u", "postgres", "--"]
    return subprocess.run(
        [*runner, *command], cwd=cwd, capture_output=True, text=True, check=False, timeout=120
    )


def start_server() -> LabServer:
    """Start a server; ``NoServer`` when there are no binaries or initdb fails. Stop it with
    :func:`stop_server`."""
    binaries = _binaries()
    if binaries is None:
        raise NoServer("no /usr/lib/postgresql/*/bin/initdb on this machine")
    folder = tempfile.mkdtemp(prefix="bringup-pg-")
    if os.geteuid() == 0:
        shutil.chown(folder, "postgres", "postgres")
    data, port = os.path.join(folder, "data"), _free_port()
    password = secrets.token_urlsafe(12)
    pwfile = os.path.join(folder, "pw")
    with open(pwfile, "w") as handle:
        handle.write(secrets.token_urlsafe(12) + "\n")  # the superuser's: never used over TCP
    if os.geteuid() == 0:
        shutil.chown(pwfile, "postgres", "postgres")
    init = _as_postgres(
        str(binaries / "initdb"), "-D", data, "-U", "postgres", "-E", "UTF8", "--no-sync",
        "--auth-local=trust", "--auth-host=scram-sha-256", f"--pwfile={pwfile}", cwd=folder,
    )  # fmt: skip
    if init.returncode != 0:
        shutil.rmtree(folder, ignore_errors=True)
        raise NoServer(f"initdb failed: {init.stderr.strip().splitlines()[-1:]}")
    options = (
        f"-c listen_addresses=127.0.0.1 -c port={port} -c unix_socket_directories={folder} "
        "-c fsync=off -c synchronous_commit=off -c full_page_writes=off -c max_connections=50"
    )
    start = _as_postgres(
        str(binaries / "pg_ctl"), "-D", data, "-o", options, "-l", os.path.join(folder, "log"),
        "-w", "-t", "60", "start", cwd=folder,
    )  # fmt: skip
    if start.returncode != 0:
        log = Path(folder, "log").read_text(errors="replace")[-400:]
        raise RuntimeError(f"PostgreSQL did not start: {start.stderr.strip()} {log}")
    server = LabServer("127.0.0.1", port, folder, password, binaries)
    try:
        with server.admin() as conn:
            conn.execute(f"CREATE ROLE {BENCH_ROLE} LOGIN PASSWORD '{password}'")
    except BaseException:
        stop_server(server)
        raise
    return server


def stop_server(server: LabServer) -> None:
    """Stop the server (fast shutdown) and remove its folder."""
    data = os.path.join(server.socket_dir, "data")
    _as_postgres(str(server.bin / "pg_ctl"), "-D", data, "-m", "fast", "-w", "stop",
                 cwd=server.socket_dir)  # fmt: skip
    shutil.rmtree(server.socket_dir, ignore_errors=True)


def create_database(server: LabServer) -> str:
    """A fresh database owned by the bench role; its name."""
    name = f"lab_{secrets.token_hex(6)}"
    with server.admin() as conn:
        conn.execute(f"CREATE DATABASE {name} OWNER {BENCH_ROLE}")
    return name
