"""End to end: a headless run of the demo board on the simulated bench, then its record.

The runner drives the simulated instruments over loopback SCPI and logs every attempt; the
record is exported, signed by two people and verified against the log.
"""

from __future__ import annotations

import json
import sqlite3
from pathlib import Path

import pytest

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.cli import main
from bringup.runner.bench_source import BenchSource
from bringup.runner.headless import run_headless
from bringup.runner.session import SessionRunner


def _run(db: Path, scenario: str) -> str:
    board, checklist = load_board("demo"), load_checklist()
    with SessionRunner.create(
        board=board, checklist=checklist, serial="DHS24-0042", operator="T. Demo",
        bench=BenchSource.simulated(scenario, seed=3), db_path=db,
    ) as runner:  # fmt: skip
        run_headless(runner)
        return runner.session_id


@pytest.mark.slow
def test_demo_session_exports_signs_and_verifies(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    db = tmp_path / "demo.db"
    sid = _run(db, "healthy")
    op, rv = tmp_path / "op.key", tmp_path / "rv.key"
    assert main(["keygen", "--name", "T. Demo", "--out", str(op)]) == 0
    assert main(["keygen", "--name", "Q. Reviewer", "--out", str(rv)]) == 0
    for key, role in ((op, "operator"), (rv, "reviewer")):
        assert main(["sign", sid, "--db", str(db), "--key", str(key), "--role", role]) == 0
    # (The PDF is tested on the smaller sample session: it is the slowest to make.)
    out = {fmt: tmp_path / f"record.{fmt}" for fmt in ("json", "html")}
    for fmt, path in out.items():
        assert main(["export", sid, "--db", str(db), "--format", fmt, "--out", str(path)]) == 0
    capsys.readouterr()
    keys = ["--key", f"{op}.pub", "--key", f"{rv}.pub"]
    assert main(["verify", str(out["json"]), "--db", str(db), *keys]) == 0, capsys.readouterr().out

    content = json.loads(out["json"].read_text())["content"]
    steps = [step for stage in content["stages"] for step in stage["steps"]]
    assert len(steps) == len(load_checklist().steps())
    # the simulated bench's session passed: a rehearsal, never an accepted board
    assert content["summary"]["overall"] == "rehearsed"
    assert content["session"]["rehearsal"] is True
    assert {i["idn"].split(",")[0] for i in content["bench"]["instruments"]} == {"NULLPOINT"}
    # The record's reading is the log's, read back with plain sqlite3.
    gate = next(s for s in steps if s["id"] == "vgs-on")["attempts"][-1]
    conn = sqlite3.connect(db)
    (logged,) = conn.execute(
        "SELECT value FROM metrics JOIN attempts ON attempts.id = metrics.attempt_id "
        "WHERE attempts.session_id = ? AND attempts.step_id = 'vgs-on' AND metrics.name = 'vgs_on'",
        [sid],
    ).fetchone()
    conn.close()
    assert gate["metrics"]["vgs_on"]["value"] == logged
    html = out["html"].read_text()
    assert "first edge (close view)</title>" in html
    # The soak readings are drawn with their first-order fit (the runner's prediction).
    soak = next(s for s in steps if s["id"] == "soak")["attempts"][-1]["extra"]["soak"]
    assert "heatsink temperature (soak)</title>" in html and "dashed: fit: final" in html
    assert len(soak["times_s"]) == len(soak["temperatures_c"]) > 10


@pytest.mark.slow
def test_source_follower_board_cannot_be_signed(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    db = tmp_path / "nodrive.db"
    sid = _run(db, "no-overdrive")
    key = tmp_path / "op.key"
    assert main(["keygen", "--name", "T. Demo", "--out", str(key)]) == 0
    capsys.readouterr()
    assert main(["sign", sid, "--db", str(db), "--key", str(key), "--role", "operator"]) == 2
    err = capsys.readouterr().err
    # A gate without overdrive fails its step; the later stages are logged as not run.
    assert "gate-overdrive/vgs-on: failed" in err and "without a waiver" in err
    assert "thermal/soak: unfinished (last attempt not-run)" in err
