"""Plans (energising prompt, hazard notice, channels) and design predictions, without a bench."""

from __future__ import annotations

import pytest

from bringup.boards.board_file import board_from_document, demo_board_path, load_board
from bringup.checklist.load import load_checklist
from bringup.errors import ConfigError
from bringup.runner import BenchSource
from bringup.runner.answers import load_answers
from bringup.runner.planning import plan_step
from bringup.runner.predictions import predict
from bringup.runner.results import worst_state
from bringup.tomlfile import parse_toml

CHECKLIST = load_checklist()
SIM = BenchSource.simulated()


def _board(bus: str):
    text = demo_board_path().read_text().replace('bus_voltage = "24 V"', f'bus_voltage = "{bus}"')
    return board_from_document(parse_toml(text, "board.toml"))


def test_energising_prompt_and_hazard_notice_above_60_v():
    step = CHECKLIST.step("power-rails.first-power")
    plan = plan_step(step, load_board("demo"), SIM)
    assert plan.energise is not None and plan.energise.hazard is None
    assert plan.energise.voltage_v == 24.0 and plan.energise.current_limit_a == pytest.approx(0.2)
    assert plan.energise.ramp_v == (6.0, 12.0, 18.0, 24.0)
    # IEC 62368-1 ES1 ends at 60 V DC [memory]: 80 V needs the notice, 60 V does not
    assert plan_step(step, _board("80 V"), SIM).energise.hazard is not None
    assert "60 V" in plan_step(step, _board("80 V"), SIM).energise.hazard
    assert plan_step(step, _board("60 V"), SIM).energise.hazard is None


def test_floating_nets_get_differential_probes_and_the_plan_says_where():
    plan = plan_step(CHECKLIST.step("droop-max-on-time.droop"), load_board("demo"), SIM)
    assert {c.net: c.probe for c in plan.channels} == {"vgs": "differential", "vbs": "differential"}
    assert any("differential probe on net vgs" in h for h in plan.hands)
    assert plan.settings["pwm"] == {"enabled": True, "duty": 0.95}
    assert plan.confirm is not None


def test_predictions_follow_the_design_equations():
    p = predict("edges", load_board("demo"))
    # TI SLUA618 plateau current [computed]: I_on = (12 - 0.6 - 4.6) V / (6 + 10 + 1.5) ohm
    # = 0.38857 A; V_DS swing Q_gd / I_on = 14 nC / 0.38857 A = 36.03 ns; 10-90 % of that ramp
    # is 80 %: 28.82 ns.
    assert p["switch_rise"] == pytest.approx(28.82e-9, rel=1e-3)
    # turn-off [computed]: I_off = 4.6 V / (3 + 10 + 1.5) ohm = 0.31724 A; 14 nC / I_off = 44.13 ns
    assert p["switch_fall"] == pytest.approx(0.8 * 44.13e-9, rel=1e-3)
    # P_sw = 1/2 V I (t_r + t_f) f [read: ST A5972D eq. 23] with 24 V, 6 A, 80.16 ns, 25 kHz
    # = 0.1443 W [computed]
    assert p["switching_loss"] == pytest.approx(0.1443, rel=2e-3)
    # Vgs 10-90 % over three RC intervals [computed]: tau1 = 17.5 ohm x 2.2 nF = 38.5 ns,
    # t10 = -tau1 ln(1 - 1.1355/11.4) = 4.04 ns, plateau from -tau1 ln(1 - 4.6/11.4) = 19.97 ns
    # for 36.03 ns, then tau2 = 17.5 ohm x 14 nC / 5.4 V = 45.37 ns to 90 % (10.22 V):
    # 45.37 ns x ln(6.8/1.18) = 79.45 ns; 19.97 + 36.03 + 79.45 - 4.04 = 131.4 ns
    assert p["vgs_rise"] == pytest.approx(131.4e-9, rel=2e-3)
    soak = predict("soak", load_board("demo"))
    # T = 25 degC + (0.1443 W + 6^2 x 0.008 x 0.95 W) x 30 K/W = 37.54 degC [computed]
    assert soak["heatsink_final"] == pytest.approx(37.54, abs=0.01)
    droop = predict("droop", load_board("demo"))
    # V_BS0 = 12 - 0.6 - (40 + 5) nC / 1 uF = 11.355 V [computed, SLUA887 charge balance]
    assert droop["vgs_start"] == pytest.approx(11.355, abs=1e-3)


