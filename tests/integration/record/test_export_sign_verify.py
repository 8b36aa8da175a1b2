"""Export, sign and verify a real session log end to end through the command line."""

from __future__ import annotations

import json
import os
import sqlite3
import stat
from pathlib import Path

import pytest
from record_samples import IDN, Keys, Session, write_session

from bringup.cli import main
from bringup.record.rfc8785 import canonical_bytes
from bringup.store.log import SessionLog


def _export(s: Session, out: Path, fmt: str = "json") -> Path:
    assert (
        main(["export", s.session_id, "--db", str(s.db), "--format", fmt, "--out", str(out)]) == 0
    )
    return out


def _sign(s: Session, key: Path, role: str) -> int:
    return main(["sign", s.session_id, "--db", str(s.db), "--key", str(key), "--role", role])


def _verify(record: Path, *extra: str) -> int:
    return main(["verify", str(record), *extra])


def _signed(s: Session, keys: Keys, tmp_path: Path) -> Path:
    assert _sign(s, keys.operator, "operator") == 0
    assert _sign(s, keys.reviewer, "reviewer") == 0
    return _export(s, tmp_path / "record.json")


def _rewrite(path: Path, record: dict) -> None:
    """Write ``record`` back in canonical form: an editor who knows the format."""
    path.write_bytes(canonical_bytes(record) + b"\n")


def _keys_args(keys: Keys) -> list[str]:
    return ["--key", f"{keys.operator}.pub", "--key", f"{keys.reviewer}.pub"]


def _changed(capsys: pytest.CaptureFixture[str]) -> list[str]:
    return [line for line in capsys.readouterr().out.splitlines() if line.startswith("CHANGED:")]


def test_record_holds_what_was_logged(session: Session, tmp_path: Path) -> None:
    record = json.loads(_export(session, tmp_path / "r.json").read_text())
    assert record["schema"] == "bringup-record/3"
    assert record["content"]["session"]["rehearsal"] is False  # a bench of real instruments
    c = record["content"]
    assert c["session"]["serial"] == "DHS24-0117"
    assert (
        c["session"]["started"]["utc"].endswith("Z")
        and c["session"]["started"]["offset"] == "+01:00"
    )
    scope = next(i for i in c["bench"]["instruments"] if i["id"] == "scope")
    assert scope["idn"] == IDN["scope"] and scope["calibration_due"] == "2027-03-31"
    assert {ch["net"]: ch["probe_ratio"] for ch in scope["channels"]} == {
        "vgs": 10,
        "switch": 10,
        "vdrv": 1,
    }
    stages = {st["id"]: {sp["id"]: sp for sp in st["steps"]} for st in c["stages"]}
    gate = stages["gate-overdrive"]["vgs-on"]
    assert [a["outcome"] for a in gate["attempts"]] == ["fail", "pass"]  # the retake is kept
    assert gate["attempts"][1]["metrics"]["vgs_on"] == {"unit": "V", "value": 11.58}
    rise = stages["edge-speed"]["switch-rise"]
    # 206 ns against max 200 ns with U = 10 ns: in [TL, TL + w] -> conditional fail
    # [read: ILAC-G8:09/2019 §4.2, REFERENCES §6]
    assert rise["attempts"][0]["verdicts"][0]["outcome"] == "conditional-fail"
    assert rise["status"] == "waived" and rise["events"][0]["by"] == "M. Lindqvist"
    assert stages["power-rails"]["logic-ripple"]["status"] == "skipped"
    nan = stages["power-rails"]["vdrv"]["attempts"][0]["metrics"]["vdrv_overshoot"]
    assert nan["value"] is None and nan["reason"]
    with SessionLog.open(session.db, create=False) as log:
        assert c["log"]["chain_head"] == log.chain_head(session.session_id)
    # the content says what was judged; accepting it is a reviewer's signature (issue 13)
    assert c["summary"]["overall"] == "passed-with-exceptions"
    assert c["summary"]["open_items"] == []
    wave = gate["attempts"][1]["waveforms"][0]
    assert wave["dtype"] == "int16" and wave["y_increment"] == 1e-3 and wave["points"] == 4000


