"""Safety gates: the first-power ramp and the rail checks are never skipped in silence.

Reported: every step could be skipped with a free-text reason, the current-limited first-power
ramp included, and after skipping them all the full-power soak was offered with no warning.
Now a checklist marks steps ``gate = true``: a gate cannot be skipped (by the runner or, behind
it, by the log), only waived after it failed, and every later energising prompt names each
earlier gate that was waived or has not passed. On the simulated bench over loopback sockets
and a real SQLite log.
"""

from __future__ import annotations

import pytest

from bringup.checklist.load import load_checklist, standard_checklist_path
from bringup.errors import ConfigError
from bringup.runner import RunnerError, StepAnswers
from bringup.store import SessionLog, StoreError

FIRST, UNLOADED, METER, LOADED = (
    "power-rails.first-power",
    "power-rails.rails-unloaded",
    "power-rails.logic-meter",
    "power-rails.rails-loaded",
)
GATES = (FIRST, UNLOADED, METER, LOADED)


def test_the_standard_checklist_gates_the_first_power_ramp_and_the_rail_checks(tmp_path):
    checklist = load_checklist()
    assert tuple(s.id for s in checklist.steps() if s.gate) == GATES
    text = standard_checklist_path().read_text(encoding="utf-8")
    bad = tmp_path / "bad.toml"
    bad.write_text(text.replace("gate = true", 'gate = "yes"', 1), encoding="utf-8")
    line = next(i for i, t in enumerate(bad.read_text().splitlines(), 1) if 'gate = "yes"' in t)
    with pytest.raises(ConfigError) as caught:
        load_checklist(bad)
    assert str(caught.value) == (
        f"{bad}:{line}: stages.power-rails.steps.first-power.gate: must be true or false"
    )


def test_a_gate_cannot_be_skipped_by_the_runner_or_the_log(make_runner):
    runner = make_runner()
    for step in GATES:
        with pytest.raises(
            RunnerError, match=f"step {step} is a safety gate: it cannot be skipped"
        ):
            runner.skip(step, "powered up on the previous shift")
    with pytest.raises(StoreError, match="power-rails/first-power is a safety gate"):
        runner.log.record_event(runner.session_id, kind="skip", operator="tester",
                                stage_id="power-rails", step_id="first-power", reason="x")  # fmt: skip
    assert runner.log.events(runner.session_id) == []
    assert runner.current_step() == FIRST  # nothing later can be reached past it


def test_every_later_energising_prompt_names_the_gates_waived_or_not_passed(make_runner):
    runner = make_runner()
    # Before anything ran, the loaded-rails step's prompt names the three gates before it.
    early = runner.plan(LOADED).energise
    assert early.unmet_gates == (
        "First power: stepped ramp at a low current limit (power-rails.first-power): not-started",
        "Rail levels and ripple, output unloaded (power-rails.rails-unloaded): not-started",
        "Logic rail on the meter (power-rails.logic-meter): not-started",
    )
    assert "WARNING: 3 earlier safety gate(s) waived or not passed" in early.prompt
    assert runner.plan(FIRST).energise.unmet_gates == ()  # nothing before the first gate
    assert runner.run_step(FIRST).state == "pass"
    assert runner.run_step(UNLOADED).state == "pass"
    # typed 3.6 V against the 3.2-3.4 V logic-rail target of the demo board: a failure
    failed = runner.run_step(METER, answers=StepAnswers(confirmed=True, reading="3.6 V"))
    assert failed.state == "fail"
    runner.waive(METER, "meter reads high, known offset", "Bo Lindqvist")
    waived = "Logic rail on the meter (power-rails.logic-meter): waived"
    plan = runner.plan(LOADED).energise
    assert plan.unmet_gates == (waived,)
    assert plan.prompt.endswith(
        f"WARNING: 1 earlier safety gate(s) waived or not passed: {waived}."
    )
    loaded = runner.run_step(LOADED)
    said = f"energised with earlier safety gate(s) waived or not passed: {waived}"
    assert said in loaded.warnings
    for later in ("gate-overdrive.vgs-on", "thermal.soak"):  # every later prompt says it
        assert runner.plan(later).energise.unmet_gates == (waived,), later
    with SessionLog.open(runner.log.path, read_only=True) as log:
        stored = log.attempts(runner.session_id, step_id="rails-loaded")[-1]
    assert said in stored.extra["warnings"]
    # a passing retake of the gate clears it from the prompts
    runner.go_back("power-rails")
    for step in (FIRST, UNLOADED):
        runner.run_step(step)
    assert (
        runner.run_step(METER, answers=StepAnswers(confirmed=True, reading="3.30 V")).state
        == "pass"
    )
    assert runner.plan("thermal.soak").energise.unmet_gates == ()
