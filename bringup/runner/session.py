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

The class is small: it holds four collaborators, each with its own state and importable on its
own, and keeps the session's rules between them:

- ``SessionState`` (``state.py``): the walk in memory: attempts, decisions, order, go-back;
- ``Planner`` (``planning.py``): a step resolved for this board and bench;
- ``StepExecutor`` (``executing.py``): the open bench, one attempt at a time, the abort flag;
- ``Recorder`` (``recording.py``): the session's side of the log;
- ``resuming.py`` reopens a logged session and replays it into a new ``SessionState``.

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
from bringup.runner.executing import StepExecutor
from bringup.runner.planning import Planner
from bringup.runner.recording import Recorder, now_utc
from bringup.runner.results import (
    AttemptResult,
    Progress,
    StageStatus,
    StepAnswers,
    StepPlan,
    StepStatus,
    SupplyOff,
    worst_state,
)
from bringup.runner.state import RunnerError, SessionState

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


class SessionRunner:
    """One session: a board serial number going through one checklist, logged in SQLite.

    Build with :meth:`create` or :meth:`resume`; use as a context manager (or call
    :meth:`close`) so the bench is left safe and the log closed.
    """

    def __init__(self, *, log, session_id: str, board: Board, checklist: Checklist,
                 serial: str, operator: str, bench: BenchSource, link=None,
                 session_lock=None) -> None:  # fmt: skip
        """Use :meth:`create` or :meth:`resume`. ``link``: a bench already open;
        ``session_lock``: this process's lock on the session (``bringup.locks``)."""
        self.session_id = session_id
        self.board = board
        self.checklist = checklist
        self.serial = serial
        self.operator = operator
        self.bench_source = bench
        self.state = SessionState(checklist)
        self.planner = Planner(board, bench, self.state.gates_before)
        self.recorder = Recorder(log, session_id, session_lock)
        self._lock = threading.RLock()  # the state, and the log through the recorder
        self._run_lock = threading.Lock()  # one step at a time
        #: Lines for the operator from opening the bench: an output found ON (at what voltage
        #: and current) and switched off, steps found interrupted by an unclean stop.
        self.bench_notices: tuple[str, ...] = ()
        self.bench_notices = self._calibration_notices()
        self.executor = StepExecutor(board=board, source=bench, planner=self.planner,
                                     recorder=self.recorder, operator=operator,
                                     on_open=self._bench_opened)  # fmt: skip
        if link is not None:
            self.executor.adopt(link)

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
        (``BenchLink.snapshot``), so nothing is logged for a bench that cannot be reached.
        ``db_path`` None = the default log. Raises ``InputError`` for a bad serial or an empty
        operator, ``ConfigError`` when the checklist names a target the board does not define,
        ``StoreError`` for the log.
        """
        from bringup.checklist.load import check_against_board
        from bringup.runner.bench_link import BenchLink
        from bringup.runner.file_snapshots import board_snapshot, checklist_snapshot
        from bringup.store import SessionLog

        if not operator or not operator.strip():
            raise InputError("--operator: a session needs the operator's name")
        _check_operator(operator)
        board.check_serial(serial)
        check_against_board(checklist, board)
        from bringup.locks import lock_session

        log = SessionLog.open(db_path)
        link = held = None
        try:
            # The bench is opened now so that the log holds what it really is: each
            # instrument's *IDN? answer, resources, profiles, probes, calibration dates.
            # Opening it takes this process's locks on its instruments (bringup.locks).
            link = BenchLink.open(bench, board)
            session_id = log.create_session(
                board=board_snapshot(board),
                checklist=checklist_snapshot(checklist),
                bench=link.snapshot(bench),
                serial=serial,
                operator=operator.strip(),
            )
            held = lock_session(log.path, session_id)  # one session, one writer
        except BaseException:
            try:
                if link is not None:
                    link.close()
            finally:
                log.close()
            raise
        runner = cls(log=log, session_id=session_id, board=board, checklist=checklist,
                     serial=serial, operator=operator.strip(), bench=bench, link=link,
                     session_lock=held)  # fmt: skip
        runner._note_locks_taken_over(link)
        return runner

    def _note_locks_taken_over(self, link) -> None:
        """Log a note when an instrument lock was left by a process that died holding the
        bench (``bringup.locks``): it did not leave the bench safe itself."""
        locks = getattr(getattr(link, "bench", None), "resource_locks", None)
        for what, record in getattr(locks, "took_over", []):
            self.recorder.event(
                "note",
                self.operator,
                reason=f"lock on {what} taken over from PID {record.get('pid')} "
                f"({record.get('command')}, since {record.get('since_utc')}), which ended "
                "without letting go",
            )

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
        from bringup.runner.resuming import reopen, replay

        if operator is not None:
            _check_operator(operator)
        found = reopen(session_id, db_path=db_path, bench=bench, operator=operator)
        try:
            runner = cls(log=found.log, session_id=found.session_id, board=found.board,
                         checklist=found.checklist, serial=found.serial,
                         operator=found.operator, bench=found.bench,
                         session_lock=found.session_lock)  # fmt: skip
            replay(found.timeline, found.checklist, runner.state)
            runner.recorder.event("resume", runner.operator,
                                  reason=f"resumed at {runner.current_step() or 'the end'}")  # fmt: skip
            return runner
        except BaseException:
            found.log.close()
            found.session_lock.release()
            raise

    # ------------------------------------------------------------------ reading
    def stages(self) -> tuple[StageStatus, ...]:
        """Every stage with its state and its steps' states, in checklist order."""
        with self._lock:
            return self.state.stages()

    def step_status(self, step_id: str) -> StepStatus:
        """One step's state (see ``bringup.runner.results.STATES``) and attempt count."""
        step = self._step(step_id)
        with self._lock:
            return self.state.status(step)

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
            return self.state.current_step()

    def plan(self, step_id: str) -> StepPlan:
        """What ``step_id`` will set on the instruments and ask of the operator (resolved for
        this board and bench): hands, channels, the energising prompt (voltage, current limit,
        hazard notice above 60 V DC), the confirmation and reading prompts."""
        return self.planner.plan(self._step(step_id))

    def attempts(self, step_id: str | None = None) -> tuple[AttemptResult, ...]:
        """Every attempt logged in this session (of ``step_id`` only, if given), oldest first.

        Attempts reloaded on resume carry their metrics and annotations; their waveforms are
        loaded from the log with :meth:`waveforms_of`."""
        with self._lock:
            return self.state.attempts(step_id)

    def waveforms_of(self, attempt: AttemptResult):
        """The attempt's waveforms (``WaveformView``), loaded from the log when needed."""
        if attempt.waveforms or attempt.attempt_id is None:
            return attempt.waveforms
        return self.recorder.views_of(attempt)

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
        step = self._step(step_id)
        if not self._run_lock.acquire(blocking=False):
            raise RunnerError(f"step {self.state.running} is running; wait for it or abort it")
        try:
            with self._lock:
                self.state.check_order(step)
                self.state.running = step_id

            def attempt_no() -> int:
                with self._lock:
                    return self.state.attempt_count(step_id) + 1

            with self._lock:
                # Other steps' latest values: evidence for a diagnosis (the rail unloaded...).
                earlier = {m.id: m.measured for a in self.state.attempts() if a.step_id != step_id
                           for m in a.metrics if m.measured is not None}  # fmt: skip
            result = self.executor.execute(step, attempt_no, answers, cancel, finish,
                                           on_progress, notes, earlier)  # fmt: skip
            with self._lock:
                self.state.add(result)
                self._update_listing()
            return result
        finally:
            with self._lock:
                self.state.running = None
            self._run_lock.release()

    def mark_not_run(self, step_id: str, message: str) -> AttemptResult:
        """Log ``step_id`` as not run (nothing powered, nothing acquired) with ``message``:
        what a headless run does to the steps after a failed one."""
        from bringup.runner.analyses import AnalysisOutput

        step = self._step(step_id)
        with self._lock:
            moment = now_utc()
            result = AttemptResult(step.id, step.stage_id, self.state.attempt_count(step_id) + 1,
                                   "not-run", (), (), {}, self.plan(step_id).settings,
                                   self.operator, moment, moment, message=message)  # fmt: skip
            result = self.recorder.store(step, result, {}, AnalysisOutput())
            self.state.add(result)
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

    # ------------------------------------------------------------------ decisions
    def skip(self, step_id: str, reason: str) -> None:
        """Skip a step with a reason (logged). A failed step cannot be skipped: waive it."""
        step = self._step(step_id)
        if not reason or not reason.strip():
            raise RunnerError(f"skipping {step_id} needs a reason")
        with self._lock:
            self.state.check_skip(step_id)
            self.recorder.event("skip", self.operator, stage_id=step.stage_id,
                                step_id=step.key, reason=reason.strip())  # fmt: skip
            self.state.decide(step_id, "skipped", reason.strip())
            self._update_listing()

    def waive(self, step_id: str, reason: str, name: str) -> None:
        """Waive a failed step (fail or conditional-fail) with a reason and the waiver's name."""
        step = self._step(step_id)
        if not reason or not reason.strip():
            raise RunnerError(f"waiving {step_id} needs a reason")
        if not name or not name.strip():
            raise RunnerError(f"waiving {step_id} needs the name of who waives it")
        from bringup.names import same_person

        if same_person(name, self.operator):
            raise RunnerError(
                f"waiving {step_id}: {name.strip()!r} runs this session and cannot waive its "
                "failures: a waiver is given by someone else (their name)"
            )
        with self._lock:
            self.state.check_waive(step_id)
            self.recorder.event("waive", name.strip(), stage_id=step.stage_id, step_id=step.key,
                                reason=reason.strip(), payload={"recorded_by": self.operator})  # fmt: skip
            self.state.decide(step_id, "waived", f"{reason.strip()} ({name.strip()})")
            self._update_listing()

    def note(self, text: str, step_id: str | None = None) -> None:
        """Add the operator's note to the log (about ``step_id`` if given)."""
        if not text or not text.strip():
            raise RunnerError("a note needs some text")
        step = self._step(step_id) if step_id else None
        with self._lock:
            self.recorder.event("note", self.operator, stage_id=step.stage_id if step else None,
                                step_id=step.key if step else None, reason=text.strip())  # fmt: skip

    def go_back(self, stage_id: str) -> None:
        """Go back to an earlier stage: its steps (and the later ones) may be retaken in order.

        Earlier attempts stay in the log; a retake adds a new attempt."""
        try:
            self.checklist.stage(stage_id)
        except KeyError:
            raise RunnerError(f"no stage {stage_id!r} in checklist {self.checklist.name}") from None
        with self._lock:
            self.recorder.event("go-back", self.operator, stage_id=stage_id,
                                reason="operator went back")  # fmt: skip
            self.state.go_back(stage_id)

    def stop(self, reason: str = "stopped by the operator") -> SupplyOff:
        """STOP: switch the supply output off now, from the calling thread, and make a running
        step end at its next check (its attempt is logged as not run, with ``reason``).

        It does not wait for the step: the output goes off even while the step's thread waits
        for the scope (``*OPC?``, a long waveform read) or for a slow supply reply (then over a
        second connection). Returns when the output reads back OFF, or when that cannot be
        confirmed: ``SupplyOff.text()`` is the line to show (the notebook's footer). Blocks
        for the switch-off's exchanges only (milliseconds on a healthy bench, at most the
        supply's timeouts): from a UI, call it from a worker. Safe from any thread, at any
        time, more than once; the session carries on (see :meth:`abort` to end it)."""
        problem = self.executor.stop(reason)
        return SupplyOff(problem is None, reason, now_utc(), problem)

    def abort(self, reason: str = "operator abort") -> SupplyOff:
        """:meth:`stop`, and log an ``abort`` event with ``reason`` (the session is left
        aborted, resumable later). Safe to call from any thread, at any time, more than once."""
        problem = self.executor.stop(f"the session was aborted ({reason})")
        off = SupplyOff(problem is None, reason, now_utc(), problem)
        with self._lock:
            try:
                self.recorder.event("abort", self.operator, reason=reason,
                                    payload={"supply_off_confirmed": off.confirmed,
                                             "problem": problem})  # fmt: skip
            except BringupError:
                pass  # the bench is safe; a log that cannot take the event must not hide that
        return off

    def _calibration_notices(self) -> tuple[str, ...]:
        """Each instrument of the bench file past its calibration due date, or without one:
        said before the first step (the record flags them too, from the bench snapshot). A
        simulated bench has none; a bench file that cannot be read is reported when the
        bench opens, not here."""
        if self.bench_source.path is None:
            return ()
        import datetime as _dt

        from bringup.errors import BringupError
        from bringup.instruments.bench import calibration_notices, load_bench

        try:
            config = load_bench(self.bench_source.path)
        except BringupError:
            return ()
        return tuple(calibration_notices(config, _dt.datetime.now(_dt.UTC).date()))

    def _bench_opened(self, link) -> None:
        """The bench is open: an output found ON and steps interrupted by an unclean stop are
        logged (``bringup.runner.recovery``) and said in ``bench_notices``."""
        from bringup.runner.recording import attempt_from_record
        from bringup.runner.recovery import find_interrupted, record_recovery

        with self._lock, self.recorder.lock:
            log = self.recorder.log
            interrupted = find_interrupted(log, self.session_id, link.supply_resource)
            if not interrupted and link.found_on is None:
                return
            from bringup.locks import lock_session

            lines = record_recovery(log, self.session_id, self.operator, interrupted,
                                    link.found_on, link.supply_resource, now_utc(),
                                    lambda sid: lock_session(log.path, sid))  # fmt: skip
            steps = {(s.stage_id, s.key): s for s in self.checklist.steps()}
            mine = {
                (i.stage_id, i.step_key) for i in interrupted if i.session_id == self.session_id
            }
            for record in log.attempts(self.session_id):
                key = (record.stage_id, record.step_id)
                if key in mine and (record.extra or {}).get("interrupted"):
                    if record.id not in {a.attempt_id for a in self.state.attempts()}:
                        self.state.add(attempt_from_record(record, steps[key]))
            self.bench_notices = (*self.bench_notices, *lines)
            self._update_listing()

    def finish_if_complete(self) -> bool:
        """Log the finish event (final verdicts) once every step is accepted; True if done."""
        with self._lock:
            self._update_listing()
            if not self.state.complete():
                return False
            self.recorder.event("finish", self.operator, payload={
                "verdict": self.verdict(), "stages": self.stage_verdicts()})  # fmt: skip
            return True

    def _update_listing(self) -> None:
        self.recorder.update_listing(self.verdict(), self.stage_verdicts())

    # ------------------------------------------------------------------ plumbing
    def _step(self, step_id: str) -> Step:
        try:
            return self.checklist.step(step_id)
        except KeyError:
            raise RunnerError(f"no step {step_id!r} in checklist {self.checklist.name}") from None

    def bench(self):
        """The open bench (``bringup.runner.bench_link.BenchLink``), opened on first use."""
        return self.executor.bench()

    @property
    def aborted(self) -> threading.Event:
        """Set by :meth:`abort`; a running step checks it between instrument calls."""
        return self.executor.aborted

    @property
    def log(self):
        """The session log (``bringup.store.SessionLog``)."""
        return self.recorder.log

    def close(self) -> None:
        """Leave the bench safe (supply OFF), close the instruments and the log."""
        try:
            self.executor.close()
        finally:
            with self._lock:
                self.recorder.close()

    def __enter__(self) -> SessionRunner:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()
