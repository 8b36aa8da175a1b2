"""A record whose signatures are not independent: one key signing twice, or as both roles.

``bringup sign`` refuses both (tests/e2e/test_record_bad_input.py); a record put together by
hand with such signatures must not hold either, though each signature verifies on its own.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from record_samples import Keys, Session

from bringup.cli import main
from bringup.record.build import assemble_record
from bringup.record.from_log import content_from_log, open_log
from bringup.record.keys import load_private_key
from bringup.record.signing import make_signature
from bringup.record.verify import record_bytes

STAMPS = ("2026-12-01T22:00:00.000000Z", "2026-12-01T22:05:00.000000Z")


def _record_signed_by(s: Session, tmp_path: Path, signers: list[tuple[Path, str]]) -> Path:
    """A record of ``s`` carrying a fresh signature per (key, role), written canonically."""
    with open_log(s.db) as log:
        content, _ = content_from_log(log, s.session_id)
    signatures = [
        make_signature(content, load_private_key(key), role, STAMPS[i])
        for i, (key, role) in enumerate(signers)
    ]
    path = tmp_path / "crafted.json"
    path.write_bytes(record_bytes(assemble_record(content, signatures)))
    return path


def _findings(capsys: pytest.CaptureFixture[str]) -> list[str]:
    return [line for line in capsys.readouterr().out.splitlines() if line.startswith("CHANGED:")]


def test_independent_signatures_hold(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _record_signed_by(
        session, tmp_path, [(keys.operator, "operator"), (keys.reviewer, "reviewer")]
    )
    assert main(["verify", str(path)]) == 0, capsys.readouterr().out


def test_one_key_as_operator_and_reviewer_does_not_hold(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _record_signed_by(
        session, tmp_path, [(keys.operator, "operator"), (keys.operator, "reviewer")]
    )
    capsys.readouterr()
    assert main(["verify", str(path)]) == 1
    assert _findings(capsys) == [
        "CHANGED: signature 2 (reviewer R. Okafor): signature 1 is by the same key as "
        "operator: the reviewer sign-off is not another person's"
    ]


def test_one_key_twice_in_one_role_does_not_hold(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _record_signed_by(
        session, tmp_path, [(keys.operator, "operator"), (keys.operator, "operator")]
    )
    capsys.readouterr()
    assert main(["verify", str(path)]) == 1
    assert _findings(capsys) == [
        "CHANGED: signature 2 (operator R. Okafor): signature 1 is by the same key "
        "in the same role operator"
    ]
