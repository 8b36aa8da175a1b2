"""A SIGKILL of a process that is logging attempts loses nothing committed and half-writes nothing."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest
from store_samples import gate_waveform

from bringup.store import SessionLog

HERE = Path(__file__).resolve().parent

WRITER = textwrap.dedent(
    """
    import sys
    sys.path.insert(0, sys.argv[3])
    from store_samples import gate_waveform
    from bringup.store import SessionLog

    log = SessionLog.open(sys.argv[1])
    sid = sys.argv[2]
    n = 0
    while True:                                   # until killed
        n += 1
        attempt_id = log.record_attempt(
            sid, stage_id="edge-speed", step_id="vgs-edges", operator="rig",
            started_utc="2026-12-01T10:00:00Z", finished_utc="2026-12-01T10:00:01Z",
            instruments={"scope": "NULLPOINT,SIMSCOPE-4"}, settings={"n": n},
            metrics={"rise_time_s": {"value": n * 1e-9, "unit": "s"}}, predictions={},
            verdicts={}, outcome="pass", waveforms={"vgs": gate_waveform(200_000, seed=n)},
        )
        print(attempt_id, n, flush=True)          # printed only after the commit returned
    """
)


@pytest.mark.slow
@pytest.mark.parametrize("kill_after", [3, 6, 11])
def test_sigkill_while_logging_keeps_every_committed_attempt_whole(tmp_path, kill_after):
    db_path = tmp_path / "crash.db"
    with SessionLog.open(db_path) as log:
        sid = log.create_session(board={"board": {"name": "DHS"}}, checklist={"id": "c"}, bench=None,
                                 serial="DHS24-0001", operator="rig")  # fmt: skip
    child = subprocess.Popen(
        [sys.executable, "-c", WRITER, str(db_path), sid, str(HERE)],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )  # fmt: skip
    committed: dict[int, int] = {}
    try:
        for line in child.stdout:
            attempt_id, n = map(int, line.split())
            committed[attempt_id] = n
            if len(committed) == kill_after:
                # the child is now inside the next attempt (compressing or inserting)
                os.kill(child.pid, signal.SIGKILL)
                break
    finally:
        if child.poll() is None:
            child.kill()
        child.wait(timeout=10)
        child.stdout.close()
        child.stderr.close()
    assert len(committed) == kill_after, "the writer died before being killed"
    assert child.returncode == -signal.SIGKILL

    with SessionLog.open(db_path) as log:
        attempts = log.attempts(sid)
        by_id = {a.id: a for a in attempts}
        # every attempt reported as committed is there; at most the one in flight was added
        assert set(committed) <= set(by_id) and len(by_id) - len(committed) in (0, 1)
        for attempt in attempts:
            n = attempt.settings["n"]
            assert attempt.metrics["rise_time_s"]["value"] == pytest.approx(n * 1e-9)
            # whole: the waveform is there with exactly the samples that were sent
            stored = log.load_waveform(attempt.id, "vgs")
            assert np.array_equal(stored.codes, gate_waveform(200_000, seed=n).codes)
        assert [a.attempt_no for a in attempts] == list(range(1, len(attempts) + 1))
        report = log.verify_chain(sid)
        assert report.ok, report.problem
        # and the log takes the next attempt after the crash
        log.record_event(sid, kind="resume", operator="rig")
        assert log.verify_chain(sid).ok
