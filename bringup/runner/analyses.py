"""The checklist's analyses: acquired data in, metrics (ids of the catalogue) and plot views out.

Each function turns what a step acquired into measured values with the measurement core
(``bringup.analysis``) and builds the ``WaveformView``s the TUI and the record plot (reference
levels, crossings, on-time windows). A metric that cannot be measured is ``None`` with a reason;
it then fails its target (a value that is not there never passes).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import partial
from types import SimpleNamespace

import numpy as np

from bringup.analysis.design import switching_loss
from bringup.analysis.edges import EdgeMetrics, measure_edges, state_levels
from bringup.boards.board_file import Board
from bringup.checklist.catalogue import RAIL_NETS
from bringup.errors import AnalysisError
from bringup.runner.half_bridge_analyses import HALF_BRIDGE_ANALYSE, HALF_BRIDGE_METRIC_NETS
from bringup.runner.results import Crossing, SoakProgress, WaveformView

__all__ = ["Trace", "clipping", "RampStep", "AnalysisInput", "AnalysisOutput", "ANALYSE", "analyse"]


@dataclass(frozen=True, eq=False)
class Trace:
    """One acquired trace in volts: sample ``i`` at ``t0_s + i * dt_s`` seconds.

    ``screen_v``: the channel's vertical window as (offset, full-scale range) in volts, when
    known; what lies within 1 % of its edges is clipped (see ``clipping``).
    ``chain_bandwidths_hz``: the measuring chain's bandwidths, taken out of its edges."""

    net: str
    volts: np.ndarray
    dt_s: float
    t0_s: float
    screen_v: tuple[float, float] | None = None
    # -3 dB bandwidths (Hz) of what the signal went through: the scope, the probe, a
    # bandwidth limit; empty when the bench file does not say (no correction then).
    chain_bandwidths_hz: tuple[float, ...] = ()
    # What a level read on this trace is good to (GUM type B terms): the ADC's code step (V,
    # 0 for float records), the channel's DC accuracy at its range (V, half-width) and the
    # probe's attenuation tolerance (fraction); 0 where the bench file does not say.
    code_step_v: float = 0.0
    dc_accuracy_v: float = 0.0
    ratio_tolerance: float = 0.0
    # How far this channel's record lags the voltage probes' (s), from the bench file's
    # ``deskew_s`` (a current probe's, measured on a resistive step); 0 when not given.
    deskew_s: float = 0.0

    def span(self, start_s: float, end_s: float) -> np.ndarray:
        """The samples from ``start_s`` to ``end_s`` (s), both included."""
        a = max(int(math.floor((start_s - self.t0_s) / self.dt_s)), 0)
        b = min(int(math.ceil((end_s - self.t0_s) / self.dt_s)) + 1, self.volts.size)
        return self.volts[a:b]


def clipping(volts: np.ndarray, offset_v: float, range_v: float) -> str | None:
    """Which edge of the screen ``volts`` reach ("top (14 V)"/"bottom (-2 V)"), or None.

    The screen spans ``offset_v`` +/- ``range_v``/2; samples within 1 % of the range from
    either edge count as clipped: an 8-bit scope's top and bottom codes."""
    if volts.size == 0:
        return None
    top, bottom = offset_v + range_v / 2, offset_v - range_v / 2
    margin = range_v / 100
    if float(volts.max()) >= top - margin:
        return f"top ({top:.4g} V)"
    if float(volts.min()) <= bottom + margin:
        return f"bottom ({bottom:.4g} V)"
    return None


@dataclass(frozen=True)
class RampStep:
    """One step of a first-power ramp: setpoint and read-back (V, A), in current limit or not."""

    setpoint_v: float
    voltage_v: float
    current_a: float
    current_limited: bool


@dataclass
class AnalysisInput:
    """Everything a step acquired."""

    traces: dict[str, Trace] = field(default_factory=dict)
    ramp: list[RampStep] = field(default_factory=list)
    ramp_stopped: str = ""
    soak_times_s: list[float] = field(default_factory=list)
    soak_temps_c: list[float] = field(default_factory=list)
    reading: float | None = None
    reading_metric: str | None = None
    reading_resolution: float = 0.0  # the last digit typed (V), 0 when not typed
    supply_v: float | None = None  # supply output read back during the acquisition (V)
    # the supply's read-back accuracy by unit ("V", "A"): (fraction of reading, offset), from
    # the bench file; absent: only the reading's last digit enters its budget
    supply_accuracy: dict[str, tuple[float, float]] = field(default_factory=dict)
    clipped: dict[str, str] = field(default_factory=dict)  # net -> why its trace is unusable


