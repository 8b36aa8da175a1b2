"""Records edited into shapes bringup never writes (found by mutating a signed record's fields):
``verify`` reports findings with exit status 1 and never fails with a Python error."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from record_samples import Keys, Session

from bringup.cli import main
from bringup.record.rfc8785 import canonical_bytes


def _signed_record(s: Session, keys: Keys, tmp_path: Path) -> dict:
    for key, role in ((keys.operator, "operator"), (keys.reviewer, "reviewer")):
        assert (
            main(["sign", s.session_id, "--db", str(s.db), "--key", str(key), "--role", role]) == 0
        )
    out = tmp_path / "record.json"
    assert main(["export", s.session_id, "--db", str(s.db), "--out", str(out)]) == 0
    return json.loads(out.read_text())


def _write(tmp_path: Path, record: dict) -> Path:
    path = tmp_path / "edited.json"
    path.write_bytes(canonical_bytes(record) + b"\n")
    return path


def _changed(capsys: pytest.CaptureFixture[str]) -> list[str]:
    return [line for line in capsys.readouterr().out.splitlines() if line.startswith("CHANGED:")]


def test_a_seal_order_that_is_not_a_list(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    record = _signed_record(session, keys, tmp_path)
    order = record["seal"]["order"]
    listed = next(k for k, v in order.items() if isinstance(v, list) and len(v) > 1)
    order[listed] = 1
    record["content"]["stages"].reverse()  # a real change for the seal to be consulted on
    capsys.readouterr()
    assert main(["verify", str(_write(tmp_path, record))]) == 1
    found = _changed(capsys)
    assert any("stages: reordered" in f for f in found), found
    assert any("signature 1 (operator R. Okafor): does not verify" in f for f in found), found


def test_a_signature_that_is_an_object_against_the_log(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    record = _signed_record(session, keys, tmp_path)
    record["signatures"][1]["signature"] = {"a": []}
    capsys.readouterr()
    assert main(["verify", str(_write(tmp_path, record)), "--db", str(session.db)]) == 1
    found = _changed(capsys)
    assert "CHANGED: signature 2 (reviewer M. Lindqvist): lacks signature" in found
    assert "CHANGED: signatures: signature 2 is not in the log" in found
    assert any("the log holds a sign-off by reviewer M. Lindqvist" in f for f in found), found


def test_a_session_that_is_not_an_object_against_the_log(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    record = _signed_record(session, keys, tmp_path)
    record["content"]["session"] = ["x"]
    record["content"]["log"] = "gone"
    capsys.readouterr()
    assert main(["verify", str(_write(tmp_path, record)), "--db", str(session.db)]) == 1
    found = _changed(capsys)
    assert "CHANGED: log: the record names no session id" in found
