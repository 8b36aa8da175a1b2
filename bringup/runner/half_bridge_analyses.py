"""The half-bridge checklist's analyses: acquired traces in, metrics and plot views out.

Each function is a thin wiring of a measurement of ``bringup.analysis`` (dead time, switch-node
stress, bootstrap refresh, switching energy) to the step's traces, the board's design values
and the bench file's probe deskew, in the shape of ``bringup.runner.analyses`` (registered in
its ``ANALYSE``, which hands each one its helpers as ``kit``: ``trace(data, net)``,
``view(name, trace, levels)``, ``level_uncertainty(metric, value, samples, trace, out)``). A value the measurement cannot give is None with its reason: it fails its
target, never passes.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from bringup.boards.board_file import Board
from bringup.errors import AnalysisError

__all__ = ["HALF_BRIDGE_ANALYSE", "HALF_BRIDGE_METRIC_NETS"]

#: Metrics that come from a net other than the one their name starts with.
HALF_BRIDGE_METRIC_NETS = {
    "vgs_low_on": "vgs_low",
    "vgs_low_off": "vgs_low",
    "dead_time_high_to_low": "vgs",
    "dead_time_low_to_high": "vgs",
    "dead_time_high_to_low_median": "vgs",
    "dead_time_low_to_high_median": "vgs",
    "gate_overlap": "vgs",
    "shoot_through_current": "i_switch",
    "loop_inductance": "switch",
    "ring_frequency": "switch",
    "ring_damping": "switch",
    "switching_energy_on": "switch",
    "switching_energy_off": "switch",
    "switching_power": "switch",
    "refresh_on_time_min": "vgs_low",
    "refresh_on_time": "vgs_low",
}


def low_side_gate(data, board: Board, out, *, kit) -> None:
    """The low side's Vgs high and low state levels (V) while switching, and the switch
    node's low state level (V): IEEE 181 histogram state levels
    (``bringup.analysis.edges.state_levels``). The low side's source is ground, so a
    single-ended probe reads its Vgs; a switch node low at the body diode's drop instead of a
    few tens of millivolts means the low side does not conduct."""
    from bringup.analysis.edges import state_levels

    vgs, sw = kit.trace(data, "vgs_low"), kit.trace(data, "switch")
    try:
        v = state_levels(vgs.volts)
        out.set("vgs_low_on", v.high_v)
        out.set("vgs_low_off", v.low_v)
        top = vgs.volts[np.abs(vgs.volts - v.high_v) < 0.1 * abs(v.high_v - v.low_v)]
        kit.level_uncertainty("vgs_low_on", v.high_v, top, vgs, out)
        out.views.append(kit.view("vgs_low", vgs, {"low": v.low_v, "high": v.high_v}))
    except AnalysisError as exc:
        out.set("vgs_low_on", None, f"vgs_low: {exc}")
        out.set("vgs_low_off", None, f"vgs_low: {exc}")
    try:
        s = state_levels(sw.volts)
        out.set("switch_low", s.low_v)
        out.views.append(kit.view("switch", sw, {"low": s.low_v, "high": s.high_v}))
    except AnalysisError as exc:
        out.set("switch_low", None, f"switch: {exc}")


def _body_diode_loss(board: Board, hl_s: float | None, lh_s: float | None) -> float | None:
    """P = V_F I_load (t_dead,1 + t_dead,2) f_sw (W): the body diode carries the load current
    through both dead times of each period (REFERENCES §12 [read]); None without both dead
    times or without the board's diode drop and load current."""
    d = board.design
    if hl_s is None or lh_s is None or "body_diode_drop" not in d or "load_current" not in d:
        return None
    dead = max(hl_s, 0.0) + max(lh_s, 0.0)
    return d["body_diode_drop"] * d["load_current"] * dead * d["switching_frequency"]


