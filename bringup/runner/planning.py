"""A step's plan resolved for one board: the operator's hands, the channels, the energising prompt.

Pure: no instrument is touched. The plan is shown before the step runs and logged with it.
"""

from __future__ import annotations

from dataclasses import replace

from bringup.analysis.quantities import format_quantity
from bringup.boards.board_file import Board
from bringup.checklist.model import Step
from bringup.errors import InputError
from bringup.runner.bench_source import BenchSource
from bringup.runner.results import ChannelPlan, EnergisePlan, StepPlan

__all__ = ["Planner", "plan_step", "MATH_COMMON_MODE_WARN_V"]

#: Above this common mode (volts), Vgs from a math difference of two ground-referenced probes is
#: flagged: a 1 % gain mismatch at the bus voltage is a sizeable error on a ~10 V difference
#: (probing tutorials, see REFERENCES.md §9; common practice).
MATH_COMMON_MODE_WARN_V = 5.0


def _v(value: float) -> str:
    return format_quantity(value, "V")


#: Probe kind per scope channel when the bench is not open yet: the simulated bench's layout
#: (single-ended probes on CH1-CH2, differential ones on CH3-CH4).
DEFAULT_PROBE_KINDS = {1: "single-ended", 2: "single-ended", 3: "differential", 4: "differential"}
#: The same for a half-bridge board: a current probe on CH4 instead of a second differential one.
HALF_BRIDGE_PROBE_KINDS = {1: "single-ended", 2: "single-ended", 3: "differential", 4: "current"}


def _channels(
    step: Step, design: dict[str, float], kinds: dict[int, str]
) -> tuple[ChannelPlan, ...]:
    """Give each capture a channel whose probe suits it: a floating net needs a differential
    probe; a ground-referenced net takes a single-ended one, or a spare differential one."""
    if step.scope is None:
        return ()
    free_single = [n for n in sorted(kinds) if kinds[n] == "single-ended"]
    free_diff = [n for n in sorted(kinds) if kinds[n] == "differential"]
    free_current = [n for n in sorted(kinds) if kinds[n] == "current"]
    # One channel per net (net -> probe, range, offset, coupling, bandwidth limit). A net the
    # step acquires itself keeps its own setup when the math difference needs it too.
    wanted: dict[str, tuple[str, str, float, float, str, bool]] = {}
    for cap in step.scope.captures:
        if cap.probe != "math":
            wanted[cap.net] = (cap.net, cap.probe, cap.range_v.resolve(design),
                               cap.offset_v.resolve(design), cap.coupling, cap.bandwidth_limit)  # fmt: skip
    for cap in step.scope.captures:
        if cap.probe == "math":
            # vgs = gate - switch from two ground-referenced probes, each over the full swing
            swing = design["bus_voltage"] + design["gate_drive_voltage"]
            for net in ("gate", "switch"):
                wanted.setdefault(net, (net, "single-ended", 1.6 * swing, 0.5 * swing,
                                        cap.coupling, cap.bandwidth_limit))  # fmt: skip
    plans: dict[str, ChannelPlan] = {}
    for net, probe, span, offset, coupling, bw in sorted(
        wanted.values(), key=lambda w: w[1] != "differential"
    ):
        if probe == "differential":
            pool = free_diff
        elif probe == "current":
            pool = free_current
        else:
            pool = free_single if free_single else free_diff
        if not pool:
            raise InputError(
                f"step {step.id}: the bench has no free {probe} probe for net {net!r} "
                f"(probes: {', '.join(f'CH{n} {k}' for n, k in sorted(kinds.items()))})"
            )
        channel = pool.pop(0)
        plans[net] = ChannelPlan(channel, net, kinds[channel], span, offset, coupling, bw)
    return tuple(plans[net] for net in wanted)


