"""``bringup sim`` as a user runs it: a subprocess that serves until SIGTERM and exits 0.

The bench file it writes is read back by the bench-file loader of the instrument layer
(``bringup.instruments.bench.load_bench``), so the two sides of the contract in DEVELOPERS.md
are checked against each other.
"""

from __future__ import annotations

import os
import queue
import signal
import subprocess
import sys
import threading
import tomllib

import pytest


def _lines(proc: subprocess.Popen) -> queue.Queue:
    q: queue.Queue = queue.Queue()

    def pump() -> None:
        for line in proc.stdout:
            q.put(line)
        q.put(None)

    threading.Thread(target=pump, daemon=True).start()
    return q


def _wait_for(q: queue.Queue, prefix: str, timeout_s: float = 20.0) -> list[str]:
    seen = []
    while True:
        line = q.get(timeout=timeout_s)
        if line is None:
            raise AssertionError(f"bringup sim ended before {prefix!r}: {seen}")
        seen.append(line)
        if line.startswith(prefix):
            return seen


@pytest.mark.parametrize("stop_signal", [signal.SIGTERM, signal.SIGINT])
def test_bringup_sim_serves_writes_a_bench_file_and_stops_on_a_signal(
    tmp_path, visa_rm, stop_signal
):
    bench_path = tmp_path / "bench.toml"
    proc = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "bringup",
            "sim",
            "--port-base",
            "0",
            "--scenario",
            "slow-gate",
            "--seed",
            "4",
            "--bench-out",
            str(bench_path),
        ],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env={**os.environ, "PYTHONUNBUFFERED": "1"},
    )
    try:
        q = _lines(proc)
        lines = _wait_for(q, "serving on 127.0.0.1")
        text = "".join(lines)
        data = tomllib.loads(bench_path.read_text())
        assert data["simulation"] == {"enabled": True}
        assert data["scope"]["profile"] == "sim-scope"
        assert data["supply"]["profile"] == "sim-supply"
        assert data["thermometer"]["profile"] == "sim-thermometer"
        assert data["scope"]["channels"]["3"] == {"net": "vgs", "probe_ratio": 50}
        for role in ("scope", "supply", "thermometer"):
            assert data[role]["resource"] in text  # printed and written alike
        inst = visa_rm.open_resource(
            data["scope"]["resource"], read_termination="\n", write_termination="\n", timeout=3000
        )
        assert inst.query("SIM:SCEN?") == '"slow-gate"'
        inst.close()
        from bringup.instruments.bench import load_bench

        config = load_bench(bench_path)
        assert config is not None
    finally:
        proc.send_signal(stop_signal)
        try:
            rc = proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            proc.kill()
            raise
    assert rc == 0
    assert proc.stderr.read() == ""
    rest = []
    while (line := q.get(timeout=10)) is not None:
        rest.append(line)
    assert rest == ["simulated bench stopped (supply output OFF).\n"]


def test_bringup_sim_rejects_an_unknown_scenario_in_one_line():
    out = subprocess.run(
        [sys.executable, "-m", "bringup", "sim", "--scenario", "on-fire"],
        capture_output=True,
        text=True,
        timeout=30,
    )
    assert out.returncode == 2
    assert out.stderr.count("\n") == 1 and "on-fire" in out.stderr
    assert "Traceback" not in out.stderr


@pytest.mark.parametrize("arg", ["--board=/nonexistent/board.toml", "--port-base=70000"])
def test_bringup_sim_bad_options_are_one_line_errors(arg):
    out = subprocess.run(
        [sys.executable, "-m", "bringup", "sim", arg], capture_output=True, text=True, timeout=30
    )
    assert out.returncode == 2 and out.stderr.count("\n") == 1, out.stderr