@dataclass
class AnalysisOutput:
    """Measured values by metric id (None = not measured), reasons, views, warnings.

    ``spans``: for a metric computed from part of its trace only, the time windows (s) of the
    samples it uses; a clipped trace then withdraws the metric only when those samples clip."""

    metrics: dict[str, float | None] = field(default_factory=dict)
    reasons: dict[str, str] = field(default_factory=dict)
    views: list[WaveformView] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    details: dict = field(default_factory=dict)
    soak: SoakProgress | None = None
    spans: dict[str, tuple[tuple[float, float], ...]] = field(default_factory=dict)
    # Expanded uncertainty (k = 2, the metric's unit) computed from the measurement itself;
    # the decision uses the larger of it and the target's declared uncertainty.
    uncertainties: dict[str, float] = field(default_factory=dict)
    # the GUM budgets behind them (``bringup.analysis.uncertainty.Budget``), by metric
    budgets: dict = field(default_factory=dict)

    def set(self, metric: str, value: float | None, reason: str = "") -> None:
        if value is not None and not math.isfinite(value):
            reason = reason or f"value {value!r} is not finite"
            value = None
        self.metrics[metric] = None if value is None else float(value)
        if value is None:
            self.reasons[metric] = reason or "not measured"


# Plots get at most this many points per trace (min/max decimation keeps the peaks).
_VIEW_POINTS = 4000