def dead_time(data, board: Board, out, *, kit) -> None:
    """Dead time at both commutations, threshold to threshold at the MOSFET's threshold
    voltage, over every commutation of the record (``bringup.analysis.dead_time``): the
    shortest of each is judged (negative = the gates overlapped), the medians reported; the
    longest overlap (shoot-through, s) and its current spike (A) when the current was recorded;
    the body diode's loss over the two median dead times (``_body_diode_loss``)."""
    from bringup.analysis.dead_time import measure_dead_time

    hi, lo = kit.trace(data, "vgs"), kit.trace(data, "vgs_low")
    current = data.traces.get("i_switch")
    threshold = board.design["mosfet_threshold"]
    try:
        r = measure_dead_time(hi.volts, lo.volts, hi.dt_s, hi.t0_s, threshold_v=threshold,
                              current=None if current is None else current.volts)  # fmt: skip
    except AnalysisError as exc:
        for metric in ("dead_time_high_to_low", "dead_time_low_to_high", "gate_overlap"):
            out.set(metric, None, str(exc))
        return
    for name, comm in (("high_to_low", r.high_to_low), ("low_to_high", r.low_to_high)):
        metric = f"dead_time_{name}"
        out.set(metric, comm.min_s, comm.reasons.get("min_s", "no commutation in the record"))
        if comm.min_uncertainty_s is not None:
            out.uncertainties[metric] = comm.min_uncertainty_s
        out.set(f"{metric}_median", comm.median_s, comm.reasons.get("median_s", "no commutation"))
    out.set("gate_overlap", r.worst_overlap_s)
    if r.worst_spike_a is not None:
        out.set("shoot_through_current", r.worst_spike_a)
    else:
        why = "no overlap of the gates" if not r.overlaps else "no current trace recorded"
        out.set("shoot_through_current", None, why)
    loss = _body_diode_loss(board, r.high_to_low.median_s, r.low_to_high.median_s)
    out.set("body_diode_loss", loss, "needs both dead times and the board's diode and load")
    out.details["dead_time"] = r.to_dict()
    out.warnings.extend(r.warnings)
    levels = {"threshold": threshold}
    out.views.append(kit.view("vgs", hi, levels))
    out.views.append(kit.view("vgs_low", lo, levels))
    if current is not None:
        out.views.append(kit.view("i_switch", current, {}))


def _ring_edge(r):
    """The edge set whose ring was fitted with a loop inductance (falling first: the turn-off
    rings hardest), or None."""
    for edge in (r.falling, r.rising):
        if edge.loop_inductance_h is not None:
            return edge
    return None


