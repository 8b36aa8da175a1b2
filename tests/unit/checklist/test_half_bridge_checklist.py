"""The shipped half-bridge checklist and demo board: stages in the agreed order, the same
safety gates and cautions as the high-side checklist, every target defined, and a current
net measured only with a current probe."""

from __future__ import annotations

import pytest

from bringup.boards.board_file import load_board
from bringup.checklist.load import check_against_board, load_checklist
from bringup.errors import ConfigError

STAGES = ["power-rails", "low-side-gate", "high-side-gate", "dead-time", "bootstrap-refresh",
          "switch-node", "switching-energy", "thermal"]  # fmt: skip


def test_stages_in_order_and_every_target_on_the_demo_half_bridge():
    checklist = load_checklist("half-bridge-bootstrap")
    assert checklist.id == "half-bridge-bootstrap" and checklist.version
    assert [s.id for s in checklist.stages] == STAGES
    check_against_board(checklist, load_board("demo-half-bridge"))
    # the high-side demo board lacks the half-bridge targets: refused before a session starts
    with pytest.raises(ConfigError, match="is not defined in board file"):
        check_against_board(checklist, load_board("demo"))


def test_the_same_safety_gates_and_cautions_as_the_high_side_checklist():
    half = load_checklist("half-bridge-bootstrap")
    high = load_checklist()
    gates = [s.id for s in half.steps() if s.gate]
    assert gates == [s.id for s in high.steps() if s.gate]  # the first-power ramp, the rails
    ramp = half.step("power-rails.first-power")
    assert ramp.supply.ramp_v and ramp.pwm is not None and not ramp.pwm.enabled
    assert any("Stored energy" in c for c in ramp.cautions)
    assert any("60 V DC" in c for c in ramp.cautions)
    for step in half.steps():
        if step.supply is not None and step.pwm is not None and step.pwm.enabled:
            assert step.cautions, f"{step.id}: energised with the PWM running, no caution"
    # every floating net on a differential probe, every current on a current probe
    for step in half.steps():
        for cap in step.scope.captures if step.scope else ():
            if cap.net in ("vgs", "vbs"):
                assert cap.probe == "differential", step.id
            assert (cap.probe == "current") == (cap.net == "i_switch"), step.id


@pytest.mark.parametrize(
    ("net", "problem"),
    [('i_switch = { range = "40 A", offset = "8 A" }', 'needs probe = "current"'),
     ('switch = { range = "80 V", offset = "22 V", probe = "current" }', "measures a current net"),
     ('i_switch = { range = "40 V", offset = "8 V", probe = "current" }', "unit")],
)  # fmt: skip
def test_a_current_net_needs_a_current_probe_and_amperes(tmp_path, net, problem):
    text = load_checklist("half-bridge-bootstrap").text
    old = 'i_switch = { range = "40 A", offset = "8 A", probe = "current" }'
    assert old in text
    bad = text.replace(old, net, 1)  # the dead-time step's current probe
    path = tmp_path / "hb.toml"
    path.write_text(bad)
    with pytest.raises(ConfigError, match=problem):
        load_checklist(path)
