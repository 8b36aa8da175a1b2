"""Getting a session's runner to the step a test is about, the way the bench would."""

from __future__ import annotations

from bringup.runner import SessionRunner, StepAnswers


def walk_to(runner: SessionRunner, step_id: str, confirm: bool = False) -> None:
    """Every step before ``step_id``: a safety gate is run (never skipped; with a 3.30 V meter
    reading where it asks one, and the operator's confirmation when ``confirm``), any other
    step is skipped with a reason."""
    for step in runner.checklist.steps():
        if step.id == step_id:
            return
        if step.gate:
            typed = "3.30 V" if step.reading else None
            answers = StepAnswers(confirmed=True, reading=typed) if confirm else None
            runner.run_step(step.id, answers=answers)
        else:
            runner.skip(step.id, "covered by another test")
    raise AssertionError(f"no step {step_id!r} in the checklist")
