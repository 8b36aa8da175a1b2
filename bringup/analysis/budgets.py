"""GUM budgets (JCGM 100:2008) of the metrics a checklist judges or reports, beyond the
levels, durations and temperatures of ``bringup.analysis.uncertainty``.

Each function takes what a measurement found (and what the bench file says about the channel:
its ADC code step, its DC accuracy as an offset in volts, the probe's ratio tolerance) and
returns a ``Budget`` whose components carry their input's standard uncertainty, the
sensitivity coefficient (the partial derivative of the result, GUM §5.1.3) and the
contribution. Inputs are uncorrelated unless a docstring says otherwise. Pure functions.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from bringup.analysis.uncertainty import (
    Budget,
    Component,
    _budget,
    quantisation,
    rectangular,
    type_a,
)

__all__ = [
    "ChannelSpec",
    "droop_budgets",
    "typed_resolution",
    "plateau_budget",
    "propagate",
    "reading_budget",
    "ripple_budget",
    "trough_budget",
    "overshoot_budget",
    "time_constant_budget",
    "renamed",
]

_B = "type B, rectangular"


class ChannelSpec:
    """What a scope channel is good to (GUM type B inputs): its ADC ``code_step_v`` (V, 0 for
    a float record), its DC accuracy ``dc_accuracy_v`` (V, a half-width: the scope's figure as
    a fraction of full scale times the range) and the probe's ``ratio_tolerance`` (a fraction
    of the reading, half-width)."""

    __slots__ = ("code_step_v", "dc_accuracy_v", "ratio_tolerance")

    def __init__(
        self, code_step_v: float = 0.0, dc_accuracy_v: float = 0.0, ratio_tolerance: float = 0.0
    ) -> None:
        self.code_step_v = float(code_step_v)
        self.dc_accuracy_v = float(dc_accuracy_v)
        self.ratio_tolerance = float(ratio_tolerance)

    def gain(self, value: float, unit: str = "V") -> Component:
        """The probe's ratio tolerance acting on ``value``: u(g) = tol/sqrt(3), c = value."""
        return Component.of(f"probe ratio tolerance +/-{100 * self.ratio_tolerance:.3g} %", _B,
                            rectangular(self.ratio_tolerance), value, "1")  # fmt: skip

    def offset(self, sensitivity: float = 1.0) -> Component:
        """The channel's DC accuracy as an offset (V): u = a/sqrt(3), c = ``sensitivity``."""
        return Component.of(f"DC accuracy +/-{self.dc_accuracy_v:.3g} V", _B,
                            rectangular(self.dc_accuracy_v), sensitivity, "V")  # fmt: skip


def renamed(budget: Budget, quantity: str, value: float | None = None) -> Budget:
    """The same budget for another quantity (a margin = a level less a constant limit)."""
    return Budget(quantity, budget.unit, budget.value if value is None else float(value),
                  budget.components, budget.k)  # fmt: skip


def propagate(
    quantity: str, unit: str, value: float, inputs: Sequence[tuple[str, Budget, float]]
) -> Budget:
    """The budget of f(x_1, x_2, ...) from its inputs' budgets, first order (GUM §5.1.2):
    each input's components carried over with the input's sensitivity coefficient
    ``df/dx_i`` (``inputs``: (name, budget of x_i, c_i)). Components of different inputs are
    taken as uncorrelated."""
    parts: list[Component] = []
    for name, b, c in inputs:
        for comp in b.components:
            parts.append(Component.of(f"{name}: {comp.name}", comp.evaluation, comp.u, c,
                                      b.unit))  # fmt: skip
    return _budget(quantity, unit, value, parts)


def reading_budget(
    value: float,
    unit: str,
    *,
    resolution: float = 0.0,
    accuracy: tuple[float, float] | None = None,
    instrument: str = "read-back",
    quantity: str = "reading",
) -> Budget:
    """Budget of one instrument reading (a supply's read-back, a typed meter reading): its
    accuracy specification +/-(fraction x |reading| + offset), rectangular (GUM §4.3.7), and
    the resolution of the digits shown (one step of the last digit, q/sqrt(12)) when known.

    With no specification (``accuracy`` None) the budget says so in a line of zero: nothing
    is invented, the expanded uncertainty is 0 and the decision keeps the board file's
    declared uncertainty."""
    parts = []
    if resolution > 0:
        parts.append(Component(f"{instrument}: resolution {resolution:.3g} {unit} (last digit)",
                               _B, quantisation(resolution)))  # fmt: skip
    if accuracy is not None:
        fraction, offset = accuracy
        a = fraction * abs(float(value)) + offset
        parts.append(Component(f"{instrument}: accuracy +/-({100 * fraction:.3g} % + "
                               f"{offset:.3g} {unit})", _B, rectangular(a)))  # fmt: skip
    budget = _budget(quantity, unit, value, parts)
    if accuracy is None:
        note = Component(f"{instrument}: accuracy not given in the bench file", _B, 0.0)
        budget = Budget(budget.quantity, unit, budget.value, (*budget.components, note))
    return budget


