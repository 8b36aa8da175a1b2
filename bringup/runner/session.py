"""The session runner: one board serial number through one checklist, every attempt logged.

The TUI and the headless run (``bringup run --auto``) are two faces of this one class; neither
computes nor stores anything itself. Typical use::

    runner = SessionRunner.create(board=load_board("demo"), checklist=load_checklist(),
                                  serial="DHS24-0001", operator="ana",
                                  bench=BenchSource.simulated("healthy"), db_path=path)
    with runner:
        for stage in runner.stages():              # StageStatus, each with StepStatus
            ...
        step_id = runner.current_step()            # e.g. "power-rails.first-power"
        plan = runner.plan(step_id)                # StepPlan: hands, channels, energise, prompts
        result = runner.run_step(step_id, answers=StepAnswers(confirmed=True),
                                 cancel=threading.Event(), on_progress=print)

Rules it keeps: steps run in checklist order (``run_step`` refuses a step while an earlier one
is not accepted: passed, waived or skipped; ``go_back`` restarts the walk at an earlier stage
for retakes, under the same rule); every attempt
is committed to the log in one transaction before the next step can start and a retake never
overwrites one; a skip needs a reason, a waiver a failed step, a reason and a name; the supply
is switched only through the instrument layer's safe-state owner, and every way out of a step
(success, failure, cancel, exception, ``abort``, ``close``) leaves its output OFF.

Thread use: ``run_step`` blocks; call it from a worker thread. Every other method may be called
from another thread meanwhile (``abort`` is meant to be: it switches the supply off at once and
makes the running step stop at its next check). Only one step runs at a time.
"""

from __future__ import annotations

import threading
from collections.abc import Callable
from pathlib import Path

from bringup.boards.board_file import Board
from bringup.checklist.model import Checklist, Step
from bringup.errors import BringupError, InputError
from bringup.runner.bench_source import BenchSource
from bringup.runner.results import (
    ACCEPTED,
    AttemptResult,
    Progress,
    StageStatus,
    StepAnswers,
    StepPlan,
    StepStatus,
    worst_state,
)

__all__ = ["SessionRunner", "RunnerError"]

ProgressCallback = Callable[[Progress], None]


def _check_operator(operator: str) -> None:
    """Refuse an operator name with a control character (it would break the session header)."""
    from bringup.boards.board_file import control_character

    bad = control_character(operator)
    if bad is not None:
        raise InputError(
            f"--operator {operator!r}: contains the control character {bad} (one line of text)"
        )


class RunnerError(BringupError):
    """A request the runner refuses (out of order, a skip without a reason, ...): one line."""