def test_signed_record_verifies_and_reexports_byte_identical(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    first = _signed(session, keys, tmp_path)
    again = _export(session, tmp_path / "again.json")
    assert first.read_bytes() == again.read_bytes()
    record = json.loads(first.read_text())
    assert [s["role"] for s in record["signatures"]] == ["operator", "reviewer"]
    assert record["signatures"][1]["key_fingerprint"].startswith("SHA256:")
    capsys.readouterr()
    assert _verify(first, "--db", str(session.db), *_keys_args(keys)) == 0
    assert "holds" in capsys.readouterr().out


def test_one_digit_of_one_reading_is_detected_and_named(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _signed(session, keys, tmp_path)
    text = path.read_text()
    reading = '"metrics":{"vgs_on":{"unit":"V","value":11.58}}'
    assert text.count(reading) == 1
    path.write_text(text.replace(reading, reading.replace("11.58", "11.68")))
    capsys.readouterr()
    assert _verify(path, *_keys_args(keys)) == 1
    found = _changed(capsys)
    assert any("step vgs-on / attempt 2 / metrics.vgs_on" in f for f in found), found
    assert sum("does not verify" in f for f in found) == 2  # both signatures fail
    # With the log: the field and both values are named.
    assert _verify(path, "--db", str(session.db)) == 1
    found = _changed(capsys)
    assert any("metrics.vgs_on.value: 11.68 in the record, 11.58 in the log" in f for f in found)


def test_removed_attempt_is_named(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _signed(session, keys, tmp_path)
    record = json.loads(path.read_text())
    gate = record["content"]["stages"][1]["steps"][0]
    del gate["attempts"][0]  # hide the failed first try
    _rewrite(path, record)
    capsys.readouterr()
    assert _verify(path) == 1
    found = _changed(capsys)
    assert any("stage gate-overdrive / step vgs-on / attempt 1: removed" in f for f in found), found


def test_reordered_steps_are_named(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _signed(session, keys, tmp_path)
    record = json.loads(path.read_text())
    steps = record["content"]["stages"][0]["steps"]
    steps[0], steps[1] = steps[1], steps[0]
    _rewrite(path, record)
    capsys.readouterr()
    assert _verify(path) == 1
    found = _changed(capsys)
    assert any(
        "stage power-rails / steps: reordered to vdrv, bus, logic-ripple" in f for f in found
    ), found


def test_swapped_public_key_is_named(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _signed(session, keys, tmp_path)
    record = json.loads(path.read_text())
    op, rv = record["signatures"]
    # Claim the reviewer's sign-off was made with the operator's key (fingerprint kept coherent).
    rv["public_key"], rv["key_fingerprint"] = op["public_key"], op["key_fingerprint"]
    _rewrite(path, record)
    capsys.readouterr()
    assert _verify(path, *_keys_args(keys)) == 1
    found = _changed(capsys)
    assert any(
        f.startswith("CHANGED: signature 2 (reviewer M. Lindqvist): does not verify") for f in found
    )
    assert any("the key belongs to 'R. Okafor', not to 'M. Lindqvist'" in f for f in found), found
    assert not any("signature 1" in f for f in found)  # the untouched one still holds


def test_untrusted_key_is_named(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _signed(session, keys, tmp_path)
    capsys.readouterr()
    assert _verify(path, "--key", f"{keys.operator}.pub") == 1
    found = _changed(capsys)
    assert found == [
        "CHANGED: signature 2 (reviewer M. Lindqvist): "
        "signed with a key that is not among the given --key files"
    ]


def test_log_row_edited_after_signing_is_named(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _signed(session, keys, tmp_path)
    # Someone with plain sqlite3 lifts the append-only guard and improves a reading.
    conn = sqlite3.connect(session.db)
    conn.execute("DROP TRIGGER attempts_no_update")
    n = conn.execute(
        "UPDATE attempts SET metrics_json = replace(metrics_json, '0.121', '0.091') "
        "WHERE step_id = 'droop'"
    ).rowcount
    conn.commit()
    conn.close()
    assert n == 1
    capsys.readouterr()
    assert _verify(path, "--db", str(session.db)) == 1
    found = _changed(capsys)
    assert any(f.startswith("CHANGED: log chain:") and "metrics" in f for f in found), found
    assert any(
        "step droop / attempt 1 / metrics.vgs_droop.value: 0.121 in the record, 0.091 in the log"
        in f
        for f in found
    ), found
    # The JSON alone still holds: the change is in the log, not in the record.
    assert _verify(path) == 0


def test_entry_removed_from_log_after_signing_is_named(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _signed(session, keys, tmp_path)
    conn = sqlite3.connect(session.db)
    conn.execute("DROP TRIGGER events_no_delete")
    conn.execute("DELETE FROM events WHERE kind = 'note'")  # the last entry of the chain
    conn.commit()
    conn.close()
    capsys.readouterr()
    assert _verify(path, "--db", str(session.db)) == 1
    found = _changed(capsys)
    assert any("the record's chain head is" in f for f in found), found
    assert any("event" in f and "in the record only" in f for f in found), found


def test_reformatted_file_is_reported(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _signed(session, keys, tmp_path)
    path.write_text(json.dumps(json.loads(path.read_text()), indent=2))
    capsys.readouterr()
    assert _verify(path) == 1
    assert _changed(capsys) == [
        "CHANGED: form: the file is not in canonical form (re-serialised or edited by hand)"
    ]


def test_sign_off_refused_while_steps_are_unfinished(
    tmp_path: Path, keys: Keys, capsys: pytest.CaptureFixture[str]
) -> None:
    s = write_session(tmp_path / "half.db", complete=False)
    capsys.readouterr()
    assert _sign(s, keys.operator, "operator") == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "sign-off refused" in err
    # The first gate try failed and was never retaken; later stages never started.
    assert "gate-overdrive/vgs-on: failed (fail) without a waiver" in err
    assert "thermal-soak/soak: unfinished (not started)" in err
    with SessionLog.open(s.db, create=False) as log:
        assert log.signatures(s.session_id) == []
    # The draft record tells the same: the failure first, then every open item.
    summary = json.loads(_export(s, tmp_path / "draft.json").read_text())["content"]["summary"]
    assert summary["overall"] == "rejected"
    assert all(item in err for item in summary["open_items"]) and len(summary["open_items"]) == 4


def test_sign_off_refused_for_a_failure_without_waiver(
    tmp_path: Path, keys: Keys, capsys: pytest.CaptureFixture[str]
) -> None:
    s = write_session(tmp_path / "nowaive.db", waive=False)
    capsys.readouterr()
    assert _sign(s, keys.reviewer, "reviewer") == 2
    err = capsys.readouterr().err
    assert "1 open: edge-speed/switch-rise: failed (conditional-fail) without a waiver" in err


def test_keygen_writes_private_key_owner_only_and_refuses_overwrite(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    key = tmp_path / "ana.key"
    assert main(["keygen", "--name", "A. Novak", "--out", str(key)]) == 0
    assert stat.S_IMODE(os.stat(key).st_mode) == 0o600
    pub = Path(f"{key}.pub").read_text()
    assert "name: A. Novak" in pub and "BEGIN PUBLIC KEY" in pub and "PRIVATE" not in pub
    before = key.read_bytes()
    assert main(["keygen", "--name", "Someone Else", "--out", str(key)]) == 2
    assert "already exists" in capsys.readouterr().err
    assert key.read_bytes() == before


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["export", "nosuch", "--format", "json"], "no session 'nosuch'"),
        (
            ["sign", "{sid}", "--key", "{tmp}/missing.key", "--role", "operator"],
            "no such private key file",
        ),
        (["verify", "{tmp}/broken.json"], "not valid JSON"),
        (["verify", "{tmp}/missing.json"], "no such record file"),
        (["verify", "{tmp}/broken.json", "--key", "{tmp}/nokey.pub"], "no such public key file"),
    ],
)
def test_errors_are_one_line(
    session: Session,
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
    argv: list[str],
    message: str,
) -> None:
    (tmp_path / "broken.json").write_text('{"schema": "bringup-record/1", "content": {')
    args = [a.format(sid=session.session_id, tmp=tmp_path) for a in argv]
    if args[0] in ("export", "sign"):
        args += ["--db", str(session.db)]
    assert main(args) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and message in err and "Traceback" not in err


def test_unsigned_record_does_not_hold(
    session: Session, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _export(session, tmp_path / "unsigned.json")
    capsys.readouterr()
    assert _verify(path, "--db", str(session.db)) == 1
    assert _changed(capsys) == [
        "CHANGED: signatures: the record carries no signature (sign it with `bringup sign`)"
    ]


def test_entry_logged_after_signing_voids_the_signatures(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    assert _sign(session, keys.operator, "operator") == 0
    with SessionLog.open(session.db, create=False) as log:
        log.record_event(session.session_id, kind="note", operator="R. Okafor", reason="late")
    path = _export(session, tmp_path / "late.json")
    capsys.readouterr()
    assert _verify(path, "--db", str(session.db)) == 1
    found = _changed(capsys)
    assert found == [
        "CHANGED: signature 1 (operator R. Okafor): does not verify: "
        "the content or the signer fields changed since signing"
    ]


def test_sign_off_dropped_from_the_record_is_named_against_the_log(
    session: Session, keys: Keys, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = _signed(session, keys, tmp_path)
    record = json.loads(path.read_text())
    del record["signatures"][1]  # hide the reviewer's sign-off
    _rewrite(path, record)
    capsys.readouterr()
    assert _verify(path) == 0  # on its own, the operator's signature still holds
    capsys.readouterr()
    assert _verify(path, "--db", str(session.db)) == 1
    found = _changed(capsys)
    assert len(found) == 1 and "the log holds a sign-off by reviewer M. Lindqvist" in found[0]
