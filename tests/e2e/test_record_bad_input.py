"""Bad input to ``verify``, ``keygen``, ``export`` and ``sign``, through the real command in a
subprocess: one line on stderr naming the file or option, exit status 2, no traceback, and
nothing already logged lost or changed (the log's bytes are compared before and after)."""

from __future__ import annotations

import hashlib
import json
import os
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

# The sample session of the record's integration tests: written through the real log.
sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "integration" / "record"))
from record_samples import Session, write_session  # noqa: E402


def _bringup(*args: str | Path) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "bringup", *map(str, args)],
        stdin=subprocess.DEVNULL,
        capture_output=True,
        text=True,
        timeout=120,
    )


def _one_line_error(result: subprocess.CompletedProcess, *names: str) -> str:
    """Assert the refusal's form; return its one line."""
    assert result.returncode == 2, (result.returncode, result.stdout, result.stderr)
    assert "Traceback" not in result.stderr, result.stderr
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("bringup: error: "), lines[0]
    for name in names:
        assert name in lines[0], (name, lines[0])
    assert result.stdout == ""
    return lines[0]


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _fingerprint(key: Path) -> str:
    text = Path(f"{key}.pub").read_text()
    return next(line for line in text.splitlines() if line.startswith("fingerprint: ")).split()[1]


@pytest.fixture
def session(tmp_path: Path) -> Session:
    """A finished sample session (every step accepted, waived or skipped) in a real log."""
    return write_session(tmp_path / "log.db")


@pytest.fixture
def exported(session: Session, tmp_path: Path) -> str:
    """The text of the session's JSON record, as ``bringup export`` writes it."""
    out = tmp_path / "record.json"
    result = _bringup("export", session.session_id, "--db", session.db, "--out", out)
    assert result.returncode == 0, result.stderr
    return out.read_text()


# --- verify: files that are not records -------------------------------------------------------


def test_verify_refuses_nesting_deeper_than_the_json_reader_goes(tmp_path: Path) -> None:
    path = tmp_path / "deep.json"
    path.write_text("[" * 100_000)
    _one_line_error(_bringup("verify", path), str(path), "nested too deeply")


def test_verify_refuses_nesting_deeper_than_any_record(tmp_path: Path) -> None:
    # 900 levels: Python's reader takes it, but no record nests so deep and every walk of it
    # (canonical form, seal, diff) would recurse that far.
    path = tmp_path / "d900.json"
    path.write_text(
        '{"schema": "bringup-record/1", "content": {"x": ' + "[" * 900 + "]" * 900 + "}}"
    )
    _one_line_error(_bringup("verify", path), str(path), "200 levels")


def test_verify_refuses_a_5000_digit_integer(exported: str, tmp_path: Path) -> None:
    path = tmp_path / "bigint.json"
    path.write_text(exported.replace('"value":11.58', '"value":' + "7" * 5000, 1))
    assert path.read_text() != exported
    line = _one_line_error(_bringup("verify", path), f"{path}:1", "5000 digits")
    assert len(line) < 300  # the digits themselves are not echoed


def test_verify_refuses_an_integer_beyond_2_53(exported: str, tmp_path: Path) -> None:
    path = tmp_path / "big.json"
    path.write_text(exported.replace('"value":11.58', '"value":9999999999999999', 1))
    assert path.read_text() != exported
    _one_line_error(_bringup("verify", path), str(path), "beyond 2**53")


@pytest.mark.parametrize(("token", "said"), [("NaN", "NaN is not a JSON value"),
                                             ("-Infinity", "-Infinity is not a JSON value"),
                                             ("1e999", "beyond the range of a double")])  # fmt: skip
def test_verify_refuses_a_number_json_has_no_form_for(
    exported: str, tmp_path: Path, token: str, said: str
) -> None:
    path = tmp_path / "nan.json"
    path.write_text(exported.replace('"value":11.58', f'"value":{token}', 1))
    assert path.read_text() != exported
    _one_line_error(_bringup("verify", path), f"{path}:1", said)


def test_the_unedited_record_is_read_as_a_record(exported: str, tmp_path: Path) -> None:
    # The control for the refusals above: the same file untouched is a record (unsigned: 1).
    path = tmp_path / "plain.json"
    path.write_text(exported)
    result = _bringup("verify", path)
    assert result.returncode == 1, result.stderr
    assert "the record carries no signature" in result.stdout and result.stderr == ""


# --- keygen: where a key cannot be written ----------------------------------------------------


def test_keygen_into_a_directory_says_it_is_a_directory(tmp_path: Path) -> None:
    folder = tmp_path / "keys"
    folder.mkdir()
    _one_line_error(
        _bringup("keygen", "--name", "T", "--out", folder), f"--out {folder}", "is a directory"
    )
    assert list(folder.iterdir()) == []


def test_keygen_under_a_regular_file(tmp_path: Path) -> None:
    afile = tmp_path / "afile"
    afile.write_text("not a folder\n")
    out = afile / "k.key"
    _one_line_error(
        _bringup("keygen", "--name", "T", "--out", out), f"--out {out}", "is not a directory"
    )
    assert afile.read_text() == "not a folder\n"


def test_keygen_write_failure_is_one_line_naming_the_path(tmp_path: Path) -> None:
    # A file name longer than any file system takes (255 bytes): the OS refuses the write
    # itself (ENAMETOOLONG), which no permission or root privilege gets around.
    out = tmp_path / ("k" * 300 + ".key")
    _one_line_error(
        _bringup("keygen", "--name", "T", "--out", out), f"--out {out}", "cannot write the key"
    )
    assert list(tmp_path.iterdir()) == []


