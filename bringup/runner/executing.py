"""One attempt of one step: answers, hands, power, acquisition, analysis, verdicts, the log.

The order is the order of safety: the operator's hands (probes, PWM switch) are done with the
board unpowered; the supply is switched on only inside the instrument layer's safe-state owner
and off again before anything is computed; the attempt is committed to the log in one
transaction before ``run_step`` returns, whatever happened (a refused or stopped attempt is
logged as ``not-run`` with the reason).
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from bringup.analysis.budgets import typed_resolution
from bringup.analysis.quantities import format_quantity, parse_quantity
from bringup.analysis.verdict import judge
from bringup.checklist.catalogue import metrics_of
from bringup.checklist.model import Step
from bringup.errors import BringupError
from bringup.runner.analyses import AnalysisInput, AnalysisOutput, RampStep, analyse
from bringup.runner.planning import Planner
from bringup.runner.predictions import disagreement, predict
from bringup.runner.recording import Recorder, now_utc
from bringup.runner.results import (
    AttemptResult,
    MetricResult,
    Progress,
    SoakProgress,
    StepAnswers,
    StepPlan,
    worst_state,
)

if TYPE_CHECKING:
    from bringup.runner.bench_link import BenchLink
    from bringup.runner.stop_signals import SignalStop

__all__ = ["StepExecutor", "StepStopped", "now_utc"]

# How often (readings) the soak's prediction is refitted while it runs, and when it counts as
# settled: the last fits agree within this (K) and the fit's uncertainty is within the guard band.
_REFIT_EVERY = 4
_SETTLED_SPREAD_K = 0.3
_SETTLED_FITS = 3  # how many successive refits must agree


class StepStopped(Exception):
    """The operator cancelled the step or the session was aborted."""


class _Context:
    """What one attempt carries along while it runs."""

    def __init__(self, executor, step, plan, cancel, finish, on_progress):
        self.executor: StepExecutor = executor
        self.board = executor.board
        self.step: Step = step
        self.plan: StepPlan = plan
        self.cancel = cancel or threading.Event()
        self.finish = finish or threading.Event()
        self.aborted: threading.Event = executor.aborted
        self.on_progress: Callable[[Progress], None] | None = on_progress
        self.data = AnalysisInput()
        self.raw: dict = {}
        self.warnings: list[str] = list(plan.warnings)
        self.soak: SoakProgress | None = None

    def check(self) -> None:
        if self.aborted.is_set():
            raise StepStopped(self.executor.stop_reason)
        if self.cancel.is_set():
            raise StepStopped("cancelled by the operator")

    def wait(self, seconds: float) -> None:
        """Wait ``seconds`` of wall time, waking at once on cancel or abort."""
        deadline = time.monotonic() + max(0.0, seconds)
        while True:
            self.check()
            left = deadline - time.monotonic()
            if left <= 0:
                return
            self.cancel.wait(min(left, 0.05))

    def emit(self, phase: str, message: str, **kw) -> None:
        if self.on_progress is not None:
            try:
                self.on_progress(Progress(self.step.id, phase, message, **kw))
            except Exception:  # a broken listener must not leave the supply on
                pass


# ------------------------------------------------------------------------- answers
def _answers(ctx: _Context, answers: StepAnswers | None, simulated: bool) -> str | None:
    """Why the step must be refused (None = it may run). Fills in the typed reading."""
    plan, step = ctx.plan, ctx.step
    if plan.confirm is not None:
        confirmed = answers.confirmed if answers is not None else None
        if confirmed is False:
            return "the operator did not confirm: " + plan.confirm
        if confirmed is None and not simulated:
            return (
                "needs the operator's confirmation (from the notebook, or --answers FILE): "
                + plan.confirm
            )
    if step.reading is not None:
        text = answers.reading if answers is not None else None
        later = answers is not None and answers.read_now is not None
        if text is not None:
            ctx.data.reading = parse_quantity(text, step.reading.unit, where=f"{step.id} reading")
            ctx.data.reading_resolution = typed_resolution(text, ctx.data.reading)
        elif not simulated and not (later and plan.energise is not None):
            return f"needs a reading typed in: {step.reading.prompt} ({step.reading.unit})"
        ctx.data.reading_metric = step.reading.metric
    return None


# ------------------------------------------------------------------------- bench work
def _ramp(ctx: _Context, bench, powered, supply: dict) -> None:
    """The first-power ramp: each step's current read back; a short stops it at once."""
    from bringup.instruments.supply import Regulation

    target = ctx.board.targets.get("ramp_current")
    ceiling = target.limit.max if target is not None and target.limit.max is not None else None
    steps = supply["ramp_v"]
    for k, volts in enumerate(steps):
        ctx.check()
        powered.set_voltage(volts)
        bench.dwell(supply["dwell_s"], ctx.wait)
        amps, read_v = powered.measure_current(), powered.measure_voltage()
        limited = powered.regulation() == Regulation.CONSTANT_CURRENT
        ctx.data.ramp.append(RampStep(volts, read_v, amps, limited))
        ctx.emit("ramp", f"ramp {format_quantity(volts, 'V')}: {format_quantity(amps, 'A')}",
                 fraction=(k + 1) / len(steps),
                 readings={"supply_voltage_v": read_v, "supply_current_a": amps})  # fmt: skip
        if limited or (ceiling is not None and amps > ceiling):
            why = "in current limit" if limited else f"above {format_quantity(ceiling, 'A')}"
            ctx.data.ramp_stopped = (
                f"ramp stopped at {format_quantity(volts, 'V')}: input current "
                f"{format_quantity(amps, 'A')} {why} (a short or a part fitted wrongly?); "
                "supply switched off"
            )
            return


