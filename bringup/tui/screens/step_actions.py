"""What the operator decides on a step: run it (after its prompts), skip, waive, note, go back.

A mixin of ``SessionScreen`` (kept apart so the screen's file stays about layout, showing and
the worker): every method here runs on the UI thread and talks to the session link only. What
goes into the log (a note, a skip, a waiver, going back) is written by a thread worker (group
"log"): a slow disk or a log busy with another writer never freezes the keys; the outcome comes
back as a ``DecisionLogged`` message.
"""

from __future__ import annotations

from collections.abc import Callable

from textual import work
from textual.message import Message
from textual.widgets import Input

from bringup.errors import BringupError
from bringup.tui.screens.prompts import ConfirmPrompt, EnergisePrompt, ReasonPrompt
from bringup.tui.views import StepDetail

__all__ = ["StepActions", "DecisionLogged"]


class DecisionLogged(Message):
    """A log write of the operator's (note, skip, waive, go back) is done: ``problem`` is None
    when it was logged, else the one-line reason it was refused. ``then`` runs on the UI thread
    with the write's return value once it succeeded."""

    def __init__(
        self, what: str, result: object, problem: str | None, then: Callable[[object], None]
    ) -> None:
        super().__init__()
        self.what = what
        self.result = result
        self.problem = problem
        self.then = then


class StepActions:
    """Actions of the session screen that ask the operator something first."""

    # provided by SessionScreen
    running: str | None
    viewed: str | None
    _writing: int  # log writes in flight

    def _busy(self) -> bool:
        if self.running is not None:
            self.say("A step is running: x stops it first.", "warn")
            return True
        if self._writing:
            self.say("Still logging the last decision: a moment.", "warn")
            return True
        return False

    def _log_decision(
        self, what: str, write: Callable[[], object], then: Callable[[object], None]
    ) -> None:
        """Run ``write`` (a SessionLink call that writes the log) off the UI thread, then
        ``then(result)`` here once it succeeded; a refusal is shown in the status line."""
        self._writing += 1
        self._write_worker(what, write, then)

    @work(thread=True, group="log", exit_on_error=False)
    def _write_worker(
        self, what: str, write: Callable[[], object], then: Callable[[object], None]
    ) -> None:
        try:
            result = write()
        except BringupError as exc:
            self.post_message(DecisionLogged(what, None, str(exc), then))
        except Exception as exc:  # one line, never a traceback; nothing was logged
            self.post_message(DecisionLogged(what, None, f"{type(exc).__name__}: {exc}", then))
        else:
            self.post_message(DecisionLogged(what, result, None, then))

    def on_decision_logged(self, message: DecisionLogged) -> None:
        self._writing = max(0, self._writing - 1)
        if message.problem is not None:
            self.say(f"{message.what}: {message.problem}", "fault")
            return
        message.then(message.result)

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
        """The prompts, then the step; the idle keys stay hidden until the step has started
        or the prompts ended without it (between a prompt closing and the step starting, the
        foot offered ``r`` again for a moment, and a second press was taken as a retake)."""
        self._asking = True
        try:
            await self._ask_in_order(detail)
        finally:
            self._asking = False
            self.refresh_bindings()

    async def _ask_in_order(self, detail: StepDetail) -> None:
        """The prompts in the order the bench needs them (``StepPlan.prompts``)."""
        answers: dict[str, object] = {}
        if detail.reading_prompt and detail.energise is not None:
            # a meter reading of a powered board: energise (hands done first), then the
            # reading, asked by the step once the supply is ON, then its confirmation
            yes = await self.app.push_screen_wait(
                EnergisePrompt(detail.title, detail.energise, by_hand=detail.confirm or "")
            )
            if not yes:
                self.say("Not confirmed: the step did not run and nothing was energised.", "warn")
                return
            answers["confirmed"] = True
            answers["hazard_acknowledged"] = detail.energise.hazardous
            answers["read_now"] = self._reader(detail)
            self._start(detail, answers)
            return
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

    def _reader(self, detail: StepDetail):
        """``read_now(prompt, unit)`` for the step's thread: shows the reading prompt on the
        UI thread once the board is powered, then asks to confirm the value; the text, or
        None when the operator cancels (or the step is stopped meanwhile)."""
        import threading

        from bringup.analysis.quantities import parse_quantity

        app, sim = self.app, self.link.simulated

        def read_now(prompt: str, unit: str) -> str | None:
            done, box = threading.Event(), {}

            def finish(value: str | None) -> None:
                box["value"] = value
                done.set()

            def typed(result: tuple[str, str] | None) -> None:
                if result is None:
                    finish(None)
                    return
                text = result[0]
                shown = text or "(the simulated meter reads it)"
                app.push_screen(
                    ConfirmPrompt("Confirm the reading", f"{prompt}: {shown}"),
                    lambda yes: finish(text if yes else None),
                )

            def ask() -> None:
                hint = "\n(Simulated bench: leave it empty and the simulated meter reads it.)"
                app.push_screen(
                    ReasonPrompt(
                        "The board is powered: type the reading",
                        f"{prompt}" + (f" (in {unit})" if unit else "") + (hint if sim else ""),
                        placeholder=f"e.g. 3.31 {unit}".strip(),
                        empty_problem="Type the value read on the meter, or Esc to cancel.",
                        allow_empty=sim,
                        validate=lambda text: parse_quantity(
                            text, unit or None, where="the reading"
                        ),
                    ),
                    typed,
                )

            app.call_from_thread(ask)
            while not done.wait(0.1):
                if self._cancel.is_set():  # STOP while the prompt was up: the step ends
                    return None
            return box.get("value")

        return read_now

    def action_back(self) -> None:
        """Go back to the first step of the stage before the viewed one."""
        if self._busy():
            return

        def done(step_id: object) -> None:
            self.refresh_all(select=str(step_id))
            self.say("Back one stage: press r to take the step again.")

        viewed = self.viewed
        self._log_decision("going back", lambda: self.link.go_back(viewed), done)

    def action_skip(self) -> None:
        if self._busy() or self.viewed is None:
            return
        step = self.viewed

        def answered(result: tuple[str, str] | None) -> None:
            if result is None:
                return
            reason = result[0]

            def done(_: object) -> None:
                self.refresh_all(select=self.link.current_step_id() or step)
                self.say(f"Skipped, reason kept: {reason}")

            self._log_decision("skip", lambda: self.link.skip(step, reason), done)

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
            reason, name = result

            def done(_: object) -> None:
                self.refresh_all(select=self.link.current_step_id() or step)
                self.say(f"Waived by {name}: {reason}")

            self._log_decision("waiver", lambda: self.link.waive(step, reason, name), done)

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
