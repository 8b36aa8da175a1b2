"""The sessions row cannot tell a different story than the chain.

The ``sessions`` row's state, verdict and stage-verdict columns are outside the hash chain, and
no trigger stops an ``UPDATE`` of them (the row must take new values as a session goes on). So
they are never believed: ``bringup sessions`` and ``resume`` take them from the chained entries,
the log refuses new attempts on a session whose chain ends with a finish, and ``verify --db``
names every column that disagrees with the chain. Each case edits a real log written by a real
headless run on the simulated bench with the ``sqlite3`` module, as anyone with the file can.
"""

from __future__ import annotations

import json
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from bringup.store import SessionLog, StoreError

STAGES = ["power-rails", "gate-overdrive", "edge-speed", "droop-max-on-time", "thermal"]


def _bringup(*args: str | Path, timeout: float = 240) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "bringup", *map(str, args)],
                          stdin=subprocess.DEVNULL, capture_output=True, text=True,
                          timeout=timeout)  # fmt: skip


def _run(db: Path, scenario: str) -> dict:
    done = _bringup("run", "--sim", "--auto", "--json", "--scenario", scenario,
                    "--serial", "DHS24-0031", "--operator", "R. Okafor", "--db", db)  # fmt: skip
    assert done.returncode in (0, 1), done.stderr
    return json.loads(done.stdout)


def _edit(db: Path, sql: str, params: tuple = ()) -> None:
    """What a person with the file and any SQLite tool can do: every trigger stays in place."""
    conn = sqlite3.connect(db)
    try:
        with conn:
            assert conn.execute(sql, params).rowcount == 1
    finally:
        conn.close()


def _copy(db: Path, to: Path) -> Path:
    """A consistent copy of a WAL log (SQLite's online backup), so each test edits its own."""
    src, dst = sqlite3.connect(db), sqlite3.connect(to)
    try:
        src.backup(dst)
    finally:
        src.close()
        dst.close()
    return to


def _listed(db: Path, session: str) -> dict:
    done = _bringup("sessions", "--json", "--db", db)
    assert done.returncode == 0, done.stderr
    return next(row for row in json.loads(done.stdout) if row["id"] == session)


@pytest.fixture(scope="module")
def failed(tmp_path_factory) -> tuple[Path, str]:
    """A session whose rails sag: it fails its first stage and the rest are not run."""
    db = tmp_path_factory.mktemp("failed") / "log.db"
    summary = _run(db, "sagging-rail")
    assert summary["verdict"] == "fail"
    return db, summary["session"]


@pytest.fixture(scope="module")
def signed(tmp_path_factory) -> tuple[Path, str, Path]:
    """A healthy session, finished, signed by its operator, and its exported JSON record."""
    folder = tmp_path_factory.mktemp("signed")
    db = folder / "log.db"
    summary = _run(db, "healthy")
    assert summary["verdict"] == "pass"
    key = folder / "okafor.key"
    for args in (("keygen", "--name", "R. Okafor", "--out", key),
                 ("sign", summary["session"], "--key", key, "--role", "operator", "--db", db),
                 ("export", summary["session"], "--format", "json", "--out", folder / "r.json",
                  "--db", db)):  # fmt: skip
        done = _bringup(*args)
        assert done.returncode == 0, (args, done.stderr)
    return db, summary["session"], folder / "r.json"


def test_a_failed_session_edited_to_pass_is_still_listed_as_failed(failed, tmp_path):
    db, session = failed
    db = _copy(db, tmp_path / "log.db")
    assert _listed(db, session)["verdict"] == "fail"
    passes = json.dumps({stage: "pass" for stage in STAGES})
    _edit(db, "UPDATE sessions SET verdict = 'pass', stage_verdicts_json = ?, state = 'open' "
              "WHERE id = ?", (passes, session))  # fmt: skip
    row = _listed(db, session)
    assert row["verdict"] == "fail"
    assert any("verdict: stored 'pass', the chain says 'fail'" in a for a in row["altered"]), row
    table = _bringup("sessions", "--db", db)
    line = next(t for t in table.stdout.splitlines() if t.startswith(session))
    assert " fail " in line and "edited" in line, line
    with SessionLog.open(db, create=False) as log:
        summary = log.session(session).summary
        assert summary.verdict == "fail"
        assert summary.stage_verdicts["power-rails"] == "fail"
        assert summary.stage_verdicts["thermal"] == "not-run"
        assert log.verify_chain(session).ok  # the chain itself was not touched
        found = log.summary_disagreements(session)
    assert any("verdict" in f for f in found) and any("stage verdicts" in f for f in found)


def test_a_finished_signed_session_set_back_to_open_is_not_resumable(signed, tmp_path):
    db, session, record = signed
    db = _copy(db, tmp_path / "log.db")
    done = _bringup("verify", record, "--db", db)
    assert done.returncode == 0, done.stdout + done.stderr
    _edit(db, "UPDATE sessions SET state = 'open', finished_utc = NULL WHERE id = ?", (session,))
    done = _bringup("resume", session, "--sim", "--auto", "--db", db)
    assert done.returncode == 2, (done.stdout, done.stderr)
    err = done.stderr.strip()
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    assert f"session {session} is finished (pass): nothing to resume" in err, err
    # the most recent unfinished session is not this one either
    done = _bringup("resume", "--sim", "--auto", "--db", db)
    assert done.returncode == 2 and "no unfinished session to resume" in done.stderr, done.stderr
    with SessionLog.open(db, create=False) as log:
        assert log.sessions()[0].state == "finished"
        attempts = len(log.attempts(session))
        with pytest.raises(StoreError, match="is finished"):
            log.record_event(session, kind="abort", operator="R. Okafor")
        assert len(log.attempts(session)) == attempts
        assert [e.kind for e in log.events(session)][-1] == "finish"  # no resume was logged


def test_verify_names_an_edited_summary_against_an_earlier_signed_record(signed, tmp_path):
    db, session, record = signed
    copy = _copy(db, tmp_path / "log.db")
    _edit(copy, "UPDATE sessions SET state = 'open', verdict = 'fail' WHERE id = ?", (session,))
    done = _bringup("verify", record, "--db", copy)
    assert done.returncode == 1, done.stdout + done.stderr
    assert "chain intact" not in done.stdout
    assert (
        f"log summary: session {session}: summary column state: stored 'open', the chain says 'finished'"
        in done.stdout
    )
    assert "summary column verdict: stored 'fail', the chain says 'pass'" in done.stdout