def _soak(ctx: _Context, bench, powered) -> None:
    """Log the heatsink temperature, refit as it comes in, stop once the prediction settles
    (never before the minimum duration) or when the operator says so after that."""
    soak = ctx.plan.settings["soak"]
    target = ctx.board.targets.get("heatsink_final")
    band = target.uncertainty if target is not None else 1.0
    limit = target.limit.max if target is not None else None
    scale = bench.time_scale()
    bench.configure_thermometer()
    clock = bench.soak_clock(scale)
    times, temps, finals = ctx.data.soak_times_s, ctx.data.soak_temps_c, []
    try:
        _soak_log(ctx, bench, powered, soak, clock, scale, band, limit, times, temps, finals)
    finally:
        clock.release()


def _soak_log(ctx: _Context, bench, powered, soak, clock, scale, band, limit, times, temps,
              finals) -> None:  # fmt: skip
    """The soak's reading loop (see ``_soak``); ``clock`` gives the bench time of each reading."""
    from bringup.analysis.soak import fit_soak
    from bringup.errors import AnalysisError

    fit = None
    # The settling test reads the last three refits, all taken once the minimum duration is
    # near; earlier refits only feed a live prediction, fitted when someone is shown it.
    deciding_s = soak["min_duration_s"] - (_SETTLED_FITS + 1) * _REFIT_EVERY * soak["interval_s"]
    while True:
        ctx.check()
        elapsed = clock.elapsed_s()
        temps.append(bench.read_temperature_c())
        times.append(elapsed)
        shown = ctx.on_progress is not None or elapsed >= deciding_s
        if len(temps) >= 8 and len(temps) % _REFIT_EVERY == 0 and shown:
            try:
                fit = fit_soak(times, temps)
                finals.append(fit.final_c)
            except AnalysisError:
                fit = None
        settled = (
            fit is not None
            and fit.decided  # "undecided": the log cannot tell yet, keep soaking
            and elapsed >= soak["min_duration_s"]
            and fit.final_c_uncertainty <= band
            and len(finals) >= _SETTLED_FITS
            and max(finals[-_SETTLED_FITS:]) - min(finals[-_SETTLED_FITS:]) <= _SETTLED_SPREAD_K
        )
        ctx.soak = SoakProgress(tuple(times), tuple(temps),
                                fit.final_c if fit else None,
                                fit.final_c_uncertainty / 2 if fit else None,
                                fit.tau_s if fit else None, settled, limit)  # fmt: skip
        readings = {"temperature_c": temps[-1], "bench_time_s": elapsed}
        # the load current now and then, not every reading, for whoever watches the soak
        if len(temps) % _REFIT_EVERY == 1 and ctx.on_progress is not None:
            readings["supply_voltage_v"] = powered.measure_voltage()
            readings["supply_current_a"] = powered.measure_current()
        ctx.emit("soaking", f"soak {elapsed:.0f} s: {temps[-1]:.1f} degC",
                 fraction=min(1.0, elapsed / soak["duration_s"]), readings=readings,
                 soak=ctx.soak)  # fmt: skip
        if settled or elapsed >= soak["duration_s"]:
            return
        if ctx.finish.is_set() and elapsed >= soak["min_duration_s"]:
            return
        if scale > 0:  # the pace a person watches; an unpaced simulated bench has none
            ctx.wait(soak["interval_s"] / scale)
        clock.tick(soak["interval_s"])


