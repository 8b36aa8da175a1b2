"""Diagnosis of the half-bridge stages: the parts a failed dead-time, bootstrap-refresh,
switch-node or switching-energy step points at, with the effective values checked against the
formulas they invert (each named), and one chain from generated gate waveforms (noise, 8-bit
codes, ringing) through the measurement core to the diagnosis."""

import math

import pytest
from halfbridge_synth import gate_pair

from bringup.analysis.dead_time import measure_dead_time
from bringup.analysis.design import (
    body_diode_loss,
    gate_delay_off,
    gate_delay_on,
    lc_excursion,
    shortest_refresh_time,
)
from bringup.analysis.diagnosis import diagnose

# The half-bridge demo board's design (checklists/demo-half-bridge.toml), SI units.
DESIGN = {
    "bus_voltage": 48.0, "gate_drive_voltage": 12.0, "switching_frequency": 100e3,
    "duty_max": 0.95, "bootstrap_capacitance": 220e-9, "bootstrap_diode_drop": 0.6,
    "bootstrap_diode_leakage": 1e-6, "bootstrap_cap_leakage": 0.5e-6,
    "floating_quiescent_current": 150e-6, "level_shift_charge": 5e-9,
    "gate_source_pulldown": 100e3, "driver_uvlo_falling": 8.2,
    "driver_source_resistance": 2.0, "driver_sink_resistance": 1.0, "gate_resistor": 3.3,
    "gate_resistance_internal": 1.0, "mosfet_gate_charge": 40e-9, "mosfet_qgd": 14e-9,
    "mosfet_threshold": 2.8, "mosfet_plateau": 4.6, "mosfet_ciss": 2.2e-9,
    "mosfet_rds_on": 6e-3, "stray_inductance": 2e-9, "switch_node_capacitance": 1.2e-9,
    "load_current": 8.0, "dead_time": 80e-9, "body_diode_drop": 0.8,
    "bootstrap_resistor": 3.3, "driver_negative_swing": 8.0,
}  # fmt: skip

# Gate delays to the 2.8 V threshold with 11.4 V of drive (12 V less the diode's 0.6 V): on
# through 2 + 3.3 + 1 ohm into 2.2 nF, R C ln(11.4/8.6) = 3.907 ns; off through 1 + 3.3 + 1
# ohm, R C ln(11.4/4.6) + Q_gd R/V_pl + R C ln(4.6/2.8) = 32.50 ns (TI SLUA618's gate-charge
# picture, REFERENCES §4 [computed]).
T_ON = 6.3 * 2.2e-9 * math.log(11.4 / 8.6)
T_OFF = 5.3 * 2.2e-9 * math.log(11.4 / 4.6) + 14e-9 * 5.3 / 4.6 + 5.3 * 2.2e-9 * math.log(4.6 / 2.8)


def test_gate_delays_and_body_diode_loss_by_hand():
    assert T_ON == pytest.approx(3.907e-9, abs=0.002e-9)
    assert T_OFF == pytest.approx(32.50e-9, abs=0.02e-9)
    assert gate_delay_on(11.4, 2.8, 6.3, 2.2e-9) == pytest.approx(T_ON)
    assert gate_delay_off(11.4, 4.6, 2.8, 14e-9, 5.3, 2.2e-9) == pytest.approx(T_OFF)
    # V_F I 2 t_dead f_sw (REFERENCES §12 [read]): 0.8 V, 8 A, 2 x 80 ns, 100 kHz = 0.1024 W.
    assert body_diode_loss(0.8, 8.0, 160e-9, 100e3) == pytest.approx(0.1024)
    # I sqrt(L/C): 8 A, 2 nH, 1.2 nF -> 10.33 V [computed].
    assert lc_excursion(8.0, 2e-9, 1.2e-9) == pytest.approx(10.33, abs=0.01)


def test_an_overlap_points_at_the_dead_time_setting_first():
    m = {"dead_time_high_to_low": -20e-9, "dead_time_low_to_high": 55e-9,
         "gate_overlap": 20e-9, "shoot_through_current": 25.0}  # fmt: skip
    dx = diagnose("dead-time", m, DESIGN, failed=("gate_overlap",))
    first = dx.causes[0]
    assert first.part == "dead_time"
    # measured = setting + t_on - t_off at threshold, so setting = -20 + 32.5 - 3.9 = 8.6 ns.
    assert first.inferred["dead_time_setting_s"] == pytest.approx(-20e-9 + T_OFF - T_ON)
    assert any("25 A" in e for e in first.evidence)
    assert dx.causes[1].part == "driver_sink_resistance"
    assert "shoot-through" in dx.notes[0]


def test_an_overlap_with_the_setting_intact_points_at_a_slow_turn_off():
    # A 5 ns overlap with a 40 ns design setting implies a -5 + 32.5 - 3.9 = 23.6 ns setting,
    # over half the design's: the setting is plausible, the turn-off is the suspect.
    design = dict(DESIGN, dead_time=40e-9)
    dx = diagnose("dead-time", {"dead_time_high_to_low": -5e-9, "gate_overlap": 5e-9}, design)
    assert dx.causes[0].part == "driver_sink_resistance"
    assert "high-side gate turns off too slowly" in dx.causes[0].title


def test_a_long_dead_time_names_the_setting_and_the_body_diode_loss():
    m = {"dead_time_high_to_low": 300e-9, "dead_time_low_to_high": 60e-9}
    dx = diagnose("dead-time", m, DESIGN, failed=("dead_time_high_to_low",))
    first = dx.causes[0]
    assert first.part == "dead_time"
    assert first.inferred["dead_time_setting_s"] == pytest.approx(300e-9 + T_OFF - T_ON)
    # V_F I (t_1 + t_2) f_sw = 0.8 x 8 x 360 ns x 100 kHz = 0.2304 W (REFERENCES §12).
    assert first.inferred["body_diode_loss_w"] == pytest.approx(0.2304)
    assert diagnose("dead-time", {"dead_time_high_to_low": 50e-9}, DESIGN) is None


