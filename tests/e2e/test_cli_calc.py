"""``bringup calc`` end to end: ``python -m bringup`` in a subprocess."""

import json
import math
import subprocess
import sys

import pytest


def bringup(*argv, check_ok=True):
    proc = subprocess.run(
        [sys.executable, "-m", "bringup", *map(str, argv)],
        capture_output=True,
        text=True,
        timeout=60,
    )
    if check_ok:
        assert proc.returncode == 0, proc.stderr
    return proc


def calc_json(*argv):
    return json.loads(bringup("calc", *argv, "--json").stdout)


def test_bootstrap_ti_worked_example():
    # TI MCF8329A-Q1 datasheet (SLLSFV1) [read; REFERENCES §3 (a)]: Q_G 54 nC, I_BST 115 uA,
    # 20 kHz -> Q_TOT 59.75 nC, C_min 59.8 nF at 1 V; here over one period (t = 1/f_sw = 50 us).
    d = calc_json(
        "bootstrap",
        "--qg",
        "54n",
        "--iq",
        "115u",
        "--ileak",
        "0",
        "--ton-max",
        "50us",
        "--dv",
        "1V",
    )
    assert d["charge_c"] == pytest.approx(59.75e-9)
    assert d["c_min_f"] == pytest.approx(59.8e-9, rel=1e-3)
    assert d["droop_v"] is None and "--c" in d["reasons"]["droop_v"]


def test_bootstrap_microchip_droop_example():
    # Microchip online datasheet §4.5 [read; REFERENCES §3 (b)]: 10 mA x 3.33 us / 0.1 uF = 0.333 V.
    d = calc_json(
        "bootstrap",
        "--qg",
        "0",
        "--iq",
        "10 mA",
        "--ileak",
        "0",
        "--ton-max",
        "3.33u",
        "--dv",
        "0.5",
        "--c",
        "0.1uF",
    )
    assert d["droop_v"] == pytest.approx(0.333, rel=1e-3)


def test_bootstrap_demo_board_with_duty_and_margin():
    d = calc_json(
        "bootstrap", "--qg", "40 nC", "--iq", "150uA", "--ileak", "1.5u", "--qls", "5n",
        "--fsw", "25 kHz", "--duty-max", "95%", "--dv", "0.5", "--margin", "2", "--c", "1u",
    )  # fmt: skip
    q = 45e-9 + 151.5e-6 * 38e-6  # [computed] over t_on,max = 0.95 / 25 kHz = 38 us
    assert d["t_on_max_s"] == pytest.approx(38e-6)
    assert d["charge_c"] == pytest.approx(q)
    assert d["c_min_f"] == pytest.approx(2 * q / 0.5)
    assert d["droop_v"] == pytest.approx(q / 1e-6)
    assert d["charge_per_period_c"] == pytest.approx(45e-9 + 151.5e-6 / 25e3)
    table = bringup(
        "calc",
        "bootstrap",
        "--qg",
        "40n",
        "--iq",
        "150u",
        "--ileak",
        "1.5u",
        "--ton-max",
        "38u",
        "--dv",
        "0.5",
    ).stdout
    assert "C_min" in table and "nF" in table


def test_bootstrap_help_names_the_method():
    text = bringup("calc", "bootstrap", "--help").stdout
    assert "AN-978" in text and "SLUA887" in text and "2x" in text


def test_gate_timing_and_rc_pullup():
    # TI SLUA618 equations, REFERENCES §4 worked example [computed].
    d = calc_json(
        "gate", "--vdrv", "12V", "--vpl", "4.5V", "--r-source", "2", "--r-sink", "2",
        "--rg", "4.7", "--rg-int", "1.3", "--qgd", "20nC", "--r-pullup", "1k", "--c-gate", "2.7n",
    )  # fmt: skip
    assert d["i_on_a"] == pytest.approx(0.9375)
    assert d["t_vds_on_s"] == pytest.approx(21.33e-9, rel=1e-3)
    assert d["t_vds_off_s"] == pytest.approx(35.56e-9, rel=1e-3)
    assert d["rc_rise_time_s"] == pytest.approx(1e3 * 2.7e-9 * math.log(9))
    rc_only = calc_json("gate", "--r-pullup", "47R", "--c-gate", "2.7nF")
    assert rc_only["i_on_a"] is None and rc_only["reasons"]["i_on_a"]


def test_losses():
    # REFERENCES §4-5 [computed]: 24 V, 10 A, 56.9 ns, 20 kHz -> 0.1365 W; 10 A, 10 mohm, D 0.5
    # -> 0.5 W; 60 nC at 12 V, 20 kHz -> 14.4 mW.
    d = calc_json(
        "losses", "--vbus", "24", "--iload", "10A", "--fsw", "20k", "--tr", "28.45n", "--tf", "28.45n",
        "--rdson", "10 mohm", "--duty", "50%", "--qg", "60n", "--vdrv", "12", "--rth", "40 K/W", "--tamb", "25 degC",
    )  # fmt: skip
    assert d["p_switching_w"] == pytest.approx(0.1365, rel=1e-3)
    assert d["p_conduction_w"] == pytest.approx(0.5)
    assert d["p_gate_w"] == pytest.approx(14.4e-3)
    assert d["t_junction_c"] == pytest.approx(25 + 40 * (0.13656 + 0.5))
    partial = calc_json("losses", "--iload", "10", "--rdson", "10m", "--duty", "0.5")
    assert partial["p_switching_w"] is None and "--vbus" in partial["reasons"]["p_switching_w"]
    assert partial["t_junction_c"] is None and partial["reasons"]["t_junction_c"]


@pytest.mark.parametrize(
    ("argv", "fragment"),
    [
        (
            [
                "bootstrap",
                "--qg",
                "40nF",
                "--iq",
                "1u",
                "--ileak",
                "0",
                "--ton-max",
                "1u",
                "--dv",
                "1",
            ],
            "--qg: cannot read '40nF' as a quantity in C",
        ),
        (["bootstrap", "--qg", "40n", "--iq", "1u", "--ileak", "0", "--dv", "1"], "--ton-max"),
        (
            [
                "bootstrap",
                "--qg",
                "40n",
                "--iq",
                "1u",
                "--ileak",
                "0",
                "--ton-max",
                "1u",
                "--dv",
                "0",
            ],
            "--dv: must be > 0",
        ),
        (["bootstrap", "--qg", "40n", "--iq", "1u", "--ileak", "0", "--ton-max", "1u"], "--dv"),
        (
            [
                "bootstrap",
                "--qg",
                "4x",
                "--iq",
                "1u",
                "--ileak",
                "0",
                "--ton-max",
                "1u",
                "--dv",
                "1",
            ],
            "'4x'",
        ),
        (["gate", "--vdrv", "12"], "also needs --vpl"),
        (["gate"], "give the gate-charge options"),
        (["losses", "--duty", "150%", "--iload", "1", "--rdson", "1"], "--duty"),
        (["losses"], "nothing to compute"),
        (["losses", "--tamb", "25 V", "--iload", "1", "--rdson", "1", "--duty", "1"], "--tamb"),
    ],
)
def test_bad_options_exit_2_in_one_line(argv, fragment):
    proc = bringup("calc", *argv, check_ok=False)
    assert proc.returncode == 2
    assert fragment in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1
    assert "Traceback" not in proc.stderr
