"""``bringup analyze`` end to end: ``python -m bringup`` in a subprocess on files written here."""

import json
import math
import subprocess
import sys

import numpy as np
import pytest


def bringup(*argv, check_ok=True):
    proc = subprocess.run(
        [sys.executable, "-m", "bringup", *map(str, argv)],
        capture_output=True,
        text=True,
        timeout=120,
    )
    if check_ok:
        assert proc.returncode == 0, proc.stderr
    return proc


def scope_like(y, seed=0, noise=0.05, lo=-2.0, hi=14.0):
    rng = np.random.default_rng(seed)
    lsb = (hi - lo) / 256  # 8-bit
    return lo + np.clip(np.round((y + rng.normal(0, noise, y.size) - lo) / lsb), 0, 255) * lsb


def rc_pwm(n, dt, period, duty, tau, high=12.0, phase=0.0):
    ph = np.mod(np.arange(n) * dt + phase, period)
    on = duty * period
    return np.where(
        ph < on, high * (1 - np.exp(-ph / tau)), high * np.exp(-np.maximum(ph - on, 0) / tau)
    )


@pytest.fixture(scope="module")
def pwm_csv(tmp_path_factory):
    # Written once for the module: the commands only read it.
    tmp_path = tmp_path_factory.mktemp("pwm")
    dt, n = 1e-9, 200_000
    t = np.arange(n) * dt
    gate = scope_like(rc_pwm(n, dt, 40e-6, 0.3, 50e-9, phase=3e-6) + 0.4, seed=1)
    switch = scope_like(rc_pwm(n, dt, 40e-6, 0.3, 20e-9, high=24.0, phase=3e-6), lo=-4, hi=28)
    path = tmp_path / "capture.csv"
    with path.open("w") as f:
        f.write("# scope export\ntime,gate,switch\n")
        np.savetxt(f, np.column_stack([t, gate, switch]), delimiter=",", fmt="%.6g")
    return path


def test_edges_table_and_json(pwm_csv):
    table = bringup("analyze", "edges", pwm_csv).stdout
    assert "channel gate" in table and "rise time" in table and "duty cycle" in table
    data = json.loads(bringup("analyze", "edges", pwm_csv, "--json").stdout)
    for key in (
        "low_level_v",
        "high_level_v",
        "level_method",
        "rise_time_s",
        "fall_time_s",
        "overshoot_pct",
        "undershoot_pct",
        "frequency_hz",
        "duty_cycle",
        "edges",
    ):
        assert key in data
    assert data["channel"] == "gate"
    assert data["level_method"] == "histogram"
    assert data["edges"] == 10
    # First-order step: 10-90 % = tau ln 9 (REFERENCES §2 [computed]).
    assert data["rise_time_s"] == pytest.approx(50e-9 * math.log(9), rel=0.03)
    assert data["frequency_hz"] == pytest.approx(25e3, rel=1e-3)
    assert data["duty_cycle"] == pytest.approx(0.3, abs=2e-3)
    assert data["low_level_v"] == pytest.approx(0.4, abs=0.03)


def test_edges_channel_levels_and_npz(pwm_csv, tmp_path):
    data = json.loads(bringup("analyze", "edges", pwm_csv, "--channel", "switch", "--json").stdout)
    assert data["channel"] == "switch"
    assert data["high_level_v"] == pytest.approx(24.0, abs=0.1)
    dt, n = 1e-9, 50_000
    np.savez(
        tmp_path / "c.npz", t=np.arange(n) * dt, vgs=scope_like(rc_pwm(n, dt, 10e-6, 0.5, 40e-9))
    )
    data = json.loads(
        bringup("analyze", "edges", tmp_path / "c.npz", "--levels", "20,50,80", "--json").stdout
    )
    assert data["reference_levels_pct"] == [20.0, 50.0, 80.0]
    assert data["rise_time_s"] == pytest.approx(40e-9 * math.log(4), rel=0.05)


def test_edges_null_with_reason(tmp_path):
    # One rising edge only: no fall time, no period; null with a reason, never a made-up number.
    dt, n = 1e-9, 5000
    y = scope_like(12 * (1 - np.exp(-np.maximum(np.arange(n) * dt - 1e-6, 0) / 30e-9)))
    np.save(tmp_path / "step.npy", np.column_stack([np.arange(n) * dt, y]))
    data = json.loads(bringup("analyze", "edges", tmp_path / "step.npy", "--json").stdout)
    assert data["edges"] == 1
    assert data["fall_time_s"] is None and data["reasons"]["fall_time_s"]
    assert data["frequency_hz"] is None and data["reasons"]["frequency_hz"]