def _hands(step: Step, design: dict[str, float], channels: tuple[ChannelPlan, ...]) -> list[str]:
    hands: list[str] = []
    if step.pwm is not None:
        if step.pwm.enabled:
            duty = step.pwm.duty.resolve(design) if step.pwm.duty is not None else None
            shown = f" at {100 * duty:g} % duty" if duty is not None else ""
            hands.append(f"Set the board's PWM{shown} and enable it.")
        else:
            hands.append("Set the board's PWM enable to off.")
    for ch in channels:
        hands.append(f"Put CH{ch.channel}'s {ch.probe} probe on net {ch.net}.")
    if step.reading is not None:
        hands.append(f"Put the meter's leads on net {step.reading.net}.")
    if step.soak is not None:
        hands.append("Fix the thermocouple to the switch's heatsink.")
    return hands


def _energise(step: Step, design: dict[str, float]) -> EnergisePlan | None:
    if step.supply is None:
        return None
    volts = step.supply.voltage_v.resolve(design)
    amps = step.supply.current_limit_a.resolve(design)
    ramp = tuple(s.resolve(design) for s in step.supply.ramp_v)
    top = max((volts, *ramp))
    prompt = f"Power the board: supply {_v(volts)}, current limit {format_quantity(amps, 'A')}"
    if ramp:
        prompt += ", raised in steps of " + ", ".join(_v(v) for v in ramp)
    prompt += "; the output goes off when the step ends."
    # One wording and one set of levels: the instrument layer's, which also decides what the
    # operator must acknowledge before the output goes on (CAUTION above 60 V DC, DANGER above
    # 120 V DC).
    from bringup.instruments.safety import hazard_for

    notice = hazard_for(top)
    if notice is None:
        return EnergisePlan(volts, amps, ramp, prompt, None)
    return EnergisePlan(volts, amps, ramp, prompt, notice.text, notice.level.name)


def _with_gates(energise: EnergisePlan, gates: tuple[tuple[Step, str], ...]) -> EnergisePlan:
    """The energising plan naming each earlier safety gate that is waived or not passed."""
    if not gates:
        return energise
    named = tuple(f"{gate.title} ({gate.id}): {state}" for gate, state in gates)
    prompt = (
        f"{energise.prompt} WARNING: {len(named)} earlier safety gate(s) waived or not passed: "
        + "; ".join(named)
        + "."
    )
    return replace(energise, prompt=prompt, unmet_gates=named)


def _math_warnings(step: Step, design: dict[str, float]) -> list[str]:
    """A warning when Vgs comes from a math difference at a high common mode (the two
    probes' gain mismatch scales with the bus voltage)."""
    warnings: list[str] = []
    if step.scope is not None and any(c.probe == "math" for c in step.scope.captures):
        common = design["bus_voltage"]
        if common > MATH_COMMON_MODE_WARN_V:
            warnings.append(
                f"Vgs from a math difference (gate - switch) at up to {_v(common)} common mode: "
                f"a 1 % gain mismatch of the two probes is {_v(0.01 * common)} of error on Vgs; "
                "use a differential probe for a verdict you can trust."
            )
    return warnings


def _settings(
    step: Step,
    design: dict[str, float],
    energise: EnergisePlan | None,
    channels: tuple[ChannelPlan, ...],
) -> dict:
    """What the step sets on each instrument (PWM, supply, scope, thermometer, meter), as
    logged with the attempt."""
    settings: dict = {}
    if step.pwm is not None:
        settings["pwm"] = {
            "enabled": step.pwm.enabled,
            "duty": step.pwm.duty.resolve(design) if step.pwm.duty is not None else None,
        }
    if energise is not None:
        assert step.supply is not None
        top = max((energise.voltage_v, *energise.ramp_v))
        settings["supply"] = {
            "voltage_v": energise.voltage_v,
            "current_limit_a": energise.current_limit_a,
            "ramp_v": list(energise.ramp_v),
            "dwell_s": step.supply.dwell_s,
            "ovp_v": step.supply.ovp_v.resolve(design) if step.supply.ovp_v else 1.1 * top + 1.0,
        }
    if step.scope is not None:
        trig = step.scope.trigger
        settings["scope"] = {
            "points": step.scope.points,
            "duration_s": step.scope.duration_s,
            "pretrigger_s": step.scope.pretrigger_s,
            "trigger": None
            if trig is None
            else {"net": trig.net, "level_v": trig.level_v.resolve(design), "slope": trig.slope},
            "channels": [c.__dict__ for c in channels],
            "math": [c.net for c in step.scope.captures if c.probe == "math"],
        }
    if step.soak is not None:
        settings["soak"] = {
            "duration_s": step.soak.duration_s,
            "interval_s": step.soak.interval_s,
            "min_duration_s": step.soak.min_duration_s,
        }
    if step.reading is not None:
        settings["reading"] = {"net": step.reading.net, "unit": step.reading.unit}
    return settings


