"""A SIGKILL of a process that is logging attempts loses nothing committed and half-writes nothing."""

from __future__ import annotations

import os
import signal
import sqlite3
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
    import os
    import sys
    sys.path.insert(0, sys.argv[3])
    from store_samples import gate_waveform
    from bringup.store import SessionLog

    log = SessionLog.open(sys.argv[1])
    sid = sys.argv[2]
    stop_inside = int(sys.argv[4])               # 0: never; k: freeze inside attempt k's transaction
    n = 0

    def freeze_inside(sql):
        # called by sqlite3 as each statement starts: attempt row and metrics are in, the
        # waveform is next, the COMMIT has not happened; wait here to be killed
        if n == stop_inside and sql.lstrip().upper().startswith('INSERT INTO "WAVEFORMS"'):
            print("inside", n, flush=True)
            sys.stdin.readline()
            os._exit(3)                           # the test went away without killing us

    log._conn.set_trace_callback(freeze_inside)
    while n < 100:                                # until killed (bounded if the test fails)
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
@pytest.mark.parametrize(
    ("kill_after", "inside_transaction"),
    [(3, False), (8, False), (4, True)],
    ids=["early", "later", "mid-commit"],
)
def test_sigkill_while_logging_keeps_every_committed_attempt_whole(
    tmp_path, kill_after, inside_transaction
):
    db_path = tmp_path / "crash.db"
    with SessionLog.open(db_path) as log:
        sid = log.create_session(board={"board": {"name": "DHS"}}, checklist={"id": "c"}, bench=None,
                                 serial="DHS24-0001", operator="rig")  # fmt: skip
    child = subprocess.Popen(
        [sys.executable, "-c", WRITER, str(db_path), sid, str(HERE), str(kill_after + 1 if inside_transaction else 0)],
        stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )  # fmt: skip
    committed: dict[int, int] = {}
    try:
        for line in child.stdout:
            if line.startswith("inside"):
                # frozen between the attempt's first inserts and its COMMIT
                os.kill(child.pid, signal.SIGKILL)
                break
            attempt_id, n = map(int, line.split())
            committed[attempt_id] = n
            assert len(committed) <= kill_after + 1, "the writer never reached the frozen point"
            if len(committed) == kill_after and not inside_transaction:
                # the child is now inside the next attempt (compressing or inserting)
                os.kill(child.pid, signal.SIGKILL)
                break
    finally:
        if child.poll() is None:
            child.kill()
        child.wait(timeout=10)
        for stream in (child.stdin, child.stdout, child.stderr):
            stream.close()
    assert len(committed) == kill_after, "the writer died before being killed"
    assert child.returncode == -signal.SIGKILL

    with SessionLog.open(db_path) as log:
        attempts = log.attempts(sid)
        by_id = {a.id: a for a in attempts}
        # every attempt reported as committed is there; at most the one in flight was added
        assert set(committed) <= set(by_id) and len(by_id) - len(committed) in (0, 1)
        if inside_transaction:
            # the attempt killed before its COMMIT left nothing: no row, no metrics, no waveform
            assert set(by_id) == set(committed)
            with sqlite3.connect(db_path) as conn:
                assert conn.execute("SELECT count(*) FROM metrics").fetchone()[0] == kill_after
                assert conn.execute("SELECT count(*) FROM waveforms").fetchone()[0] == kill_after
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