class SessionRunner:
    """One session: a board serial number going through one checklist, logged in SQLite.

    Build with :meth:`create` or :meth:`resume`; use as a context manager (or call
    :meth:`close`) so the bench is left safe and the log closed.
    """

    def __init__(self, *, log, session_id: str, board: Board, checklist: Checklist,
                 serial: str, operator: str, bench: BenchSource) -> None:  # fmt: skip
        """Use :meth:`create` or :meth:`resume`."""
        from bringup.runner.state import SessionState

        self._log = log
        self.session_id = session_id
        self.board = board
        self.checklist = checklist
        self.serial = serial
        self.operator = operator
        self.bench_source = bench
        self._state = SessionState(checklist)
        self._lock = threading.RLock()  # state and log
        self._run_lock = threading.Lock()  # one step at a time
        self._abort = threading.Event()
        self._bench = None  # opened lazily on the first step that needs instruments
        self._cursor: int | None = None  # index of the step to retake after a go-back
        self._running: str | None = None

    # ------------------------------------------------------------------ building
    @classmethod
    def create(
        cls,
        *,
        board: Board,
        checklist: Checklist,
        serial: str,
        operator: str,
        bench: BenchSource,
        db_path: str | Path | None = None,
    ) -> SessionRunner:
        """Start a new session for board ``serial`` (checked against the board's pattern).

        The board, checklist and bench are snapshotted into the log so the session can be
        resumed and exported exactly as it ran; the bench is opened here for its identities
        (``BenchLink.snapshot``), so nothing is logged for a bench that cannot be reached. ``db_path`` None = the default log.
        Raises ``InputError`` for a bad serial or an empty operator, ``ConfigError`` when the
        checklist names a target the board does not define, ``StoreError`` for the log.
        """
        from bringup.checklist.load import check_against_board
        from bringup.runner.file_snapshots import board_snapshot, checklist_snapshot
        from bringup.store import SessionLog

        if not operator or not operator.strip():
            raise InputError("--operator: a session needs the operator's name")
        _check_operator(operator)
        board.check_serial(serial)
        check_against_board(checklist, board)
        from bringup.runner.bench_link import BenchLink

        log = SessionLog.open(db_path)
        link = None
        try:
            # The bench is opened now so that the log holds what it really is: each
            # instrument's *IDN? answer, resources, profiles, probes, calibration dates.
            link = BenchLink.open(bench, board)
            session_id = log.create_session(
                board=board_snapshot(board),
                checklist=checklist_snapshot(checklist),
                bench=link.snapshot(bench),
                serial=serial,
                operator=operator.strip(),
            )
        except BaseException:
            try:
                if link is not None:
                    link.close()
            finally:
                log.close()
            raise
        runner = cls(log=log, session_id=session_id, board=board, checklist=checklist,
                     serial=serial, operator=operator.strip(), bench=bench)  # fmt: skip
        runner._bench = link
        return runner

    @classmethod
    def resume(
        cls,
        session_id: str | None = None,
        *,
        db_path: str | Path | None = None,
        bench: BenchSource | None = None,
        operator: str | None = None,
    ) -> SessionRunner:
        """Reopen a session (``None`` = the most recent unfinished one; a unique id prefix is
        enough). Board and checklist come from the session's snapshot; the bench from ``bench``
        or else the one the session was started with. Every committed attempt is reloaded;
        :meth:`current_step` is the first unfinished step. Logs a ``resume`` event.
        """
        from bringup.runner.resuming import reopen

        if operator is not None:
            _check_operator(operator)
        return reopen(cls, session_id, db_path=db_path, bench=bench, operator=operator)

    # ------------------------------------------------------------------ reading
    def stages(self) -> tuple[StageStatus, ...]:
        """Every stage with its state and its steps' states, in checklist order."""
        with self._lock:
            out = []
            for stage in self.checklist.stages:
                steps = tuple(self.step_status(s.id) for s in stage.steps)
                out.append(
                    StageStatus(stage.id, stage.title, worst_state([s.state for s in steps]), steps)
                )
            return tuple(out)

    def step_status(self, step_id: str) -> StepStatus:
        """One step's state (see ``bringup.runner.results.STATES``) and attempt count."""
        step = self._step(step_id)
        with self._lock:
            state = "in-progress" if self._running == step_id else self._state.state(step_id)
            return StepStatus(step.id, step.stage_id, step.title, state,
                              self._state.attempt_count(step_id), self._state.reason(step_id))  # fmt: skip

    def stage_verdicts(self) -> dict[str, str]:
        """Stage id -> stage state (the worst of its steps)."""
        return {s.stage_id: s.state for s in self.stages()}

    def verdict(self) -> str:
        """The session's overall state: the worst of its stages'."""
        return worst_state([s.state for s in self.stages()])

    def current_step(self) -> str | None:
        """The step to run next. After ``go_back`` it walks the stage gone back to and the
        later ones step by step (each is retaken in order); otherwise it is the first step not
        yet accepted. None when every step is accepted."""
        with self._lock:
            steps = self.checklist.steps()
            if self._cursor is not None and self._cursor < len(steps):
                return steps[self._cursor].id
            self._cursor = None
            for step in steps:
                if self._state.state(step.id) not in ACCEPTED:
                    return step.id
            return None

    def _advance(self, step_id: str) -> None:
        """After an attempt or a decision: a go-back walk moves on once its step is accepted."""
        steps = self.checklist.steps()
        if self._cursor is not None and steps[self._cursor].id == step_id:
            if self._state.state(step_id) in ACCEPTED:
                self._cursor += 1

    def plan(self, step_id: str) -> StepPlan:
        """What ``step_id`` will set on the instruments and ask of the operator (resolved for
        this board and bench): hands, channels, the energising prompt (voltage, current limit,
        hazard notice above 60 V DC), the confirmation and reading prompts."""
        from bringup.runner.planning import plan_step

        bench = self._bench
        kinds = bench.probe_kinds() if bench is not None else None
        return plan_step(self._step(step_id), self.board, self.bench_source, kinds)

    def attempts(self, step_id: str | None = None) -> tuple[AttemptResult, ...]:
        """Every attempt logged in this session (of ``step_id`` only, if given), oldest first.

        Attempts reloaded on resume carry their metrics and annotations; their waveforms are
        loaded from the log with :meth:`waveforms_of`."""
        with self._lock:
            return self._state.attempts(step_id)

    def waveforms_of(self, attempt: AttemptResult):
        """The attempt's waveforms (``WaveformView``), loaded from the log when needed."""
        if attempt.waveforms or attempt.attempt_id is None:
            return attempt.waveforms
        from bringup.runner.resuming import load_views

        with self._lock:
            return load_views(self._log, self.session_id, attempt)

    # ------------------------------------------------------------------ running
    def run_step(
        self,
        step_id: str,
        *,
        answers: StepAnswers | None = None,
        cancel: threading.Event | None = None,
        finish: threading.Event | None = None,
        on_progress: ProgressCallback | None = None,
        notes: str = "",
    ) -> AttemptResult:
        """Run one attempt of ``step_id`` and log it; blocks until done (call from a worker).

        ``notes``: the operator's notes, logged with the attempt itself.

        ``answers``: the operator's confirmation and typed reading. With none, a simulated
        bench answers for itself (it plays the operator's hands and reads its meter); otherwise
        the attempt is refused and logged as ``not-run``. ``cancel`` set: the step stops at its
        next check, the supply goes off and the attempt is logged as ``not-run``. ``finish``
        set during a thermal soak: stop soaking and judge the readings so far (the soak never
        stops before its minimum duration). ``on_progress`` receives ``Progress`` events from
        this thread (live supply readings, the soak's temperature log and prediction).

        Raises ``RunnerError`` when an earlier step is not accepted (retake, skip or waive it
        first) or another step is running. Instrument faults do not raise: the attempt is logged as
        ``not-run`` with the fault in its message, and the supply is off.
        """
        from bringup.runner.executing import execute

        step = self._step(step_id)
        if not self._run_lock.acquire(blocking=False):
            raise RunnerError(f"step {self._running} is running; wait for it or abort it")
        try:
            with self._lock:
                self._check_order(step)
                self._running = step_id
                self._abort.clear()
            result = execute(self, step, answers, cancel, finish, on_progress, notes)
            with self._lock:
                self._state.add(result)
                self._advance(step_id)
                self._update_listing()
            return result
        finally:
            with self._lock:
                self._running = None
            self._run_lock.release()

    def mark_not_run(self, step_id: str, message: str) -> AttemptResult:
        """Log ``step_id`` as not run (nothing powered, nothing acquired) with ``message``:
        what a headless run does to the steps after a failed one."""
        from bringup.runner.analyses import AnalysisOutput
        from bringup.runner.executing import now_utc
        from bringup.runner.recording import store_attempt

        step = self._step(step_id)
        with self._lock:
            moment = now_utc()
            result = AttemptResult(step.id, step.stage_id, self._state.attempt_count(step_id) + 1,
                                   "not-run", (), (), {}, self.plan(step_id).settings,
                                   self.operator, moment, moment, message=message)  # fmt: skip
            result = store_attempt(self, step, result, {}, AnalysisOutput())
            self._state.add(result)
            self._update_listing()
            return result

    def check_reading(self, step_id: str, text: str) -> float:
        """Read a typed reading for ``step_id`` in the step's unit (SI float); raises
        ``InputError`` naming the step for text that is not a quantity in that unit."""
        from bringup.analysis.quantities import parse_quantity

        step = self._step(step_id)
        if step.reading is None:
            raise RunnerError(f"step {step_id} asks for no reading")
        return parse_quantity(text, step.reading.unit, where=f"{step_id} reading")

    def _check_order(self, step: Step) -> None:
        # Going back changes where the walk starts, not the rule: every step before the one
        # run must stand accepted (a retake that fails blocks the later steps again).
        for earlier in self.checklist.steps():
            if earlier.id == step.id:
                return
            state = self._state.state(earlier.id)
            if state not in ACCEPTED:
                raise RunnerError(
                    f"step {step.id} comes after {earlier.id}, which is {state}: "
                    "steps run in order (retake, skip or waive it first)"
                )

    # ------------------------------------------------------------------ decisions
    def skip(self, step_id: str, reason: str) -> None:
        """Skip a step with a reason (logged). A failed step cannot be skipped: waive it."""
        step = self._step(step_id)
        if not reason or not reason.strip():
            raise RunnerError(f"skipping {step_id} needs a reason")
        with self._lock:
            if self._state.state(step_id) in ("fail", "conditional-fail"):
                raise RunnerError(
                    f"step {step_id} failed: waive it with a reason and a name, or retake it"
                )
            self._log.record_event(self.session_id, kind="skip", operator=self.operator,
                                   stage_id=step.stage_id, step_id=step.key, reason=reason.strip())  # fmt: skip
            self._state.decide(step_id, "skipped", reason.strip())
            self._advance(step_id)
            self._update_listing()

    def waive(self, step_id: str, reason: str, name: str) -> None:
        """Waive a failed step (fail or conditional-fail) with a reason and the waiver's name."""
        step = self._step(step_id)
        if not reason or not reason.strip():
            raise RunnerError(f"waiving {step_id} needs a reason")
        if not name or not name.strip():
            raise RunnerError(f"waiving {step_id} needs the name of who waives it")
        with self._lock:
            state = self._state.state(step_id)
            if state not in ("fail", "conditional-fail"):
                raise RunnerError(f"step {step_id} is {state}: only a failed step can be waived")
            self._log.record_event(self.session_id, kind="waive", operator=name.strip(),
                                   stage_id=step.stage_id, step_id=step.key, reason=reason.strip(),
                                   payload={"recorded_by": self.operator})  # fmt: skip
            self._state.decide(step_id, "waived", f"{reason.strip()} ({name.strip()})")
            self._advance(step_id)
            self._update_listing()

    def note(self, text: str, step_id: str | None = None) -> None:
        """Add the operator's note to the log (about ``step_id`` if given)."""
        if not text or not text.strip():
            raise RunnerError("a note needs some text")
        step = self._step(step_id) if step_id else None
        with self._lock:
            self._log.record_event(
                self.session_id,
                kind="note",
                operator=self.operator,
                stage_id=step.stage_id if step else None,
                step_id=step.key if step else None,
                reason=text.strip(),
            )

    def go_back(self, stage_id: str) -> None:
        """Go back to an earlier stage: its steps (and the later ones) may be retaken in order.

        Earlier attempts stay in the log; a retake adds a new attempt."""
        try:
            self.checklist.stage(stage_id)
        except KeyError:
            raise RunnerError(f"no stage {stage_id!r} in checklist {self.checklist.name}") from None
        with self._lock:
            self._log.record_event(self.session_id, kind="go-back", operator=self.operator,
                                   stage_id=stage_id, reason="operator went back")  # fmt: skip
            self._cursor = next(
                i for i, s in enumerate(self.checklist.steps()) if s.stage_id == stage_id
            )

    def abort(self, reason: str = "operator abort") -> None:
        """Put the bench in its safe state now (supply output OFF) and stop a running step.

        Safe to call from any thread, at any time, more than once."""
        self._abort.set()
        bench = self._bench
        if bench is not None:
            bench.make_safe()
        with self._lock:
            try:
                self._log.record_event(self.session_id, kind="abort", operator=self.operator,
                                       reason=reason)  # fmt: skip
            except BringupError:
                pass  # the bench is safe; a log that cannot take the event must not hide that

    def finish_if_complete(self) -> bool:
        """Log the finish event (final verdicts) once every step is accepted; True if done."""
        with self._lock:
            self._update_listing()
            if any(self._state.state(s.id) not in ACCEPTED for s in self.checklist.steps()):
                return False
            self._log.record_event(self.session_id, kind="finish", operator=self.operator,
                                   payload={"verdict": self.verdict(),
                                            "stages": self.stage_verdicts()})  # fmt: skip
            return True

    def _update_listing(self) -> None:
        self._log.set_session_state(
            self.session_id, verdict=self.verdict(), stage_verdicts=self.stage_verdicts()
        )

    # ------------------------------------------------------------------ plumbing
    def _step(self, step_id: str) -> Step:
        try:
            return self.checklist.step(step_id)
        except KeyError:
            raise RunnerError(f"no step {step_id!r} in checklist {self.checklist.name}") from None

    def bench(self):
        """The open bench (``bringup.runner.bench_link.BenchLink``), opened on first use."""
        with self._lock:
            if self._bench is None:
                from bringup.runner.bench_link import BenchLink

                self._bench = BenchLink.open(self.bench_source, self.board)
            return self._bench

    @property
    def aborted(self) -> threading.Event:
        """Set by :meth:`abort`; a running step checks it between instrument calls."""
        return self._abort

    @property
    def log(self):
        """The session log (``bringup.store.SessionLog``)."""
        return self._log

    def close(self) -> None:
        """Leave the bench safe (supply OFF), close the instruments and the log."""
        bench, self._bench = self._bench, None
        try:
            if bench is not None:
                bench.close()
        finally:
            with self._lock:
                self._log.close()

    def __enter__(self) -> SessionRunner:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
