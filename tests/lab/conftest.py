"""Fixtures of the lab tests: one real PostgreSQL server for the whole run (``pg_server.py``:
started from the installed binaries as the ``postgres`` user, 127.0.0.1 only, a free port,
stopped at the end), and a database of its own for each test.

No binaries (``/usr/lib/postgresql/*/bin/initdb``, or ``$BRINGUP_PG_BIN``): under CI (``CI`` set)
the lab tests FAIL, so a machine without PostgreSQL cannot pass unnoticed (``.ci/run`` installs
it); elsewhere they are skipped with a loud reason that says how to install it.
"""

from __future__ import annotations

import contextlib
import os
from collections.abc import Iterator
from dataclasses import dataclass

import pytest
from pg_server import LabServer, NoServer, create_database, start_server, stop_server


@pytest.fixture(scope="session")
def lab_server() -> Iterator[LabServer]:
    """The server for the whole run."""
    try:
        server = start_server()
    except NoServer as missing:
        if os.environ.get("CI"):
            pytest.fail(f"lab tests need PostgreSQL under CI: {missing}", pytrace=False)
        pytest.skip(
            f"LAB TESTS NOT RUN: {missing}; install PostgreSQL (`apt-get install -y "
            "postgresql`) or set BRINGUP_PG_BIN to its bin folder"
        )
    try:
        yield server
    finally:
        stop_server(server)


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
    name = create_database(lab_server)
    monkeypatch.setenv("PGPASSWORD", lab_server.bench_password)
    for variable in ("BRINGUP_LAB_URL", "PGPASSFILE", "PGSERVICE", "PGHOST", "PGUSER"):
        monkeypatch.delenv(variable, raising=False)
    env = {**os.environ, "PGPASSWORD": lab_server.bench_password}
    yield LabDatabase(lab_server.url(name), name, env, lab_server)
    with contextlib.suppress(Exception), lab_server.admin() as conn:
        conn.execute(f"DROP DATABASE IF EXISTS {name} WITH (FORCE)")
