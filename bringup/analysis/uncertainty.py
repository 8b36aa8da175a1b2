"""Measurement uncertainty budgets, combined as the GUM does (JCGM 100:2008).

Each input quantity gets a standard uncertainty: type A from repeated observations (s/sqrt(n),
GUM §4.2), type B from a specification or a bound (a rectangular bound +/- a gives a/sqrt(3),
a triangular one a/sqrt(6), one quantisation step q gives q/sqrt(12); GUM §4.3.7, §4.3.9). The
components here are already multiplied by their sensitivity coefficient (in the result's unit)
and are uncorrelated, so u_c = sqrt(sum u_i^2) (GUM §5.1.2); the expanded uncertainty is
U = k u_c with k = 2 (about 95 % for a large effective number of degrees of freedom, GUM §6.3).

A ``Budget`` lists its components (what each is, how it was evaluated, its value) so that the
reader can see where the uncertainty comes from. Pure functions: numbers in, budgets out.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

__all__ = [
    "COVERAGE_K",
    "Budget",
    "Component",
    "crossing_budget",
    "dead_time_budget",
    "duration_budget",
    "excursion_budget",
    "level_budget",
    "loop_inductance_budget",
    "quantisation",
    "rectangular",
    "switching_energy_budget",
    "refresh_time_budget",
    "temperature_budget",
    "thermocouple_tolerance",
    "triangular",
    "type_a",
]

COVERAGE_K = 2.0


def rectangular(half_width: float) -> float:
    """Standard uncertainty of a quantity known only to lie within +/- ``half_width``
    (uniform, GUM §4.3.7): a/sqrt(3)."""
    return abs(float(half_width)) / math.sqrt(3.0)


def triangular(half_width: float) -> float:
    """Standard uncertainty of a triangular distribution of half-width a (GUM §4.3.9):
    a/sqrt(6)."""
    return abs(float(half_width)) / math.sqrt(6.0)


def quantisation(step: float) -> float:
    """Standard uncertainty of one reading rounded to ``step``: q/sqrt(12) (the rectangular
    rule over +/- q/2)."""
    return abs(float(step)) / math.sqrt(12.0)


def type_a(std: float, n: int) -> float:
    """Type A standard uncertainty of the mean of ``n`` observations of standard deviation
    ``std`` (GUM §4.2.3): s/sqrt(n)."""
    if n < 1:
        raise ValueError(f"a type A evaluation needs at least one observation, got {n}")
    return abs(float(std)) / math.sqrt(n)


@dataclass(frozen=True)
class Component:
    """One line of a budget: ``name`` (what it is, with the figures it came from),
    ``evaluation`` ("type A" or "type B, rectangular"...), ``u`` its contribution to the
    result's standard uncertainty, |c_i| u(x_i), in the result's unit (GUM §5.1.3).

    ``u_input`` is the input's own standard uncertainty u(x_i) in ``input_unit`` and
    ``sensitivity`` the coefficient c_i = df/dx_i (result unit per input unit); a component
    evaluated directly in the result's unit has c_i = 1 and u_input = u (``Component.of``
    builds one from u(x_i) and c_i)."""

    name: str
    evaluation: str
    u: float
    sensitivity: float = 1.0
    u_input: float | None = None
    input_unit: str = ""

    @classmethod
    def of(
        cls, name: str, evaluation: str, u_input: float, sensitivity: float, input_unit: str
    ) -> Component:
        """A component from its input's standard uncertainty ``u_input`` (``input_unit``) and
        its sensitivity coefficient (GUM §5.1.3: contribution = |c_i| u(x_i))."""
        u_x = abs(float(u_input))
        c = float(sensitivity)
        return cls(name, evaluation, abs(c) * u_x, c, u_x, input_unit)

    @property
    def kind(self) -> str:
        """ "A" (statistical, GUM §4.2) or "B" (other means, GUM §4.3)."""
        return "A" if self.evaluation.lower().startswith("type a") else "B"

    def to_dict(self) -> dict:
        return {
            "name": self.name,
            "evaluation": self.evaluation,
            "type": self.kind,
            "u": self.u,
            "sensitivity": self.sensitivity,
            "u_input": self.u if self.u_input is None else self.u_input,
            "input_unit": self.input_unit,
        }


@dataclass(frozen=True)
class Budget:
    """An uncertainty budget for ``quantity`` (in ``unit``): its components, the combined
    standard uncertainty (root sum of squares, uncorrelated inputs) and the expanded one."""

    quantity: str
    unit: str
    value: float
    components: tuple[Component, ...]
    k: float = COVERAGE_K

    @property
    def combined(self) -> float:
        """u_c = sqrt(sum u_i^2) (GUM §5.1.2)."""
        return math.sqrt(sum(c.u * c.u for c in self.components))

    @property
    def expanded(self) -> float:
        """U = k u_c (GUM §6.2)."""
        return self.k * self.combined

    def dominant(self) -> Component | None:
        """The largest component (what to improve first)."""
        return max(self.components, key=lambda c: c.u, default=None)

    def to_dict(self) -> dict:
        main = self.dominant()
        return {
            "quantity": self.quantity,
            "unit": self.unit,
            "value": self.value,
            "components": [c.to_dict() for c in self.components],
            "combined": self.combined,
            "k": self.k,
            "expanded": self.expanded,
            "main": None if main is None else main.name,
        }


def _budget(quantity: str, unit: str, value: float, parts: Iterable[Component]) -> Budget:
    return Budget(quantity, unit, float(value), tuple(c for c in parts if c.u > 0))


def level_budget(
    level_v: float,
    *,
    noise_rms_v: float,
    samples: int,
    code_step_v: float = 0.0,
    gain_accuracy: float = 0.0,
    offset_accuracy_v: float = 0.0,
    probe_ratio_tolerance: float = 0.0,
    quantity: str = "level",
) -> Budget:
    """Budget of a DC level (V) read as the mean of ``samples`` scope samples.

    Components: the noise averaged over the samples (type A, sigma/sqrt(n)); the ADC's code
    step (q/sqrt(12), itself averaged when the noise dithers it, i.e. sigma >= q/2); the
    channel's gain accuracy (a fraction of the reading, rectangular); its offset accuracy (V,
    rectangular); the probe's attenuation tolerance (a fraction of the reading, rectangular).
    The accuracy figures come from the instrument's and probe's specifications at the range
    used.
    """
    level = abs(float(level_v))
    n = max(int(samples), 1)
    dithered = noise_rms_v >= code_step_v / 2.0
    q = quantisation(code_step_v) / (math.sqrt(n) if dithered else 1.0)
    return _budget(
        quantity,
        "V",
        level_v,
        (
            Component(f"noise {noise_rms_v:.3g} V rms over {n} samples", "type A",
                      type_a(noise_rms_v, n)),
            Component(f"ADC code step {code_step_v:.3g} V"
                      + (" (dithered by the noise)" if dithered else ""),
                      "type B, rectangular", q),
            Component(f"gain accuracy +/-{100 * gain_accuracy:.3g} % of reading",
                      "type B, rectangular", rectangular(gain_accuracy * level)),
            Component(f"offset accuracy +/-{offset_accuracy_v:.3g} V", "type B, rectangular",
                      rectangular(offset_accuracy_v)),
            Component(f"probe ratio tolerance +/-{100 * probe_ratio_tolerance:.3g} %",
                      "type B, rectangular", rectangular(probe_ratio_tolerance * level)),
        ),
    )  # fmt: skip


def duration_budget(
    duration_s: float,
    edge_durations_s: Sequence[float],
    *,
    dt_s: float,
    statistic: str = "median",
    timebase_ppm: float = 0.0,
    interpolation_bias: float = 0.0,
    chain_s: float = 0.0,
    noise_floor_s: float = 0.0,
    quantity: str = "10-90 % duration",
) -> Budget:
    """Budget of an edge duration (s) from ``edge_durations_s`` (every edge of the record).

    ``statistic``: "median" (the record's typical edge: the edges' scatter s over sqrt(n),
    times sqrt(pi/2) for a median, type A) or "max" (the slowest edge judged alone: one
    edge's scatter s, type A). Type B: the bias of taking the last crossing of each level on
    a noisy edge, bounded by one edge's scatter (rectangular); the sample clock's accuracy (``timebase_ppm``, of the
    value, rectangular); the linear interpolation's bias on an edge with few samples
    (``interpolation_bias``, a fraction of the value, rectangular: see
    ``edges.MIN_EDGE_SAMPLES``); a removed chain rise time ``chain_s``: its 0.35/BW is
    uncertain (0.45/BW for a steep roll-off, REFERENCES §9), so the corrected value lies
    between the two corrections (rectangular over half their difference). With one edge
    only, its scatter is unknown: one sample interval / sqrt(6) stands in (two crossings each
    within a triangular +/- dt/2, common practice) and the budget says so.

    ``noise_floor_s``: one edge's standard uncertainty from the record's noise over the
    edge's local slopes (``edges.crossing_noise``, type B from the noise estimate). The
    scatter of a few edges is itself uncertain (two edges give s with one degree of freedom,
    GUM annex G), so the larger of the two stands for one edge's scatter.
    """
    if statistic not in ("median", "max"):
        raise ValueError(f"statistic must be 'median' or 'max', got {statistic!r}")
    d = [float(v) for v in edge_durations_s]
    n = len(d)
    parts: list[Component] = []
    if n >= 2:
        mean = sum(d) / n
        s = max(math.sqrt(sum((v - mean) ** 2 for v in d) / (n - 1)), float(noise_floor_s))
        if statistic == "median":
            parts.append(Component(f"scatter of {n} edges (or the noise), s = {s:.3g} s (median)", "type A",
                                   math.sqrt(math.pi / 2.0) * type_a(s, n)))  # fmt: skip
        else:
            parts.append(Component(f"scatter of {n} edges (or the noise), s = {s:.3g} s (one edge)",
                                   "type A", s))  # fmt: skip
            # The largest of n noisy readings of like edges reads high by about
            # s sqrt(2 ln n) (the expected maximum of n normal draws, common practice).
            parts.append(Component(f"the slowest of {n} noisy edges reads high",
                                   "type B, rectangular",
                                   rectangular(s * math.sqrt(2.0 * math.log(n)))))  # fmt: skip
        # The last crossing of each reference level is taken (IEEE 181 hysteresis): with
        # noise on a shallow part of the edge that is the latest of several, a bias that the
        # scatter does not show. Bounded by one edge's scatter (rectangular).
        parts.append(Component("crossing choice under noise, up to one edge's scatter",
                               "type B, rectangular", rectangular(s)))  # fmt: skip
    else:
        parts.append(Component("one edge only: two crossings within +/- dt/2 each",
                               "type B, triangular", math.sqrt(2.0) * triangular(dt_s / 2.0)))  # fmt: skip
        parts.append(Component("one edge only: noise over the edge's slopes", "type A",
                               float(noise_floor_s)))  # fmt: skip
        # the last crossing of each level is taken: biased late by up to the noise's share
        parts.append(Component("crossing choice under noise", "type B, rectangular",
                               rectangular(float(noise_floor_s))))  # fmt: skip
    value = float(duration_s)
    parts.append(Component(f"timebase accuracy {timebase_ppm:.3g} ppm", "type B, rectangular",
                           rectangular(timebase_ppm * 1e-6 * value)))  # fmt: skip
    parts.append(Component(f"interpolation on few samples, up to {100 * interpolation_bias:.3g} %",
                           "type B, rectangular", rectangular(interpolation_bias * value)))  # fmt: skip
    if chain_s > 0:
        measured = math.hypot(value, chain_s)
        steep = chain_s * 0.45 / 0.35
        alt = math.sqrt(max(measured * measured - steep * steep, 0.0))
        parts.append(Component(f"chain rise time {chain_s:.3g} s (0.35/BW, or 0.45/BW)",
                               "type B, rectangular", rectangular((value - alt) / 2.0)))  # fmt: skip
    return _budget(quantity, "s", value, parts)


#: IEC 60584-1 tolerance classes of thermocouples (K, J, N, E, T share the form; REFERENCES
#: §10 [memory]): (fixed half-width K, fraction of |t| in degC), the larger applies.
_TC_CLASSES = {1: (1.5, 0.004), 2: (2.5, 0.0075)}


def thermocouple_tolerance(t_c: float, tolerance_class: int = 2) -> float:
    """Half-width (K) of a thermocouple's tolerance at ``t_c`` (degC): class 1 +/-1.5 K or
    0.4 % of |t|, class 2 +/-2.5 K or 0.75 % of |t|, whichever is larger (IEC 60584-1
    [memory, REFERENCES §10])."""
    if tolerance_class not in _TC_CLASSES:
        raise ValueError(f"thermocouple tolerance class must be 1 or 2, got {tolerance_class!r}")
    fixed, frac = _TC_CLASSES[tolerance_class]
    return max(fixed, frac * abs(float(t_c)))


def temperature_budget(
    final_c: float,
    fit_expanded_c: float,
    *,
    tolerance_class: int = 2,
    resolution_c: float = 0.0,
    quantity: str = "final temperature",
) -> Budget:
    """Budget of a soak's predicted final temperature (degC): the fit's own uncertainty (its
    expanded value / 2, from the log's noise and the model), the thermocouple's tolerance
    class at that temperature (rectangular) and the reader's resolution (q/sqrt(12))."""
    tol = thermocouple_tolerance(final_c, tolerance_class)
    return _budget(
        quantity,
        "degC",
        final_c,
        (
            Component("soak fit (noise of the log and the model)", "type A",
                      float(fit_expanded_c) / COVERAGE_K),
            Component(f"thermocouple class {tolerance_class}: +/-{tol:.3g} K at "
                      f"{final_c:.4g} degC", "type B, rectangular", rectangular(tol)),
            Component(f"reader resolution {resolution_c:.3g} K", "type B, rectangular",
                      quantisation(resolution_c)),
        ),
    )  # fmt: skip


def crossing_budget(
    noise_v: float,
    slope_v_per_s: float,
    curvature_v_per_s2: float = 0.0,
    dt_s: float = 0.0,
    *,
    quantity: str = "threshold-crossing instant",
) -> Budget:
    """Budget of one threshold-crossing instant (s) found by linear interpolation between two
    samples ``dt_s`` apart on an edge of slope ``slope_v_per_s`` (V/s).

    Components: the noise ``noise_v`` (V rms) moves the crossing by noise/|slope| (type A,
    REFERENCES §10: a time uncertainty is u(y) over the slope at the crossing); taking the last
    of several noisy crossings (the hysteresis rule) biases it by up to that much again
    (rectangular, as in ``duration_budget``); linear
    interpolation on a curved edge errs by at most |y''| dt^2 / (8 |y'|) (the remainder of
    linear interpolation, max |f''|/2 (t - t_i)(t_{i+1} - t), divided by the slope; any
    numerical-analysis text), taken as a rectangular bound (GUM §4.3.7). A zero or infinite
    slope gives an infinite uncertainty (a crossing that cannot be timed)."""
    slope = abs(float(slope_v_per_s))
    if not (slope > 0 and math.isfinite(slope)):
        return _budget(quantity, "s", math.nan,
                       (Component("no slope at the crossing", "type B", math.inf),))  # fmt: skip
    remainder = abs(float(curvature_v_per_s2)) * float(dt_s) ** 2 / (8.0 * slope)
    return _budget(
        quantity,
        "s",
        math.nan,
        (Component(f"noise {noise_v:.3g} V over slope {slope:.3g} V/s", "type A",
                   abs(float(noise_v)) / slope),
         Component("crossing choice under noise (the last of several), up to noise/slope",
                   "type B, rectangular", rectangular(abs(float(noise_v)) / slope)),
         Component(f"linear interpolation on a curved edge, up to {remainder:.3g} s",
                   "type B, rectangular", rectangular(remainder))),
    )  # fmt: skip


def excursion_budget(
    extreme_v: float,
    noise_v: float,
    samples: int,
    code_step_v: float = 0.0,
    between_samples_v: float = 0.0,
    *,
    quantity: str = "peak voltage",
) -> Budget:
    """Budget of a waveform's extreme (V) read as its highest (or lowest) sample.

    Components: the noise on that one sample (type A, sigma); the extreme of ``samples`` noisy
    samples reads outward by up to sigma sqrt(2 ln N) (the expected maximum of N normal draws,
    common practice; rectangular); one ADC code (q/sqrt(12), GUM §4.3.7); the true peak falling
    between samples, up to ``between_samples_v`` (for a ring of amplitude A at f sampled every
    dt, A (1 - cos(pi f dt)) [computed]; rectangular)."""
    n = max(int(samples), 2)
    return _budget(
        quantity,
        "V",
        extreme_v,
        (Component(f"noise {noise_v:.3g} V rms on one sample", "type A", abs(float(noise_v))),
         Component(f"the extreme of {n} noisy samples reads outward", "type B, rectangular",
                   rectangular(noise_v * math.sqrt(2.0 * math.log(n)))),
         Component(f"ADC code step {code_step_v:.3g} V", "type B, rectangular",
                   quantisation(code_step_v)),
         Component(f"peak between samples, up to {between_samples_v:.3g} V",
                   "type B, rectangular", rectangular(between_samples_v))),
    )  # fmt: skip


def loop_inductance_budget(
    frequency_hz: float,
    frequency_u_hz: float,
    capacitance_f: float,
    capacitance_u_f: float = 0.0,
    *,
    quantity: str = "loop inductance",
) -> Budget:
    """Budget of L = 1/((2 pi f)^2 C) (H) from a ring's natural frequency (Hz, standard
    uncertainty ``frequency_u_hz``) and the switch node's capacitance (F, ``capacitance_u_f``).

    L is a product of powers (f^-2 C^-1), so its relative uncertainty is
    sqrt((2 u(f)/f)^2 + (u(C)/C)^2) (GUM §5.1.6); each component below is that relative part
    times L."""
    f, c = float(frequency_hz), float(capacitance_f)
    if not (f > 0 and c > 0):
        raise ValueError("frequency and capacitance must be > 0")
    value = 1.0 / ((2.0 * math.pi * f) ** 2 * c)
    return _budget(
        quantity,
        "H",
        value,
        (Component(f"ring frequency {f:.4g} Hz +/- {frequency_u_hz:.3g} Hz (sensitivity -2 L/f)",
                   "type A (fit)", 2.0 * abs(float(frequency_u_hz)) / f * value),
         Component(f"switch-node capacitance {c:.4g} F +/- {capacitance_u_f:.3g} F",
                   "type B", abs(float(capacitance_u_f)) / c * value)),
    )  # fmt: skip


def refresh_time_budget(
    tau_s: float,
    tau_u_s: float,
    full_v: float,
    full_u_v: float,
    droop_v: float,
    droop_u_v: float,
    required_v: float,
    *,
    quantity: str = "shortest refreshing low-side on-time",
) -> Budget:
    """Budget of t = tau ln(H/(H - D)), H = V_f - V_req (s): the shortest low-side on-time that
    keeps a bootstrap with droop D per period above V_req (``bootstrap_refresh``).

    Sensitivities (GUM §5.1.3, the partial derivatives): dt/dtau = t/tau; dt/dV_f =
    -tau D/(H (H - D)); dt/dD = tau/(H - D). The value is ``math.inf`` (with infinite
    components) when D >= H."""
    tau, h, d = float(tau_s), float(full_v) - float(required_v), max(float(droop_v), 0.0)
    if h <= d:
        inf = Component("droop per period at least the headroom above the required level",
                        "type B", math.inf)  # fmt: skip
        return Budget(quantity, "s", math.inf, (inf,))
    t = tau * math.log(h / (h - d)) if d > 0 else 0.0
    return _budget(
        quantity,
        "s",
        t,
        (Component(f"time constant {tau:.3g} s +/- {tau_u_s:.3g} s", "type A (fit) or B (design)",
                   t / tau * abs(float(tau_u_s)) if tau > 0 else 0.0),
         Component(f"full level {full_v:.4g} V +/- {full_u_v:.3g} V", "type A (fit)",
                   tau * d / (h * (h - d)) * abs(float(full_u_v))),
         Component(f"droop per period {d:.3g} V +/- {droop_u_v:.3g} V", "type A",
                   tau / (h - d) * abs(float(droop_u_v)))),
    )  # fmt: skip


def switching_energy_budget(
    energy_j: float,
    noise_j: float,
    skew_sensitivity_j_per_s: float,
    skew_u_s: float,
    window_ends_j: float = 0.0,
    gain_u: float = 0.0,
    *,
    quantity: str = "switching energy",
) -> Budget:
    """Budget of one edge's switching energy E = integral of v i dt (J).

    Components: the channels' noise integrated over the window (``noise_j``, type A, computed
    by the caller as dt sqrt(sum(v^2 sigma_i^2 + i^2 sigma_v^2))); the deskew's standard
    uncertainty ``skew_u_s`` times dE/dskew (``skew_sensitivity_j_per_s``, GUM §5.1.3); the
    window's ends, p(t_end) u(t_end) (``window_ends_j``, type A); the probes' gain accuracy,
    ``gain_u`` x E (type B)."""
    return _budget(
        quantity,
        "J",
        energy_j,
        (Component("noise of both channels over the window", "type A", abs(float(noise_j))),
         Component(f"deskew +/- {skew_u_s:.3g} s at dE/dskew {skew_sensitivity_j_per_s:.3g} J/s",
                   "type B", abs(float(skew_sensitivity_j_per_s) * float(skew_u_s))),
         Component("the window's ends (their crossing instants)", "type A",
                   abs(float(window_ends_j))),
         Component(f"probe gain accuracy {100 * gain_u:.3g} %", "type B",
                   abs(float(gain_u) * float(energy_j)))),
    )  # fmt: skip


def dead_time_budget(
    dead_time_s: float,
    off_u_s: float,
    on_u_s: float,
    skew_u_s: float = 0.0,
    *,
    quantity: str = "dead time",
) -> Budget:
    """Budget of one dead time t_on,other - t_off,this (s) between two gates' threshold
    crossings: each crossing's standard uncertainty (``crossing_budget``'s combined value, a
    difference of two uncorrelated instants, GUM §5.1.2) and the skew between the two gate
    channels (``skew_u_s``, type B, from the bench's deskew)."""
    return _budget(
        quantity,
        "s",
        dead_time_s,
        (Component("the turning-off gate's threshold crossing", "type A and B", abs(float(off_u_s))),
         Component("the turning-on gate's threshold crossing", "type A and B", abs(float(on_u_s))),
         Component("skew between the two gate channels", "type B", abs(float(skew_u_s)))),
    )  # fmt: skip
