"""Headless runs (``bringup run --sim --auto --json``) on every scenario of the simulated bench.

Healthy passes every stage; each fault scenario passes the stages before its own, fails its
own, and the later stages are not run (their order is the order of safety). A false pass is the
worst bug this product can have, so the fault scenarios are checked as strictly as the healthy
one. The six runs are separate processes started together (the bench is on loopback ports).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest

from bringup.store import SessionLog

STAGES = ["power-rails", "gate-overdrive", "edge-speed", "droop-max-on-time", "thermal"]
# The scenario plan agreed with the simulator (scenario -> the stage it must fail).
FAULTS = {
    "sagging-rail": "power-rails",
    "no-overdrive": "gate-overdrive",
    "slow-gate": "edge-speed",
    "weak-bootstrap": "droop-max-on-time",
    "hot-switch": "thermal",
}
SCENARIOS = ["healthy", *FAULTS]


def _command(scenario: str, db, seed: int = 0) -> list[str]:
    return [sys.executable, "-m", "bringup", "run", "--sim", "--scenario", scenario,
            "--seed", str(seed),
            "--serial", "DHS24-0007", "--operator", "tester", "--db", str(db),
            "--auto", "--json"]  # fmt: skip


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    """Run all scenarios at once; scenario -> (exit status, JSON summary, stderr, db path)."""
    folder = tmp_path_factory.mktemp("headless")
    env = {**os.environ, "PYTHONUNBUFFERED": "1"}
    procs = {}
    # healthy once more with another noise seed (other probe gain errors, other noise)
    for name, scenario, seed in [*((s, s, 0) for s in SCENARIOS), ("healthy-seed-7", "healthy", 7)]:
        db = folder / f"{name}.sqlite"
        procs[name] = (subprocess.Popen(_command(scenario, db, seed), stdout=subprocess.PIPE,
                                            stderr=subprocess.PIPE, text=True, env=env), db)  # fmt: skip
    out = {}
    for scenario, (proc, db) in procs.items():
        stdout, stderr = proc.communicate(timeout=240)
        lines = [line for line in stdout.splitlines() if line.strip()]
        assert len(lines) == 1, f"{scenario}: stdout must be one JSON object, got {stdout!r}"
        out[scenario] = (proc.returncode, json.loads(lines[0]), stderr, db)
    return out


@pytest.mark.parametrize("name", ["healthy", "healthy-seed-7"])
def test_healthy_passes_every_stage(runs, name):
    status, summary, stderr, _ = runs[name]
    assert status == 0, stderr
    assert summary["verdict"] == "pass"
    assert [s["id"] for s in summary["stages"]] == STAGES
    assert all(s["verdict"] == "pass" for s in summary["stages"]), summary
    assert "Traceback" not in stderr


@pytest.mark.parametrize("scenario", list(FAULTS))
def test_fault_fails_its_own_stage_and_stops_the_later_ones(runs, scenario):
    status, summary, stderr, _ = runs[scenario]
    own = FAULTS[scenario]
    verdicts = {s["id"]: s["verdict"] for s in summary["stages"]}
    assert status == 1, stderr
    assert summary["verdict"] == "fail"
    assert verdicts[own] == "fail", (scenario, verdicts)
    before = STAGES[: STAGES.index(own)]
    after = STAGES[STAGES.index(own) + 1 :]
    # Stages before the fault are inside their limits (a guard band may make one conditional).
    assert all(verdicts[s] in ("pass", "conditional-pass") for s in before), verdicts
    assert all(verdicts[s] == "not-run" for s in after), verdicts
    assert "Traceback" not in stderr


def test_the_log_holds_every_attempt_with_its_evidence(runs):
    _, summary, _, db = runs["healthy"]
    with SessionLog.open(db, create=False) as log:
        data = log.session(summary["session"])
        assert data.summary.finished and data.summary.verdict == "pass"
        assert log.verify_chain(summary["session"]).ok
        attempts = data.attempts
        assert [a.step_id for a in attempts] == [
            "first-power", "rails-unloaded", "logic-meter", "rails-loaded",
            "vgs-on", "edges", "droop", "soak",
        ]  # fmt: skip
        for a in attempts:
            assert a.operator == "tester" and a.outcome == "pass"
            # every attempt names the instruments by their *IDN? replies
            assert set(a.instruments) == {"scope", "supply", "thermometer"}
            assert all(v.startswith("NULLPOINT,") for v in a.instruments.values())
            assert a.verdicts and all("margin" in v for v in a.verdicts.values())
        edges = next(a for a in attempts if a.step_id == "edges")
        assert set(edges.waveforms) == {"vgs", "switch"}
        stored = log.load_waveform(edges.id, "switch")
        # raw ADC codes plus scale, not volts as float64
        assert stored.codes.dtype.kind == "i" and stored.codes.size == 100_000
        assert edges.predictions["switch_rise"] > 0
        assert edges.settings["scope"]["points"] == 100_000


def test_later_stages_are_logged_as_not_run(runs):
    _, summary, _, db = runs["no-overdrive"]
    with SessionLog.open(db, create=False) as log:
        data = log.session(summary["session"])
        assert not data.summary.finished  # a failed session stays open for a retake
        by_step = {a.step_id: a for a in data.attempts}
        assert by_step["vgs-on"].outcome == "fail"
        for step in ("edges", "droop", "soak"):
            assert by_step[step].outcome == "not-run"
            assert by_step[step].waveforms == {}
        assert log.verify_chain(summary["session"]).ok


# The diagnosis names a part by its [design] key; a simulator change with no design key is
# named by the part it stands for (sim_instruments/scenarios.py: gate_drive_to_bus is the
# floating supply strapped to the bus; the vdrv_* changes are the gate-drive rail's feed).
PART_OF_CHANGE = {
    "gate_drive_to_bus": "bootstrap_supply",
    "vdrv_feed_resistance": "vdrv_supply",
    "vdrv_rail_impedance": "vdrv_supply",
    "vdrv_ripple_pp": "vdrv_supply",
}


def _failed_attempt(summary: dict) -> dict:
    return next(a for a in summary["attempts"] if a["state"] == "fail")


@pytest.mark.parametrize("scenario", list(FAULTS))
def test_failed_step_names_the_changed_part_first(runs, scenario):
    from sim_instruments.scenarios import SCENARIOS as SIM

    _, summary, _, db = runs[scenario]
    failed = _failed_attempt(summary)
    diagnosis = failed["diagnosis"]
    assert diagnosis and diagnosis["causes"], failed
    first = diagnosis["causes"][0]
    changed = {PART_OF_CHANGE.get(key, key) for key in SIM[scenario].changes}
    assert first["part"] in changed, (scenario, first, changed)
    assert first["evidence"] and first["check"]
    # every cause ranked, most likely first
    weights = [c["weight"] for c in diagnosis["causes"]]
    assert weights == sorted(weights, reverse=True)
    # the record keeps it with the attempt (in its details, outside the hash-chain form)
    with SessionLog.open(db, create=False) as log:
        data = log.session(summary["session"])
        stored = next(a for a in data.attempts if a.outcome == "fail")
        assert stored.extra["details"]["diagnosis"] == diagnosis
        assert log.verify_chain(summary["session"]).ok


@pytest.mark.parametrize("name", ["healthy", "healthy-seed-7"])
def test_healthy_runs_carry_no_diagnosis(runs, name):
    _, summary, _, _ = runs[name]
    assert all(a["diagnosis"] is None for a in summary["attempts"]), summary


def test_slow_gate_infers_the_fitted_gate_resistor(runs):
    # The scenario fits 1 kohm where 10 ohm was meant; SLUA618's plateau timing inverted
    # (R = t * (V_drv - V_pl) / Q_gd) must land near it: first-order, so within 30 %.
    first = _failed_attempt(runs["slow-gate"][1])["diagnosis"]["causes"][0]
    assert 700 < first["inferred"]["gate_resistor_ohm"] < 1300, first


def test_weak_bootstrap_says_below_the_floor_and_the_effective_parts(runs):
    import re

    diagnosis = _failed_attempt(runs["weak-bootstrap"][1])["diagnosis"]
    text = " ".join([*diagnosis["notes"], *(c["title"] for c in diagnosis["causes"])])
    assert "already starts at" in text and "below the 10.5 V floor" in text, text
    # both readings of the sag: the capacitor as N nF against the design's 1 uF, and the
    # current as M mA/uA with the design's capacitor
    assert re.search(r"behaves like [\d.]+ nF against the design's 1 µF", text), text
    assert re.search(r"[\d.]+ [mµ]A with the design's 1 µF", text), text
    # the scenario's true drain current: about 10.4 V over 1.2 kohm plus the 0.15 mA
    # quiescent; with the design's 1 uF (the scenario fits 680 nF) the sag reads it 1/0.68 high
    lead = diagnosis["causes"][0]
    assert 8e-3 < lead["inferred"]["drain_current_a"] < 16e-3, lead
    assert "gate to its source" in lead["check"]


def test_a_resumed_session_shows_the_same_diagnosis(runs):
    from bringup.runner import SessionRunner

    _, summary, _, db = runs["weak-bootstrap"]
    failed = _failed_attempt(summary)
    with SessionRunner.resume(summary["session"], db_path=db, operator="tester") as resumed:
        again = resumed.attempts(failed["step"])[-1]
    assert again.diagnosis == failed["diagnosis"]
    # the headless lines print it: notes, then each cause with its evidence and its check
    from bringup.runner.reporting import attempt_lines

    text = "\n".join(attempt_lines(7, 8, again))
    assert "? diagnosis: Vgs already starts at" in text
    first = failed["diagnosis"]["causes"][0]
    assert f"? cause 1: {first['title']}" in text
    assert f"check: {first['check']}" in text
    assert all(e in text for e in first["evidence"])


def test_the_record_shows_the_diagnosis(runs, tmp_path):
    """The readable record (HTML and PDF, one rendering model) lists the likely causes of the
    failed step, the first with its check; before, only the embedded JSON carried them."""
    from pypdf import PdfReader

    _, summary, _, db = runs["no-overdrive"]
    first = _failed_attempt(summary)["diagnosis"]["causes"][0]
    pages = {}
    for fmt in ("html", "pdf"):
        out = tmp_path / f"record.{fmt}"
        done = subprocess.run(
            [sys.executable, "-m", "bringup", "export", summary["session"], "--format", fmt,
             "--out", str(out), "--db", str(db)],
            capture_output=True, text=True, timeout=120,
        )  # fmt: skip
        assert done.returncode == 0, done.stderr
        pages[fmt] = out
    html = pages["html"].read_text(encoding="utf-8")
    visible = html.split('<script type="application/json"', 1)[0]  # not the embedded record
    assert "Likely causes, most likely first" in visible
    assert first["title"].split(":")[0] in visible
    pdf = " ".join(" ".join(p.extract_text().split()) for p in PdfReader(str(pages["pdf"])).pages)
    assert "Likely causes, most likely first" in pdf
    assert " ".join(first["title"].split(":")[0].split()) in pdf


@pytest.mark.parametrize("name", ["healthy", "healthy-seed-7"])
def test_every_judged_metric_carries_its_uncertainty(runs, name):
    """--json gives each metric its measured value with the expanded uncertainty U (k = 2)
    the decision used (the larger of the computed budget and the board's declared value)."""
    _, summary, _, _ = runs[name]
    judged = [m for a in summary["attempts"] for m in a["metrics"] if m["outcome"] is not None]
    assert len(judged) >= 10, summary
    for m in judged:
        assert m["measured"] is not None and m["uncertainty"] is not None, m
        assert 0 < m["uncertainty"] < float("inf"), m
