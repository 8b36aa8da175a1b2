"""The headless run (``bringup run --auto``, ``bringup resume --auto``): every step in order,
no UI. Stages run in order because each makes the next safe: once a step is not accepted, every
later step is logged as ``not-run`` and nothing more is powered.
"""

from __future__ import annotations

from collections.abc import Callable

from bringup.runner.answers import AnswerBook
from bringup.runner.results import ACCEPTED, AttemptResult, Progress
from bringup.runner.session import SessionRunner

__all__ = ["run_headless"]


def run_headless(
    runner: SessionRunner,
    answers: AnswerBook | None = None,
    *,
    on_result: Callable[[AttemptResult], None] | None = None,
    on_progress: Callable[[Progress], None] | None = None,
) -> str:
    """Run every unfinished step of ``runner``'s session in order; returns the overall state.

    A step already accepted (passed, waived, skipped: a resumed session) is not run again.
    The session is marked finished when every step is accepted.
    """
    blocked: str | None = None
    for step in runner.checklist.steps():
        state = runner.step_status(step.id).state
        if state in ACCEPTED:
            continue
        if blocked is not None:
            result = runner.mark_not_run(step.id, blocked)
        else:
            result = runner.run_step(
                step.id,
                answers=answers.get(step.id) if answers is not None else None,
                on_progress=on_progress,
            )
            if result.state not in ACCEPTED:
                blocked = (
                    f"not run: {step.id} is {result.state}; the stages run in order for safety"
                )
        if on_result is not None:
            on_result(result)
    runner.finish_if_complete()
    return runner.verdict()