def switch_node(data, board: Board, out, *, kit) -> None:
    """The switch node's lowest and highest voltage (V) with their GUM uncertainty, the margin
    to the driver's rated negative swing (``driver_negative_swing`` of a half-bridge board),
    the ring's natural frequency (Hz) and damping ratio, the loop inductance
    L = 1/((2 pi f_n)^2 C) (H) with C the board's switch-node capacitance, and the steepest
    dv/dt of each edge direction (V/s): ``bringup.analysis.switch_node_stress``."""
    from bringup.analysis.switch_node_stress import measure_switch_node

    sw = kit.trace(data, "switch")
    d = board.design
    rating = -d["driver_negative_swing"] if "driver_negative_swing" in d else None
    bus = data.supply_v if data.supply_v is not None else d["bus_voltage"]
    try:
        r = measure_switch_node(sw.volts, sw.dt_s, sw.t0_s, bus_v=bus,
                                capacitance_f=d["switch_node_capacitance"],
                                negative_rating_v=rating)  # fmt: skip
    except AnalysisError as exc:
        for metric in ("switch_min", "switch_max", "loop_inductance", "ring_frequency"):
            out.set(metric, None, f"switch: {exc}")
        return
    out.set("switch_min", r.min_v)
    out.uncertainties["switch_min"] = r.min_uncertainty_v
    out.set("switch_max", r.max_v)
    out.uncertainties["switch_max"] = r.max_uncertainty_v
    out.set("switch_negative_margin", r.negative_margin_v, "no rated negative swing given")
    edge = _ring_edge(r)
    why = "; ".join(f"{e.direction}: {e.reasons.get('loop_inductance_h', 'no ring fitted')}"
                    for e in (r.falling, r.rising))  # fmt: skip
    if edge is None:
        for metric in ("loop_inductance", "ring_frequency", "ring_damping"):
            out.set(metric, None, why)
    else:
        out.set("loop_inductance", edge.loop_inductance_h)
        if edge.loop_inductance_uncertainty_h is not None:
            out.uncertainties["loop_inductance"] = edge.loop_inductance_uncertainty_h
        out.set("ring_frequency", edge.ring_natural_frequency_hz)
        out.set("ring_damping", edge.ring_zeta)
    out.set("switch_dv_dt_rise", r.rising.dv_dt_max_v_per_s, "no rising edge")
    fall = r.falling.dv_dt_max_v_per_s
    out.set("switch_dv_dt_fall", None if fall is None else abs(fall), "no falling edge")
    out.details["switch_node"] = r.to_dict()
    out.warnings.extend(f"switch: {w}" for w in r.warnings)
    levels = {"low": r.low_level_v, "high": r.high_level_v, "min": r.min_v, "max": r.max_v}
    if rating is not None:
        levels["rating"] = rating
    out.views.append(kit.view("switch", sw, levels))


def _on_intervals(trace, threshold_v: float, what: str):
    """When ``trace`` is above ``threshold_v`` (V): ``dead_time.gate_on_intervals``."""
    from bringup.analysis.dead_time import gate_on_intervals

    return gate_on_intervals(trace.volts, trace.dt_s, trace.t0_s, threshold_v=threshold_v,
                             what=what)  # fmt: skip


def bootstrap_refresh(data, board: Board, out, *, kit) -> None:
    """The bootstrap voltage over many periods at the longest high-side on-time
    (``bringup.analysis.bootstrap_refresh``): its lowest level between refreshes and the margin
    to the driver's falling UVLO (V), the lowest level a refresh reaches (V), and the shortest
    low-side on-time that still refreshes it against the one the record holds (s). The refresh
    windows are the low side's on-intervals (its gate above threshold); the high side's are
    the switch node above half the bus. The recharge time constant is fitted from the data, or
    taken from the design ((R_boot + R_DS(on)) C_boot) when the recovery is too straight."""
    from bringup.analysis.bootstrap_refresh import measure_refresh

    vbs, low = kit.trace(data, "vbs"), kit.trace(data, "vgs_low")
    d = board.design
    uvlo = d["driver_uvlo_falling"]
    metrics = ("vbs_uvlo_margin", "vbs_min", "vbs_refreshed", "refresh_on_time_min",
               "refresh_on_time")  # fmt: skip
    try:
        low_on = _on_intervals(low, d["mosfet_threshold"], "low-side gate")
        high_on = None
        if "switch" in data.traces:
            bus = data.supply_v if data.supply_v is not None else d["bus_voltage"]
            high_on = _on_intervals(data.traces["switch"], 0.5 * bus, "switch node")
        tau = (d.get("bootstrap_resistor", 0.0) + d["mosfet_rds_on"]) * d["bootstrap_capacitance"]
        r = measure_refresh(vbs.volts, vbs.dt_s, vbs.t0_s, low_on=low_on, uvlo_v=uvlo,
                            high_on=high_on, tau_s=tau if tau > 0 else None,
                            full_v=d["gate_drive_voltage"] - d["bootstrap_diode_drop"])  # fmt: skip
    except AnalysisError as exc:
        for metric in metrics:
            out.set(metric, None, str(exc))
        return
    reason = r.reasons.get
    out.set("vbs_uvlo_margin", r.uvlo_margin_v, reason("uvlo_margin_v", "no bottom found"))
    if r.lowest_uncertainty_v is not None:
        out.uncertainties["vbs_uvlo_margin"] = r.lowest_uncertainty_v
    out.set("vbs_min", r.lowest_v, reason("lowest_v", "no bottom found"))
    out.set("vbs_refreshed", r.lowest_end_v, reason("lowest_end_v", "no refresh found"))
    out.set("refresh_on_time_min", r.refresh_on_time_min_s,
            reason("refresh_on_time_min_s", "no recharge time constant"))  # fmt: skip
    out.set("refresh_on_time", r.low_on_time_min_s, reason("low_on_time_min_s", "no refresh found"))
    out.details["bootstrap_refresh"] = r.to_dict() if hasattr(r, "to_dict") else {}
    out.warnings.extend(f"vbs: {w}" for w in r.warnings)
    out.views.append(kit.view("vbs", vbs, {"uvlo": uvlo, **({"min": r.lowest_v} if r.lowest_v
                                                          is not None else {})}))  # fmt: skip
    out.views.append(kit.view("vgs_low", low, {"threshold": d["mosfet_threshold"]}))