@pytest.mark.skipif(
    hasattr(os, "geteuid") and os.geteuid() == 0,
    reason="root writes into a mode 0500 folder regardless; the ENAMETOOLONG case covers it",
)
def test_keygen_into_a_read_only_folder(tmp_path: Path) -> None:
    folder = tmp_path / "ro"
    folder.mkdir()
    folder.chmod(0o500)
    try:
        out = folder / "k.key"
        _one_line_error(
            _bringup("keygen", "--name", "T", "--out", out), f"--out {out}", "cannot write the key"
        )
        assert list(folder.iterdir()) == []
    finally:
        folder.chmod(0o700)


# --- export and sign: a log changed after logging ---------------------------------------------


def _byte_edit_metric(db: Path) -> None:
    """Change one reading (0.121 V of droop to 0.091 V) in the file's bytes: no SQL, no trigger."""
    data = db.read_bytes()
    at = data.find(b'"value":0.121')
    assert at >= 0
    db.write_bytes(data[:at] + b'"value":0.091' + data[at + len(b'"value":0.121') :])


def test_export_refuses_a_log_whose_chain_is_broken(session: Session, tmp_path: Path) -> None:
    _byte_edit_metric(session.db)
    before = _digest(session.db)
    out = tmp_path / "record.json"
    for fmt in ("json", "html"):
        result = _bringup("export", session.session_id, "--db", session.db,
                          "--format", fmt, "--out", out)  # fmt: skip
        line = _one_line_error(result, str(session.db), "export refused")
        assert "attempts row" in line and "'metrics'" in line, line
    assert not out.exists() and not out.with_name("record.json.part").exists()
    assert "does not match its hash" in line
    assert _digest(session.db) == before


def test_export_to_stdout_refuses_too(session: Session) -> None:
    _byte_edit_metric(session.db)
    result = _bringup("export", session.session_id, "--db", session.db, "--out", "-")
    _one_line_error(result, str(session.db), "export refused")


def test_sign_refuses_a_log_whose_chain_is_broken(session: Session, tmp_path: Path) -> None:
    key = tmp_path / "op.key"
    assert _bringup("keygen", "--name", "R. Okafor", "--out", key).returncode == 0
    _byte_edit_metric(session.db)
    before = _digest(session.db)
    result = _bringup("sign", session.session_id, "--db", session.db, "--key", key,
                      "--role", "operator")  # fmt: skip
    _one_line_error(result, str(session.db), "sign-off refused")
    assert _digest(session.db) == before  # no signature row was added


# --- sign: one key, one role, one person ------------------------------------------------------


def _sign(s: Session, key: Path, role: str) -> subprocess.CompletedProcess:
    return _bringup("sign", s.session_id, "--db", s.db, "--key", key, "--role", role)


def _signature_rows(db: Path) -> list[tuple[str, str]]:
    conn = sqlite3.connect(db)
    try:
        return conn.execute("SELECT role, fingerprint FROM signatures ORDER BY id").fetchall()
    finally:
        conn.close()


def test_one_key_signs_one_role_once_and_never_both(session: Session, tmp_path: Path) -> None:
    op, other, rv = tmp_path / "op.key", tmp_path / "op2.key", tmp_path / "rv.key"
    for name, key in (("R. Okafor", op), ("r.  okafor", other), ("M. Lindqvist", rv)):
        assert _bringup("keygen", "--name", name, "--out", key).returncode == 0
    fp = _fingerprint(op)
    assert _sign(session, op, "operator").returncode == 0
    before = _digest(session.db)

    again = _one_line_error(_sign(session, op, "operator"), f"--key {fp}", "already signed")
    assert "as operator" in again
    both = _one_line_error(_sign(session, op, "reviewer"), f"--key {fp}", "another person")
    assert "signed session" in both and "as operator" in both
    # the same person with a second key is still not an independent reviewer
    same = _one_line_error(_sign(session, other, "reviewer"), f"--key {_fingerprint(other)}", fp)
    assert "another person" in same
    assert _digest(session.db) == before and _signature_rows(session.db) == [("operator", fp)]

    assert _sign(session, rv, "reviewer").returncode == 0
    assert _signature_rows(session.db) == [("operator", fp), ("reviewer", _fingerprint(rv))]
    out = tmp_path / "record.json"
    assert _bringup("export", session.session_id, "--db", session.db, "--out", out).returncode == 0
    record = json.loads(out.read_text())
    assert [s["role"] for s in record["signatures"]] == ["operator", "reviewer"]
    checked = _bringup(
        "verify", out, "--db", session.db, "--key", f"{op}.pub", "--key", f"{rv}.pub"
    )
    assert checked.returncode == 0, checked.stdout


def test_reviewer_first_then_the_same_key_as_operator(session: Session, tmp_path: Path) -> None:
    rv = tmp_path / "rv.key"
    assert _bringup("keygen", "--name", "M. Lindqvist", "--out", rv).returncode == 0
    assert _sign(session, rv, "reviewer").returncode == 0
    line = _one_line_error(_sign(session, rv, "operator"), f"--key {_fingerprint(rv)}")
    assert "as reviewer" in line and "another person" in line
    assert len(_signature_rows(session.db)) == 1
