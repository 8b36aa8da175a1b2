"""``kill -9`` of a headless run in the middle of a step, then ``bringup resume``.

Every attempt committed before the kill is there, unchanged; the hash chain verifies; on resume
the step that was running is logged as an interrupted attempt (its ``energise`` entry had no
attempt after it), then run again, and the session completes.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading

from bringup.store import SessionLog


def _wait_for_energise(db, session, step_key, proc) -> None:
    """Until the step's ``energise`` entry is in the log (read by another connection)."""
    import time

    while proc.poll() is None:
        with SessionLog.open(db, create=False) as log:
            if any(e.kind == "energise" and e.step_id == step_key for e in log.events(session)):
                return
        time.sleep(0.02)
    raise AssertionError(f"the run ended before {step_key} was energised: {proc.stderr.read()}")


def test_kill_during_the_soak_then_resume(tmp_path):
    db = tmp_path / "log.sqlite"
    env = {**os.environ, "PYTHONUNBUFFERED": "1"}
    # A slow thermal clock (100x): the soak lasts at least 4.8 s of wall time, so a kill right
    # after step 7 is reported lands inside step 8.
    cmd = [sys.executable, "-m", "bringup", "run", "--sim", "--time-scale", "100",
           "--serial", "DHS24-0042", "--operator", "tester", "--db", str(db), "--auto"]  # fmt: skip
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    watchdog = threading.Timer(120, proc.kill)
    watchdog.start()
    session = None
    try:
        for line in proc.stdout:
            if line.startswith("session ") and session is None:
                session = line.split()[1].rstrip(":")
            if line.startswith("[7/8]"):
                # killed once the soak has logged that its supply is going ON: it is running
                _wait_for_energise(db, session, "soak", proc)
                os.kill(proc.pid, signal.SIGKILL)
                break
        proc.wait(timeout=30)
    finally:
        watchdog.cancel()
    assert proc.returncode == -signal.SIGKILL, proc.stderr.read()
    assert session is not None

    with SessionLog.open(db, create=False) as log:
        before = [(a.id, a.step_id, a.content_hash) for a in log.attempts(session)]
        assert [b[1] for b in before] == [
            "first-power", "rails-unloaded", "logic-meter", "rails-loaded", "vgs-on", "edges",
            "droop",
        ]  # fmt: skip
        assert log.verify_chain(session).ok
        assert not log.session(session).summary.finished

    resumed = subprocess.run(
        [sys.executable, "-m", "bringup", "resume", session, "--db", str(db), "--auto", "--json"],
        capture_output=True, text=True, timeout=120, env=env,
    )  # fmt: skip
    assert resumed.returncode == 0, resumed.stderr
    summary = json.loads(resumed.stdout)
    assert summary["session"] == session and summary["verdict"] == "pass"
    assert all(s["verdict"] == "pass" for s in summary["stages"])

    with SessionLog.open(db, create=False) as log:
        after = [(a.id, a.step_id, a.content_hash) for a in log.attempts(session)]
        assert after[: len(before)] == before  # nothing committed was changed or lost
        assert [a[1] for a in after[len(before) :]] == ["soak", "soak"]
        interrupted, retake = log.attempts(session)[len(before) :]
        assert interrupted.outcome == "not-run" and interrupted.extra["interrupted"] is True
        assert "interrupted" in interrupted.extra["message"] and retake.outcome == "pass"
        report = log.verify_chain(session)
        assert report.ok, report.problem
        data = log.session(session)
        assert data.summary.finished and data.summary.verdict == "pass"
        # every energised step logged its "energise" entry before the output went ON
        assert [e.kind for e in data.events if e.kind != "energise"] == ["resume", "finish"]
        energised = [e.step_id for e in data.events if e.kind == "energise"]
        assert energised.count("soak") == 2  # the interrupted soak and its retake
