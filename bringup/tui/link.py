"""The one object the screens talk to: a ``SessionRunner`` seen through the notebook's views.

Every call goes to the runner (``bringup.runner.SessionRunner``), which does the measuring,
judging and logging; this module only turns its records into ``bringup.tui.views`` and keeps
a small cache of converted attempts so that moving the cursor does not reload waveforms.
"""

from __future__ import annotations

import dataclasses
import threading
from collections.abc import Callable
from typing import Any

from bringup.tui.present import attempt_view, detail_view, progress_view
from bringup.tui.views import AttemptView, Progress, StageRow, StepDetail, StepRow, SummaryRow

__all__ = ["SessionLink"]


class SessionLink:
    """A running session for the screens. ``runner`` is a ``SessionRunner``."""

    def __init__(self, runner: Any, bench_text: str = "") -> None:
        self.runner = runner
        self._notices_shown = 0
        self.bench_text = bench_text
        self._attempt_cache: dict[tuple[str, int], AttemptView] = {}
        self._idle = threading.Event()  # clear while a step runs
        self._idle.set()
        self._closed = False
        self._finished_logged = False

    # -- who and what ----------------------------------------------------------------------
    @property
    def operator(self) -> str:
        """The session's operator."""
        return self.runner.operator

    @property
    def simulated(self) -> bool:
        """True on a simulated bench (it plays the hands and reads its own meter)."""
        return bool(self.runner.bench_source.is_simulated)

    @property
    def session_id(self) -> str:
        """The session id in the log."""
        return self.runner.session_id

    def header(self) -> str:
        """One line: board, serial, operator, session, bench and progress."""
        board = self.runner.board
        stages = self.runner.stages()
        steps = [s for st in stages for s in st.steps]
        done = sum(1 for s in steps if s.state not in ("not-started", "in-progress"))
        name = getattr(board, "name", "board")
        rev = getattr(board, "revision", "")
        bench = f" · {self.bench_text}" if self.bench_text else ""
        return (
            f"{name}{' rev ' + rev if rev else ''} · SN {self.runner.serial} · "
            f"{self.operator} · session {self.session_id}{bench} · {done}/{len(steps)} done"
        )

    def stages(self) -> tuple[StageRow, ...]:
        """Stages and steps with their states, in checklist order."""
        return tuple(
            StageRow(
                st.stage_id,
                st.title,
                tuple(StepRow(s.step_id, s.title, s.state, s.attempts) for s in st.steps),
                st.state,
            )
            for st in self.runner.stages()
        )

    def current_step_id(self) -> str | None:
        """The step to do next, None when every step has an accepted verdict."""
        return self.runner.current_step()

    def detail(self, step_id: str) -> StepDetail:
        """The step's brief: instructions, cautions, settings, energising, prompts."""
        plan = self.runner.plan(step_id)
        state = self.runner.step_status(step_id).state
        step = self.runner.checklist.step(step_id)
        return detail_view(plan, state, soak=step.soak is not None)

    def attempts(self, step_id: str) -> tuple[AttemptView, ...]:
        """The step's attempts, oldest first (waveforms of resumed attempts loaded once)."""
        out = []
        for a in self.runner.attempts(step_id):
            key = (step_id, a.attempt_no)
            view = self._attempt_cache.get(key)
            if view is None:
                if not a.waveforms and a.attempt_id is not None:
                    a = dataclasses.replace(a, waveforms=tuple(self.runner.waveforms_of(a)))
                view = attempt_view(a)
                self._attempt_cache[key] = view
            out.append(view)
        return tuple(out)

    def blocking_step(self, step_id: str) -> str | None:
        """The title of the unfinished step that must come before ``step_id`` (None if it may
        run now): the runner's own order rule, asked before the operator is prompted."""
        from bringup.runner.results import ACCEPTED

        current = self.runner.current_step()
        if current is None or current == step_id:
            return None
        steps = [s.id for s in self.runner.checklist.steps()]
        if steps.index(step_id) <= steps.index(current):
            return None  # a retake of an earlier step, or one of a stage gone back to
        status = self.runner.step_status(current)
        return None if status.state in ACCEPTED else status.title

    def step_notes(self, step_id: str) -> tuple[str, ...]:
        """Notes logged about the step, and the reason of a skip or waiver."""
        step = self.runner.checklist.step(step_id)
        notes = []
        for e in self.runner.log.events(self.runner.session_id):
            if e.stage_id == step.stage_id and e.step_id == step.key:
                if e.kind == "note":
                    notes.append(f"{e.operator}: {e.reason}")
                elif e.kind in ("skip", "waive"):
                    notes.append(f"{e.kind} by {e.operator}: {e.reason}")
        return tuple(notes)

    # -- acting ----------------------------------------------------------------------------
    def run(
        self,
        step_id: str,
        answers: dict[str, object],
        cancel: threading.Event,
        finish: threading.Event,
        on_progress: Callable[[Progress], None],
    ) -> AttemptView:
        """Run one attempt (blocking: call from a worker thread) and return it as a view."""
        from bringup.runner import StepAnswers

        step_answers = StepAnswers(
            confirmed=answers.get("confirmed"),  # type: ignore[arg-type]
            reading=answers.get("reading"),  # type: ignore[arg-type]
            hazard_acknowledged=bool(answers.get("hazard_acknowledged", False)),
            read_now=answers.get("read_now"),  # type: ignore[arg-type]
        )
        self._idle.clear()
        try:
            result = self.runner.run_step(
                step_id,
                answers=step_answers,
                cancel=cancel,
                finish=finish,
                on_progress=lambda p: on_progress(progress_view(p)),
            )
        finally:
            self._idle.set()
        view = attempt_view(result)
        self._attempt_cache[(step_id, result.attempt_no)] = view
        self._log_finish_if_complete()
        return view

    def bench_notices_pending(self) -> bool:
        """True while the runner holds notices not shown yet (a calibration past due, said
        as the session screen opens, before the first step)."""
        return len(tuple(getattr(self.runner, "bench_notices", ()))) > self._notices_shown

    def new_bench_notices(self) -> tuple[str, ...]:
        """What the runner found on opening the bench (an output found ON after an unclean
        stop, a step it interrupted) and has not been shown yet; each notice once."""
        notices = tuple(getattr(self.runner, "bench_notices", ()))
        fresh = notices[self._notices_shown :]
        self._notices_shown = len(notices)
        return fresh

    def switch_off_now(self, reason: str = "STOP pressed in the notebook"):
        """STOP: the runner's ``stop`` switches the supply output OFF now from the calling
        thread (never the step's own, which may be blocked in an instrument call for up to its
        timeout) and reads it back; the running step ends at its next check and its attempt is
        logged as not run, with ``reason``. The session carries on (closing the notebook uses
        ``abort`` instead). Returns the runner's ``SupplyOff`` (``confirmed``, ``at_utc``,
        ``problem``, ``text()``); blocks for the switch-off's exchanges: call it from a worker."""
        return self.runner.stop(reason)

    def skip(self, step_id: str, reason: str) -> None:
        """Skip with a reason (the runner refuses a failed step)."""
        self.runner.skip(step_id, reason)
        self._log_finish_if_complete()

    def waive(self, step_id: str, reason: str, name: str) -> None:
        """Waive a failed step with a reason and who accepts it."""
        self.runner.waive(step_id, reason, name)
        self._log_finish_if_complete()

    def add_note(self, step_id: str, text: str) -> None:
        """Log a note about the step."""
        self.runner.note(text, step_id)

    def go_back(self, step_id: str | None) -> str:
        """Go back to the viewed step's stage if it is before the current one, else one stage
        before the viewed step's; returns the first step of that stage."""
        stages = list(self.runner.checklist.stages)
        ids = [s.id for s in stages]
        viewed = self.runner.checklist.step(step_id).stage_id if step_id else ids[0]
        current = self.runner.current_step()
        current_stage = self.runner.checklist.step(current).stage_id if current else ids[-1]
        if ids.index(viewed) < ids.index(current_stage):
            target = viewed
        else:
            target = ids[max(0, ids.index(viewed) - 1)]
        self.runner.go_back(target)
        self._finished_logged = False
        return stages[ids.index(target)].steps[0].id

    def summary(self) -> tuple[SummaryRow, ...]:
        """Every stage, then its steps, with verdicts, attempts and a detail line."""
        rows: list[SummaryRow] = []
        for st in self.runner.stages():
            rows.append(SummaryRow(0, st.title, st.state, sum(s.attempts for s in st.steps), ""))
            for s in st.steps:
                detail = s.reason
                if not detail:
                    views = self.attempts(s.step_id)
                    if views:
                        judged = [m for m in views[-1].metrics if m.verdict != "reported"]
                        detail = ", ".join(f"{m.label} {m.measured}" for m in judged[:2])
                rows.append(SummaryRow(1, s.title, s.state, s.attempts, detail))
        return tuple(rows)

    def overall(self) -> str:
        """The session's verdict: the worst of its stages'."""
        return self.runner.verdict()

    def overall_finished(self) -> bool:
        """True when every step has an accepted verdict (nothing left to do)."""
        return self.runner.current_step() is None

    def _log_finish_if_complete(self) -> None:
        if not self._finished_logged and self.runner.current_step() is None:
            self._finished_logged = bool(self.runner.finish_if_complete())

    def close(self) -> None:
        """Supply OFF and instruments and log closed; stops a running step first."""
        if self._closed:
            return
        self._closed = True
        try:
            if not self._idle.is_set():
                # abort switches the supply off at once; then let the worker log its attempt
                self.runner.abort("the notebook was closed while the step ran")
                self._idle.wait(5.0)
        finally:
            self.runner.close()