def _prompt_order(
    step: Step, energise: EnergisePlan | None, confirm: str | None
) -> tuple[str, ...]:
    """The order the step asks in: confirm, reading, energise; a meter reading a powered
    board is read after the power comes on and confirmed after it is read."""
    if step.reading is not None and energise is not None:
        # the meter reads a powered board: power first, read, then confirm the value read
        prompts: tuple[str, ...] = ("energise", "reading", "confirm")
    else:
        prompts = tuple(
            kind
            for kind, present in (
                ("confirm", confirm is not None),
                ("reading", step.reading is not None),
                ("energise", energise is not None),
            )
            if present
        )
    return prompts


def plan_step(
    step: Step,
    board: Board,
    bench: BenchSource,
    probe_kinds: dict[int, str] | None = None,
    gates: tuple[tuple[Step, str], ...] = (),
) -> StepPlan:
    """Resolve ``step`` for ``board``: what will be set, acquired and asked. ``probe_kinds``:
    the kind of probe on each scope channel (default ``DEFAULT_PROBE_KINDS``); ``gates``: the
    earlier safety gates waived or not passed, with their states (the energising prompt names
    them)."""
    design = board.design
    default = HALF_BRIDGE_PROBE_KINDS if board.is_half_bridge else DEFAULT_PROBE_KINDS
    channels = _channels(step, design, dict(probe_kinds or default))
    energise = _energise(step, design)
    if energise is not None:
        energise = _with_gates(energise, gates)
    warnings = _math_warnings(step, design)
    settings = _settings(step, design, energise, channels)
    hands = _hands(step, design, channels)
    needs_confirm = step.confirm is not None or bool(hands)
    confirm = None
    if needs_confirm:
        confirm = " ".join([*hands, *([step.confirm] if step.confirm else [])])
    prompts = _prompt_order(step, energise, confirm)
    return StepPlan(
        prompts=prompts,
        step_id=step.id,
        stage_id=step.stage_id,
        title=step.title,
        instructions=step.instructions,
        cautions=step.cautions,
        hands=tuple(hands),
        channels=channels,
        energise=energise,
        confirm=confirm,
        reading_prompt=step.reading.prompt if step.reading else None,
        reading_unit=step.reading.unit if step.reading else None,
        targets=step.targets,
        settings=settings,
        warnings=tuple(warnings),
    )


class Planner:
    """Plans the steps of one board on one bench: ``plan(step)``. The probes the open bench
    really has replace the default layout once known (``use_probes``)."""

    def __init__(self, board: Board, bench: BenchSource, gates=None) -> None:
        """``gates(step_id)``: the earlier safety gates waived or not passed, with their states
        (``SessionState.gates_before``); None = none known."""
        self.board = board
        self.bench = bench
        self._kinds: dict[int, str] | None = None
        self._gates = gates

    def use_probes(self, probe_kinds: dict[int, str]) -> None:
        """The kind of probe on each scope channel of the open bench."""
        self._kinds = dict(probe_kinds)

    def plan(self, step: Step) -> StepPlan:
        """``step`` resolved for this board and bench (see ``plan_step``)."""
        gates = self._gates(step.id) if self._gates is not None else ()
        return plan_step(step, self.board, self.bench, self._kinds, gates)
