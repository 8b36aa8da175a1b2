"""What the runner hands to its callers (the TUI, the headless run): plain frozen records.

No UI code here and nothing that needs an instrument: a step's *plan* (what it will set and ask),
its *progress* while it runs, and its *result* (metrics beside predictions, verdicts with margins,
waveforms with their reference levels, crossings and on-time window for plotting).

Step and stage states (``STATES``):

- ``not-started``: no attempt yet;  ``in-progress``: an attempt is running now;
- ``pass`` / ``conditional-pass`` / ``conditional-fail`` / ``fail``: the latest attempt's verdict
  (ILAC-G8:09/2019 §4.2, the worst over the step's judged metrics);
- ``skipped`` (with a reason), ``waived`` (a failed step, with a reason and a name);
- ``not-run``: refused (no answer for a confirmation or reading, an instrument fault) or stopped
  because an earlier step failed in a headless run.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from bringup.analysis.verdict import Limit

__all__ = [
    "STATES",
    "ACCEPTED",
    "FINISHED",
    "Progress",
    "SoakProgress",
    "EnergisePlan",
    "ChannelPlan",
    "StepPlan",
    "StepAnswers",
    "MetricResult",
    "Crossing",
    "WaveformView",
    "AttemptResult",
    "StepStatus",
    "StageStatus",
    "SupplyOff",
    "worst_state",
    "HAZARD_VOLTAGE_V",
]

STATES = (
    "not-started",
    "in-progress",
    "pass",
    "fail",
    "conditional-pass",
    "conditional-fail",
    "skipped",
    "waived",
    "not-run",
)
#: States that let the next step (and the next stage) go ahead.
ACCEPTED = ("pass", "conditional-pass", "waived", "skipped")
#: States that end a step (nothing left to do unless the operator retakes it).
FINISHED = ("pass", "conditional-pass", "conditional-fail", "fail", "skipped", "waived", "not-run")
#: DC voltage above which the energising prompt carries a hazard notice: IEC 62368-1 ES1 limit
#: (60 V DC) [memory]; local codes and the lab's licensed practice come first.
HAZARD_VOLTAGE_V = 60.0

# Worst first: how a stage (or the session) is summed up from its steps.
_SEVERITY = (
    "fail",
    "conditional-fail",
    "not-run",
    "in-progress",
    "not-started",
    "skipped",
    "waived",
    "conditional-pass",
    "pass",
)


def worst_state(states: list[str] | tuple[str, ...]) -> str:
    """The worst of ``states`` (fail > conditional-fail > not-run > in-progress > not-started >
    skipped > waived > conditional-pass > pass); "not-started" for an empty list.

    A mix of finished and not-started states with nothing worse is "in-progress": the stage
    (or session) has begun but is not done."""
    if not states:
        return "not-started"
    worst = min(states, key=_SEVERITY.index)
    if worst == "not-started" and any(s != "not-started" for s in states):
        return "in-progress"
    return worst


@dataclass(frozen=True)
class SoakProgress:
    """The thermal soak so far: bench time (s) and heatsink temperature (degC) of each reading,
    the first-order fit's predicted final temperature and its standard uncertainty (degC, None
    until there are enough readings), and whether the prediction has settled (the operator may
    stop the soak: ``run_step(..., finish=event)``)."""

    times_s: tuple[float, ...]
    temperatures_c: tuple[float, ...]
    predicted_final_c: float | None
    predicted_sigma_c: float | None
    time_constant_s: float | None
    settled: bool
    limit_c: float | None


@dataclass(frozen=True)
class Progress:
    """One progress event from a running step (sent from the runner's worker thread).

    ``phase``: "preparing", "hands" (operator actions), "energising", "ramp", "acquiring",
    "soaking", "analysing", "storing", "safe" (supply off) or "done". ``readings`` are live
    values keyed like ``"supply_voltage_v"``, ``"supply_current_a"``, ``"temperature_c"``.
    ``fraction`` is 0..1 when known.
    """

    step_id: str
    phase: str
    message: str
    fraction: float | None = None
    readings: dict[str, float] = field(default_factory=dict)
    soak: SoakProgress | None = None


@dataclass(frozen=True)
class EnergisePlan:
    """What the supply will be set to before the board is powered, and the prompt to show.

    Volts and amperes. ``ramp_v`` lists the voltage steps of a first-power ramp (empty = straight
    to ``voltage_v``). ``hazard`` is the instrument layer's notice
    (``bringup.instruments.safety.hazard_for``) when the highest voltage the step sets is above
    60 V DC, else None; ``hazard_level`` its level, "CAUTION" (above 60 V DC) or "DANGER"
    (above 120 V DC), else None. ``unmet_gates`` names each earlier safety gate (``gate =
    true`` in the checklist) that was waived or has not passed, as ``"<title> (<step id>):
    <state>"``; the prompt ends with them, so nobody powers the board past a gate unawares.
    """

    voltage_v: float
    current_limit_a: float
    ramp_v: tuple[float, ...]
    prompt: str
    hazard: str | None
    hazard_level: str | None = None
    unmet_gates: tuple[str, ...] = ()


@dataclass(frozen=True)
class ChannelPlan:
    """One scope channel of a step: which net, probe kind, vertical range/offset (volts)."""

    channel: int
    net: str
    probe: str
    range_v: float
    offset_v: float
    coupling: str
    bandwidth_limit: bool


@dataclass(frozen=True)
class StepPlan:
    """Everything a step will do, resolved for this board, before it is run.

    ``hands`` are the operator's actions in order (move a probe, set the PWM); under ``--sim`` the
    simulated bench plays them. ``confirm`` is the text the operator must confirm (None = none);
    ``reading`` the prompt and unit of a value to type in (None = none). ``settings`` is the
    resolved instrument setup as stored with each attempt.
    """

    step_id: str
    stage_id: str
    title: str
    instructions: str
    cautions: tuple[str, ...]
    hands: tuple[str, ...]
    channels: tuple[ChannelPlan, ...]
    energise: EnergisePlan | None
    confirm: str | None
    reading_prompt: str | None
    reading_unit: str | None
    targets: tuple[str, ...]
    settings: dict
    warnings: tuple[str, ...] = ()
    #: the order the operator is asked, as the bench needs it: "confirm" (hands done,
    #: board unpowered), "energise", "reading"; a reading on a powered board is asked once the
    #: supply is ON and confirmed after it: ("energise", "reading", "confirm")
    prompts: tuple[str, ...] = ()


@dataclass(frozen=True)
class StepAnswers:
    """The operator's answers for one step: ``confirmed`` the confirmation (True = done),
    ``reading`` a typed reading ("3.31", "3.31 V"), ``hazard_acknowledged`` the hazard notice
    of a supply above 60 V DC. None = not answered.

    ``read_now``: for a reading taken on a powered board (``StepPlan.prompts`` ==
    ``("energise", "reading", "confirm")``), called from the step's thread once the supply is
    ON, as ``read_now(prompt, unit)``; it returns the typed text, already confirmed by the
    operator, or None to stop the step (supply off, logged as not run); "" on a simulated
    bench lets its meter read. A ``reading`` given in
    advance (an answers file) is used instead."""

    confirmed: bool | None = None
    reading: str | None = None
    hazard_acknowledged: bool = False
    read_now: Callable[[str, str], str | None] | None = None


@dataclass(frozen=True)
class MetricResult:
    """One metric of an attempt: measured beside predicted, judged against its target.

    ``measured`` and ``predicted`` are in ``unit`` (None = could not be measured / no model).
    ``limit``, ``uncertainty``, ``rule``, ``outcome``, ``margin`` (signed distance to the nearest
    limit, positive inside) and ``reason`` are None for a metric that is only reported.
    ``disagreement`` is a note when measured and predicted differ by more than the metric's
    tolerance (a wrong part fitted, a probe problem): a finding in itself.
    """

    id: str
    label: str
    unit: str
    measured: float | None
    predicted: float | None
    limit: Limit | None = None
    uncertainty: float | None = None
    rule: str | None = None
    outcome: str | None = None
    margin: float | None = None
    reason: str | None = None
    disagreement: str | None = None

    @property
    def judged(self) -> bool:
        """True when the metric was judged against a target."""
        return self.outcome is not None


@dataclass(frozen=True)
class Crossing:
    """A reference-level crossing on a waveform: time (s), level (V), its name ("10 %", ...)
    and the direction ("rising"/"falling")."""

    time_s: float
    level_v: float
    name: str
    direction: str


@dataclass(frozen=True, eq=False)
class WaveformView:
    """A trace ready to plot: volts (float64) at ``t0_s + i * dt_s``.

    ``levels`` are named reference levels in volts ("low", "high", "10 %", "50 %", "90 %",
    "plateau", "limit", ...); ``crossings`` the interpolated reference-level instants;
    ``window_s`` the on-time window (start, end) in seconds, or None.
    """

    name: str
    net: str
    t0_s: float
    dt_s: float
    volts: np.ndarray
    levels: dict[str, float] = field(default_factory=dict)
    crossings: tuple[Crossing, ...] = ()
    window_s: tuple[float, float] | None = None

    def times(self) -> np.ndarray:
        """Sample times in seconds (float64)."""
        return self.t0_s + self.dt_s * np.arange(self.volts.size, dtype=np.float64)


@dataclass(frozen=True)
class AttemptResult:
    """One attempt of one step, as logged.

    ``state`` is the attempt's outcome ("pass", "fail", "conditional-pass", "conditional-fail",
    "not-run"); ``message`` says why for "not-run" and errors. ``instruments`` maps role
    ("scope", "supply", "thermometer") to its ``*IDN?`` reply; ``settings`` the setup sent.
    Times are ISO 8601 UTC. ``attempt_id`` is the store's row id (None if not stored).
    ``fault``: the instrument fault that ended the attempt ("" if none: the run's exit status
    is 2 when one did); ``absorbed``: faults a retry or a switch-off got past during the
    attempt (a late reply sent again, a dropped connection reopened, an error found in the
    queue), one line each: the attempt stood, but they are logged and shown with it.
    ``diagnosis``: for a failed step (or a metric far from its prediction), the likely causes
    ranked with their evidence and the next bench check (``Diagnosis.to_dict()`` of
    ``bringup.analysis.diagnosis``: "summary", "notes", "causes"); {} when there is none.
    ``budgets``: each measured metric's GUM budget by metric id (``Budget.to_dict()`` of
    ``bringup.analysis.uncertainty``: components with type, standard uncertainty, sensitivity
    coefficient; combined, k, expanded), {} when none was computed.
    """

    step_id: str
    stage_id: str
    attempt_no: int
    state: str
    metrics: tuple[MetricResult, ...]
    waveforms: tuple[WaveformView, ...]
    instruments: dict[str, str]
    settings: dict
    operator: str
    started_utc: str
    finished_utc: str
    notes: str = ""
    message: str = ""
    warnings: tuple[str, ...] = ()
    attempt_id: int | None = None
    soak: SoakProgress | None = None
    fault: str = ""
    absorbed: tuple[str, ...] = ()
    diagnosis: dict = field(default_factory=dict)
    budgets: dict = field(default_factory=dict)

    def metric(self, metric_id: str) -> MetricResult:
        """The metric with id ``metric_id``; KeyError if the attempt has none."""
        for m in self.metrics:
            if m.id == metric_id:
                return m
        raise KeyError(metric_id)


@dataclass(frozen=True)
class StepStatus:
    """A step's place in the session: its state and how many attempts it has."""

    step_id: str
    stage_id: str
    title: str
    state: str
    attempts: int
    reason: str = ""


@dataclass(frozen=True)
class StageStatus:
    """A stage's state (the worst of its steps', see ``worst_state``) and its steps."""

    stage_id: str
    title: str
    state: str
    steps: tuple[StepStatus, ...]


@dataclass(frozen=True)
class SupplyOff:
    """What ``SessionRunner.stop``/``abort`` did to the supply output, for a footer or a log.

    ``confirmed``: the output reads back OFF (or no bench was open: nothing could be on);
    ``problem``: why it could not be confirmed (then switch it off at the instrument);
    ``at_utc``: when the switch-off was confirmed or given up (ISO 8601 UTC)."""

    confirmed: bool
    reason: str
    at_utc: str
    problem: str | None = None

    def text(self) -> str:
        """One line: "Supply output OFF, confirmed at 14:03:07 UTC" or the problem."""
        clock = self.at_utc[11:19]
        if self.confirmed:
            return f"Supply output OFF, confirmed at {clock} UTC"
        return (
            f"Supply output NOT confirmed off ({self.problem}): switch it off at the supply "
            "and check the board"
        )
