"""The lab as a lab lead uses it (issue 16's "done when"): four simulated boards, three healthy
and one with a weak bootstrap, run on two simulated benches into their own logs; both benches
push to one PostgreSQL database at once; ``bringup batch --lab`` shows the four serials, flags
the weak one and writes the HTML batch report."""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys

import pytest

DROOP = "droop-max-on-time.droop.vgs_droop"
HEALTHY = {"DHS24-0101": ("bench-a", 11), "DHS24-0102": ("bench-a", 12),
           "DHS24-0103": ("bench-b", 13)}  # fmt: skip
WEAK = {"DHS24-0104": ("bench-b", 14)}


def _start(*args: str, env: dict[str, str]) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-m", "bringup", *args],
        env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )  # fmt: skip


def _wait(procs: list[subprocess.Popen], allowed: tuple[int, ...]) -> list[str]:
    outs = []
    for proc in procs:
        out, err = proc.communicate(timeout=300)
        assert proc.returncode in allowed, f"{proc.args}: exit {proc.returncode}\n{err}"
        outs.append(out)
    return outs


@pytest.mark.slow
def test_two_benches_push_and_the_lab_batch_flags_the_weak_board(lab_db, tmp_path):
    env = {**lab_db.env, "PYTHONUNBUFFERED": "1", "BRINGUP_LOCK_DIR": str(tmp_path)}
    runs = []
    for serial, (bench, seed) in {**HEALTHY, **WEAK}.items():
        scenario = "weak-bootstrap" if serial in WEAK else "healthy"
        runs.append(_start(
            "run", "--sim", "--auto", "--scenario", scenario, "--seed", str(seed),
            "--serial", serial, "--operator", "T. Bench", "--db", str(tmp_path / f"{bench}.db"),
            env=env,
        ))  # fmt: skip
    _wait(runs, allowed=(0, 1))  # the weak board fails its droop stage: exit 1
    pushes = [
        _start("push", "--lab", lab_db.url, "--db", str(tmp_path / f"{bench}.db"),
               "--bench-name", bench, env=env)
        for bench in ("bench-a", "bench-b")
    ]  # fmt: skip
    outs = _wait(pushes, allowed=(0,))
    for bench, out in zip(("bench-a", "bench-b"), outs, strict=True):
        said = rf"bench {bench}: 2 session\(s\) sent \(\d+ entries\), 0 already there, 0 refused"
        assert re.search(said, out.splitlines()[-1]), out
    report = tmp_path / "batch.html"
    done = subprocess.run(
        [sys.executable, "-m", "bringup", "batch", "--lab", lab_db.url, "--json",
         "--html", str(report)],
        env=env, capture_output=True, text=True, timeout=300, check=False,
    )  # fmt: skip
    assert done.returncode == 0, done.stderr
    batch = json.loads(done.stdout)
    serials = {s["serial"]: s for s in batch["serials"]}
    assert set(serials) == {*HEALTHY, *WEAK}
    (weak,) = WEAK
    assert DROOP in serials[weak]["outliers"]
    assert serials[weak]["values"][DROOP]["outcome"] == "fail"
    for serial in HEALTHY:
        assert serials[serial]["outliers"] == [], serial
    droop = next(m for m in batch["metrics"] if m["key"] == DROOP)
    assert droop["outliers"] == [weak]
    html = report.read_text(encoding="utf-8")
    assert all(serial in html for serial in serials) and "<script" not in html
    assert os.path.getsize(report) > 0
