"""Names with bidirectional override or isolate characters are refused like control characters.

U+202A-U+202E and U+2066-U+2069 are Unicode's explicit bidirectional formatting characters
(UAX #9 section 2.1-2.2 [read]): invisible, they make a name display in another order than it
is stored, so an operator "Ana\u202eotrO" shows as "AnaOrto" in a terminal that applies the
algorithm. Every way a name enters the log or the record is tried through the real command in
a subprocess (or, for a waiver's name, the real runner on the simulated bench over loopback):
one line naming the option or file and the character, exit status 2, nothing written.
"""

from __future__ import annotations

import hashlib
import re
import subprocess
import sys
from pathlib import Path

import pytest

from bringup.boards.board_file import checklists_dir
from bringup.store import SessionLog, StoreError

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "integration" / "record"))
from record_samples import write_session  # noqa: E402

BASE = ["run", "--sim", "--auto", "--serial", "DHS24-0001", "--operator", "tester"]
# One of each kind: embeddings and overrides (U+202A..U+202E), isolates (U+2066..U+2069).
BIDI = ["\u202a", "\u202b", "\u202c", "\u202d", "\u202e", "\u2066", "\u2067", "\u2068", "\u2069"]


def _bringup(*args: str | Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "bringup", *map(str, args)],
                          stdin=subprocess.DEVNULL, capture_output=True, text=True, timeout=120)  # fmt: skip


def _refused(done: subprocess.CompletedProcess, *want: str) -> str:
    err = done.stderr.strip()
    assert done.returncode == 2, (done.returncode, done.stdout, err)
    assert len(err.splitlines()) == 1 and "Traceback" not in err, err
    for text in want:
        assert text in err, (text, err)
    assert done.stdout == "", done.stdout
    return err


@pytest.mark.parametrize("char", BIDI)
def test_operator_and_serial_with_a_bidi_control_are_refused_before_a_session(tmp_path, char):
    db = tmp_path / "never.sqlite"
    code = f"U+{ord(char):04X}"
    done = _bringup("run", "--sim", "--auto", "--serial", "DHS24-0001",
                    "--operator", f"Ana{char}Ortiz", "--db", db)  # fmt: skip
    _refused(done, "--operator", f"contains the control character {code}")
    done = _bringup("run", "--sim", "--auto", "--serial", f"DHS24-0001{char}",
                    "--operator", "tester", "--db", db)  # fmt: skip
    _refused(done, "--serial", f"contains the control character {code}")
    assert not db.exists()


def test_board_name_and_revision_with_a_bidi_override_are_refused_naming_the_line(tmp_path):
    db = tmp_path / "never.sqlite"
    text = (checklists_dir() / "demo-board.toml").read_text()
    for key, old in (
        ("name", 'name = "DHS-24 demo heater switch"'),
        ("revision", 'revision = "B"'),
    ):
        assert old in text
        board = tmp_path / f"{key}.toml"
        board.write_text(text.replace(old, old[:-1] + '\u202eX"'), encoding="utf-8")
        line = next(i for i, t in enumerate(board.read_text().splitlines(), 1) if "\u202e" in t)
        done = _bringup(*BASE, "--board", board, "--db", db)
        _refused(done, f"{board}:{line}: board.{key}: contains the control character U+202E")
    assert not db.exists()


def test_keygen_refuses_a_bidi_name_and_writes_no_key(tmp_path):
    out = tmp_path / "me.key"
    done = _bringup("keygen", "--name", "R. Okafor\u2067", "--out", out)
    _refused(done, "--name", "U+2067")
    assert not out.exists() and not Path(f"{out}.pub").exists()


def test_sign_refuses_a_key_file_whose_name_was_given_a_bidi_override(tmp_path):
    session = write_session(tmp_path / "log.db")
    key = tmp_path / "rev.key"
    made = _bringup("keygen", "--name", "J. Mbeki", "--out", key)
    assert made.returncode == 0, made.stderr
    data = key.read_bytes()
    assert b"name: J. Mbeki\n" in data
    key.write_bytes(data.replace(b"name: J. Mbeki\n", "name: J. \u202eikebM\n".encode()))
    before = hashlib.sha256(Path(session.db).read_bytes()).hexdigest()
    done = _bringup("sign", session.session_id, "--key", key, "--role", "reviewer",
                    "--db", session.db)  # fmt: skip
    _refused(done, str(key), "U+202E")
    assert hashlib.sha256(Path(session.db).read_bytes()).hexdigest() == before


def test_the_log_refuses_bidi_names_from_any_caller(tmp_path):
    # The store is the last gate: a waiver's or signer's name typed in the notebook reaches
    # it without passing the command line's checks.
    session = write_session(tmp_path / "log.db", complete=False)
    with SessionLog.open(session.db) as log:
        before = len(log.events(session.session_id))
        # repr() shows the character as its escape: the message cannot be reordered either
        said = re.escape("the name 'B\\u202een' contains the control character U+202E")
        with pytest.raises(StoreError, match=said):
            log.record_event(session.session_id, kind="waive", operator="B\u202een",
                             stage_id="power-rails", step_id="bus", reason="x")  # fmt: skip
        with pytest.raises(StoreError, match="signer's name"):
            log.add_signature(session.session_id, name="J\u2066M", role="reviewer",
                              signed_utc="2026-01-01T00:00:00Z", public_key=b"k",
                              fingerprint="SHA256:0", signature=b"s", content_digest="d")  # fmt: skip
        with pytest.raises(StoreError, match="operator"):
            log.create_session(board={"name": "b"}, checklist={"id": "c"}, bench=None,
                               serial="S1", operator="x\u202dy")  # fmt: skip
        assert len(log.events(session.session_id)) == before
        assert not log.signatures(session.session_id)
