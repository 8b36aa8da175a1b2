"""A healthy headless run through every supply and thermometer dialect the simulator speaks,
each driven by the profile shipped for that family of instruments.

The simulated bench speaks the dialect (``start_bench(dialects=...)``) from the same physical
model; ``bringup run --bench FILE --auto`` drives it through the shipped profile, copied as it
is into a profile folder (each family profile's identity pattern admits the simulator's
``*IDN?`` beside the family's). The stage verdicts must be the same as through the simulator's own
profiles and every metric within 2 % (metrics that sit near zero, whose 2 % would be below
the instruments' noise, within 2 % of the target's limit instead).
"""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

from bringup.instruments.profiles import BUILTIN_DIR
from bringup.store import SessionLog
from sim_instruments.bench import start_bench

ANSWERS = Path(__file__).resolve().parents[2] / "checklists" / "answers-demo.toml"
COMBINATIONS = {
    "own": {"supply": "nullpoint", "thermometer": "nullpoint"},
    "triple+dmm": {"supply": "triple", "thermometer": "dmm"},
    "select+logger": {"supply": "select", "thermometer": "logger"},
}


def _bench_folder(folder: Path, bench_text: str) -> Path:
    """The bench file and a profile folder holding copies of the shipped profiles it names."""
    profiles = folder / "profiles"
    profiles.mkdir(parents=True)
    for name in re.findall(r'^profile = "([^"]+)"$', bench_text, flags=re.M):
        text = (BUILTIN_DIR / f"{name}.toml").read_text()
        (profiles / f"{name}.toml").write_text(text)
    (folder / "bench.toml").write_text(bench_text)
    return profiles


@pytest.fixture(scope="module")
def runs(tmp_path_factory, demo_design):
    """combination -> (exit status, JSON summary, stderr, db path, the sim's supply lines).

    One run at a time, at 400 simulated seconds per wall second. The soak's readings are
    stamped on the simulator's own clock, which the runner holds and steps by one interval per
    reading (``bringup.runner.bench_link.SoakClock``), so the machine's load does not move
    them along the heating curve."""
    out = {}
    for name, dialects in COMBINATIONS.items():
        folder = tmp_path_factory.mktemp(name.replace("+", "-"))
        with start_bench(dict(demo_design), dialects=dialects, time_scale=400.0) as sim:
            profiles = _bench_folder(folder, sim.bench_file_text())
            db = folder / "log.sqlite"
            env = {**os.environ, "PYTHONUNBUFFERED": "1", "BRINGUP_PROFILES": str(profiles)}
            command = [sys.executable, "-m", "bringup", "run", "--bench",
                       str(folder / "bench.toml"), "--board", "demo", "--serial", "DHS24-0009",
                       "--operator", "tester", "--db", str(db), "--auto", "--json",
                       "--answers", str(ANSWERS)]  # fmt: skip
            done = subprocess.run(command, capture_output=True, text=True, env=env, timeout=240)
            lines = [line for line in done.stdout.splitlines() if line.strip()]
            summary = json.loads(lines[-1]) if lines else {}
            out[name] = (done.returncode, summary, done.stderr, db, sim.supply.received_lines())
    return out


def _metrics(db: Path, session: str) -> dict[tuple[str, str], float]:
    log = SessionLog.open(db)
    try:
        found = {}
        for attempt in log.attempts(session):
            for metric, value in attempt.metrics.items():
                number = value.get("value") if isinstance(value, dict) else value
                if isinstance(number, int | float):
                    found[(attempt.step_id, metric)] = float(number)
        return found
    finally:
        log.close()


@pytest.mark.parametrize("name", list(COMBINATIONS))
def test_healthy_run_passes_through_the_dialect(runs, name):
    status, summary, stderr, _, _ = runs[name]
    assert status == 0, stderr
    assert summary["verdict"] == "pass"
    assert "Traceback" not in stderr


@pytest.mark.parametrize("name", [n for n in COMBINATIONS if n != "own"])
def test_same_verdicts_and_metrics_as_through_the_simulators_own_profiles(runs, name):
    _, reference, _, ref_db, _ = runs["own"]
    _, summary, stderr, db, _ = runs[name]
    assert summary["stages"] == reference["stages"], stderr
    ref = _metrics(ref_db, reference["session"])
    got = _metrics(db, summary["session"])
    assert set(got) == set(ref)
    assert len(ref) > 20  # every stage measured something
    off = []
    for key, expected in ref.items():
        # near zero (a switch drop of millivolts, a droop of a few mV) 2 % is below the noise:
        # there the 2 % is of the metric's scale in this run, the largest of its readings
        scale = max(abs(expected), 0.05 * max(abs(v) for (_, m), v in ref.items() if m == key[1]))
        share = 0.02  # every metric, the soak's too (its log is on the simulated clock)
        if abs(got[key] - expected) > share * scale:
            off.append((key, got[key], expected))
    assert not off, off


def test_three_channel_supply_addressed_by_argument_feeds_the_board_from_its_channel(runs):
    # the reported reproduction: channel by argument, protection YES/NO, mode CV/CC/UR; every
    # output command names CH2 and the protection is armed on CH2 before it goes ON
    lines = runs["triple+dmm"][4]
    on = [i for i, line in enumerate(lines) if line.startswith(":OUTPut:STATe CH2,ON")]
    assert on, lines[-40:]
    first = on[0]
    before = lines[:first]
    assert any(line.startswith(":OUTPut:OVP:VALue CH2,") for line in before)
    assert any(line.startswith(":OUTPut:OCP:VALue CH2,") for line in before)
    assert ":OUTPut:OVP:VALue? CH2" in before and ":OUTPut:OCP:VALue? CH2" in before
    assert any(line.startswith(":APPLy CH2,") for line in before)
    assert ":OUTPut:MODE? CH2" in lines  # the ramp asked the regulation mode in words
    outputs = [line for line in lines if line.startswith(":OUTPut:STATe ")]
    assert all(line.split()[1].startswith("CH2,") for line in outputs), outputs
    assert (
        lines[-2:] == [":OUTPut:STATe CH2,OFF", ":SYSTem:ERRor?"]
        or ":OUTPut:STATe? CH2" in (lines[-1])
    )
