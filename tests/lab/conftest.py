"""A real PostgreSQL server for the lab tests: started once per test run from the installed
binaries, each test in a database of its own.

The server runs from a temporary folder owned by the ``postgres`` user (``initdb`` refuses to
run as root, and these tests run as root on CI), listens on 127.0.0.1 only at a free port, and
is stopped at the end of the run (``pg_ctl stop -m fast``). The superuser logs in without a
password over the folder's unix socket only; over TCP every role needs its password
(SCRAM-SHA-256), so a wrong password is really refused.

No binaries (``/usr/lib/postgresql/*/bin/initdb``, or ``$BRINGUP_PG_BIN``): under CI (``CI`` set)
the lab tests FAIL, so a machine without PostgreSQL cannot pass unnoticed (``.ci/run`` installs
it); elsewhere they are skipped with a reason that says how to install it.
"""

from __future__ import annotations

import contextlib
import glob
import os
import secrets
import shutil
import socket
import subprocess
import tempfile
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import pytest

BENCH_ROLE = "bench"


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


def _missing(reason: str) -> None:
    if os.environ.get("CI"):
        pytest.fail(f"lab tests need PostgreSQL under CI: {reason}", pytrace=False)
    pytest.skip(
        f"LAB TESTS NOT RUN: {reason}; install PostgreSQL (`apt-get install -y postgresql`) "
        "or set BRINGUP_PG_BIN to its bin folder"
    )


@pytest.fixture(scope="session")
def lab_server() -> Iterator[LabServer]:
    """Start the server for the whole run; stop it and remove its folder at the end."""
    binaries = _binaries()
    if binaries is None:
        _missing("no /usr/lib/postgresql/*/bin/initdb on this machine")
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
        _missing(f"initdb failed: {init.stderr.strip().splitlines()[-1:]}")
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
        pytest.fail(f"PostgreSQL did not start: {start.stderr.strip()} {log}", pytrace=False)
    server = LabServer("127.0.0.1", port, folder, password, binaries)
    try:
        with server.admin() as conn:
            conn.execute(f"CREATE ROLE {BENCH_ROLE} LOGIN PASSWORD '{password}'")
        yield server
    finally:
        _as_postgres(str(binaries / "pg_ctl"), "-D", data, "-m", "fast", "-w", "stop", cwd=folder)
        shutil.rmtree(folder, ignore_errors=True)


@dataclass(frozen=True)
class LabDatabase:
    """One test's database: its URL (no password), its name and an env for the processes a
    test starts (the bench role's password in ``PGPASSWORD``, as a lab would set it)."""

    url: str
    name: str
    env: dict[str, str]
    server: LabServer


@pytest.fixture
def lab_db(lab_server: LabServer, monkeypatch: pytest.MonkeyPatch) -> Iterator[LabDatabase]:
    """A fresh database owned by the bench role; ``PGPASSWORD`` set in this process too."""
    name = f"lab_{secrets.token_hex(6)}"
    with lab_server.admin() as conn:
        conn.execute(f"CREATE DATABASE {name} OWNER {BENCH_ROLE}")
    monkeypatch.setenv("PGPASSWORD", lab_server.bench_password)
    for variable in ("BRINGUP_LAB_URL", "PGPASSFILE", "PGSERVICE", "PGHOST", "PGUSER"):
        monkeypatch.delenv(variable, raising=False)
    env = {**os.environ, "PGPASSWORD": lab_server.bench_password}
    yield LabDatabase(lab_server.url(name), name, env, lab_server)
    with contextlib.suppress(Exception), lab_server.admin() as conn:
        conn.execute(f"DROP DATABASE IF EXISTS {name} WITH (FORCE)")