def _on_bench(ctx: _Context, answers: StepAnswers | None) -> dict[str, str]:
    """Hands, power, acquisition; returns the instruments' identities. Supply OFF after."""
    step = ctx.step
    ctx.emit("preparing", "opening the bench")
    bench = ctx.executor.bench()
    # Channels follow the probes the open bench really has.
    ctx.plan = plan = ctx.executor.planner.plan(step)
    identities = bench.identities()
    ctx.check()
    if bench.simulated:
        ctx.emit("hands", "the simulated bench sets the PWM and moves the probes")
        bench.play_hands(step, plan)
    else:
        bench.note_probes(plan)
    # a scope that lacks what the step needs (math, bandwidth limit...) says so before power
    bench.check_scope_offers(plan)
    supply = plan.settings.get("supply")
    if supply is None:
        if step.reading is not None and ctx.data.reading is None:
            ctx.data.reading = bench.read_meter_volts()
        return identities
    ctx.data.supply_accuracy = bench.supply_accuracy()
    ramp = supply["ramp_v"]
    first = ramp[0] if ramp else supply["voltage_v"]
    top = max([supply["voltage_v"], *ramp])
    acknowledged = bool(answers.hazard_acknowledged) if answers is not None else False
    if plan.settings.get("soak") is not None:
        # The fit's scipy import takes a good part of a second: done now, not in the middle of
        # the temperature log (on a sped-up simulated clock that gap would be minutes).
        import scipy.optimize  # noqa: F401
    ctx.check()
    if plan.energise is not None and plan.energise.unmet_gates:
        # Logged with the attempt and printed by the headless run: powered past a gate.
        ctx.warnings.append(
            "energised with earlier safety gate(s) waived or not passed: "
            + "; ".join(plan.energise.unmet_gates)
        )
    ctx.emit("energising", plan.energise.prompt if plan.energise else "supply on")
    # logged before the output goes ON: if this process dies mid-step (SIGKILL, power cut),
    # the next opening of the bench knows which step was running (bringup.runner.recovery)
    ctx.executor.mark_energising(step, bench.supply_resource, supply)
    with bench.energised(first, supply["current_limit_a"], supply["ovp_v"], top,
                         acknowledged) as powered:  # fmt: skip
        if ramp:
            _ramp(ctx, bench, powered, supply)
        else:
            bench.dwell(supply["dwell_s"], ctx.wait)
            ctx.emit("energising", "supply on",
                     readings={"supply_voltage_v": powered.measure_voltage(),
                               "supply_current_a": powered.measure_current()})  # fmt: skip
        if plan.settings.get("scope") is not None:
            ctx.check()
            ctx.emit("acquiring", "acquiring")
            traces, raw, clipped = bench.acquire(plan)
            # a STOP while the scope waited switched the supply off under the acquisition:
            # that record shows the board unpowered, not how it behaves
            ctx.check()
            ctx.data.supply_v = powered.measure_voltage()
            ctx.emit("acquiring", f"{len(traces)} traces acquired",
                     readings={"supply_voltage_v": ctx.data.supply_v,
                               "supply_current_a": powered.measure_current()})  # fmt: skip
            ctx.data.clipped.update(clipped)
            ctx.data.traces.update(traces)
            ctx.raw.update(raw)
        if step.reading is not None and ctx.data.reading is None:
            ctx.data.reading = _read_powered(ctx, bench, answers)
        if plan.settings.get("soak") is not None:
            _soak(ctx, bench, powered)
        tripped = powered.switched_off_because
        if tripped is not None:
            raise tripped
        ctx.check()  # nothing read after a STOP is judged
    ctx.emit("safe", "supply output off")
    return identities


