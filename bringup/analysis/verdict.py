"""Pass/fail decisions with measurement uncertainty: ILAC-G8:09/2019 §4.2 decision rules.

For an upper tolerance limit TL and a guard band w (w = U, the expanded uncertainty, for the
"guarded" rule; w = 0 for the "simple" rule):

    value <  TL - w          pass
    TL - w <= value <= TL    conditional pass
    TL < value <= TL + w     conditional fail
    value >  TL + w          fail

and the mirror image for a lower limit. With both limits the worse outcome of the two counts.
With w = 0 the rule is binary ("simple acceptance"): a value on the limit passes.

A value that is missing (None), NaN, infinite or the SCPI overrange / not-a-number value
(9.9E37, 9.91E37: "the instrument could not measure") never passes: it fails with a reason.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

from bringup.analysis.quantities import format_quantity

__all__ = ["Limit", "Verdict", "judge", "OUTCOMES", "RULES", "SCPI_OVERRANGE"]

OUTCOMES = ("pass", "conditional-pass", "conditional-fail", "fail")
RULES = ("simple", "guarded")
#: SCPI-99 +INF is 9.9E37, NaN 9.91E37; scopes send them when a measurement cannot be made.
SCPI_OVERRANGE = 9.9e37

_SEVERITY = {name: i for i, name in enumerate(OUTCOMES)}


@dataclass(frozen=True)
class Limit:
    """A tolerance interval in ``unit``: ``min``, ``max`` or both (None = no limit that side)."""

    min: float | None
    max: float | None
    unit: str

    def __post_init__(self) -> None:
        if self.min is None and self.max is None:
            raise ValueError("a limit needs a min, a max or both")
        for name in ("min", "max"):
            bound = getattr(self, name)
            if bound is not None:
                if isinstance(bound, bool) or not math.isfinite(float(bound)):
                    raise ValueError(f"limit {name} must be a finite number, got {bound!r}")
                object.__setattr__(self, name, float(bound))
        if self.min is not None and self.max is not None and self.min > self.max:
            raise ValueError(f"limit min {self.min!r} is above max {self.max!r}")

    def describe(self) -> str:
        """'4.5 V .. 5.5 V', '>= 10 V', '<= 70 °C'."""
        if self.min is not None and self.max is not None:
            return (
                f"{format_quantity(self.min, self.unit)} .. {format_quantity(self.max, self.unit)}"
            )
        if self.min is not None:
            return f">= {format_quantity(self.min, self.unit)}"
        return f"<= {format_quantity(self.max, self.unit)}"

    def to_dict(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class Verdict:
    """The outcome of ``judge``.

    ``margin`` is the signed distance from the value to the nearest limit, in the value's unit,
    positive inside the limits (None when there is no usable value). ``guard_band`` is w.
    """

    outcome: str
    value: float | None
    margin: float | None
    guard_band: float
    reason: str
    unit: str = ""
    rule: str = "guarded"

    @property
    def accepted(self) -> bool:
        """True for "pass" and "conditional-pass" (inside the limits)."""
        return self.outcome in ("pass", "conditional-pass")

    def to_dict(self) -> dict:
        return asdict(self)


def _unusable(value: object) -> str | None:
    """Why ``value`` cannot be judged, or None when it is a usable number."""
    if value is None:
        return "no value was measured"
    try:
        x = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return f"value {value!r} is not a number"
    if math.isnan(x):
        return "value is NaN (not measured)"
    if math.isinf(x):
        return "value is infinite (not measured)"
    if abs(x) >= SCPI_OVERRANGE:
        return f"instrument returned the SCPI overrange value {x:.4g} (could not measure)"
    return None


def _side(value: float, limit_value: float, w: float, upper: bool) -> str:
    """ILAC-G8 §4.2 outcome against one limit; ``upper`` is True for a max."""
    inside = limit_value - value if upper else value - limit_value  # >= 0 inside
    if w == 0.0:
        return "pass" if inside >= 0 else "fail"
    if inside > w:
        return "pass"
    if inside >= 0:
        return "conditional-pass"
    if inside >= -w:
        return "conditional-fail"
    return "fail"


def judge(
    value: float | None, limit: Limit, uncertainty: float = 0.0, rule: str = "guarded"
) -> Verdict:
    """Judge ``value`` (in ``limit.unit``) against ``limit`` per ILAC-G8:09/2019 §4.2.

    ``uncertainty`` is the expanded uncertainty U (same unit, usually k = 2). ``rule``:
    "simple" (guard band w = 0, binary) or "guarded" (w = U: pass / conditional pass /
    conditional fail / fail). Missing, NaN, infinite and SCPI-overrange values fail.
    """
    if rule not in RULES:
        raise ValueError(f"unknown decision rule {rule!r} (expected one of {', '.join(RULES)})")
    u = float(uncertainty)
    if not math.isfinite(u) or u < 0:
        raise ValueError(f"uncertainty must be a finite number >= 0, got {uncertainty!r}")
    w = u if rule == "guarded" else 0.0
    unit = limit.unit

    why = _unusable(value)
    if why is not None:
        shown = None
        if value is not None:
            try:
                shown = float(value)  # type: ignore[arg-type]
            except (TypeError, ValueError):
                shown = None
            if shown is not None and not math.isfinite(shown):
                shown = None  # keep to_dict() valid JSON; the reason says what came back
        return Verdict("fail", shown, None, w, why, unit, rule)

    x = float(value)  # type: ignore[arg-type]
    checks = []  # (outcome, inside distance, limit text)
    if limit.max is not None:
        checks.append((_side(x, limit.max, w, True), limit.max - x, "max"))
    if limit.min is not None:
        checks.append((_side(x, limit.min, w, False), x - limit.min, "min"))
    outcome = max((c[0] for c in checks), key=_SEVERITY.__getitem__)
    margin, nearest = min(((c[1], c[2]) for c in checks), key=lambda c: c[0])

    shown = format_quantity(x, unit)
    bound = format_quantity(getattr(limit, nearest), unit)
    dist = format_quantity(abs(margin), unit)
    band = f", guard band {format_quantity(w, unit)}" if w > 0 else ""
    if margin == 0:
        where = f"on {nearest} {bound}"
    elif margin > 0:
        where = f"{dist} inside {nearest} {bound}"
    else:
        where = f"{dist} beyond {nearest} {bound}"
    reason = f"{shown} is {where} (limit {limit.describe()}{band}, rule {rule})"
    return Verdict(outcome, x, margin, w, reason, unit, rule)
