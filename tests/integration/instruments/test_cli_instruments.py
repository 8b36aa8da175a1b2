"""``bringup instruments`` against the simulated bench (never with ``--discover``)."""

from __future__ import annotations

import subprocess
import sys

from bringup.cli import main
from bringup.instruments.profiles import BUILTIN_DIR


def test_every_instrument_answers(sim_bench, tmp_path, capsys):
    sim = sim_bench()
    path = tmp_path / "bench.toml"
    path.write_text(sim.bench_file_text())
    assert main(["instruments", "--bench", str(path)]) == 0
    out = capsys.readouterr().out
    for role, model, profile in (
        ("scope", "SIMSCOPE-4", "sim-scope"),
        ("supply", "SIMSUPPLY-60", "sim-supply"),
        ("thermometer", "SIMTHERM-1", "sim-thermometer"),
    ):
        assert f"{role}: {sim.resources[role]} (profile {profile})" in out
        assert f"NULLPOINT,{model}," in out
        assert f"profile   {profile} matches" in out
    assert out.count("errors    queue empty") == 3
    assert "output    OFF" in out
    assert "CH1=gate (10:1)" in out
    assert out.rstrip().endswith("all instruments answer")


def test_a_queued_error_and_a_profile_that_does_not_fit_are_reported(sim_bench, tmp_path, capsys):
    sim = sim_bench()
    folder = tmp_path / "profiles"
    folder.mkdir()
    text = (BUILTIN_DIR / "sim-thermometer.toml").read_text()
    text = text.replace('name = "sim-thermometer"', 'name = "lab-meter"').replace(
        "SIMTHERM-1", "LABMETER-9"
    )
    (folder / "lab-meter.toml").write_text(text)
    bench = sim.bench_file_text().replace('profile = "sim-thermometer"', 'profile = "lab-meter"')
    path = tmp_path / "bench.toml"
    path.write_text(bench)
    sim.scope.faults.inject("error", code=-350)
    assert main(["instruments", "--bench", str(path), "--profiles", str(folder)]) == 1
    out = capsys.readouterr().out
    assert "profile   lab-meter does NOT match (profiles that do: sim-thermometer" in out
    assert "errors    -350," in out
    assert out.rstrip().endswith("some instruments need attention")


def test_bad_bench_file_is_one_line_with_the_key(tmp_path):
    path = tmp_path / "bench.toml"
    path.write_text('[scope]\nresource = "TCPIP::127.0.0.1::5025::SOCKET"\nprofile = "sim-scope"\n')
    done = subprocess.run(
        [sys.executable, "-m", "bringup", "instruments", "--bench", str(path)],
        capture_output=True,
        text=True,
        timeout=60,
    )
    assert done.returncode == 2
    assert done.stderr.strip() == f"bringup: error: {path}: supply: missing table [supply]"
