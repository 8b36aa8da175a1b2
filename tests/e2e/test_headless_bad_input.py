"""Bad typed readings, options and names for ``bringup run``/``resume``/``sessions``/``sim``:
one line naming what and where, exit status 2, before a session is created, resumed or powered;
never a traceback, and nothing already logged changes."""

from __future__ import annotations

import json
import subprocess
import sys

from bringup.boards.board_file import checklists_dir
from bringup.store import SessionLog

BASE = ["run", "--serial", "DHS24-0001", "--operator", "tester"]


def _bringup(args: list[str], timeout: float = 120) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "bringup", *args], capture_output=True,
                          text=True, timeout=timeout)  # fmt: skip


def _refused(done: subprocess.CompletedProcess, want: str) -> str:
    err = done.stderr.strip()
    assert done.returncode == 2, (done.stdout, err)
    assert len(err.splitlines()) == 1 and "Traceback" not in err, err
    assert want in err, err
    assert done.stdout == "", done.stdout
    return err


def _answers(tmp_path, reading: str, name: str = "answers.toml"):
    text = (checklists_dir() / "answers-demo.toml").read_text()
    assert 'reading = "3.31 V"' in text
    path = tmp_path / name
    path.write_text(text.replace('reading = "3.31 V"', f"reading = {reading}"))
    line = next(i for i, t in enumerate(path.read_text().splitlines(), 1) if "reading =" in t)
    return path, line


def test_typed_readings_are_checked_against_their_step_before_a_session_is_created(tmp_path):
    db = tmp_path / "never.sqlite"
    key = "steps.power-rails.logic-meter.reading"
    cases = {
        "parsecs": ('"3.31 parsecs"', "unknown unit 'parsecs'"),
        "amperes": ('"3.31 A"', "its unit is A"),
        "nan text": ('"nan"', "cannot read 'nan' as a quantity in V"),
        "nan number": ("nan", "not a finite number"),
    }
    for name, (reading, problem) in cases.items():
        answers, line = _answers(tmp_path, reading, f"{name.replace(' ', '-')}.toml")
        done = _bringup([*BASE, "--sim", "--auto", "--answers", str(answers), "--db", str(db)])
        err = _refused(done, f"{answers}:{line}: {key}: ")
        assert problem in err and "Logic rail voltage on the meter" in err, (name, err)
    # a reading for a step that asks for none
    text = (checklists_dir() / "answers-demo.toml").read_text()
    answers = tmp_path / "misplaced.toml"
    old = '[steps."thermal.soak"]\nconfirmed = true'
    answers.write_text(text.replace(old, old + '\nreading = "40 degC"'))
    line = next(i for i, t in enumerate(answers.read_text().splitlines(), 1) if "40 degC" in t)
    done = _bringup([*BASE, "--sim", "--auto", "--answers", str(answers), "--db", str(db)])
    _refused(
        done, f"{answers}:{line}: steps.thermal.soak.reading: step thermal.soak asks for no reading"
    )
    assert not db.exists()


def test_resume_checks_the_answers_before_the_session_is_reopened(tmp_path):
    db = tmp_path / "log.sqlite"
    failing, _ = _answers(tmp_path, '"3.45 V"', "failing.toml")  # above the 3.4 V maximum
    first = _bringup(
        [*BASE, "--sim", "--auto", "--json", "--answers", str(failing), "--db", str(db)]
    )
    assert first.returncode == 1, first.stderr
    session = json.loads(first.stdout)["session"]
    with SessionLog.open(db, create=False) as log:
        before = (len(log.events(session)), len(log.attempts(session)))
    bad, line = _answers(tmp_path, '"3.31 A"', "bad.toml")
    done = _bringup(["resume", session, "--auto", "--answers", str(bad), "--db", str(db)])
    _refused(done, f"{bad}:{line}: steps.power-rails.logic-meter.reading: ")
    with SessionLog.open(db, create=False) as log:
        assert (len(log.events(session)), len(log.attempts(session))) == before


