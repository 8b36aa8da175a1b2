"""The simulated half-bridge bench's current probe, through PyVISA: its wiring in the generated
bench file (ratio in A/V, deskew), the probe kinds a net accepts, and its lag behind the voltage
probes (the deskew a bench measures on a resistive step, common practice: current probes'
amplifiers lag passive voltage probes by a few nanoseconds).
"""

from __future__ import annotations

import numpy as np
import pytest

from bringup.boards.board_file import load_board
from bringup.instruments.bench import load_bench
from sim_instruments.scope import CURRENT_PROBE_SKEW_S


@pytest.fixture
def half_bridge(sim_bench):
    return sim_bench(design=load_board("demo-half-bridge").design)


def _crossing(t: np.ndarray, y: np.ndarray, level: float, rising: bool) -> float:
    """First crossing instant of ``level`` by linear interpolation (IEEE 181 crossing)."""
    s = y - level
    hits = np.flatnonzero((s[:-1] < 0) & (s[1:] >= 0) if rising else (s[:-1] > 0) & (s[1:] <= 0))
    i = int(hits[0])
    return float(t[i] + (t[i + 1] - t[i]) * s[i] / (s[i] - s[i + 1]))


def test_the_bench_file_wires_a_current_probe_with_its_deskew(half_bridge, tmp_path):
    path = tmp_path / "bench.toml"
    path.write_text(half_bridge.bench_file_text())
    config = load_bench(path)
    wiring = config.channels[4]
    assert (wiring.net, wiring.kind, wiring.probe_ratio) == ("i_switch", "current", 10.0)
    assert wiring.deskew_s == pytest.approx(CURRENT_PROBE_SKEW_S)
    assert [config.channels[n].kind for n in (1, 2, 3)] == [
        "single-ended", "single-ended", "differential"]  # fmt: skip


def test_a_current_needs_a_current_probe_and_a_voltage_a_voltage_probe(half_bridge, connect):
    scope = connect(half_bridge, "scope")
    assert scope.query("SIM:PROB4:TYPE?") == "CURR"
    scope.write("SIM:PROB4:NET SWITCH")  # a current probe on a voltage net
    assert scope.query("SYST:ERR?").startswith("-221,")
    scope.write("SIM:PROB1:NET I_SWITCH")  # a voltage probe on a current
    assert scope.query("SYST:ERR?").startswith("-221,")
    scope.write("SIM:PROB1:TYPE CURR;:SIM:PROB1:NET I_SWITCH")
    assert scope.query("SYST:ERR?") == '0,"No error"'
    assert scope.query("SIM:PROB1:NET?") == "I_SWITCH"


def test_the_high_side_board_has_no_current_net(sim_bench, connect):
    scope = connect(sim_bench(), "scope")
    scope.write("SIM:PROB4:TYPE CURR;:SIM:PROB4:NET I_SWITCH")
    assert scope.query("SYST:ERR?").startswith("-221,")


def test_the_current_probe_lags_the_voltage_probe_by_its_deskew(half_bridge, connect):
    """The turn-off: the switch node falls (its 50 % crossing), then the drain current falls
    (its 50 % crossing). On the scope the current's crossing comes later than on the model's
    own waveforms by the probe's delay."""
    supply = connect(half_bridge, "supply")
    supply.write("VOLT 48;CURR 10;OUTP ON")
    assert supply.query("OUTP?") == "1"
    scope = connect(half_bridge, "scope", timeout_ms=20000)
    scope.write("SIM:PWM ON;SIM:PWM:DUTY 0.5")
    scope.write("SENS2:VOLT:RANG:PTP 80;SENS2:VOLT:RANG:OFFS 22")
    scope.write("SENS4:VOLT:RANG:PTP 20;SENS4:VOLT:RANG:OFFS 5;INP1 OFF;INP3 OFF")
    scope.write("SWE:TIME 2E-6;SWE:POIN 20000;SWE:OFFS:TIME -5E-7;TRIG:SOUR CH2;TRIG:SLOP NEG")
    scope.write("TRIG:LEV 24;INIT")
    scope.query("*OPC?")
    assert scope.query("SYST:ERR?") == '0,"No error"'
    scope.write("FORM REAL,32")
    pre = scope.query("TRAC:PRE? CH2").split(",")
    t = np.arange(int(pre[0])) * float(pre[1]) + float(pre[2])
    volts = scope.query_binary_values("TRAC? CH2", datatype="f", is_big_endian=True,
                                      container=np.array)  # fmt: skip
    amps = scope.query_binary_values("TRAC? CH4", datatype="f", is_big_endian=True,
                                     container=np.array)  # fmt: skip
    on_scope = _crossing(t, amps, 4.0, False) - _crossing(t, volts, 24.0, False)
    model = half_bridge.model
    f = model.operating_point.frame
    tm = np.arange(40_000) * 0.1e-9 + f.t_on - 1e-6
    true_v = model.waveform("switch", tm[0], 0.1e-9, tm.size)
    true_i = model.waveform("i_switch", tm[0], 0.1e-9, tm.size)
    in_model = _crossing(tm, true_i, 4.0, False) - _crossing(tm, true_v, 24.0, False)
    # within 0.6 ns: the 8-bit codes and noise at 0.1 ns per sample, the 350 MHz pole alike on both
    assert on_scope - in_model == pytest.approx(CURRENT_PROBE_SKEW_S, abs=0.6e-9)