def test_worst_state_orders_failures_first():
    assert worst_state(["pass", "conditional-pass"]) == "conditional-pass"
    assert worst_state(["pass", "not-run", "conditional-fail"]) == "conditional-fail"
    assert worst_state(["waived", "pass"]) == "waived"
    assert worst_state(["skipped", "not-started"]) == "in-progress"
    assert worst_state(["pass", "not-started", "not-started"]) == "in-progress"
    assert worst_state(["not-started", "not-started"]) == "not-started"
    assert worst_state([]) == "not-started"


def test_answer_file_sample_loads_and_bad_ones_name_the_line(tmp_path):
    from bringup.boards.board_file import checklists_dir

    book = load_answers(checklists_dir() / "answers-demo.toml", CHECKLIST)
    assert book.get("power-rails.logic-meter").reading == "3.31 V"
    bad = tmp_path / "answers.toml"
    bad.write_text('schema = 1\n\n[steps."power-rails.first-powr"]\nconfirmed = true\n')
    with pytest.raises(ConfigError) as info:
        load_answers(bad, CHECKLIST)
    assert info.value.line == 3 and "no step" in str(info.value)
    bad.write_text('schema = 1\n[steps."thermal.soak"]\nconfirmed = "yes"\n')
    with pytest.raises(ConfigError) as info:
        load_answers(bad, CHECKLIST)
    assert info.value.line == 3 and info.value.key == "steps.thermal.soak.confirmed"


def test_vgs_from_a_math_difference_is_planned_on_two_probes_with_a_warning(tmp_path):
    from bringup.checklist.load import standard_checklist_path

    text = standard_checklist_path().read_text()
    head, tail = text.split("[stages.edge-speed.steps.edges.scope.nets]")
    tail = tail.replace('probe = "differential"', 'probe = "math"', 1)
    path = tmp_path / "math.toml"
    path.write_text(head + "[stages.edge-speed.steps.edges.scope.nets]" + tail)
    plan = plan_step(load_checklist(path).step("edge-speed.edges"), load_board("demo"), SIM)
    assert sorted((c.net, c.probe) for c in plan.channels) == [
        ("gate", "single-ended"),
        ("switch", "single-ended"),
    ]
    assert plan.settings["scope"]["math"] == ["vgs"]
    # 1 % of the 24 V common mode is 0.24 V of error on Vgs [computed]
    assert len(plan.warnings) == 1 and "240 mV" in plan.warnings[0]
    # the switch node keeps the range the step gave it (50 V), not the math's
    assert next(c for c in plan.channels if c.net == "switch").range_v == 50.0


def test_the_energising_notice_is_the_instrument_layers_with_both_levels():
    """One wording: the plan shows what ``hazard_for`` says and the level the supply owner will
    ask to be acknowledged: CAUTION above 60 V DC, DANGER above 120 V DC (IEC 62368-1 ES1 and
    ES2 limits [memory])."""
    from bringup.instruments.safety import hazard_for

    step = CHECKLIST.step("power-rails.first-power")
    for bus, level in (("80 V", "CAUTION"), ("120 V", "CAUTION"), ("150 V", "DANGER")):
        energise = plan_step(step, _board(bus), SIM).energise
        volts = float(bus.split()[0])
        assert energise.hazard == hazard_for(volts).text and energise.hazard_level == level, bus
        assert f"{bus} DC" in energise.hazard
    assert "above 120 V DC" in plan_step(step, _board("150 V"), SIM).energise.hazard
    assert plan_step(step, _board("60 V"), SIM).energise.hazard_level is None
