"""A healthy run through each scope dialect of the simulated bench, driven by that family's
shipped profile, gives the same stage verdicts and metrics (within 2 %) as the nullpoint one.

Each run is real end to end: ``bringup sim --dialect scope=NAME --bench-out FILE`` in one
process, ``bringup run --bench FILE --auto --json`` in another, talking over loopback sockets.
The physical model, seed and checklist are the same; only the scope's command set, its
transfer format and the profile differ (8-bit unsigned codes from a reference code and paged
reads; a ;-separated preamble with echoed headers and 16-bit codes).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from bringup.store import SessionLog

DIALECTS = ("nullpoint", "tenfield", "outpre")
ANSWERS = Path(__file__).resolve().parents[2] / "checklists" / "answers-demo.toml"
PROFILES = {"nullpoint": "sim-scope", "tenfield": "rigol-ds1000z", "outpre": "tektronix-mdo3000"}


def _serve(dialect: str, bench_path, env) -> subprocess.Popen:
    cmd = [sys.executable, "-m", "bringup", "sim", "--dialect", f"scope={dialect}",
           "--bench-out", str(bench_path)]  # fmt: skip
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    for line in proc.stdout:  # the bench file is written before "serving" is printed
        if line.startswith("serving"):
            return proc
    proc.kill()
    raise AssertionError(
        f"bringup sim --dialect scope={dialect} did not start: {proc.stderr.read()}"
    )


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    folder = tmp_path_factory.mktemp("dialects")
    env = {**os.environ, "PYTHONUNBUFFERED": "1"}
    sims, procs = {}, {}
    try:
        for dialect in DIALECTS:
            sims[dialect] = _serve(dialect, folder / f"{dialect}.toml", env)
        for dialect in DIALECTS:
            db = folder / f"{dialect}.sqlite"
            cmd = [sys.executable, "-m", "bringup", "run", "--bench", str(folder / f"{dialect}.toml"),
                   "--board", "demo", "--serial", "DHS24-0042", "--operator", "tester", "--db", str(db),
                   "--answers", str(ANSWERS), "--auto", "--json"]  # fmt: skip
            procs[dialect] = (subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                                               text=True, env=env), db)  # fmt: skip
        out = {}
        for dialect, (proc, db) in procs.items():
            stdout, stderr = proc.communicate(timeout=240)
            out[dialect] = (proc.returncode, stdout, stderr, db)
        return out
    finally:
        for proc in sims.values():
            proc.terminate()
            proc.wait(timeout=30)


def _metrics(db) -> tuple[dict, dict]:
    with SessionLog.open(db, create=False) as log:
        (summary,) = log.sessions()
        data = log.session(summary.id)
        values = {}
        for a in data.attempts:
            for metric, m in a.metrics.items():
                if m.get("value") is not None:
                    values[(a.step_id, metric)] = m["value"]
        return values, {a.step_id: a.outcome for a in data.attempts}


@pytest.mark.parametrize("dialect", DIALECTS)
def test_a_healthy_run_passes_through_each_dialect(runs, dialect):
    status, stdout, stderr, db = runs[dialect]
    assert status == 0, stderr
    summary = json.loads(stdout)
    assert summary["verdict"] == "pass"
    assert all(s["verdict"] == "pass" for s in summary["stages"]), summary
    with SessionLog.open(db, create=False) as log:
        bench = log.session(summary["session"]).summary
        assert bench is not None
    assert "Traceback" not in stderr


@pytest.mark.parametrize("dialect", ["tenfield", "outpre"])
def test_the_same_metrics_within_two_percent(runs, dialect):
    base, base_outcomes = _metrics(runs["nullpoint"][3])
    other, outcomes = _metrics(runs[dialect][3])
    assert outcomes == base_outcomes
    assert set(other) == set(base)
    far = {}
    for key, value in base.items():
        # 2 % of the value, or of the step's own resolution for values near zero (a drop of a
        # few mV is a few codes: the 2 % is then of the full scale's code, 48 V / 256)
        allowed = max(0.02 * abs(value), 0.02 * 48.0 / 256 if abs(value) < 1 else 0.0)
        if abs(other[key] - value) > allowed:
            far[key] = (value, other[key])
    assert not far, far
