"""What the operator decides on a step: run it (after its prompts), skip, waive, note, go back.

A mixin of ``SessionScreen`` (kept apart so the screen's file stays about layout, showing and
the worker): every method here runs on the UI thread and talks to the session link only.
"""

from __future__ import annotations

from textual import work
from textual.widgets import Input

from bringup.errors import BringupError
from bringup.tui.screens.prompts import ConfirmPrompt, EnergisePrompt, ReasonPrompt
from bringup.tui.views import StepDetail

__all__ = ["StepActions"]


class StepActions:
    """Actions of the session screen that ask the operator something first."""

    # provided by SessionScreen
    running: str | None
    viewed: str | None

    def _busy(self) -> bool:
        if self.running is not None:
            self.say("A step is running: x stops it first.", "warn")
            return True
        return False

    def action_take(self) -> None:
        """Run (or retake) the viewed step: ask what it needs, then start the worker."""
        if self._busy() or self.viewed is None:
            return
        try:
            detail = self.link.detail(self.viewed)
            waiting = self.link.blocking_step(self.viewed)
        except BringupError as exc:
            self.say(str(exc), "fault")
            return
        if waiting is not None:
            # the runner would refuse it; say so before asking anything of the operator
            self.say(f"Steps run in order: {waiting} comes first (run, skip or waive it).", "warn")
            return
        self._ask_then_start(detail)

    @work(exclusive=True, group="prompts")
    async def _ask_then_start(self, detail: StepDetail) -> None:
        """The by-hand confirmation, the typed reading and the energising prompt, in order."""
        answers: dict[str, object] = {}
        if detail.confirm and detail.energise is not None and not detail.reading_prompt:
            # one question: the hands are done and the supply may go on
            yes = await self.app.push_screen_wait(
                EnergisePrompt(detail.title, detail.energise, by_hand=detail.confirm)
            )
            if not yes:
                self.say("Not confirmed: the step did not run and nothing was energised.", "warn")
                return
            answers["confirmed"] = True
            answers["hazard_acknowledged"] = detail.energise.hazardous
            self._start(detail, answers)
            return
        if detail.confirm:
            yes = await self.app.push_screen_wait(ConfirmPrompt("Check by hand", detail.confirm))
            if not yes:
                self.say("Not confirmed: the step did not run.", "warn")
                return
            answers["confirmed"] = True
        if detail.reading_prompt:
            from bringup.analysis.quantities import parse_quantity

            unit = detail.reading_unit
            sim = self.link.simulated
            hint = "\n(Simulated bench: leave it empty and the simulated meter reads it.)"
            typed = await self.app.push_screen_wait(
                ReasonPrompt(
                    "Type the reading",
                    f"{detail.reading_prompt}"
                    + (f" (in {unit})" if unit else "")
                    + (hint if sim else ""),
                    placeholder=f"e.g. 3.31 {unit}".strip(),
                    empty_problem="Type the value read on the meter, or Esc to cancel.",
                    allow_empty=sim,
                    validate=lambda text: parse_quantity(text, unit or None, where="the reading"),
                )
            )
            if typed is None:
                self.say("No reading typed: the step did not run.", "warn")
                return
            answers["reading"] = typed[0] or None
        if detail.energise is not None:
            yes = await self.app.push_screen_wait(EnergisePrompt(detail.title, detail.energise))
            if not yes:
                self.say("Not energised: the step did not run.", "warn")
                return
            answers["hazard_acknowledged"] = detail.energise.hazardous
        self._start(detail, answers)

    def action_back(self) -> None:
        """Go back to the first step of the stage before the viewed one."""
        if self._busy():
            return
        try:
            step_id = self.link.go_back(self.viewed)
        except BringupError as exc:
            self.say(str(exc), "fault")
            return
        self.refresh_all(select=step_id)
        self.say("Back one stage: press r to take the step again.")

    def action_skip(self) -> None:
        if self._busy() or self.viewed is None:
            return
        step = self.viewed

        def answered(result: tuple[str, str] | None) -> None:
            if result is None:
                return
            try:
                self.link.skip(step, result[0])
            except BringupError as exc:
                self.say(str(exc), "fault")
                return
            self.refresh_all(select=self.link.current_step_id() or step)
            self.say(f"Skipped, reason kept: {result[0]}")

        self.app.push_screen(
            ReasonPrompt(
                "Skip this step?", "A skipped step needs a reason; it goes in the record."
            ),
            answered,
        )

    def action_waive(self) -> None:
        if self._busy() or self.viewed is None:
            return
        step = self.viewed

        def answered(result: tuple[str, str] | None) -> None:
            if result is None:
                return
            try:
                self.link.waive(step, result[0], result[1])
            except BringupError as exc:
                self.say(str(exc), "fault")
                return
            self.refresh_all(select=self.link.current_step_id() or step)
            self.say(f"Waived by {result[1]}: {result[0]}")

        self.app.push_screen(
            ReasonPrompt(
                "Waive this failed step?",
                "A waiver accepts a failed result: it needs a reason and the name of who accepts it.",
                ask_name=True,
                validate_name=self._check_waiver_name,
            ),
            answered,
        )

    def _check_waiver_name(self, name: str) -> None:
        """A waiver is someone else's decision: not the operator's own name, no control or
        direction-override character in it (``bringup.names``; the runner and the log keep the
        same rules: this says so in the prompt, before anything is logged)."""
        from bringup.errors import InputError
        from bringup.names import control_character

        bad = control_character(name)
        if bad is not None:
            raise InputError(
                f"the name contains {bad}, which would change how it reads: type it without"
            )
        if name.casefold() == self.link.operator.strip().casefold():
            raise InputError(
                "a waiver is given by someone other than the session's operator: type their name"
            )

    def action_note(self) -> None:
        self.action_tab("tab-notes")
        self.query_one("#note-input", Input).focus()
