"""Headless runs of the half-bridge checklist on the demo half-bridge board, every scenario of
the simulated half-bridge, two noise seeds each (``bringup run --sim --board demo-half-bridge
--checklist half-bridge-bootstrap --scenario NAME --auto --json``).

Healthy passes every stage; each fault passes the stages before its own, fails its own, and the
later ones are not run. The runs are separate processes started together (loopback ports).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest

STAGES = ["power-rails", "low-side-gate", "high-side-gate", "dead-time", "bootstrap-refresh",
          "switch-node", "switching-energy", "thermal"]  # fmt: skip
# The scenario plan agreed with the simulator (sim_instruments/half_bridge_scenarios.py).
FAULTS = {
    "shoot-through": "dead-time",
    "long-dead-time": "dead-time",
    "no-refresh": "bootstrap-refresh",
    "switch-node-spike": "switch-node",
}
SEEDS = (0, 11)


def _command(scenario: str, db, seed: int) -> list[str]:
    return [sys.executable, "-m", "bringup", "run", "--sim", "--board", "demo-half-bridge",
            "--checklist", "half-bridge-bootstrap", "--scenario", scenario, "--seed", str(seed),
            "--serial", "PLB48-0007", "--operator", "tester", "--db", str(db),
            "--auto", "--json"]  # fmt: skip


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    """(scenario, seed) -> (exit status, JSON summary, stderr)."""
    folder = tmp_path_factory.mktemp("half-bridge")
    env = {**os.environ, "PYTHONUNBUFFERED": "1"}
    procs = {}
    for scenario in ["healthy", *FAULTS]:
        for seed in SEEDS:
            db = folder / f"{scenario}-{seed}.sqlite"
            procs[scenario, seed] = subprocess.Popen(
                _command(scenario, db, seed), stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                text=True, env=env)  # fmt: skip
    out = {}
    for key, proc in procs.items():
        stdout, stderr = proc.communicate(timeout=300)
        lines = [line for line in stdout.splitlines() if line.strip()]
        assert len(lines) == 1, f"{key}: stdout must be one JSON object, got {stdout!r}"
        out[key] = (proc.returncode, json.loads(lines[0]), stderr)
    return out


@pytest.mark.parametrize("seed", SEEDS)
def test_healthy_passes_every_stage(runs, seed):
    status, summary, stderr = runs["healthy", seed]
    assert status == 0, stderr
    assert summary["verdict"] == "pass"
    assert [s["id"] for s in summary["stages"]] == STAGES
    assert all(s["verdict"] == "pass" for s in summary["stages"]), summary["stages"]
    assert "Traceback" not in stderr


@pytest.mark.parametrize("seed", SEEDS)
@pytest.mark.parametrize("scenario", list(FAULTS))
def test_fault_fails_its_own_stage_and_stops_the_later_ones(runs, scenario, seed):
    status, summary, stderr = runs[scenario, seed]
    own = FAULTS[scenario]
    verdicts = {s["id"]: s["verdict"] for s in summary["stages"]}
    assert status == 1, stderr
    assert summary["verdict"] == "fail"
    assert verdicts[own] == "fail", (scenario, verdicts)
    at = STAGES.index(own)
    assert all(verdicts[s] == "pass" for s in STAGES[:at]), verdicts
    assert all(verdicts[s] == "not-run" for s in STAGES[at + 1 :]), verdicts
    assert "Traceback" not in stderr


def _metric(summary: dict, step: str, metric: str) -> dict:
    attempt = next(a for a in summary["attempts"] if a["step"] == step)
    return next(m for m in attempt["metrics"] if m["id"] == metric)


def test_each_fault_is_named_by_the_metric_it_breaks(runs):
    """Not only the stage: the reading that fails is the one the fault moves."""
    shoot = runs["shoot-through", 0][1]
    overlap = _metric(shoot, "dead-time.dead-times", "gate_overlap")
    assert overlap["outcome"] == "fail" and overlap["measured"] > 10e-9
    assert _metric(shoot, "dead-time.dead-times", "shoot_through_current")["measured"] > 4.0
    long = runs["long-dead-time", 0][1]
    assert _metric(long, "dead-time.dead-times", "dead_time_high_to_low")["measured"] > 400e-9
    assert _metric(long, "dead-time.dead-times", "gate_overlap")["outcome"] == "pass"
    refresh = runs["no-refresh", 0][1]
    margin = _metric(refresh, "bootstrap-refresh.refresh-max-duty", "vbs_uvlo_margin")
    assert margin["outcome"] == "fail" and margin["measured"] < 0.4
    spike = runs["switch-node-spike", 0][1]
    assert _metric(spike, "switch-node.ringing", "switch_min")["measured"] < -8.0
    assert _metric(spike, "switch-node.ringing", "loop_inductance")["outcome"] == "fail"
    healthy = runs["healthy", 0][1]
    power = _metric(healthy, "switching-energy.energy", "switching_power")
    assert power["outcome"] == "pass" and 0.4 < power["measured"] < 1.2