def typed_resolution(text: str, value: float) -> float:
    """The step of the last digit a person typed, in the value's SI unit: "3.300 V" -> 1 mV,
    "3300 mV" -> 1 mV, "3.3" -> 0.1 (the number's mantissa and the prefix or exponent that
    scaled it to ``value``); 0 when the text holds no number or the number is 0."""
    import re

    found = re.search(r"[-+]?(\d+)(?:\.(\d*))?", str(text))
    if found is None:
        return 0.0
    mantissa = float(found.group(0))
    if mantissa == 0:
        return 0.0
    decimals = len(found.group(2) or "")
    return abs(float(value) / mantissa) * 10.0 ** (-decimals)


def ripple_budget(estimate, channel: ChannelSpec, quantity: str = "ripple") -> Budget:
    """Budget of a ripple estimate (V, ``rails.RippleEstimate``).

    The two extremes of the averaged record each carry the averaged noise sigma/sqrt(w)
    (type A); the correction for the noise that chose them is known to within its own size
    (rectangular); the correction for the average's loss on the peaks within half its size
    (rectangular: between 1/3 and 1 of the two widths' difference); the ADC code step on two
    readings (q/sqrt(12) each, averaged over w samples when the noise dithers it); the probe's
    ratio tolerance scales the peak-to-peak. The channel's DC accuracy is an offset: it
    cancels in a difference of two readings of one record."""
    e = estimate
    w = max(int(e.width), 1)
    sigma_w = e.noise_rms_v / math.sqrt(w)
    q = channel.code_step_v
    dithered = e.noise_rms_v >= q / 2.0
    return _budget(quantity, "V", e.value_v, (
        Component.of(f"noise {e.noise_rms_v:.3g} V rms averaged over {w} samples, on the two "
                     "extremes", "type A", sigma_w, math.sqrt(2.0), "V"),
        Component(f"noise lifting the extremes (corrected by {e.selection_v:.3g} V)", _B,
                  rectangular(e.selection_v)),
        Component(f"peaks lost to the {w}-sample average (corrected by {e.attenuation_v:.3g} V)",
                  _B, rectangular(e.attenuation_v / 2.0)),
        Component.of(f"ADC code step {q:.3g} V" + (" (dithered)" if dithered else ""), _B,
                     quantisation(q) / (math.sqrt(w) if dithered else 1.0), math.sqrt(2.0),
                     "V"),
        channel.gain(e.value_v),
    ))  # fmt: skip


def _line_u(d, dt: float) -> tuple[float, float, float, int]:
    """(u of the fitted line's mean, u of its slope in V/s, the fit's centre instant s, n)
    from a ``DroopMetrics``: a least-squares line through n samples of residual rms r has
    s^2 = r^2 n/(n-2), var(mean) = s^2/n and var(slope) = s^2/Sxx, uncorrelated about the
    centre (the fit covariance, common practice for ordinary least squares)."""
    n = max(int(round((d.top_end_s - d.top_start_s) / dt)) + 1, 3)
    s2 = d.residual_rms_v**2 * n / (n - 2)
    return (math.sqrt(s2 / n), d.droop_rate_uncertainty_v_per_s,
            0.5 * (d.top_start_s + d.top_end_s), n)  # fmt: skip


def _bend_component(d, span_s: float, what: str) -> Component | None:
    """When the top is not a straight line (``bend_rates_v_per_s``: the slopes of its two
    halves differ beyond their noise), the line's model error over ``span_s`` seconds: half
    the two halves' difference in rate times the span, rectangular."""
    rates = getattr(d, "bend_rates_v_per_s", None)
    if not rates:
        return None
    half = abs(rates[1] - rates[0]) / 2.0 * abs(span_s)
    return Component(f"the top bends ({rates[0]:.3g} then {rates[1]:.3g} V/s): {what}", _B,
                     rectangular(half))  # fmt: skip


def _level_on_line(d, t_s: float, dt: float, channel: ChannelSpec, value: float,
                   quantity: str, on_u_s: float) -> Budget:  # fmt: skip
    """Budget of the fitted line's value at instant ``t_s`` (V)."""
    u_mean, u_rate, t_c, n = _line_u(d, dt)
    parts = [
        Component.of(f"line fit: mean of {n} top samples (residual {d.residual_rms_v:.3g} V)",
                     "type A", u_mean, 1.0, "V"),
        Component.of(f"line fit: droop rate, carried {abs(t_s - t_c):.3g} s from the fit's "
                     "centre", "type A", u_rate, -(t_s - t_c), "V/s"),
        Component.of("on-pulse edge instant", "type A", on_u_s, -d.droop_rate_v_per_s, "s"),
        channel.gain(value),
        channel.offset(),
    ]  # fmt: skip
    bend = _bend_component(d, t_s - t_c, "the line's error there")
    return _budget(quantity, "V", value, parts + ([bend] if bend else []))


