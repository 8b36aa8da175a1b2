"""``bringup run/resume/sessions`` options and bad files: one line, exit status 2, no traceback,
nothing created; and a headless run that takes its typed reading from an answer file."""

from __future__ import annotations

import json
import subprocess
import sys

from bringup.boards.board_file import checklists_dir
from bringup.store import SessionLog

BASE = ["run", "--serial", "DHS24-0001", "--operator", "tester"]


def _start(args: list[str]) -> subprocess.Popen:
    return subprocess.Popen([sys.executable, "-m", "bringup", *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)  # fmt: skip


def test_bad_options_and_files_are_one_line_errors(tmp_path):
    db = tmp_path / "never.sqlite"
    bad_checklist = tmp_path / "checklist.toml"
    text = (checklists_dir() / "high-side-bootstrap.toml").read_text()
    bad_checklist.write_text(text.replace('analysis = "droop"', 'analysis = "sag"'))
    line = next(i for i, t in enumerate(bad_checklist.read_text().splitlines(), 1) if '"sag"' in t)
    bad_answers = tmp_path / "answers.toml"
    bad_answers.write_text('schema = 1\n[steps."thermal.soak"]\nconfirmd = true\n')
    cases = {
        "json without auto": (BASE + ["--sim", "--json", "--db", str(db)], "--json: only with --auto"),
        "no bench": (BASE + ["--auto", "--db", str(db)], "give --bench FILE"),
        "bad serial": (["run", "--sim", "--serial", "42", "--operator", "t", "--auto", "--db", str(db)],
                       "does not match the pattern"),
        "missing board": (BASE + ["--sim", "--board", str(tmp_path / "nope.toml"), "--auto",
                                  "--db", str(db)], "file not found"),
        "bad checklist": (BASE + ["--sim", "--checklist", str(bad_checklist), "--auto", "--db", str(db)],
                          f"{bad_checklist}:{line}: stages.droop-max-on-time.steps.droop.analysis"),
        "bad answers": (BASE + ["--sim", "--answers", str(bad_answers), "--auto", "--db", str(db)],
                        f"{bad_answers}:3: steps.thermal.soak.confirmd: unknown key"),
        "unknown scenario": (BASE + ["--sim", "--scenario", "smoky", "--auto", "--db", str(db)],
                             "--scenario smoky: unknown"),
        "resume without a log": (["resume", "--auto", "--db", str(db)], "no session log there"),
    }  # fmt: skip
    procs = {name: (_start(args), want) for name, (args, want) in cases.items()}
    for name, (proc, want) in procs.items():
        out, err = proc.communicate(timeout=120)
        assert proc.returncode == 2, (name, out, err)
        assert len(err.strip().splitlines()) == 1 and want in err, (name, err)
        assert "Traceback" not in err and out == "", (name, out)
    assert not db.exists()  # nothing starts on an invalid file or option


def test_sessions_on_a_log_that_does_not_exist_yet(tmp_path):
    db = tmp_path / "none.sqlite"
    done = subprocess.run([sys.executable, "-m", "bringup", "sessions", "--db", str(db), "--json"],
                          capture_output=True, text=True, timeout=60)  # fmt: skip
    assert done.returncode == 0 and json.loads(done.stdout) == []
    assert not db.exists()


def test_a_typed_reading_from_the_answer_file_is_judged(tmp_path):
    db = tmp_path / "log.sqlite"
    answers = tmp_path / "answers.toml"
    text = (checklists_dir() / "answers-demo.toml").read_text().replace('"3.31 V"', '"3.45 V"')
    answers.write_text(text)
    done = subprocess.run([sys.executable, "-m", "bringup", *BASE, "--sim", "--auto", "--json",
                           "--answers", str(answers), "--db", str(db)],
                          capture_output=True, text=True, timeout=120)  # fmt: skip
    summary = json.loads(done.stdout)
    # 3.45 V typed against 3.2-3.4 V: beyond the max by more than the 0.02 V guard band
    assert done.returncode == 1 and summary["stages"][0] == {"id": "power-rails", "verdict": "fail"}
    assert [s["verdict"] for s in summary["stages"][1:]] == ["not-run"] * 4
    with SessionLog.open(db, create=False) as log:
        meter = log.attempts(summary["session"], step_id="logic-meter")[0]
        assert meter.metrics["logic_level"]["value"] == 3.45
        assert meter.verdicts["logic_level"]["outcome"] == "fail"
    listed = subprocess.run([sys.executable, "-m", "bringup", "sessions", "--db", str(db), "--json"],
                            capture_output=True, text=True, timeout=60)  # fmt: skip
    rows = json.loads(listed.stdout)
    assert [(r["id"], r["serial"], r["verdict"], r["finished"]) for r in rows] == [
        (summary["session"], "DHS24-0001", "fail", False)
    ]


def test_out_of_range_design_values_are_refused_before_anything_is_powered(tmp_path):
    """``run`` and ``sim --board`` share the board loader: a negative gate resistor (a math
    range error three powered steps in, before) is one line naming file:line and key."""
    text = (checklists_dir() / "demo-board.toml").read_text()
    board = tmp_path / "board.toml"
    board.write_text(text.replace('gate_resistor = "10 ohm"', 'gate_resistor = "-10 ohm"'))
    line = next(i for i, t in enumerate(board.read_text().splitlines(), 1) if "-10 ohm" in t)
    db = tmp_path / "never.sqlite"
    for args in (BASE + ["--sim", "--board", str(board), "--auto", "--db", str(db)],
                 ["sim", "--board", str(board)]):  # fmt: skip
        done = subprocess.run([sys.executable, "-m", "bringup", *args], capture_output=True,
                              text=True, timeout=120)  # fmt: skip
        assert done.returncode == 2, (args, done.stdout, done.stderr)
        err = done.stderr.strip()
        assert len(err.splitlines()) == 1 and "Traceback" not in err, err
        assert err.endswith(f"{board}:{line}: design.gate_resistor: -10 Ω is out of range: "
                            "must be at least 0 Ω and at most 1 MΩ"), err  # fmt: skip
        assert done.stdout == ""
    assert not db.exists()


def test_out_of_range_checklist_settings_are_refused_before_a_session_is_created(tmp_path):
    """A duty written as an expression is checked once resolved for the board, a negative
    current limit on load: both before the log is created or the board powered."""
    text = (checklists_dir() / "high-side-bootstrap.toml").read_text()
    old = 'pwm = { enabled = true, duty = "design.duty_max" }'
    cases = {
        "duty": (text.replace(old, old.replace('"design.duty_max"', '"2 * design.duty_max"'), 1),
                 "2 * design.duty_max", "stages.power-rails.steps.rails-loaded.pwm.duty: 1.9 "),
        "current": (text.replace('current_limit = "0.2 A"', 'current_limit = "-0.2 A"'),
                    '"-0.2 A"', "stages.power-rails.steps.first-power.supply.current_limit: -200 mA"),
    }  # fmt: skip
    db = tmp_path / "never.sqlite"
    for name, (body, needle, want) in cases.items():
        checklist = tmp_path / f"{name}.toml"
        checklist.write_text(body)
        line = next(i for i, t in enumerate(body.splitlines(), 1) if needle in t)
        done = subprocess.run([sys.executable, "-m", "bringup", *BASE, "--sim", "--auto",
                               "--checklist", str(checklist), "--db", str(db)],
                              capture_output=True, text=True, timeout=120)  # fmt: skip
        err = done.stderr.strip()
        assert done.returncode == 2 and done.stdout == "", (name, done.stdout, err)
        assert len(err.splitlines()) == 1 and f"{checklist}:{line}: {want}" in err, (name, err)
    assert not db.exists()