def switching_energy(data, board: Board, out, *, kit) -> None:
    """Turn-on and turn-off energy of the high side (J), E = integral of v_DS i_D dt over each
    transition after the current is deskewed by the bench file's ``deskew_s`` of its channel
    (``bringup.analysis.switching_energy``); v_DS = the bus (the supply's read-back) minus the
    switch node. The medians over the record's edges are judged, and (E_on + E_off) f_sw (W)
    beside the predicted 1/2 V I (t_r + t_f) f_sw (``predictions.switching_power``)."""
    from bringup.analysis.switching_energy import measure_switching_energy
    from bringup.runner.predictions import switching_power

    sw, amps = kit.trace(data, "switch"), kit.trace(data, "i_switch")
    d = board.design
    bus = data.supply_v if data.supply_v is not None else d["bus_voltage"]
    out.set("switching_power_predicted", switching_power(d))
    metrics = ("switching_energy_on", "switching_energy_off", "switching_power")
    if sw.volts.size != amps.volts.size or abs(sw.dt_s - amps.dt_s) > 1e-6 * sw.dt_s:
        for metric in metrics:
            out.set(metric, None, "the switch node and the current were not sampled together")
        return
    try:
        e = measure_switching_energy(bus - sw.volts, amps.volts, sw.dt_s, sw.t0_s,
                                     skew_s=amps.deskew_s - sw.deskew_s,
                                     frequency_hz=d["switching_frequency"])  # fmt: skip
    except AnalysisError as exc:
        for metric in metrics:
            out.set(metric, None, str(exc))
        return
    for metric, value, u, key in (
        ("switching_energy_on", e.e_on_median_j, e.e_on_uncertainty_j, "e_on_median_j"),
        ("switching_energy_off", e.e_off_median_j, e.e_off_uncertainty_j, "e_off_median_j"),
        ("switching_power", e.power_w, e.power_uncertainty_w, "power_w"),
    ):
        out.set(metric, value, e.reasons.get(key, "not measured"))
        if u is not None:
            out.uncertainties[metric] = u
    out.details["switching_energy"] = e.to_dict() if hasattr(e, "to_dict") else {}
    if not (amps.deskew_s or sw.deskew_s):
        out.warnings.append(
            "no deskew in the bench file for the current probe's channel: a few ns of probe "
            "delay move a fast edge's energy by tens of percent (measure it on a resistive step)"
        )
    out.views.append(kit.view("switch", sw, {"bus": bus}))
    out.views.append(kit.view("i_switch", amps, {}))


HALF_BRIDGE_ANALYSE: dict[str, Callable] = {
    "bootstrap-refresh": bootstrap_refresh,
    "switching-energy": switching_energy,
    "low-side-gate": low_side_gate,
    "dead-time": dead_time,
    "switch-node": switch_node,
}