def _read_powered(ctx: _Context, bench, answers: StepAnswers | None) -> float:
    """The meter reading of a powered board: asked of the operator now, while the supply is
    ON (``StepAnswers.read_now``), or read by the simulated bench's meter."""
    step = ctx.step
    assert step.reading is not None
    ask = answers.read_now if answers is not None else None
    if ask is None:
        return bench.read_meter_volts()
    ctx.check()
    ctx.emit("reading", f"the board is powered: {step.reading.prompt}")
    text = ask(step.reading.prompt, step.reading.unit)
    ctx.check()
    if text is None:  # the operator closed the prompt
        raise StepStopped("no reading typed")
    if not str(text).strip():
        if bench.simulated:  # left empty on a simulated bench: its meter reads
            return bench.read_meter_volts()
        raise StepStopped("no reading typed")
    value = parse_quantity(str(text), step.reading.unit, where=f"{step.id} reading")
    ctx.data.reading_resolution = typed_resolution(str(text), value)
    return value


# ------------------------------------------------------------------------- judging
def _judge(ctx: _Context, out: AnalysisOutput) -> tuple[str, tuple[MetricResult, ...]]:
    board, step = ctx.board, ctx.step
    predicted = predict(step.analysis, board)
    units = metrics_of(step.analysis)
    results: list[MetricResult] = []
    outcomes: list[str] = []
    # A value extrapolated far beyond the record is not compared with the design (the warning
    # says so): its gap would be the measurement's resolution, not a finding.
    for metric in out.details.get("extrapolated", ()):
        predicted.pop(metric, None)
    for metric in (*step.targets, *[m for m in step.report if m not in step.targets]):
        value = out.metrics.get(metric)
        p = predicted.get(metric)
        if metric in step.targets:
            t = board.targets[metric]
            # The guard band: the larger of the declared and the computed uncertainty.
            u = max(t.uncertainty, out.uncertainties.get(metric, 0.0))
            v = judge(value, t.limit, u, t.rule)
            reason = v.reason
            if value is None and metric in out.reasons:
                reason = f"{out.reasons[metric]}: {v.reason}"
            outcomes.append(v.outcome)
            results.append(MetricResult(metric, t.label, t.unit, value, p, t.limit, u,
                                        t.rule, v.outcome, v.margin, reason,
                                        disagreement(value, p, t.unit, u)))  # fmt: skip
        else:
            unit = units[metric]
            # reported only: its computed uncertainty is shown, nothing is decided with it
            u = out.uncertainties.get(metric)
            results.append(MetricResult(metric, metric.replace("_", " "), unit, value, p,
                                        uncertainty=u, reason=out.reasons.get(metric),
                                        disagreement=disagreement(value, p, unit, u or 0.0)))  # fmt: skip
    state = worst_state(outcomes) if outcomes else "pass"
    return state, tuple(results)


def _diagnose(
    ctx: _Context,
    out: AnalysisOutput,
    state: str,
    metrics: tuple[MetricResult, ...],
    earlier: Mapping[str, float],
) -> dict:
    """The diagnosis (``bringup.analysis.diagnosis``) of a step that failed or whose metric
    disagrees with its prediction by more than its uncertainty, as a dict; {} otherwise. Kept
    in ``out.details["diagnosis"]`` too, so the log and the record hold it with the attempt."""
    from bringup.analysis.diagnosis import diagnose

    flagged = tuple(m.id for m in metrics if m.outcome in ("fail", "conditional-fail")
                    or m.disagreement)  # fmt: skip
    if state not in ("fail", "conditional-fail") and not flagged:
        return {}
    board, step = ctx.board, ctx.step
    target = board.targets.get("vgs_end")
    floor = target.limit.min if target is not None and target.limit.min is not None else None
    pwm = ctx.plan.settings.get("pwm") or {}
    found = diagnose(step.analysis, {m.id: m.measured for m in metrics}, board.design,
                     failed=flagged, predicted={m.id: m.predicted for m in metrics
                                                if m.predicted is not None},
                     earlier=earlier, floor_v=floor, loaded=bool(pwm.get("enabled")))  # fmt: skip
    if found is None:
        return {}
    out.details["diagnosis"] = found.to_dict()
    return out.details["diagnosis"]


