"""The model's gate drive against published physics, measured on scope-like captures.

Every waveform passes through the test's digitiser (350 MHz, 0.15 % FS noise, 8 bits) and is
measured with the measurement core; the expected values come from design values and the formulas
named beside each check, not from the model's internals.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from bringup.analysis import (
    find_miller_plateau,
    gate_timing,
    measure_edges,
    rc_rise_time,
    state_levels,
)
from sim_instruments.model import StageModel


def _running(design, scenario="healthy", duty=0.5, **changes) -> StageModel:
    m = StageModel({**design, **changes}, scenario)
    m.set_bus(design["bus_voltage"])
    m.set_pwm(True, duty)
    return m


def test_source_follower_output_sits_a_plateau_below_the_gate(demo_design, digitise, rng):
    """No bootstrap lift: V_out settles where V_gs(I) = V_th + I/g_fs, I = V_out/R_load.

    [memory] REFERENCES §4, TI SLUA618 plateau relation V_pl = V_th + I_D/g_fs; g_fs from the
    design's plateau at its current, g_fs = I_design/(V_pl - V_th) [computed].
    """
    d = demo_design
    m = _running(d, "no-overdrive")
    dt = 100e-6 / 100_000
    sw = digitise(m, "switch", -2e-6, dt, 100_000, 50.0, 15.0, rng)
    vgs = digitise(m, "vgs", -2e-6, dt, 100_000, 30.0, 10.0, rng)
    i_design = d["bus_voltage"] / (d["load_resistance"] + d["mosfet_rds_on"])
    g_fs = i_design / (d["mosfet_plateau"] - d["mosfet_threshold"])
    r = d["load_resistance"]
    v_gate = d["bus_voltage"]
    # V_out = V_gate - V_th - V_out/(R g_fs)  ->  V_out = (V_gate - V_th) / (1 + 1/(R g_fs))
    v_out = (v_gate - d["mosfet_threshold"]) / (1.0 + 1.0 / (r * g_fs))  # [computed] ~19.7 V
    high = state_levels(sw).high_v
    assert high == pytest.approx(v_out, abs=0.25)  # 8-bit LSB at 50 V range: 0.2 V
    assert d["bus_voltage"] - high > 3.0  # stuck a threshold and more below the bus
    vgs_expected = d["mosfet_threshold"] + (v_out / r) / g_fs  # [computed] ~4.3 V
    assert state_levels(vgs).high_v == pytest.approx(vgs_expected, abs=0.25)
    # ... and it runs hot: the linear loss (V_bus - V_out) I D dominates [computed, §4].
    linear = (d["bus_voltage"] - v_out) * (v_out / r) * 0.5
    assert m.losses()["linear"] == pytest.approx(linear, rel=0.02)


@pytest.mark.parametrize("r_gate", [10.0, 100.0, 470.0])
def test_gate_rc_rise_is_r_c_ln9(demo_design, digitise, rng, r_gate):
    """A gate that is a plain capacitor (no Miller charge) charges as an RC: 10-90 = R C ln 9.

    [computed] REFERENCES §2 first-order step response, 10-90 % = tau ln 9. The gate is made a
    plain 2.2 nF (Q_gd = 0, Q_g = Ciss x 10 V) and the bootstrap capacitor large, so the drive
    is a stiff source through R = R_source + R_G + R_G,int.
    """
    d = demo_design
    ciss = d["mosfet_ciss"]
    m = _running(
        d,
        gate_resistor=r_gate,
        mosfet_qgd=1e-15,
        mosfet_gate_charge=ciss * 10.0,
        bootstrap_capacitance=100e-6,
    )
    r_total = d["driver_source_resistance"] + r_gate + d["gate_resistance_internal"]
    expected = rc_rise_time(r_total, ciss)  # R C ln 9
    dt = max(expected / 200.0, 0.25e-9)
    n = int(1.2 * 40e-6 / dt)
    vgs = digitise(m, "vgs", -1e-6, dt, n, 16.0, 6.0, rng)
    rise = measure_edges(vgs, dt, -1e-6).rise_time_s
    # 350 MHz front end adds sqrt(t^2 + 1 ns^2): < 0.01 % here; 8-bit noise a little more.
    assert rise == pytest.approx(expected, rel=0.03)


def test_gate_rise_time_scales_with_the_gate_resistance(demo_design, digitise, rng):
    """With the Miller plateau in, every part of the rise is R times a charge or capacitance, so
    the Vgs 10-90 time scales with the total gate resistance (common practice, no source;
    REFERENCES §4: 10-90 of an RC pull-up scales linearly with R)."""
    d = demo_design
    rises = []
    totals = []
    for r_gate in (10.0, 40.0, 160.0):
        m = _running(d, gate_resistor=r_gate)
        r_total = d["driver_source_resistance"] + r_gate + d["gate_resistance_internal"]
        dt = 0.5e-9 * r_total / 17.5
        n = int(1.2 * 40e-6 / dt)
        vgs = digitise(m, "vgs", -1e-6, dt, n, 30.0, 10.0, rng)
        rises.append(measure_edges(vgs, dt, -1e-6).rise_time_s)
        totals.append(r_total)
    ratios = np.asarray(rises) / np.asarray(totals)
    assert ratios.max() / ratios.min() == pytest.approx(1.0, abs=0.05)


@pytest.mark.parametrize(("scenario", "tolerance"), [("slow-gate", 0.05), ("healthy", 0.15)])
def test_plateau_lasts_qgd_over_the_gate_current(demo_design, digitise, rng, scenario, tolerance):
    """The Miller plateau lasts t = Q_gd / I_on, I_on = (V_DRV - V_pl) / R_on.

    [memory] REFERENCES §4 (TI SLUA618), as in its worked example (12 V, 4.5 V plateau, 8 ohm,
    20 nC -> 0.9375 A, 21.33 ns [computed]); ``bringup.analysis.gate_timing`` evaluates it.
    V_DRV and V_pl are read off the capture: the flat top and the shelf.
    """
    d = demo_design
    m = _running(d, scenario)
    r_gate = 1e3 if scenario == "slow-gate" else d["gate_resistor"]
    dt = 4e-9 if scenario == "slow-gate" else 0.25e-9
    # From well into the off-time to the end of the on-time: one rising edge, and enough of the
    # low state that the histogram's low level is 0 V and not the long plateau of a slow gate.
    t0, n = -12e-6, int(31e-6 / dt)
    vgs = digitise(m, "vgs", t0, dt, n, 16.0, 6.0, rng)
    plateau = find_miller_plateau(vgs, dt, t0)
    assert plateau is not None
    v_drv = state_levels(vgs).high_v
    timing = gate_timing(
        v_drv,
        plateau.voltage_v,
        d["driver_source_resistance"],
        d["driver_sink_resistance"],
        r_gate,
        d["gate_resistance_internal"],
        d["mosfet_qgd"],
    )
    # The plateau voltage itself: V_th + I/g_fs at the design current is the design's V_pl.
    assert plateau.voltage_v == pytest.approx(d["mosfet_plateau"], abs=0.15)
    assert plateau.duration_s == pytest.approx(timing.t_vds_on_s, rel=tolerance)
    # The switch node swings while Q_gd flows: its 10-90 is 80 % of that time (linear ramp).
    sw = digitise(m, "switch", t0, dt, n, 50.0, 15.0, rng)
    rise = measure_edges(sw, dt, t0).rise_time_s
    assert rise == pytest.approx(0.8 * timing.t_vds_on_s, rel=tolerance + 0.05)
    assert math.isfinite(rise)