def _zoomed_instants(d, off_level_v: float) -> Component:
    """A record zoomed on the top (its off level below the screen) has its on-pulse instants
    read at the middle of what the screen shows, ``d.mid_level_v``, not at 50 % of the full
    swing from ``off_level_v``: each edge's instant moves by (mid - 50 % level)/slope, the
    on-time reads short by their sum (a linear edge, common practice). A one-sided shift
    whose size rests on the edge staying straight below the screen: a rectangular bound of
    that size, not a correction."""
    full_mid = 0.5 * (off_level_v + d.start_v)
    shift = sum(abs(d.mid_level_v - full_mid) / s for s in d.edge_slopes_v_per_s if s > 0)
    return Component(f"zoomed screen: the instants read at {d.mid_level_v:.3g} V, not at "
                     f"{full_mid:.3g} V (50 % from an off level of {off_level_v:.3g} V)",
                     _B, rectangular(shift))  # fmt: skip


def droop_budgets(
    d,
    dt: float,
    channel: ChannelSpec,
    names: dict[str, str],
    on_u: tuple[float, float],
    off_level_v: float | None = None,
) -> dict[str, Budget]:
    """Budgets of what ``droop.measure_droop`` found (a ``DroopMetrics``), by metric name:
    ``names`` maps "start", "end", "droop", "on_time", "supported" to the metric ids wanted.
    ``on_u`` is the standard uncertainty (s) of the on-pulse's start and end instants.

    start/end: the line at the on-pulse's two 50 % instants: the fit's mean and its slope
    carried from the fit's centre (fit covariance, type A), the probe's ratio and the DC
    accuracy (type B). droop = rate x on-time: the slope (c = on-time), the on-time (c = rate),
    the probe's ratio (a gain scales a droop; an offset cancels). on-time: the two instants.
    supported on-time t = t_c - t_start + (mean - floor)/rate: d t/d mean = 1/rate,
    d t/d rate = -(mean - floor)/rate^2, d t/d gain = floor/rate, d t/d offset = 1/rate,
    d t/d t_start = -1 (the floor is the target's limit: a constant). A bent top adds the
    line's model error. ``off_level_v``: the off level when it lies below a zoomed screen
    (the on-time then gains ``_zoomed_instants``)."""
    u_mean, u_rate, t_c, n = _line_u(d, dt)
    rate, out = d.droop_rate_v_per_s, {}
    if "start" in names:
        out["start"] = _level_on_line(d, d.on_start_s, dt, channel, d.start_v, names["start"],
                                      on_u[0])  # fmt: skip
    if "end" in names:
        out["end"] = _level_on_line(d, d.on_end_s, dt, channel, d.end_v, names["end"], on_u[1])
    u_on = math.hypot(*on_u)
    if "on_time" in names:
        parts = [
            Component.of("on-pulse start instant (noise over the edge's slope, sample interval)",
                         "type A", on_u[0], -1.0, "s"),
            Component.of("on-pulse end instant", "type A", on_u[1], 1.0, "s"),
        ]  # fmt: skip
        if off_level_v is not None and d.mid_level_v is not None:
            parts.append(_zoomed_instants(d, off_level_v))
        out["on_time"] = _budget(names["on_time"], "s", d.on_time_s, parts)
    if "droop" in names:
        bend = _bend_component(d, d.on_time_s, "over the on-time")
        out["droop"] = _budget(names["droop"], "V", d.droop_v, [
            Component.of(f"line fit: droop rate over {n} top samples", "type A", u_rate,
                         d.on_time_s, "V/s"),
            Component.of("on-time", "type A", u_on, rate, "s"),
            channel.gain(d.droop_v),
        ] + ([bend] if bend else []))  # fmt: skip
    if "supported" in names and d.t_on_max_s is not None and rate > 0:
        mean = d.start_v - rate * (t_c - d.on_start_s)
        bend = _bend_component(d, d.t_on_max_s, "extrapolated to the floor")
        parts = [
            Component.of(f"line fit: mean of {n} top samples", "type A", u_mean, 1.0 / rate, "V"),
            Component.of("line fit: droop rate", "type A", u_rate,
                         -(mean - d.floor_v) / rate**2, "V/s"),
            Component.of(f"probe ratio tolerance +/-{100 * channel.ratio_tolerance:.3g} %", _B,
                         rectangular(channel.ratio_tolerance), d.floor_v / rate, "1"),
            channel.offset(1.0 / rate),
            Component.of("on-pulse start instant", "type A", on_u[0], -1.0, "s"),
        ]  # fmt: skip
        if bend is not None:
            # the bend's voltage error at the floor, over the rate: seconds
            parts.append(Component(bend.name, _B, bend.u / rate))
        out["supported"] = _budget(names["supported"], "s", d.t_on_max_s, parts)
    return out


