"""Design equations against published worked examples (tags as in shared REFERENCES.md)."""

import math

import pytest

from bringup.analysis import bootstrap_dv_max, design
from bringup.errors import InputError

# --- Bootstrap capacitor -------------------------------------------------------------------


def test_ti_mcf8329a_worked_example():
    # TI MCF8329A-Q1 datasheet (SLLSFV1), application section [read; REFERENCES §3 (a)]:
    # Q_G 54 nC, I_BST 115 uA, 20 kHz -> Q_TOT 59.75 nC; at dV = 1 V, C_min = 59.8 nF; and
    # dV_max = GVDD 12 V - diode 0.85 V - BST UVLO 4.45 V = 6.7 V, TI SLUA887's
    # dV_max = V_DD - V_F - V_BST,UVLO [read; REFERENCES §3, per-period form]. TI's
    # per-period form is the charge balance over one period t = 1/f_sw.
    q = design.bootstrap_charge(qg_c=54e-9, t_on_max_s=1 / 20e3, iq_a=115e-6)
    assert q == pytest.approx(59.75e-9, rel=1e-9)
    assert design.bootstrap_c_min(q, 1.0) == pytest.approx(59.8e-9, rel=1e-3)
    assert design.bootstrap_dv_max(12.0, 0.85, 4.45) == pytest.approx(6.7, abs=1e-12)
    assert bootstrap_dv_max is design.bootstrap_dv_max  # exported by bringup.analysis
    sized = design.size_bootstrap(54e-9, 115e-6, 0.0, 1 / 20e3, 1.0, c_f=100e-9)
    assert sized.c_min_f == pytest.approx(59.75e-9)
    assert sized.droop_v == pytest.approx(0.5975)  # the 100 nF chosen [computed]


def test_microchip_gate_drive_droop_example():
    # Microchip online datasheet §4.5 "MOSFET Gate Drive" [read; REFERENCES §3 (b)]:
    # 10 mA for 3.33 us from 0.1 uF droops 0.333 V.
    q = design.bootstrap_charge(qg_c=0.0, t_on_max_s=3.33e-6, iq_a=10e-3)
    assert design.bootstrap_droop(q, 0.1e-6) == pytest.approx(0.333, rel=1e-3)


def test_st_l6388e_charging_drop_example():
    # ST L6388E datasheet, "Bootstrap driver" [read; REFERENCES §3 (c)]: 30 nC in 5 us through
    # 125 ohm -> 0.75 V (published "~0.8 V").
    assert design.bootstrap_charging_drop(30e-9, 5e-6, 125.0) == pytest.approx(0.75)


def test_microchip_precharge_example():
    # Microchip motor-driver datasheet §13.21.1.3 [read; REFERENCES §3 (d)]: pre-charge takes
    # 1.2 ms per uF (12 V at 10 mA, t = C dV / I).
    assert design.bootstrap_precharge_time(1e-6, 12.0, 10e-3) == pytest.approx(1.2e-3)


def test_charge_balance_terms_and_margin():
    # The demo board (checklists/demo-board.toml): 40 nC, 5 nC level shift, 150 uA quiescent,
    # 1 + 0.5 uA leakage, 38 us: Q = 40 + 5 + 151.5e-6 * 38e-6 C [computed].
    s = design.size_bootstrap(40e-9, 150e-6, 1.5e-6, 38e-6, 0.5, qls_c=5e-9, margin=2.0, c_f=1e-6)
    assert s.charge_c == pytest.approx(45e-9 + 151.5e-6 * 38e-6)
    assert s.c_min_f == pytest.approx(2 * s.charge_c / 0.5)
    assert s.droop_v == pytest.approx(s.charge_c / 1e-6)
    assert sum(s.terms_c.values()) == pytest.approx(s.charge_c)


def test_on_time_at_duty_and_the_longest_on_time():
    assert design.on_time_at_duty(0.95, 25e3) == pytest.approx(38e-6)
    # t_on,max = ((V_BS0 - V_UVLO) C - Q_G) / I (REFERENCES §3 [read]; numbers [computed]):
    # (11.4 - 8.2) V x 1 uF - 40 nC = 3.16 uC at 151.5 uA -> 20.86 ms.
    t = design.bootstrap_on_time_max(1e-6, 11.4, 8.2, 151.5e-6, qg_c=40e-9)
    assert t == pytest.approx(3.16e-6 / 151.5e-6)
    assert design.bootstrap_on_time_max(10e-9, 11.4, 8.2, 1e-3, qg_c=40e-9) == 0.0
    assert design.bootstrap_on_time_max(1e-6, 11.4, 8.2, 0.0) == math.inf


def test_recharge_time():
    # REFERENCES §3 [computed]: 1 V to 10 mV through 10 ohm into 1 uF takes tau ln 100 = 46.05 us.
    assert design.bootstrap_recharge_time(1e-6, 10.0, 1.0, 0.01) == pytest.approx(
        46.05e-6, rel=1e-3
    )
    assert design.bootstrap_recharge_time(1e-6, 10.0, 0.005, 0.01) == 0.0


# --- Gate timing ---------------------------------------------------------------------------