def test_droop(tmp_path):
    dt, n = 100e-9, 50_000
    t = np.arange(n) * dt
    on = (t >= 0.5e-3) & (t < 4.5e-3)
    s = t - 0.5e-3
    # The turn-on edge rings (0.8 V at 1 MHz, decaying in 2 us) before the linear sag.
    ring = 0.8 * np.exp(-np.maximum(s, 0.0) / 2e-6) * np.sin(2 * np.pi * s / 1e-6)
    y = scope_like(np.where(on, 11.4 - 151.5 * s + ring, 0.0), noise=0.03)
    np.savez(tmp_path / "vgs.npz", t=t, vgs=y)
    data = json.loads(
        bringup("analyze", "droop", tmp_path / "vgs.npz", "--floor", "8.2V", "--json").stdout
    )
    for key in ("start_v", "end_v", "droop_v", "droop_rate_v_per_s", "on_time_s", "t_on_max_s"):
        assert key in data
    assert data["droop_rate_v_per_s"] == pytest.approx(151.5, rel=0.02)
    assert data["start_v"] == pytest.approx(11.4, abs=0.05)  # the ring is not the start
    # (11.4 - 8.2) V / 151.5 V/s = 21.12 ms [computed]
    assert data["t_on_max_s"] == pytest.approx(3.2 / 151.5, rel=0.03)
    table = bringup("analyze", "droop", tmp_path / "vgs.npz", "--floor", "8.2").stdout
    assert "longest on-time" in table


def test_soak(tmp_path):
    t = np.arange(0, 900, 5.0)
    temp = 80 - 55 * np.exp(-t / 300) + np.random.default_rng(2).normal(0, 0.1, t.size)
    # A thermocouple meter reads to 0.1 degC: the readings are quantised to that step.
    temp = np.round(temp, 1)
    path = tmp_path / "soak.csv"
    path.write_text(
        "t;temp\n" + "".join(f"{a:.1f};{b:.1f}\n" for a, b in zip(t, temp, strict=True))
    )
    data = json.loads(bringup("analyze", "soak", path, "--band", "0.5 K", "--json").stdout)
    for key in ("final_c", "final_c_uncertainty", "tau_s", "settle_time_s"):
        assert key in data
    assert data["final_c"] == pytest.approx(80.0, abs=0.5)
    assert data["tau_s"] == pytest.approx(300.0, rel=0.05)
    # Within 0.5 K when 55 exp(-t/300) = 0.5: t = 300 ln 110 = 1410 s [computed]
    assert data["settle_time_s"] == pytest.approx(300 * math.log(110), rel=0.05)
    assert "final temperature" in bringup("analyze", "soak", path).stdout


def _bad(tmp_path, name, text):
    path = tmp_path / name
    path.write_text(text)
    return path


@pytest.mark.parametrize(
    ("make", "args", "fragment"),
    [
        (lambda p: p / "missing.csv", [], "no such file"),
        (lambda p: _bad(p, "empty.csv", ""), [], "the file is empty"),
        (lambda p: _bad(p, "cell.csv", "t,v\n0,1\n1,2\n2,oops\n"), [], "line 4, column 2"),
        (lambda p: _bad(p, "nan.csv", "t,v\n0,1\n1,nan\n2,1\n"), [], "line 3: NaN"),
        (
            lambda p: _bad(p, "time.csv", "t,v\n0,1\n2,2\n1,1\n"),
            [],
            "line 4: the time does not increase",
        ),
        (
            lambda p: _bad(p, "flat.csv", "".join(f"{i}e-9,3.3\n" for i in range(500))),
            [],
            "one level only",
        ),
        (lambda p: _bad(p, "few.csv", "0,0\n1,1\n2,0\n"), [], "too few samples"),
        (lambda p: _bad(p, "ok.csv", "t,v\n0,0\n1,1\n"), ["--levels", "10,90,50"], "--levels"),
        (lambda p: _bad(p, "ok2.csv", "t,v\n0,0\n1,1\n"), ["--channel", "vgs"], "no channel 'vgs'"),
    ],
)
def test_bad_input_is_one_line_and_exit_2(tmp_path, make, args, fragment):
    path = make(tmp_path)
    proc = bringup("analyze", "edges", path, *args, check_ok=False)
    assert proc.returncode == 2
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1, proc.stderr
    assert fragment in lines[0]
    assert "Traceback" not in proc.stderr
    assert proc.stdout == ""


def test_bad_units_on_options(tmp_path):
    path = _bad(tmp_path, "x.csv", "t,v\n0,0\n1,1\n2,1\n")
    proc = bringup("analyze", "droop", path, "--floor", "8.2 A", check_ok=False)
    assert proc.returncode == 2 and "--floor: cannot read '8.2 A' as a quantity in V" in proc.stderr
    proc = bringup("analyze", "soak", path, "--band", "1 V", check_ok=False)
    assert proc.returncode == 2 and "--band" in proc.stderr
    proc = bringup("analyze", "droop", path, check_ok=False)  # --floor is required
    assert proc.returncode == 2 and "--floor" in proc.stderr and "Traceback" not in proc.stderr