def plateau_budget(p, channel: ChannelSpec, quantity: str = "miller_plateau") -> Budget:
    """Budget of a Miller plateau voltage (V, ``plateau.PlateauResult``): the median over the
    edges that show a shelf (their scatter s: sqrt(pi/2) s/sqrt(n) for a median, type A; one
    edge: the noise over its shelf samples, sqrt(pi/2) sigma/sqrt(m)); the shelf's own drift
    (it is not flat: the level is somewhere along it, rectangular over half the drift); the
    ramps' samples counted into the shelf's band (the median of the shelf against that of its
    middle half, rectangular); the ADC code step (dithered by the noise: over sqrt(m)), the
    DC accuracy and the probe's ratio."""
    volts = list(p.edge_voltages_v) or [p.voltage_v]
    n = len(volts)
    m = max(int(min(p.shelf_samples)) if p.shelf_samples else 1, 1)
    noise_part = math.sqrt(math.pi / 2.0) * type_a(p.noise_v, m) / math.sqrt(n)
    parts = [Component(f"noise {p.noise_v:.3g} V rms over {m} shelf samples", "type A",
                       noise_part)]  # fmt: skip
    if n >= 2:
        mean = sum(volts) / n
        s = math.sqrt(sum((v - mean) ** 2 for v in volts) / (n - 1))
        parts.append(Component(f"scatter of {n} edges' shelves, s = {s:.3g} V (median)",
                               "type A", math.sqrt(math.pi / 2.0) * s / math.sqrt(n)))  # fmt: skip
    q = channel.code_step_v
    dithered = p.noise_v >= q / 2.0
    parts += [
        Component(f"the shelf drifts {p.drift_v:.3g} V along its length", _B,
                  rectangular(p.drift_v / 2.0)),
        Component("the ramps' samples inside the shelf's band (median against its middle "
                  "half's)", _B, rectangular(p.edge_bias_v)),
        Component(f"ADC code step {q:.3g} V" + (" (dithered)" if dithered else ""), _B,
                  quantisation(q) / (math.sqrt(m) if dithered else 1.0)),
        channel.gain(p.voltage_v),
        channel.offset(),
    ]  # fmt: skip
    return _budget(quantity, "V", p.voltage_v, parts)


def trough_budget(trough, channel: ChannelSpec, quantity: str = "lowest") -> Budget:
    """Budget of the lowest point of a record (V, ``edges.Trough``): the settled trough's fit
    (the record's noise through the local quadratic's variance factor, type A); the lowest of
    n like troughs reads low by about u sqrt(2 ln n) (the expected extreme of n normal draws,
    common practice; rectangular); the ADC code step, the DC accuracy, the probe's ratio."""
    parts = [Component.of(f"trough fit on the record's noise {trough.noise_v:.3g} V rms",
                          "type A", trough.u_fit_v, 1.0, "V")]  # fmt: skip
    if trough.candidates >= 2:
        parts.append(Component(f"the lowest of {trough.candidates} troughs reads low", _B,
                               rectangular(trough.u_fit_v
                                           * math.sqrt(2.0 * math.log(trough.candidates)))))  # fmt: skip
    parts += [
        Component(f"ADC code step {channel.code_step_v:.3g} V", _B,
                  quantisation(channel.code_step_v)),
        channel.gain(trough.value_v),
        channel.offset(),
    ]  # fmt: skip
    return _budget(quantity, "V", trough.value_v, parts)


def overshoot_budget(
    value_pct: float, u_fit_pct: float, u_level_pct: float, quantity: str = "overshoot"
) -> Budget:
    """Budget of the largest overshoot (% of amplitude) from ``edges``' settled-peak method:
    the peak's local fit on the record's noise (type A, ``aberration_uncertainty``) and the
    high state level it is read against (its histogram bin and code step, rectangular). A
    probe's gain scales peak and amplitude alike: it cancels in a percentage."""
    return _budget(quantity, "%", value_pct, (
        Component("settled peak's fit on the record's noise", "type A", u_fit_pct),
        Component("state level (histogram bin, ADC code step)", _B, u_level_pct),
    ))  # fmt: skip


def time_constant_budget(tau_s: float, expanded_s: float, quantity: str) -> Budget:
    """Budget of a soak's time constant (s): the fit's covariance (its expanded value over
    k = 2; ``soak.fit_soak``), type A. Thermocouple offsets cancel in a time constant."""
    return _budget(quantity, "s", tau_s,
                   (Component("soak fit covariance", "type A", expanded_s / 2.0),))  # fmt: skip