def test_slua618_gate_charge_timing_example():
    # TI SLUA618 (Balogh, "Fundamentals of MOSFET and IGBT Gate Driver Circuits") plateau-
    # current equations [memory for equation numbers], worked example REFERENCES §4 [computed]:
    # V_DRV 12 V, V_pl 4.5 V, R = 2 + 4.7 + 1.3 ohm, Q_gd 20 nC -> I_on 0.9375 A, t 21.33 ns;
    # I_off 0.5625 A, t 35.56 ns.
    g = design.gate_timing(12.0, 4.5, 2.0, 2.0, 4.7, 1.3, 20e-9)
    assert g.i_on_a == pytest.approx(0.9375)
    assert g.i_off_a == pytest.approx(0.5625)
    assert g.t_vds_on_s == pytest.approx(21.33e-9, rel=1e-3)
    assert g.t_vds_off_s == pytest.approx(35.56e-9, rel=1e-3)
    assert g.t_current_on_s is None
    g2 = design.gate_timing(12.0, 4.5, 2.0, 2.0, 4.7, 1.3, 20e-9, q_gs2_c=5e-9)
    assert g2.t_current_on_s == pytest.approx(5e-9 / 0.9375)


def test_rc_rise_time():
    # First-order step: 10-90 % = RC ln 9 (REFERENCES §2 [computed]); 20-80 % = RC ln 4.
    assert design.rc_rise_time(1e3, 1e-9) == pytest.approx(1e-6 * math.log(9))
    assert design.rc_rise_time(1e3, 1e-9, 20, 80) == pytest.approx(1e-6 * math.log(4))


def test_rc_pullup_scales_with_r():
    # Common practice, no source: on the same gate (here 2.7 nF) about 6 us with 1 kOhm, about
    # 600 ns with 100 Ohm and about half that again with 47 Ohm.
    c = 2.7e-9
    assert design.rc_rise_time(1e3, c) == pytest.approx(6e-6, rel=0.05)
    assert design.rc_rise_time(100.0, c) == pytest.approx(600e-9, rel=0.05)
    assert design.rc_rise_time(47.0, c) / design.rc_rise_time(100.0, c) == pytest.approx(0.47)


# --- Losses and temperature ----------------------------------------------------------------


def test_loss_worked_examples():
    # REFERENCES §4 [computed] on the published forms: ST A5972D eq. 23 (switching), TI
    # TPS40200-Q1 (gate drive), I^2 R D (conduction).
    assert design.switching_loss(24.0, 10.0, 28.45e-9, 28.45e-9, 20e3) == pytest.approx(
        0.1365, rel=1e-3
    )
    assert design.gate_drive_loss(60e-9, 12.0, 20e3) == pytest.approx(14.4e-3)
    assert design.conduction_loss(10.0, 10e-3, 0.5) == pytest.approx(0.500)
    # TI TPS40200-Q1 datasheet [read]: 9 nC x 300 kHz = 2.7 mA average gate current.
    assert design.gate_drive_current(9e-9, 300e3) == pytest.approx(2.7e-3)


def test_junction_temperature_example():
    # REFERENCES §5 [computed]: 25 degC + 1.5 W x 40 K/W = 85.0 degC.
    assert design.junction_temperature(1.5, 40.0, 25.0) == pytest.approx(85.0)


def test_estimate_losses_says_what_is_missing():
    b = design.estimate_losses(i_load_a=10.0, r_ds_on_ohm=10e-3, duty=0.5)
    assert b.p_conduction_w == pytest.approx(0.5)
    assert b.p_switching_w is None and "v_bus_v" in b.reasons["p_switching_w"]
    assert b.t_junction_c is None and b.reasons["t_junction_c"]
    full = design.estimate_losses(
        v_bus_v=24.0,
        i_load_a=10.0,
        fsw_hz=20e3,
        t_rise_s=28.45e-9,
        t_fall_s=28.45e-9,
        r_ds_on_ohm=10e-3,
        duty=0.5,
        qg_c=60e-9,
        v_drv_v=12.0,
        r_th_k_per_w=40.0,
        t_ambient_c=25.0,
    )
    assert full.p_mosfet_w == pytest.approx(0.13656 + 0.5)
    assert full.t_junction_c == pytest.approx(25 + 40 * (0.13656 + 0.5))
    assert full.reasons == {}


@pytest.mark.parametrize(
    ("call", "fragment"),
    [
        (lambda: design.bootstrap_c_min(40e-9, 0.0), "dv_v must be > 0"),
        (lambda: design.bootstrap_charge(-1e-9, 1e-6), "qg_c must be >= 0"),
        (lambda: design.bootstrap_droop(40e-9, 0.0), "c_f must be > 0"),
        (lambda: design.bootstrap_dv_max(5.0, 0.85, 4.45), "undervoltage lockout"),
        (lambda: design.bootstrap_dv_max(12.0, -0.85, 4.45), "v_diode_v must be >= 0"),
        (lambda: design.on_time_at_duty(1.5, 25e3), "duty"),
        (lambda: design.gate_timing(12, 13, 1, 1, 1, 1, 1e-9), "plateau"),
        (lambda: design.rc_rise_time(1e3, 1e-9, 90, 10), "reference levels"),
        (lambda: design.switching_loss(float("nan"), 1, 1e-9, 1e-9, 1e3), "finite"),
    ],
)
def test_nonsense_is_an_input_error(call, fragment):
    with pytest.raises(InputError, match=fragment):
        call()
