"""Messages a step's worker thread posts back to the interface (thread-safe ``post_message``)."""

from __future__ import annotations

from textual.message import Message

from bringup.tui.views import AttemptView, Progress

__all__ = ["StepProgressed", "StepFinished", "StepFaulted", "StepStopped", "SupplySwitchedOff"]


class StepProgressed(Message):
    """A live reading or a soak sample arrived."""

    def __init__(self, step_id: str, progress: Progress) -> None:
        super().__init__()
        self.step_id = step_id
        self.progress = progress


class StepFinished(Message):
    """The step's attempt was judged and logged."""

    def __init__(self, step_id: str, attempt: AttemptView) -> None:
        super().__init__()
        self.step_id = step_id
        self.attempt = attempt


class StepFaulted(Message):
    """The step could not run: an instrument fault or bad input (one line)."""

    def __init__(self, step_id: str, message: str) -> None:
        super().__init__()
        self.step_id = step_id
        self.message = message


class StepStopped(Message):
    """The operator cancelled the step; the bench was put in its safe state."""

    def __init__(self, step_id: str, message: str = "") -> None:
        super().__init__()
        self.step_id = step_id
        self.message = message


class SupplySwitchedOff(Message):
    """STOP's own thread has switched the supply output off: ``problem`` is None when the
    supply read back OFF (confirmed at ``clock``, "14:03:07 UTC"), else why it could not be."""

    def __init__(self, problem: str | None, clock: str = "") -> None:
        super().__init__()
        self.problem = problem
        self.clock = clock

    @property
    def confirmed(self) -> bool:
        """True when the supply answered that its output is OFF."""
        return self.problem is None
