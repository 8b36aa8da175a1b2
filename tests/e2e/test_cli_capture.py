"""``bringup capture``: one record from the scope, checked, saved for ``bringup analyze``; the
supply is never spoken to, and every SCPI line goes to ``--scpi-log``."""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

from bringup.instruments.profiles import BUILTIN_DIR


def _bringup(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "bringup", *args], capture_output=True,
                          text=True, timeout=120)  # fmt: skip


@pytest.fixture
def powered_bench(sim_bench, tmp_path):
    """A simulated bench with its supply ON at 24 V and the board switching (set in the
    simulator itself, as an operator would at the front panel)."""
    sim = sim_bench()
    sim.supply.new_session().execute("VOLT:PROT 27;CURR 8;VOLT 24;OUTP ON")
    sim.board.set_pwm(enabled=True)
    assert sim.supply.output_on
    bench = tmp_path / "bench.toml"
    bench.write_text(sim.bench_file_text())
    return sim, bench


def test_capture_saves_a_checked_record_that_analyze_reads(powered_bench, tmp_path):
    sim, bench = powered_bench
    out, log = tmp_path / "cap.npz", tmp_path / "scpi.log"
    supply_lines = len(sim.supply.received_lines())
    done = _bringup("capture", "--bench", str(bench), "--net", "switch", "--points", "20000",
                    "--span", "100us", "--out", str(out), "--scpi-log", str(log))  # fmt: skip
    assert done.returncode == 0, done.stderr
    # the supply was never spoken to: still ON, not one line more
    assert sim.supply.output_on
    assert len(sim.supply.received_lines()) == supply_lines
    with np.load(out) as z:
        assert {"t", "switch", "meta_codes", "meta_scale", "meta_identity"} <= set(z.files)
        assert str(z["meta_identity"]).startswith("NULLPOINT,SIMSCOPE-4,")
        y_inc, y_org, *_ = z["meta_scale"]
        np.testing.assert_allclose(z["switch"], z["meta_codes"] * y_inc + y_org)
        assert z["t"].size == 20000
        assert 20.0 < np.percentile(z["switch"], 95) < 28.0  # the 24 V bus, switched
    edges = _bringup("analyze", "edges", str(out), "--channel", "switch", "--json")
    assert edges.returncode == 0, edges.stderr
    result = json.loads(edges.stdout)
    assert result["amplitude_v"] > 20.0  # the 24 V bus switched (design 24 V, demo board)
    assert result["edges"] >= 2
    text = log.read_text()
    assert " scope > *IDN?" in text and "<binary block of 40000 bytes>" in text
    assert " supply " not in text


def test_capture_with_a_wrong_profile_is_one_line_naming_the_key(powered_bench, tmp_path):
    sim, bench = powered_bench
    folder = tmp_path / "profiles"
    folder.mkdir()
    text = (BUILTIN_DIR / "sim-scope.toml").read_text()
    # the instrument keeps sending big-endian codes; the copy says little-endian and has no
    # byte-order command to make it so
    text = text.replace('byte_order = "big"', 'byte_order = "little"')
    text = text.replace('byte_order = "FORM:BORD {order}"\n', "")
    text = text.replace(
        'identity = "^NULLPOINT,SIMSCOPE-4,"',
        'identity = "^NULLPOINT,SIMSCOPE-4,"\nabsent = ["byte_order"]',
    )
    (folder / "sim-scope.toml").write_text(text)
    out = tmp_path / "cap.npz"
    done = _bringup("capture", "--bench", str(bench), "--channel", "2", "--profiles",
                    str(folder), "--out", str(out))  # fmt: skip
    assert done.returncode != 0
    assert not out.exists()
    (line,) = done.stderr.strip().splitlines()
    assert "block.byte_order" in line and str(folder / "sim-scope.toml") in line
    assert sim.supply.output_on


def test_scpi_log_of_a_headless_run_holds_every_instrument_exchange(sim_bench, tmp_path):
    sim = sim_bench()
    bench = tmp_path / "bench.toml"
    bench.write_text(sim.bench_file_text())
    log = tmp_path / "run-scpi.log"
    done = _bringup("instruments", "--bench", str(bench), "--scpi-log", str(log))
    assert done.returncode == 0, done.stderr
    lines = log.read_text().splitlines()
    for role in ("scope", "supply", "thermometer"):
        assert any(f" {role} > *IDN?" in line for line in lines), role
        assert any(f" {role} < NULLPOINT," in line for line in lines), role
    # every line: an ISO 8601 UTC time, the instrument, the direction, the text
    assert all(line[:4].isdigit() and "Z " in line[:40] for line in lines)
    refused = _bringup("instruments", "--bench", str(bench), "--scpi-log",
                       str(tmp_path / "no-such-folder" / "x.log"))  # fmt: skip
    assert refused.returncode == 2
    (one,) = refused.stderr.strip().splitlines()
    assert "--scpi-log" in one
