"""The checklist as typed data: stages of steps, each with what to set, acquire and judge.

Values are SI floats (volts, amperes, seconds). A setting may instead refer to a design value of
the board, written ``"design.KEY"`` or ``"1.5 * design.KEY"``: it is resolved against the board
with ``resolve`` when the step runs, so one checklist serves boards of other voltages.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

__all__ = [
    "Setting",
    "NetCapture",
    "Trigger",
    "ScopeSetup",
    "SupplySetup",
    "PwmSetup",
    "SoakSetup",
    "ReadingSpec",
    "Step",
    "Stage",
    "Checklist",
]


@dataclass(frozen=True)
class Setting:
    """A number given directly (``value``) or as ``factor * design[design_key]``."""

    value: float | None = None
    design_key: str | None = None
    factor: float = 1.0

    def resolve(self, design: dict[str, float]) -> float:
        """The SI value for a board's ``design`` values."""
        if self.design_key is None:
            assert self.value is not None
            return self.value
        return self.factor * design[self.design_key]

    def describe(self) -> str:
        if self.design_key is None:
            return repr(self.value)
        prefix = "" if self.factor == 1.0 else f"{self.factor:g} * "
        return f"{prefix}design.{self.design_key}"


@dataclass(frozen=True)
class NetCapture:
    """One scope trace: which net, its vertical setup (volts at the probe tip).

    ``probe`` is "single-ended", "differential" (a floating node such as vgs, vbs) or "math":
    the floating difference computed from two ground-referenced traces (vgs = gate - switch),
    which the runner warns about at high common mode.
    """

    net: str
    range_v: Setting
    offset_v: Setting
    coupling: str = "DC"
    bandwidth_limit: bool = False
    probe: str = "single-ended"


@dataclass(frozen=True)
class Trigger:
    """Edge trigger on a net (volts, "positive"/"negative")."""

    net: str
    level_v: Setting
    slope: str = "positive"


@dataclass(frozen=True)
class ScopeSetup:
    """Record length (points), duration and pre-trigger time (seconds), trigger and traces."""

    points: int
    duration_s: float
    pretrigger_s: float
    trigger: Trigger | None
    captures: tuple[NetCapture, ...]


@dataclass(frozen=True)
class SupplySetup:
    """The bench supply: final voltage, current limit (A), ramp steps (V), dwell per step (s)."""

    voltage_v: Setting
    current_limit_a: Setting
    ramp_v: tuple[Setting, ...] = ()
    dwell_s: float = 0.05
    ovp_v: Setting | None = None


@dataclass(frozen=True)
class PwmSetup:
    """The board's PWM enable and duty (fraction): set by the operator's hands."""

    enabled: bool
    duty: Setting | None = None


@dataclass(frozen=True)
class SoakSetup:
    """A thermal soak: longest duration and reading interval (seconds of bench time).

    ``min_duration_s``: the soak may stop early once the prediction has settled, never before.
    """

    duration_s: float
    interval_s: float
    min_duration_s: float


@dataclass(frozen=True)
class ReadingSpec:
    """A value the operator reads off a meter and types in (unit as in the catalogue)."""

    prompt: str
    unit: str
    metric: str
    net: str


@dataclass(frozen=True)
class Step:
    """One step. ``id`` is ``"<stage>.<step>"``, unique in the checklist."""

    id: str
    key: str
    stage_id: str
    title: str
    instructions: str
    analysis: str
    cautions: tuple[str, ...] = ()
    confirm: str | None = None
    reading: ReadingSpec | None = None
    pwm: PwmSetup | None = None
    supply: SupplySetup | None = None
    scope: ScopeSetup | None = None
    soak: SoakSetup | None = None
    targets: tuple[str, ...] = ()
    report: tuple[str, ...] = ()
    #: a safety gate: never skipped, only waived after a failure; later energising prompts
    #: name it while it is waived or not passed
    gate: bool = False


@dataclass(frozen=True)
class Stage:
    """A stage: steps in order. The stages' order is the order of safety."""

    id: str
    title: str
    purpose: str
    steps: tuple[Step, ...]


@dataclass(frozen=True)
class Checklist:
    """A validated checklist file.

    ``name`` is its title; ``id`` names the checklist (the file's stem when the file gives
    none) and ``version`` its revision (None when the file gives none)."""

    name: str
    description: str
    stages: tuple[Stage, ...]
    path: Path
    text: str
    source: dict = field(repr=False)
    id: str = ""
    version: str | None = None

    @property
    def title(self) -> str:
        """The checklist's title (the same as ``name``)."""
        return self.name

    def steps(self) -> tuple[Step, ...]:
        """Every step, in checklist order."""
        return tuple(step for stage in self.stages for step in stage.steps)

    def step(self, step_id: str) -> Step:
        """The step with id ``"<stage>.<step>"``; KeyError if there is none."""
        for step in self.steps():
            if step.id == step_id:
                return step
        raise KeyError(step_id)

    def stage(self, stage_id: str) -> Stage:
        """The stage with id ``stage_id``; KeyError if there is none."""
        for stage in self.stages:
            if stage.id == stage_id:
                return stage
        raise KeyError(stage_id)
