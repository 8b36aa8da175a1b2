"""The walk through a checklist, in memory: each step's attempts, the operator's decisions, the
step running now and where a go-back restarted the walk, and the rules that follow from them.

Rebuilt from the log on resume (``bringup.runner.resuming.replay``); the log is the truth, this
is its running summary. No I/O: what it refuses it refuses with a ``RunnerError`` before
anything is logged.
"""

from __future__ import annotations

from bringup.checklist.model import Checklist, Step
from bringup.errors import BringupError
from bringup.runner.results import (
    ACCEPTED,
    AttemptResult,
    StageStatus,
    StepStatus,
    worst_state,
)

__all__ = ["SessionState", "RunnerError"]

#: The states a waiver may be given for.
FAILED = ("fail", "conditional-fail")


class RunnerError(BringupError):
    """A request the runner refuses (out of order, a skip without a reason, ...): one line."""


class SessionState:
    """Attempts per step (oldest first), the latest skip/waive decision per step, the step
    running now and the go-back cursor."""

    def __init__(self, checklist: Checklist) -> None:
        self._checklist = checklist
        self._attempts: dict[str, list[AttemptResult]] = {s.id: [] for s in checklist.steps()}
        self._decision: dict[str, tuple[str, str]] = {}  # step id -> (state, reason)
        self._order: list[AttemptResult] = []
        self._cursor: int | None = None  # index of the step to retake after a go-back
        #: The id of the step whose attempt is running, or None.
        self.running: str | None = None

    # ------------------------------------------------------------------ facts
    def add(self, attempt: AttemptResult) -> None:
        """Add a logged attempt; a new attempt replaces any earlier skip or waiver. A go-back
        walk moves on once the step is accepted."""
        self._attempts[attempt.step_id].append(attempt)
        self._order.append(attempt)
        self._decision.pop(attempt.step_id, None)
        self._advance(attempt.step_id)

    def decide(self, step_id: str, state: str, reason: str) -> None:
        """Record a skip ("skipped") or waiver ("waived") of ``step_id``."""
        self._decision[step_id] = (state, reason)
        self._advance(step_id)

    def go_back(self, stage_id: str) -> None:
        """Restart the walk at the first step of ``stage_id`` (checked by the caller)."""
        self._cursor = next(
            i for i, s in enumerate(self._checklist.steps()) if s.stage_id == stage_id
        )

    def _advance(self, step_id: str) -> None:
        steps = self._checklist.steps()
        if self._cursor is not None and self._cursor < len(steps):
            if steps[self._cursor].id == step_id and self.state(step_id) in ACCEPTED:
                self._cursor += 1

    # ------------------------------------------------------------------ reading
    def state(self, step_id: str) -> str:
        """The step's state from its latest attempt or decision."""
        if step_id in self._decision:
            return self._decision[step_id][0]
        attempts = self._attempts[step_id]
        return attempts[-1].state if attempts else "not-started"

    def reason(self, step_id: str) -> str:
        """Why the step is in its state (a skip/waive reason, a not-run message), or ""."""
        if step_id in self._decision:
            return self._decision[step_id][1]
        attempts = self._attempts[step_id]
        return attempts[-1].message if attempts else ""

    def attempt_count(self, step_id: str) -> int:
        """How many attempts the step has."""
        return len(self._attempts[step_id])

    def attempts(self, step_id: str | None = None) -> tuple[AttemptResult, ...]:
        """All attempts in logged order, or those of one step."""
        if step_id is None:
            return tuple(self._order)
        return tuple(self._attempts[step_id])

    def status(self, step: Step) -> StepStatus:
        """One step's state (``in-progress`` while it runs) and attempt count."""
        state = "in-progress" if self.running == step.id else self.state(step.id)
        return StepStatus(step.id, step.stage_id, step.title, state,
                          self.attempt_count(step.id), self.reason(step.id))  # fmt: skip

    def stages(self) -> tuple[StageStatus, ...]:
        """Every stage with its state (the worst of its steps') and its steps, in order."""
        out = []
        for stage in self._checklist.stages:
            steps = tuple(self.status(s) for s in stage.steps)
            out.append(
                StageStatus(stage.id, stage.title, worst_state([s.state for s in steps]), steps)
            )
        return tuple(out)

    def current_step(self) -> str | None:
        """The step to run next. After a go-back it walks the stage gone back to and the
        later ones step by step (each is retaken in order); otherwise it is the first step not
        yet accepted. None when every step is accepted."""
        steps = self._checklist.steps()
        if self._cursor is not None and self._cursor < len(steps):
            return steps[self._cursor].id
        self._cursor = None
        for step in steps:
            if self.state(step.id) not in ACCEPTED:
                return step.id
        return None

    def gates_before(self, step_id: str) -> tuple[tuple[Step, str], ...]:
        """Each safety gate before ``step_id`` that is waived or has not passed, with its state
        (``waived``, ``fail``, ``not-started``, ...), in checklist order."""
        found = []
        for step in self._checklist.steps():
            if step.id == step_id:
                break
            state = self.state(step.id)
            if step.gate and state not in ("pass", "conditional-pass"):
                found.append((step, state))
        return tuple(found)

    def complete(self) -> bool:
        """True when every step is accepted (passed, waived or skipped)."""
        return all(self.state(s.id) in ACCEPTED for s in self._checklist.steps())

    # ------------------------------------------------------------------ rules
    def check_order(self, step: Step) -> None:
        """Refuse ``step`` while an earlier step is not accepted. Going back changes where the
        walk starts, not the rule: a retake that fails blocks the later steps again."""
        for earlier in self._checklist.steps():
            if earlier.id == step.id:
                return
            state = self.state(earlier.id)
            if state not in ACCEPTED:
                raise RunnerError(
                    f"step {step.id} comes after {earlier.id}, which is {state}: "
                    "steps run in order (retake, skip or waive it first)"
                )

    def check_skip(self, step_id: str) -> None:
        """A failed step cannot be skipped: it is waived or retaken. A safety gate (``gate =
        true`` in the checklist) is never skipped: it is run, and waived only after it failed."""
        if self.state(step_id) in FAILED:
            raise RunnerError(
                f"step {step_id} failed: waive it with a reason and a name, or retake it"
            )
        if self._checklist.step(step_id).gate:
            raise RunnerError(
                f"step {step_id} is a safety gate: it cannot be skipped; run it (a failure may "
                "then be waived by someone other than the operator)"
            )

    def check_waive(self, step_id: str) -> None:
        """Only a failed step (fail or conditional-fail) can be waived."""
        state = self.state(step_id)
        if state not in FAILED:
            raise RunnerError(f"step {step_id} is {state}: only a failed step can be waived")
