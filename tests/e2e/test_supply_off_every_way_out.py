"""Supply OFF on every way out of a real ``bringup run`` process (issue: a closed terminal left
the output ON).

The simulated bench runs in this test process and is reached through a bench file, so it
outlives the ``bringup`` process under test: what its supply does after a signal or a
``kill -9`` is read straight from the instrument. To hold a step in the middle of its work
with the output ON, the simulated scope's acquisition waits until the test lets it go (a
trigger that does not come): the process waits in its acquisition, as on a real bench.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading

import pytest

from bringup.boards.board_file import checklists_dir
from bringup.store import SessionLog


def _env() -> dict[str, str]:
    return {**os.environ, "PYTHONUNBUFFERED": "1"}  # read now: the test's own lock folder


def _hold_acquisitions(sim) -> tuple[threading.Event, threading.Event]:
    """Make the simulated scope's next acquisitions wait for ``release``; ``entered`` is set
    when one is waiting (the step is then energised and waiting for its trigger)."""
    entered, release = threading.Event(), threading.Event()
    real = sim.scope.acquire

    def held():
        entered.set()
        release.wait(60)
        return real()

    sim.scope.acquire = held
    return entered, release


def _bench_file(sim, tmp_path):
    path = tmp_path / "bench.toml"
    path.write_text(sim.bench_file_text())
    return path


def _run(bench_path, db, *extra):
    answers = checklists_dir() / "answers-demo.toml"
    cmd = [sys.executable, "-m", "bringup", "run", "--board", "demo", "--bench", str(bench_path),
           "--serial", "DHS24-0042", "--operator", "tester", "--db", str(db), "--auto",
           "--answers", str(answers), *extra]  # fmt: skip
    return subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            env=_env())  # fmt: skip


def _stop(proc) -> None:
    if proc.poll() is None:
        proc.kill()
        proc.wait()


def _only_session(db) -> str:
    with SessionLog.open(db, create=False) as log:
        (summary,) = log.sessions()
        return summary.id


@pytest.mark.parametrize("name", ["SIGHUP", "SIGQUIT", "SIGTERM", "SIGINT"])
def test_a_terminating_signal_switches_the_supply_off_and_is_logged(sim_bench, tmp_path, name):
    sim = sim_bench()
    entered, release = _hold_acquisitions(sim)
    db = tmp_path / "log.sqlite"
    proc = _run(_bench_file(sim, tmp_path), db)
    try:
        assert entered.wait(60), proc.stderr.read() if proc.poll() is not None else "no step"
        assert sim.supply.output_on  # rails-unloaded is energised, waiting for its trigger
        signum = getattr(signal, name)
        proc.send_signal(signum)
        _, stderr = proc.communicate(timeout=30)
    finally:
        release.set()
        _stop(proc)
    assert not sim.supply.output_on, "the supply was left ON"
    assert proc.returncode == 128 + signum, stderr  # as a shell reports it (130 for SIGINT)
    assert f"stopped by {name}" in stderr and "Supply output OFF, confirmed" in stderr
    assert "Traceback" not in stderr
    session = _only_session(db)
    with SessionLog.open(db, create=False) as log:
        aborts = [e for e in log.events(session) if e.kind == "abort"]
        assert len(aborts) == 1 and aborts[0].reason.startswith(f"{name}: ")
        assert aborts[0].payload["supply_off_confirmed"] is True
        last = log.attempts(session)[-1]
        assert last.step_id == "rails-unloaded" and last.outcome == "not-run"
        assert f"interrupted by {name}" in last.extra["message"]
        assert log.verify_chain(session).ok


def test_a_closed_output_pipe_stops_the_run_with_the_supply_off(sim_bench, tmp_path):
    sim = sim_bench()
    db = tmp_path / "log.sqlite"
    proc = _run(_bench_file(sim, tmp_path), db)
    try:
        assert proc.stdout.readline().startswith("session ")
        proc.stdout.close()  # the reader goes away (``bringup run ... | head -1``)
        proc.wait(timeout=120)
        stderr = proc.stderr.read()
    finally:
        _stop(proc)
    assert proc.returncode == 128 + signal.SIGPIPE, stderr
    assert "stopped by SIGPIPE" in stderr and "Traceback" not in stderr
    assert not sim.supply.output_on
    session = _only_session(db)
    with SessionLog.open(db, create=False) as log:
        (abort,) = [e for e in log.events(session) if e.kind == "abort"]
        assert abort.reason.startswith("SIGPIPE: ")
        # it stopped after the step it could not report: the later steps were not run
        assert len(log.attempts(session)) < 8


def test_after_kill_9_the_next_open_switches_off_says_so_and_logs_the_interrupted_step(
    sim_bench, tmp_path
):
    sim = sim_bench()
    entered, release = _hold_acquisitions(sim)
    bench_path = _bench_file(sim, tmp_path)
    db = tmp_path / "log.sqlite"
    proc = _run(bench_path, db)
    try:
        assert entered.wait(60), proc.stderr.read() if proc.poll() is not None else "no step"
        proc.kill()  # SIGKILL: nothing in the process runs, the output stays as it was
        proc.wait(timeout=30)
    finally:
        _stop(proc)
    assert proc.returncode == -signal.SIGKILL
    assert sim.supply.output_on  # the control: no software survives SIGKILL
    set_v = sim.supply.voltage_set
    session = _only_session(db)
    sim.scope.acquire = type(sim.scope).acquire.__get__(sim.scope)  # the trigger comes again
    release.set()
    sim.clock.set_scale(1000.0)  # the soak in a second or two of wall time

    resumed = subprocess.run(
        [sys.executable, "-m", "bringup", "resume", session, "--db", str(db), "--auto",
         "--answers", str(checklists_dir() / "answers-demo.toml"), "--json"],
        capture_output=True, text=True, timeout=180, env=_env(),
    )  # fmt: skip
    assert resumed.returncode == 0, resumed.stderr
    found = [line for line in resumed.stderr.splitlines() if "found ON" in line]
    assert len(found) == 1, resumed.stderr
    # one line: at what voltage (the demo board's 24 V bus) and current, and switched off
    assert (
        " V, " in found[0] and " A on opening the bench" in found[0] and "switched off" in found[0]
    )
    assert json.loads(resumed.stdout)["verdict"] == "pass"
    with SessionLog.open(db, create=False) as log:
        data = log.session(session)
        (event,) = [e for e in data.events if e.kind == "found-on"]
        assert event.step_id == "rails-unloaded"
        # read back from the supply as it was found: its setpoint within the sim's noise
        assert event.payload["volts"] == pytest.approx(set_v, rel=0.02)
        assert event.payload["amps"] is not None and event.payload["amps"] >= 0.0
        unloaded = [a for a in data.attempts if a.step_id == "rails-unloaded"]
        # the interrupted attempt, then the retake that passed
        assert [a.outcome for a in unloaded] == ["not-run", "pass"]
        assert unloaded[0].extra["interrupted"] is True
        assert "found ON" in unloaded[0].extra["message"]
        assert log.verify_chain(session).ok


def test_an_instrument_fault_ends_the_run_with_status_2_and_a_fault_got_past_is_shown(
    sim_bench, tmp_path
):
    """Exit status: an instrument fault is an error (2, as the README says), not a failed
    board (1). A fault a retry got past earlier in the run is in the step's output and JSON."""
    sim = sim_bench()
    entered, release = _hold_acquisitions(sim)
    db = tmp_path / "log.sqlite"
    proc = _run(_bench_file(sim, tmp_path), db, "--json")
    try:
        assert entered.wait(60), proc.stderr.read() if proc.poll() is not None else "no step"
        # rails-unloaded waits for its trigger: its next supply read-back comes back cut off
        # (a retry gets past it), then the scope answers with bytes that are no reply at all
        sim.supply.faults.inject("drop")
        sim.scope.faults.inject("garbage")
        release.set()
        stdout, stderr = proc.communicate(timeout=120)
    finally:
        release.set()
        _stop(proc)
    assert proc.returncode == 2, stderr
    assert "bringup: error: instrument fault in step power-rails.rails-unloaded" in stderr
    assert not sim.supply.output_on
    summary = json.loads(stdout)
    by_step = {a["step"]: a for a in summary["attempts"]}
    unloaded = by_step["power-rails.rails-unloaded"]
    assert unloaded["state"] == "not-run" and "scope" in unloaded["fault"]
    assert any("closed the connection" in line for line in unloaded["absorbed"]), unloaded
    assert "! fault got past" in stderr  # the headless lines (on stderr beside --json)
    # the later steps were not run for safety, and that is no instrument fault of theirs
    assert by_step["thermal.soak"]["state"] == "not-run" and by_step["thermal.soak"]["fault"] == ""