def _decimate(trace: Trace) -> tuple[np.ndarray, float]:
    """Min/max pairs over blocks so that peaks and edges survive on a small plot."""
    y = trace.volts
    if y.size <= _VIEW_POINTS:
        return y.astype(np.float64), trace.dt_s
    block = int(math.ceil(y.size / (_VIEW_POINTS / 2)))
    n = (y.size // block) * block
    shaped = y[:n].reshape(-1, block)
    out = np.empty(2 * shaped.shape[0])
    out[0::2] = shaped.min(axis=1)
    out[1::2] = shaped.max(axis=1)
    return out, trace.dt_s * block / 2


def _view(
    name: str, trace: Trace, levels: dict[str, float], crossings=(), window=None
) -> WaveformView:
    volts, dt = _decimate(trace)
    return WaveformView(name, trace.net, trace.t0_s, dt, volts,
                        {k: float(v) for k, v in levels.items() if v is not None and math.isfinite(v)},
                        tuple(crossings), window)  # fmt: skip


def _edge_crossings(m: EdgeMetrics, limit: int = 6) -> list[Crossing]:
    out: list[Crossing] = []
    tr = m.transitions
    if tr is None:
        return out
    lo, mid, hi = m.reference_levels_v
    for k in range(min(len(tr.direction), limit)):
        rising = bool(tr.direction[k] > 0)
        way = "rising" if rising else "falling"
        for t, v, label in ((tr.t_low_s[k], lo, "10 %"), (tr.t_mid_s[k], mid, "50 %"),
                            (tr.t_high_s[k], hi, "90 %")):  # fmt: skip
            out.append(Crossing(float(t), float(v), label, way))
    return out


def _edge_levels(m: EdgeMetrics) -> dict[str, float]:
    lo, mid, hi = m.reference_levels_v
    return {"low": m.low_level_v, "high": m.high_level_v, "10 %": lo, "50 %": mid, "90 %": hi}


def _trace(data: AnalysisInput, net: str) -> Trace:
    try:
        return data.traces[net]
    except KeyError:
        raise AnalysisError(f"no trace of net {net!r} was acquired") from None


def _keep(out: AnalysisOutput, metric: str, budget) -> None:
    """A metric's GUM budget: its expanded uncertainty (k = 2) to ``out.uncertainties`` (the
    decision uses the larger of it and the declared one), the budget to
    ``details["budgets"]`` (the notebook's budget view, the log and the record)."""
    if out.metrics.get(metric) is None:
        return
    out.budgets[metric] = budget
    out.details.setdefault("budgets", {})[metric] = budget.to_dict()
    if budget.expanded > 0:  # a budget of zero (no specification given) decides nothing
        out.uncertainties[metric] = budget.expanded


def _spec(trace: Trace):
    """What the trace's channel is good to (``bringup.analysis.budgets.ChannelSpec``)."""
    from bringup.analysis.budgets import ChannelSpec

    return ChannelSpec(trace.code_step_v, trace.dc_accuracy_v, trace.ratio_tolerance)


def _reading(data: AnalysisInput, metric: str, value: float, unit: str, instrument: str):
    """The budget of one read-back of the supply (``budgets.reading_budget``): the bench
    file's read-back accuracy for ``unit``, or a line saying it gives none."""
    from bringup.analysis.budgets import reading_budget

    if unit not in data.supply_accuracy:
        key = "voltage_accuracy" if unit == "V" else "current_accuracy"
        instrument += f" ([supply] {key})"
    return reading_budget(value, unit, accuracy=data.supply_accuracy.get(unit),
                          instrument=instrument, quantity=metric)  # fmt: skip


# --------------------------------------------------------------------------- analyses
def first_power(data: AnalysisInput, board: Board, out: AnalysisOutput) -> None:
    """Highest input current over the ramp's steps (A) and the last read-back voltage (V).

    A step in current limit is a short (or a part fitted backwards): its current is at the
    limit, so ``ramp_current`` fails its target however the limit was set."""
    if not data.ramp:
        out.set("ramp_current", None, data.ramp_stopped or "the ramp did not run")
        out.set("ramp_voltage", None, data.ramp_stopped or "the ramp did not run")
        return
    peak = max(s.current_a for s in data.ramp)
    out.set("ramp_current", peak)
    out.set("ramp_voltage", data.ramp[-1].voltage_v)
    _keep(
        out, "ramp_current", _reading(data, "ramp_current", peak, "A", "supply current read-back")
    )
    _keep(out, "ramp_voltage", _reading(data, "ramp_voltage", data.ramp[-1].voltage_v, "V",
                                        "supply voltage read-back"))  # fmt: skip
    out.details["ramp"] = [s.__dict__ for s in data.ramp]
    if data.ramp_stopped:
        out.warnings.append(data.ramp_stopped)


def _level_budget(metric: str, value: float, samples: np.ndarray, trace: Trace):
    """The GUM budget of a level (V) read as the mean of ``samples``
    (``bringup.analysis.uncertainty.level_budget``): their scatter (type A), the code step,
    the channel's DC accuracy and the probe's ratio tolerance from the bench file; None for
    fewer than 2 samples. Scatter is taken as independent samples: ripple averaged over whole
    periods cancels, so this is a fair figure for a mean over many periods."""
    from bringup.analysis.uncertainty import level_budget

    if samples.size < 2:
        return None
    return level_budget(value, noise_rms_v=float(np.std(samples, dtype=np.float64)),
                        samples=int(samples.size), code_step_v=trace.code_step_v,
                        offset_accuracy_v=trace.dc_accuracy_v,
                        probe_ratio_tolerance=trace.ratio_tolerance, quantity=metric)  # fmt: skip


def _level_uncertainty(metric: str, value: float, samples: np.ndarray, trace: Trace,
                       out: AnalysisOutput) -> None:  # fmt: skip
    """``_level_budget`` kept for ``metric`` (``_keep``)."""
    budget = _level_budget(metric, value, samples, trace)
    if budget is not None:
        _keep(out, metric, budget)


def rail_levels(data: AnalysisInput, board: Board, out: AnalysisOutput) -> None:
    """Mean (V) and peak-to-peak ripple (V) of each rail trace (``<net>_level``/``_ripple``).

    The ripple is the peak-to-peak of the rail's waveform with the record's random noise
    taken out (``rails.ripple_estimate``): a raw max - min reads high by some 4 sigma of noise
    on a 10 000-point record; the raw figure stays in ``details["ripple"]``."""
    from bringup.analysis.budgets import ripple_budget
    from bringup.analysis.rails import measure_rail, ripple_estimate

    for net in RAIL_NETS:
        if net not in data.traces:
            continue
        trace = data.traces[net]
        try:
            rail = measure_rail(trace.volts)
        except AnalysisError as exc:
            out.set(f"{net}_level", None, str(exc))
            out.set(f"{net}_ripple", None, str(exc))
            continue
        out.set(f"{net}_level", rail.mean_v)
        _level_uncertainty(f"{net}_level", rail.mean_v, trace.volts, trace, out)
        ripple = ripple_estimate(trace.volts)
        out.set(f"{net}_ripple", ripple.value_v)
        _keep(out, f"{net}_ripple", ripple_budget(ripple, _spec(trace), f"{net}_ripple"))
        out.details.setdefault("ripple", {})[net] = ripple.to_dict()
        out.views.append(
            _view(net, trace, {"mean": rail.mean_v, "min": rail.min_v, "max": rail.max_v})
        )


def meter_reading(data: AnalysisInput, board: Board, out: AnalysisOutput) -> None:
    """The value read on the meter, as the step's reading metric."""
    from bringup.analysis.budgets import reading_budget

    metric = data.reading_metric or ""
    out.set(metric, data.reading, "no reading was given")
    if data.reading is not None:
        # The meter's own accuracy is not in the bench file: the digits typed only (the
        # decision still uses the larger of this and the target's declared uncertainty).
        _keep(out, metric, reading_budget(data.reading, "V", resolution=data.reading_resolution,
                                          instrument="meter reading", quantity=metric))  # fmt: skip


def gate_overdrive(data: AnalysisInput, board: Board, out: AnalysisOutput) -> None:
    """Vgs high state level while on (V), switch node high level (V), the bus (V) and the
    switch node's shortfall from the bus, ``switch_drop`` = bus - switch high (V).

    State levels by the IEEE 181 histogram method (``bringup.analysis.edges.state_levels``):
    a source follower shows a Vgs near its plateau and a switch node a few volts below the bus.
    The bus is the supply's own read-back taken during the acquisition (a supply's voltmeter is
    good to a few tens of millivolts, a scope probe's gain only to about 0.5 %); without it, the
    mean of a bus trace. Supply-lead drop makes the shortfall read larger, never smaller.
    """
    vgs, sw = _trace(data, "vgs"), _trace(data, "switch")
    try:
        v = state_levels(vgs.volts)
        out.set("vgs_on", v.high_v)
        _level_uncertainty("vgs_on", v.high_v, _high_samples(vgs, v.high_v, v.low_v), vgs, out)
        out.views.append(_view("vgs", vgs, {"low": v.low_v, "high": v.high_v}))
    except AnalysisError as exc:
        out.set("vgs_on", None, f"vgs: {exc}")
    if data.supply_v is not None:
        bus_v = data.supply_v
        out.set("bus_level", bus_v)
        _keep(out, "bus_level", _reading(data, "bus_level", bus_v, "V", "supply voltage read-back"))
    elif "bus" in data.traces:
        bus = data.traces["bus"]
        bus_v = float(np.mean(bus.volts, dtype=np.float64))
        out.set("bus_level", bus_v)
        _level_uncertainty("bus_level", bus_v, bus.volts, bus, out)
    else:
        raise AnalysisError("no bus voltage: neither a supply read-back nor a bus trace")
    try:
        s = state_levels(sw.volts)
        out.set("switch_high", s.high_v)
        out.set("switch_drop", bus_v - s.high_v)
        _level_uncertainty("switch_high", s.high_v, _high_samples(sw, s.high_v, s.low_v), sw, out)
        _switch_drop_budget(out)
        out.views.append(_view("switch", sw, {"low": s.low_v, "high": s.high_v, "bus": bus_v}))
    except AnalysisError as exc:
        out.set("switch_high", None, f"switch: {exc}")
        out.set("switch_drop", None, f"switch: {exc}")


def _switch_drop_budget(out: AnalysisOutput) -> None:
    """switch_drop = bus - switch high: the two budgets with sensitivities +1 and -1 (GUM
    §5.1.2; the supply's read-back and the scope channel are separate instruments)."""
    from bringup.analysis.budgets import propagate

    bus, high = out.budgets.get("bus_level"), out.budgets.get("switch_high")
    value = out.metrics.get("switch_drop")
    if bus is None or high is None or value is None:
        return
    _keep(out, "switch_drop", propagate("switch_drop", "V", value,
                                        (("bus", bus, 1.0), ("switch high", high, -1.0))))  # fmt: skip


def _chain_corrected(
    metric: str, measured: float | None, trace: Trace, out: AnalysisOutput
) -> float | None:
    """A 10-90 time with the scope and probe's own rise time taken out (root sum of squares,
    ``bringup.analysis.probing``), or None with the reason when the edge is faster than the
    chain resolves (below 1.4x its rise time: not judged). Unchanged without bandwidths.
    The correction is shown in ``details["chain"]`` and, when it is not small, as a warning."""
    from bringup.analysis.probing import VALID_RATIO, chain_rise_time, correct_rise_time

    if measured is None or not trace.chain_bandwidths_hz:
        return measured
    c = correct_rise_time(measured, chain_rise_time(trace.chain_bandwidths_hz))
    out.details.setdefault("chain", {})[metric] = c.to_dict()
    if not c.resolved:
        out.reasons[metric] = f"{trace.net}: {c.note}"
        return None
    if c.ratio < VALID_RATIO:
        out.warnings.append(f"{metric.replace('_', ' ')}: {c.note}")
    return c.corrected_s


def _edge_time(metric: str, m: EdgeMetrics, rising: bool, trace: Trace, out: AnalysisOutput):
    """The slowest edge's 10-90 time (s) with the chain taken out (``_chain_corrected``), and
    its GUM budget (``bringup.analysis.uncertainty.duration_budget``, the slowest of the
    record's edges): the expanded uncertainty goes to ``out.uncertainties``, the budget to
    ``details["budgets"]``."""
    from bringup.analysis.edges import crossing_noise, noise_rms, slow_reading_fraction
    from bringup.analysis.uncertainty import duration_budget

    value = _chain_corrected(metric, m.rise_time_max_s if rising else m.fall_time_max_s,
                             trace, out)  # fmt: skip
    tr = m.transitions
    if value is None or tr is None:
        return value
    durations = tr.duration_s[(tr.direction > 0) == rising]
    samples = m.rise_time_samples if rising else m.fall_time_samples
    chain = out.details.get("chain", {}).get(metric, {}).get("chain_s", 0.0)
    sigma = noise_rms(trace.volts)
    floor = crossing_noise(trace.volts, trace.dt_s, trace.t0_s, tr, rising, sigma)
    budget = duration_budget(value, durations.tolist(), dt_s=trace.dt_s, statistic="max",
                             interpolation_bias=slow_reading_fraction(samples or 0.0),
                             chain_s=chain, noise_floor_s=floor, quantity=metric)  # fmt: skip
    out.metrics[metric] = value  # set again by the caller, with its reason if None
    _keep(out, metric, budget)
    return value


def edges(data: AnalysisInput, board: Board, out: AnalysisOutput) -> None:
    """IEEE 181 10-90 % times (s) of the switch node and Vgs, judged on the slowest edge of
    the record; the switch node's worst overshoot (% of amplitude) and its lowest voltage (V);
    the Miller plateau of Vgs (V); and the switching loss the switch-node edges imply,
    P_sw = 1/2 * V * I * (t_r + t_f) * f_sw (ST A5972D datasheet eq. 23), with V the switch
    node's high level and I = V / R_load from the design's load resistance. When the bench
    file gives the scope's and probes' bandwidths, the 10-90 times have the chain's own rise
    time taken out, and an edge faster than 1.4x it is not judged (``_chain_corrected``)."""
    sw, vgs = _trace(data, "switch"), _trace(data, "vgs")
    _switch_edges(sw, board, out)
    _vgs_edges(vgs, out)


def _switch_edges(sw: Trace, board: Board, out: AnalysisOutput) -> None:
    """The switch node's part of ``edges``: 10-90 times, overshoot, lowest point, loss."""
    from bringup.analysis.budgets import overshoot_budget, trough_budget
    from bringup.analysis.edges import settled_trough

    try:
        m = measure_edges(sw.volts, sw.dt_s, sw.t0_s)
        out.warnings.extend(f"switch: {w}" for w in m.warnings)
        rise = _edge_time("switch_rise", m, True, sw, out)
        fall = _edge_time("switch_fall", m, False, sw, out)
        out.set(
            "switch_rise", rise, out.reasons.get("switch_rise") or m.reasons.get("rise_time_s", "")
        )
        out.set(
            "switch_fall", fall, out.reasons.get("switch_fall") or m.reasons.get("fall_time_s", "")
        )
        out.set("switch_overshoot", m.overshoot_max_pct, m.reasons.get("overshoot_pct", ""))
        if m.overshoot_max_pct is not None and m.transitions is not None:
            tr = m.transitions
            up = tr.direction > 0
            u_fit = float(tr.aberration_u_pct[up][int(np.argmax(tr.aberration_pct[up]))])
            _keep(out, "switch_overshoot", overshoot_budget(
                m.overshoot_max_pct, u_fit, m.level_uncertainty_pct or 0.0, "switch_overshoot"))  # fmt: skip
        # the lowest point of the settled response, not the lowest noisy sample (which reads
        # some 4 sigma low on a long record)
        trough = settled_trough(sw.volts, m)
        out.set("switch_negative_excursion", trough.value_v)
        _keep(out, "switch_negative_excursion",
              trough_budget(trough, _spec(sw), "switch_negative_excursion"))  # fmt: skip
        out.details["switch_trough"] = {"method": trough.method, "lowest_sample_v": m.min_v}
        _switching_loss(m, sw, rise, fall, board, out)
        out.views.append(
            _view("switch", sw, {**_edge_levels(m), "min": trough.value_v}, _edge_crossings(m))
        )
    except AnalysisError as exc:
        for metric in ("switch_rise", "switch_fall", "switch_overshoot", "switching_loss"):
            out.set(metric, None, f"switch: {exc}")
        out.set("switch_negative_excursion", float(np.min(sw.volts)))


def _switching_loss(
    m: EdgeMetrics, sw: Trace, rise, fall, board: Board, out: AnalysisOutput
) -> None:
    """P_sw = 1/2 V I (t_r + t_f) f_sw with I = V/R_load (ST A5972D datasheet eq. 23), so
    P = V^2 (t_r + t_f) f_sw / (2 R_load): its budget carries the rise and fall times'
    budgets (dP/dt = P/(t_r + t_f)) and the high level's noise and code step (dP/dV = 2P/V);
    R_load and f_sw are the design's values the prediction is made at (constants here)."""
    from bringup.analysis.budgets import propagate

    if rise is None or fall is None:
        out.set("switching_loss", None, "needs both a rising and a falling switch-node edge")
        return
    volts = m.high_level_v
    amps = volts / board.design["load_resistance"]
    loss = switching_loss(volts, amps, rise, fall, board.design["switching_frequency"])
    out.set("switching_loss", loss)
    if "switch_rise" not in out.budgets or "switch_fall" not in out.budgets or volts <= 0:
        return
    high = _level_budget("switch high level", volts, _high_samples(sw, volts, m.low_level_v), sw)
    if high is None:
        return
    _keep(out, "switching_loss", propagate("switching_loss", "W", loss, (
        ("rise time", out.budgets["switch_rise"], loss / (rise + fall)),
        ("fall time", out.budgets["switch_fall"], loss / (rise + fall)),
        ("high level", high, 2.0 * loss / volts),
    )))  # fmt: skip


def _high_samples(trace: Trace, high_v: float, low_v: float) -> np.ndarray:
    """The high state's samples: within a tenth of the amplitude of its level."""
    return trace.volts[np.abs(trace.volts - high_v) < 0.1 * abs(high_v - low_v)]


def _vgs_edges(vgs: Trace, out: AnalysisOutput) -> None:
    """Vgs's part of ``edges``: 10-90 times and the Miller plateau, with their budgets."""
    from bringup.analysis.budgets import plateau_budget
    from bringup.analysis.plateau import find_miller_plateau

    try:
        g = measure_edges(vgs.volts, vgs.dt_s, vgs.t0_s)
        out.warnings.extend(f"vgs: {w}" for w in g.warnings)
        g_rise = _edge_time("vgs_rise", g, True, vgs, out)
        g_fall = _edge_time("vgs_fall", g, False, vgs, out)
        out.set("vgs_rise", g_rise, out.reasons.get("vgs_rise") or g.reasons.get("rise_time_s", ""))
        out.set("vgs_fall", g_fall, out.reasons.get("vgs_fall") or g.reasons.get("fall_time_s", ""))
        levels = _edge_levels(g)
        try:
            plateau = find_miller_plateau(vgs.volts, vgs.dt_s, vgs.t0_s)
        except AnalysisError as exc:
            plateau = None
            out.reasons["miller_plateau"] = str(exc)
        if plateau is not None:
            out.set("miller_plateau", plateau.voltage_v)
            _keep(out, "miller_plateau", plateau_budget(plateau, _spec(vgs), "miller_plateau"))
            levels["plateau"] = plateau.voltage_v
        else:
            out.set("miller_plateau", None, out.reasons.get("miller_plateau", "no plateau found"))
        out.views.append(_view("vgs", vgs, levels, _edge_crossings(g)))
    except AnalysisError as exc:
        for metric in ("vgs_rise", "vgs_fall", "miller_plateau"):
            out.set(metric, None, f"vgs: {exc}")


def _supported_on_time(d, floor: float, out: AnalysisOutput) -> None:
    """The longest on-time (s) the droop line ``d`` supports before Vgs reaches ``floor`` (V),
    with its special cases (below the floor at once, no measurable droop, far extrapolation)."""
    if d.t_on_max_s is not None:
        out.set("on_time_supported", d.t_on_max_s)
    elif d.start_v <= floor:
        # Vgs is below the floor as soon as the edge settles: no on-time is supported.
        out.set("on_time_supported", 0.0)
        out.warnings.append(
            f"Vgs starts at {d.start_v:.3g} V, already below the {floor:.3g} V floor"
        )
    elif d.droop_rate_v_per_s <= 0 and d.end_v > floor:
        # The top does not sag at all: its line never reaches the floor. Reported as a
        # large finite value so that the target can judge it.
        out.set("on_time_supported", 1.0)
        out.warnings.append("Vgs does not droop measurably: supported on-time shown as 1 s")
    else:
        out.set("on_time_supported", None, d.reasons.get("t_on_max_s", "no estimate"))
    if d.extrapolation is not None and d.extrapolation > 10:
        out.details["extrapolated"] = ["on_time_supported"]
        out.warnings.append(
            f"the supported on-time extrapolates the droop line {d.extrapolation:.0f}x beyond "
            "the measured on-time"
        )


def _bootstrap_droop(vbs: Trace, uvlo: float, on_window, out: AnalysisOutput) -> None:
    """V_BS at the end of the on-time found on V_GS (V) and its margin over the driver's
    falling UVLO ``uvlo`` (V). The margin's budget is V_BS's: the UVLO is the datasheet's
    figure the margin is measured against, a constant of the limit."""
    from bringup.analysis.budgets import droop_budgets, renamed
    from bringup.analysis.droop import measure_droop

    if on_window is None:
        why = "vbs: needs the on-time found on vgs, which was not measured"
        out.set("vbs_end", None, why)
        out.set("uvlo_margin", None, why)
        return
    try:
        b = measure_droop(vbs.volts, vbs.dt_s, uvlo, vbs.t0_s, on_window_s=on_window)
        out.set("vbs_end", b.end_v)
        out.set("uvlo_margin", b.end_v - uvlo)
        # the instants come from Vgs: their uncertainty carries over
        vgs_droop = out.details.get("vgs_droop") or {}
        on_u = (float(vgs_droop.get("on_start_uncertainty_s") or 0.0),
                float(vgs_droop.get("on_end_uncertainty_s") or 0.0))  # fmt: skip
        end = droop_budgets(b, vbs.dt_s, _spec(vbs), {"end": "vbs_end"}, on_u)["end"]
        _keep(out, "vbs_end", end)
        _keep(out, "uvlo_margin", renamed(end, "uvlo_margin", b.end_v - uvlo))
        out.spans["vbs_end"] = out.spans["uvlo_margin"] = ((b.top_start_s, b.top_end_s),)
        out.views.append(_view("vbs", vbs, {"start": b.start_v, "end": b.end_v, "uvlo": uvlo},
                               window=(b.top_start_s, b.top_end_s)))  # fmt: skip
        out.details["vbs_droop"] = b.to_dict()
        out.warnings.extend(f"vbs: {w}" for w in b.warnings)
    except AnalysisError as exc:
        out.set("vbs_end", None, f"vbs: {exc}")
        out.set("uvlo_margin", None, f"vbs: {exc}")


def droop(data: AnalysisInput, board: Board, out: AnalysisOutput) -> None:
    """Droop of Vgs and of the bootstrap voltage over the on-time (V), by a least-squares line
    over the settled top (``bringup.analysis.droop``); Vgs at the start and end of the on-time;
    the longest on-time at which the line reaches the Vgs floor (the ``vgs_end`` target's min,
    else the R_DS(on) rating voltage); the bootstrap voltage at the end of the on-time minus
    the driver's falling UVLO (V).

    The standard checklist zooms in on the flat top (offset near the on level, a range of half
    the gate-drive voltage: one 8-bit code is 23 mV instead of 62.5 mV on the demo board, and
    the line through some 47 000 noisy samples resolves a millivolt): the off level and the
    bottom of the edges then lie off the screen, and only the fitted top's samples decide whether the droop metrics stand
    (``spans``). The on-time runs between the crossings of the mid level of what the screen
    shows; on a zoomed record that level sits near the top, so each crossing is off the 50 %
    instant of the full swing by less than that edge's duration (about 0.15 us of a 38 us
    on-time on the demo board).

    V_BS is fitted over the on-time found on V_GS: alone, its longest "pulse" is the recharge
    bump in the off-time, not the sagging on-time (``measure_droop``'s ``on_window_s``)."""
    from bringup.analysis.droop import measure_droop

    vgs, vbs = _trace(data, "vgs"), _trace(data, "vbs")
    target = board.targets.get("vgs_end")
    floor = target.limit.min if target is not None and target.limit.min is not None else None
    if floor is None:
        floor = board.design["mosfet_rds_on_vgs"]
    on_window = None
    try:
        d = measure_droop(vgs.volts, vgs.dt_s, floor, vgs.t0_s)
        on_window = (d.on_start_s, d.on_end_s)
        top = ((d.top_start_s, d.top_end_s),)
        out.set("vgs_droop", d.droop_v)
        out.set("vgs_start", d.start_v)
        out.set("vgs_end", d.end_v)
        out.set("on_time", d.on_time_s)
        for metric in ("vgs_droop", "vgs_start", "vgs_end", "on_time_supported"):
            out.spans[metric] = top
        # The on-time uses the samples that bracket its two crossings (interpolated between).
        out.spans["on_time"] = tuple((t - vgs.dt_s, t + vgs.dt_s) for t in on_window)
        _supported_on_time(d, floor, out)
        _droop_budgets(d, vgs, out)
        out.views.append(_view("vgs", vgs, {"start": d.start_v, "end": d.end_v, "floor": floor},
                               window=(d.top_start_s, d.top_end_s)))  # fmt: skip
        out.details["vgs_droop"] = d.to_dict()
        out.warnings.extend(f"vgs: {w}" for w in d.warnings)
    except AnalysisError as exc:
        for metric in ("vgs_droop", "vgs_start", "vgs_end", "on_time", "on_time_supported"):
            out.set(metric, None, f"vgs: {exc}")
    _bootstrap_droop(vbs, board.design["driver_uvlo_falling"], on_window, out)


def _droop_budgets(d, vgs: Trace, out: AnalysisOutput) -> None:
    """The droop metrics' GUM budgets (``bringup.analysis.budgets.droop_budgets``: the line
    fit's covariance, the on-pulse's instants, the channel's accuracy)."""
    from bringup.analysis.budgets import droop_budgets

    names = {"start": "vgs_start", "end": "vgs_end", "droop": "vgs_droop", "on_time": "on_time",
             "supported": "on_time_supported"}  # fmt: skip
    on_u = (d.on_start_uncertainty_s, d.on_end_uncertainty_s)
    off = None
    if vgs.screen_v is not None:
        bottom = vgs.screen_v[0] - vgs.screen_v[1] / 2
        if float(np.min(vgs.volts)) <= bottom + vgs.screen_v[1] / 100:
            # the off level lies below the zoomed screen: Vgs is off at 0 V (gate pulled to
            # its source), the level the full swing's 50 % is taken from
            off = 0.0
    for key, budget in droop_budgets(d, vgs.dt_s, _spec(vgs), names, on_u, off).items():
        _keep(out, names[key], budget)


def soak(data: AnalysisInput, board: Board, out: AnalysisOutput) -> None:
    """Final heatsink temperature (degC) predicted from the soak by one or two time constants
    (``bringup.analysis.soak.fit_soak``), its slowest time constant (s) and the last reading.
    An "undecided" fit (the log cannot tell where the soak ends) gives no final value: its
    reason says to keep soaking."""
    from bringup.analysis.soak import fit_soak

    t, temp = np.asarray(data.soak_times_s), np.asarray(data.soak_temps_c)
    if temp.size:
        out.set("heatsink_last", float(temp[-1]))
        _keep(out, "heatsink_last", _last_reading_budget(temp))
    else:
        out.set("heatsink_last", None, "no temperature was read")
    try:
        fit = fit_soak(t, temp)
    except AnalysisError as exc:
        out.set("heatsink_final", None, str(exc))
        out.set("soak_time_constant", None, str(exc))
        return
    out.set("soak_time_constant", fit.tau_s)
    from bringup.analysis.budgets import time_constant_budget

    _keep(out, "soak_time_constant",
          time_constant_budget(fit.tau_s, fit.tau_uncertainty_s, "soak_time_constant"))  # fmt: skip
    out.warnings.extend(fit.warnings)
    out.details["soak_fit"] = fit.to_dict()
    if not fit.decided:
        # The log cannot tell where the soak ends: no value to judge (it fails as not
        # measured, with the reason and how much longer to soak), never a confident guess.
        out.set("heatsink_final", None, fit.undecided_reason)
        return
    out.set("heatsink_final", fit.final_c)
    # GUM budget: the fit (noise and model), the thermocouple's class 2 tolerance (the bench
    # file does not name a class: the wider, usual one) and the reader's resolution.
    from bringup.analysis.uncertainty import temperature_budget

    budget = temperature_budget(fit.final_c, fit.final_c_uncertainty, resolution_c=_resolution(temp),
                                quantity="heatsink_final")  # fmt: skip
    _keep(out, "heatsink_final", budget)
    target = board.targets.get("heatsink_final")
    if target is not None and fit.final_c_uncertainty > target.uncertainty:
        out.warnings.append(
            f"the fit's uncertainty ({fit.final_c_uncertainty:.2g} K, k = 2) is wider than the "
            f"target's guard band ({target.uncertainty:.2g} K): soak longer for a firmer verdict"
        )


def _resolution(temp: np.ndarray) -> float:
    """The thermometer's resolution (K): the smallest step between successive readings."""
    steps = np.abs(np.diff(temp))
    return float(steps[steps > 0].min()) if np.any(steps > 0) else 0.0


def _last_reading_budget(temp: np.ndarray):
    """The last temperature read (degC): the thermocouple's class 2 tolerance at it, the
    reader's resolution, and the log's noise (second differences of the readings, type A:
    one reading; ``edges.noise_rms``)."""
    from bringup.analysis.edges import noise_rms
    from bringup.analysis.uncertainty import Component, temperature_budget

    last = float(temp[-1])
    b = temperature_budget(last, 0.0, resolution_c=_resolution(temp), quantity="heatsink_last")
    noise = noise_rms(temp) if temp.size >= 3 else 0.0
    parts = (*b.components, Component(f"the log's noise {noise:.3g} K rms, one reading",
                                      "type A", noise))  # fmt: skip
    return type(b)(b.quantity, b.unit, b.value, tuple(c for c in parts if c.u > 0), b.k)


ANALYSE: dict[str, Callable[[AnalysisInput, Board, AnalysisOutput], None]] = {
    "first-power": first_power,
    "rail-levels": rail_levels,
    "meter-reading": meter_reading,
    "gate-overdrive": gate_overdrive,
    "edges": edges,
    "droop": droop,
    "soak": soak,
}
# The half-bridge checklist's analyses (``half_bridge_analyses``), handed this module's helpers
# (it cannot import them: this module imports it).
_KIT = SimpleNamespace(trace=_trace, view=_view, level_uncertainty=_level_uncertainty)
ANALYSE.update({name: partial(fn, kit=_KIT) for name, fn in HALF_BRIDGE_ANALYSE.items()})


# Metrics that come from a net other than the one their name starts with.
_METRIC_NET = {
    "uvlo_margin": "vbs",
    "on_time_supported": "vgs",
    "on_time": "vgs",
    "miller_plateau": "vgs",
    "switching_loss": "switch",
    **HALF_BRIDGE_METRIC_NETS,
}


def metric_net(metric: str) -> str | None:
    """The net a metric is measured on (None for metrics not taken from a trace)."""
    if metric in _METRIC_NET:
        return _METRIC_NET[metric]
    head = metric.split("_", 1)[0]
    return head if head in ("vgs", "vbs", "switch", "bus", "vdrv", "logic") else None


def analyse(name: str, data: AnalysisInput, board: Board) -> AnalysisOutput:
    """Run analysis ``name`` of the catalogue on ``data``; never raises ``AnalysisError``
    (what cannot be measured is a metric of None with its reason).

    A metric taken from a clipped trace is withdrawn (None, so it fails its target): the
    signal went beyond what the scope saw, and a clipped peak or level reads inside a limit it
    may really be beyond. A metric that uses only part of its trace (``spans``, e.g. the fitted
    top of a zoomed record) is withdrawn only when those samples clip."""
    out = AnalysisOutput()
    try:
        ANALYSE[name](data, board, out)
    except AnalysisError as exc:
        out.warnings.append(str(exc))
    withdrawn: dict[str, str] = {}
    for metric in list(out.metrics):
        net = metric_net(metric)
        if net is None or net not in data.clipped or net not in data.traces:
            continue
        trace = data.traces[net]
        spans = out.spans.get(metric)
        if spans and trace.screen_v is not None:
            edges = [clipping(trace.span(a, b), *trace.screen_v) for a, b in spans]
            edge = next((e for e in edges if e is not None), None)
            if edge is None:
                continue  # its own samples are all on the screen
            why = data.clipped[net].split(" clipped", 1)[0]
            why = f"{why} clipped at the {edge} of its range over the samples {metric} uses"
        else:
            why = data.clipped[net]
        out.set(metric, None, why)
        withdrawn[net] = data.clipped[net]
    for net, why in data.clipped.items():
        if net in withdrawn or not any(metric_net(m) == net for m in out.metrics):
            out.warnings.append(why)
        else:
            # Off the screen only where no metric looks (a zoomed record's edges): noted, no
            # warning.
            where = why.split(" of its range", 1)[0].replace(" clipped at the ", " off the ")
            out.details.setdefault("off_screen", {})[net] = (
                f"{where} of the screen, outside the samples its metrics use"
            )
    return out
