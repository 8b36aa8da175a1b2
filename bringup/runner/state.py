"""The session's state in memory: each step's attempts and the operator's decisions.

Rebuilt from the log on resume; the log is the truth, this is its running summary.
"""

from __future__ import annotations

from bringup.checklist.model import Checklist
from bringup.runner.results import AttemptResult

__all__ = ["SessionState"]


class SessionState:
    """Attempts per step (oldest first) and the latest skip/waive decision per step."""

    def __init__(self, checklist: Checklist) -> None:
        self._checklist = checklist
        self._attempts: dict[str, list[AttemptResult]] = {s.id: [] for s in checklist.steps()}
        self._decision: dict[str, tuple[str, str]] = {}  # step id -> (state, reason)
        self._order: list[AttemptResult] = []

    def add(self, attempt: AttemptResult) -> None:
        """Add a logged attempt; a new attempt replaces any earlier skip or waiver."""
        self._attempts[attempt.step_id].append(attempt)
        self._order.append(attempt)
        self._decision.pop(attempt.step_id, None)

    def decide(self, step_id: str, state: str, reason: str) -> None:
        """Record a skip ("skipped") or waiver ("waived") of ``step_id``."""
        self._decision[step_id] = (state, reason)

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