def test_refresh_failing_through_a_resistive_recharge_path():
    # Design tau = (3.3 + 0.006) ohm x 220 nF = 727 ns (REFERENCES §3 "Refresh"); a measured
    # 3 us says the path behaves like 3 us / 220 nF - 6 mohm = 13.63 ohm [computed].
    m = {"vbs_uvlo_margin": -0.6, "refresh_tau": 3e-6, "refresh_on_time": 340e-9}
    dx = diagnose("bootstrap-refresh", m, DESIGN, failed=("vbs_uvlo_margin",))
    assert dx.causes[0].part == "bootstrap_resistor"
    assert dx.causes[0].inferred["bootstrap_resistance_ohm"] == pytest.approx(13.63, abs=0.01)


def test_refresh_failing_through_too_short_a_low_side_on_time():
    # Design: droop (45 nC + 265.5 uA x 9.5 us)/220 nF = 0.2160 V per period, V_f 11.4 V, so
    # it needs 727 ns ln(3.2/(3.2 - 0.216)) = 50.8 ns of low-side on-time [computed];
    # a 30 ns on-time is short of that.
    tau = 3.306 * 220e-9
    droop = (45e-9 + (151.5e-6 + 11.4 / 100e3) * 0.95 / 100e3) / 220e-9
    need = shortest_refresh_time(tau, 11.4, droop, 8.2)
    assert need == pytest.approx(50.8e-9, abs=0.2e-9)
    dx = diagnose("bootstrap-refresh", {"vbs_uvlo_margin": -0.3, "refresh_on_time": 30e-9},
                  DESIGN)  # fmt: skip
    assert dx.causes[0].part == "duty_max"
    assert any("50.8" in e for e in dx.causes[0].evidence)


def test_refresh_failing_through_a_small_capacitor():
    # A 0.65 V droop per period against the design's 0.216 V: C = Q/dV = 73 nF [computed].
    m = {"vbs_uvlo_margin": -0.2, "refresh_droop": 0.65, "refresh_on_time": 340e-9}
    dx = diagnose("bootstrap-refresh", m, DESIGN)
    assert dx.causes[0].part == "bootstrap_capacitance"
    assert dx.causes[0].inferred["bootstrap_capacitance_f"] == pytest.approx(
        0.2160 * 220e-9 / 0.65, rel=0.002
    )


def test_switch_node_undershoot_points_at_the_loop_inductance():
    # 60 MHz with 1.2 nF: L = 1/((2 pi 60 MHz)^2 1.2 nF) = 5.863 nH (REFERENCES §12), three
    # times the design's 2 nH; zeta 0.05 says no snubber.
    m = {"switch_min": -11.0, "switch_negative_margin": -3.0, "ring_frequency": 60e6,
         "ring_damping": 0.05}  # fmt: skip
    dx = diagnose("switch-node", m, DESIGN, failed=("switch_negative_margin",))
    assert [c.part for c in dx.causes][:2] == ["stray_inductance", "snubber"]
    assert dx.causes[0].inferred["loop_inductance_h"] == pytest.approx(5.863e-9, rel=1e-3)
    assert any("17.68 V" in e for e in dx.causes[0].evidence)  # 8 A sqrt(5.863 nH/1.2 nF)


def test_switching_energy_negative_points_at_the_deskew():
    dx = diagnose("switching-energy", {"switching_energy_on": -2e-6, "switching_energy_off": 5e-6},
                  DESIGN)  # fmt: skip
    assert dx.causes[0].part == "current_probe_deskew"


def test_switching_energy_dominated_by_turn_on_points_at_reverse_recovery():
    m = {"switching_energy_on": 30e-6, "switching_energy_off": 8e-6, "switching_power": 3.8,
         "switching_power_predicted": 1.2}  # fmt: skip
    dx = diagnose("switching-energy", m, DESIGN, failed=("switching_power",))
    assert dx.causes[0].part == "body_diode"
    # E = 1/2 V I t_c (Mohan et al., ch. 2 [memory]): 2 x 38 uJ/(48 V x 8 A) = 197.9 ns.
    assert dx.causes[1].inferred["crossover_time_s"] == pytest.approx(197.9e-9, rel=1e-3)


def test_from_generated_gates_to_the_diagnosis():
    # A 60 ns early low-side command overlaps the gates by 69.5 ns at threshold (see
    # test_dead_time); measured on the noisy 8-bit record, the chain names the setting.
    g = gate_pair(overlap_period=4, seed=5)
    r = measure_dead_time(g.high, g.low, g.dt, threshold_v=g.threshold_v, current=g.current)
    m = {"dead_time_high_to_low": r.high_to_low.min_s, "dead_time_low_to_high": r.low_to_high.min_s,
         "gate_overlap": r.worst_overlap_s, "shoot_through_current": r.worst_spike_a}  # fmt: skip
    dx = diagnose("dead-time", m, DESIGN, failed=("gate_overlap",))
    assert dx.causes[0].part == "dead_time"
    assert dx.causes[0].inferred["dead_time_setting_s"] == pytest.approx(
        -69.5e-9 + T_OFF - T_ON, abs=1e-9
    )


def test_missing_design_keys_give_no_diagnosis_rather_than_a_guess():
    design = {k: v for k, v in DESIGN.items() if k != "mosfet_ciss"}
    assert diagnose("dead-time", {"dead_time_high_to_low": -20e-9}, design) is None
