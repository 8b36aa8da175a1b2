"""What the screens show, as plain frozen data: the only shapes the widgets know.

``bringup.tui.link`` builds these from the runner's objects; the screens never reach into the
runner themselves, so a change of the runner's API is absorbed in one module.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = [
    "StepRow",
    "StageRow",
    "StepDetail",
    "Energise",
    "MetricRow",
    "BudgetView",
    "TraceView",
    "AttemptView",
    "Progress",
    "SessionRow",
    "SummaryRow",
]


@dataclass(frozen=True)
class StepRow:
    """One step in the checklist column. ``state`` is a verdict or a step state word."""

    id: str
    title: str
    state: str
    attempts: int = 0


@dataclass(frozen=True)
class StageRow:
    """One stage and its steps, in checklist order."""

    id: str
    title: str
    steps: tuple[StepRow, ...]
    state: str = "not-started"


@dataclass(frozen=True)
class Energise:
    """What the supply will be set to before the step: volts and amperes."""

    voltage_v: float
    current_limit_a: float
    ramp_v: tuple[float, ...] = ()
    prompt: str = ""
    hazard: str | None = None
    #: earlier safety gates waived or not passed ("<title> (<step id>): <state>")
    unmet_gates: tuple[str, ...] = ()

    @property
    def hazardous(self) -> bool:
        """Above 60 V DC (the usual extra-low-voltage limit) the notice must be shown."""
        return self.voltage_v > 60.0 or bool(self.hazard)


@dataclass(frozen=True)
class StepDetail:
    """Everything about a step before it runs."""

    id: str
    stage_id: str
    title: str
    state: str
    instructions: str
    cautions: tuple[str, ...]
    settings: tuple[tuple[str, str, str], ...]  # (instrument, setting, value)
    energise: Energise | None
    kind: str  # "waveform", "soak", "reading", "confirm", "supply"
    reading_prompt: str = ""
    reading_unit: str = ""
    confirm: str = ""


@dataclass(frozen=True)
class BudgetView:
    """A metric's GUM uncertainty budget, formatted: one row per contribution (what it is,
    type A or B, the input's standard uncertainty u(x_i), the sensitivity coefficient c_i,
    the contribution |c_i| u(x_i) to the result), then the combined standard uncertainty, k
    and the expanded uncertainty U, and the main contributor."""

    title: str  # "switch rise: 26.84 ns ± 1.2 ns (k = 2)"
    rows: tuple[tuple[str, str, str, str, str], ...]
    combined: str
    k: str
    expanded: str
    main: str = ""
    used: str = ""  # which U the decision used (the computed one or the declared, larger one)


@dataclass(frozen=True)
class MetricRow:
    """A metric judged against its target; values already formatted with units."""

    label: str
    measured: str
    predicted: str
    limits: str
    margin: str
    verdict: str
    reason: str = ""
    budget: BudgetView | None = None


@dataclass(frozen=True)
class TraceView:
    """A waveform to plot: seconds and volts (or °C for a soak) with its marks."""

    title: str
    t: np.ndarray = field(repr=False)
    v: np.ndarray = field(repr=False)
    unit: str = "V"
    levels: tuple[tuple[str, float], ...] = ()
    crossings: tuple[tuple[str, float], ...] = ()
    window: tuple[float, float] | None = None


@dataclass(frozen=True)
class AttemptView:
    """One attempt of a step."""

    number: int
    verdict: str
    when: str
    operator: str
    metrics: tuple[MetricRow, ...]
    traces: tuple[TraceView, ...]
    notes: tuple[str, ...] = ()
    message: str = ""


@dataclass(frozen=True)
class Progress:
    """A live update while a step runs (from the worker thread)."""

    fraction: float | None  # 0..1, None when unknown
    text: str  # "reading: 23.98 V, 0.41 A"
    readings: tuple[tuple[str, str], ...] = ()  # (name, formatted value)
    soak_t: tuple[float, ...] = ()  # seconds since start
    soak_temp: tuple[float, ...] = ()  # °C
    predicted_final: str = ""
    settled: bool = False
    soak_limit_c: float | None = None
    soak_final_c: float | None = None
    #: the prediction's standard uncertainty from the fit alone (K): the band is twice it
    soak_sigma_c: float | None = None


@dataclass(frozen=True)
class SessionRow:
    """A session in the start screen's list."""

    id: int | str
    board: str
    serial: str
    operator: str
    progress: str
    last_activity: str
    verdict: str
    #: the session runs on a simulated bench: a rehearsal, never a board's record
    rehearsal: bool = False


@dataclass(frozen=True)
class SummaryRow:
    """A stage or step line of the summary view."""

    level: int  # 0 stage, 1 step
    title: str
    verdict: str
    attempts: int
    detail: str