def test_time_scale_out_of_bounds_is_refused_naming_the_option(tmp_path):
    """inf ran a soak into 9.9E37 and 1e-300 hung with the session left in progress."""
    db = tmp_path / "never.sqlite"
    for value in ("inf", "1e-300", "0.5", "2e4", "nan"):
        done = _bringup([*BASE, "--sim", "--auto", "--time-scale", value, "--db", str(db)])
        _refused(done, "--time-scale ")
        assert "must lie between 1 (real time) and 10000" in done.stderr, done.stderr
    done = _bringup(["resume", "--sim", "--auto", "--time-scale", "inf", "--db", str(db)])
    _refused(done, "--time-scale inf: must lie between 1")
    assert not db.exists()


def test_a_negative_seed_is_refused_naming_seed(tmp_path):
    db = tmp_path / "never.sqlite"
    done = _bringup([*BASE, "--sim", "--auto", "--seed", "-5", "--db", str(db)])
    err = _refused(done, "--seed -5: must be a non-negative integer")
    assert "--scenario" not in err
    assert not db.exists()  # no orphan not-started session
    done = _bringup(["sim", "--seed", "-1"])
    err = _refused(done, "--seed -1: must be a non-negative integer")
    assert "--scenario" not in err


def _unfinished_session(tmp_path, db) -> str:
    failing, _ = _answers(tmp_path, '"3.45 V"', "failing.toml")  # above the 3.4 V maximum
    first = _bringup(
        [*BASE, "--sim", "--auto", "--json", "--answers", str(failing), "--db", str(db)]
    )
    assert first.returncode == 1, first.stderr
    return json.loads(first.stdout)["session"]


def test_an_empty_session_id_or_db_path_is_refused(tmp_path):
    db = tmp_path / "log.sqlite"
    session = _unfinished_session(tmp_path, db)
    with SessionLog.open(db, create=False) as log:
        before = (len(log.events(session)), len(log.attempts(session)))
    for args in (
        ["resume", "", "--sim", "--auto", "--db", str(db)],
        ["resume", " ", "--db", str(db)],
    ):
        _refused(_bringup(args), "an empty session id")
    with SessionLog.open(db, create=False) as log:
        assert (len(log.events(session)), len(log.attempts(session))) == before
    for args in ([*BASE, "--sim", "--auto", "--db", ""], ["resume", "--auto", "--db", ""],
                 ["sessions", "--db", ""], ["sessions", "--json", "--db", " "]):  # fmt: skip
        _refused(_bringup(args), "an empty path (leave --db out for the default log)")


def test_names_and_serials_with_control_characters_are_refused(tmp_path):
    db = tmp_path / "never.sqlite"
    cases = {
        "operator": (["run", "--serial", "DHS24-0001", "--operator", "ana\nSERIAL X"],
                     "--operator 'ana\\nSERIAL X': contains the control character U+000A"),
        "serial": (["run", "--serial", "DHS24-0001\n", "--operator", "ana"],
                   "--serial 'DHS24-0001\\n': contains the control character U+000A"),
        "escape": (["run", "--serial", "DHS24-0001", "--operator", "ana\x1b[2J"],
                   "contains the control character U+001B"),
    }  # fmt: skip
    for args, want in cases.values():
        _refused(_bringup([*args, "--sim", "--auto", "--db", str(db)]), want)
    text = (checklists_dir() / "demo-board.toml").read_text()
    for key, old in (
        ("name", 'name = "DHS-24 demo heater switch"'),
        ("revision", 'revision = "B"'),
    ):
        board = tmp_path / f"{key}.toml"
        assert old in text
        board.write_text(text.replace(old, old[:-1] + '\\nline two"'))
        line = next(i for i, t in enumerate(board.read_text().splitlines(), 1) if "line two" in t)
        done = _bringup([*BASE, "--sim", "--auto", "--board", str(board), "--db", str(db)])
        _refused(done, f"{board}:{line}: board.{key}: contains the control character U+000A")
    assert not db.exists()