@dataclass
class _Ran:
    """What running one attempt gave: its instruments' identities, state, metrics, diagnosis
    and analysis, or the message (and fault, and terminating signal) that stopped it."""

    identities: dict[str, str] = field(default_factory=dict)
    state: str = "not-run"
    metrics: tuple[MetricResult, ...] = ()
    diagnosis: dict = field(default_factory=dict)
    out: AnalysisOutput = field(default_factory=AnalysisOutput)
    message: str = ""
    fault: str = ""
    signalled: SignalStop | None = None


class StepExecutor:
    """Runs attempts on the bench and logs them: owns the open bench (opened on first use)
    and the stop flag that every running step checks.

    ``execute`` blocks (call it from a worker thread); ``stop``, ``abort`` and ``stop_now`` may
    be called from any thread meanwhile. ``on_open(link)`` is called once the bench is open
    (the runner checks it for an output left ON and an interrupted step)."""

    def __init__(self, *, board, source, planner: Planner, recorder: Recorder, operator: str,
                 on_open: Callable[[BenchLink], None] | None = None) -> None:  # fmt: skip
        self.board = board
        self.source = source
        self.planner = planner
        self.recorder = recorder
        self.operator = operator
        self.on_open = on_open
        self._bench: BenchLink | None = None
        self._bench_lock = threading.Lock()
        self._abort = threading.Event()
        self._stop_reason = "the session was aborted"

    @property
    def aborted(self) -> threading.Event:
        """Set by ``stop``/``abort``; a running step checks it between instrument calls."""
        return self._abort

    @property
    def is_open(self) -> bool:
        """True once the bench is open."""
        return self._bench is not None

    def bench(self) -> BenchLink:
        """The open bench, opened on first use."""
        with self._bench_lock:
            if self._bench is None:
                from bringup.runner.bench_link import BenchLink

                self._take(BenchLink.open(self.source, self.board))
            assert self._bench is not None
            return self._bench

    def adopt(self, link: BenchLink) -> None:
        """Use ``link``, a bench already open (``SessionRunner.create`` opens it first)."""
        with self._bench_lock:
            self._take(link)

    def _take(self, link: BenchLink) -> None:
        self.planner.use_probes(link.probe_kinds())
        self._bench = link
        if self.on_open is not None:
            self.on_open(link)

    def mark_energising(self, step: Step, supply_resource: str, supply: dict) -> None:
        """Log the ``energise`` event of ``step`` (just before its output goes ON)."""
        from bringup.runner.recovery import energise_payload

        reason = (
            f"supply output ON at {format_quantity(supply['voltage_v'], 'V')}, "
            f"limit {format_quantity(supply['current_limit_a'], 'A')}"
        )
        self.recorder.event("energise", self.operator, stage_id=step.stage_id, step_id=step.key,
                            reason=reason, payload=energise_payload(supply_resource, supply))  # fmt: skip

    def execute(
        self,
        step: Step,
        attempt_no: Callable[[], int],
        answers: StepAnswers | None,
        cancel: threading.Event | None,
        finish: threading.Event | None,
        on_progress: Callable[[Progress], None] | None,
        notes: str = "",
        earlier: Mapping[str, float] | None = None,
    ) -> AttemptResult:
        """Run one attempt of ``step`` and log it (see the module docstring); ``attempt_no()``
        numbers it once the bench is open (opening may log an interrupted attempt first).

        A terminating signal (``SignalStop``) is logged as an interrupted attempt, then raised
        again for the command to finish its way out. ``earlier``: the latest values of other
        steps' metrics this session, evidence for a diagnosis."""
        self._abort.clear()
        self._stop_reason = "the session was aborted"
        ctx = _Context(self, step, self.planner.plan(step), cancel, finish, on_progress)
        started = now_utc()
        ran = self._attempt(ctx, answers, earlier)
        absorbed = self._bench.take_absorbed() if self._bench is not None else ()
        ctx.emit("storing", "logging the attempt")
        result = AttemptResult(
            step_id=step.id,
            stage_id=step.stage_id,
            attempt_no=attempt_no(),
            state=ran.state,
            metrics=ran.metrics,
            waveforms=tuple(ran.out.views),
            instruments=ran.identities,
            settings=ctx.plan.settings,
            operator=self.operator,
            started_utc=started,
            finished_utc=now_utc(),
            message=ran.message,
            warnings=tuple(dict.fromkeys(ctx.warnings)),
            soak=ctx.soak,
            notes=str(notes or "").strip(),
            fault=ran.fault,
            absorbed=absorbed,
            diagnosis=ran.diagnosis,
            budgets=dict(ran.out.details.get("budgets") or {}),
        )
        stored = self.recorder.store(step, result, ctx.raw, ran.out)
        if ran.signalled is not None:
            raise ran.signalled
        ctx.emit("done", f"{step.id}: {ran.state}")
        return stored

    def _attempt(
        self, ctx: _Context, answers: StepAnswers | None, earlier: Mapping[str, float] | None
    ) -> _Ran:
        """Check the answers, run the step on the bench, analyse and judge it; a stop, an
        instrument fault, a refusal or a terminating signal becomes the attempt's message.
        The supply is switched off on every way out."""
        from bringup.instruments.faults import InstrumentFault
        from bringup.runner.stop_signals import SignalStop

        step = ctx.step
        ran = _Ran()
        try:
            refusal = _answers(ctx, answers, self.source.is_simulated)
            if refusal is not None:
                ran.message = f"not run: {refusal}"
            else:
                ran.identities = _on_bench(ctx, answers)
                ctx.emit("analysing", "analysing")
                ran.out = analyse(step.analysis, ctx.data, self.board)
                ctx.warnings.extend(ran.out.warnings)
                ran.state, ran.metrics = _judge(ctx, ran.out)
                ran.diagnosis = _diagnose(ctx, ran.out, ran.state, ran.metrics, earlier or {})
        except StepStopped as exc:
            ran.message = f"not run: {exc}; supply switched off"
        except InstrumentFault as exc:
            ran.message, ran.fault = f"not run: {exc}", str(exc)
        except BringupError as exc:
            ran.message = f"not run: {exc}"
        except SignalStop as exc:
            ran.signalled = exc
            ran.message = f"not run: interrupted by {exc.reason}; supply switched off"
        finally:
            problem = self.stop_now() if self._bench is not None else None
            if problem:
                ctx.warnings.append(f"could not confirm the supply off: {problem}")
        return ran

    def stop(self, reason: str) -> str | None:
        """Make a running step stop at its next check (logged as not run, ``reason``) and
        switch the supply off now, from the calling thread; a problem text or None."""
        self._stop_reason = reason
        self._abort.set()
        return self.stop_now()

    def abort(self) -> str | None:
        """``stop`` for the whole session."""
        return self.stop("the session was aborted")

    def stop_now(self, *, interrupting: bool = False) -> str | None:
        """Supply output OFF now, from any thread; a problem text, or None when confirmed
        (or when the bench was never opened: nothing can be on). ``interrupting``: from a
        signal handler (``BenchLink.make_safe``)."""
        bench = self._bench
        return bench.make_safe(interrupting=interrupting) if bench is not None else None

    @property
    def stop_reason(self) -> str:
        """Why the running step was told to stop."""
        return self._stop_reason

    def close(self) -> None:
        """Supply OFF (confirmed), the bench's connections closed, a simulated bench stopped."""
        with self._bench_lock:
            bench, self._bench = self._bench, None
        if bench is not None:
            bench.close()
