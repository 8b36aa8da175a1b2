"""What the design values predict for each metric, shown beside the measured value.

Each prediction uses the measurement core's design equations (``bringup.analysis.design``) on
the board's ``[design]`` values; a metric with no model gets no prediction. A measured value far
from its prediction is a finding in itself (a wrong part fitted, a probe on the wrong net).
"""

from __future__ import annotations

import math

from bringup.analysis import design as eq
from bringup.boards.board_file import Board
from bringup.errors import InputError

__all__ = ["predict", "disagreement", "DISAGREE_FRACTION"]

#: A measured value this far (relative) from its prediction, and beyond three guard bands, is
#: flagged. The models are first-order, so anything tighter would flag healthy boards.
DISAGREE_FRACTION = 0.3


def _load_current(d: dict[str, float]) -> float:
    """Load current (A): a half-bridge board's electronic load (``load_current``), else the
    resistive load's at the bus voltage, switch drop neglected."""
    if "load_current" in d:
        return d["load_current"]
    return d["bus_voltage"] / d["load_resistance"]


def switching_power(d: dict[str, float]) -> float:
    """Predicted switching loss (W) of the switch, 1/2 V I (t_r + t_f) f_sw [read: ST A5972D
    eq. 23] with the drain-source transitions Q_gd / I_gate of the gate timing (TI SLUA618)."""
    t = _timing(d)
    return eq.switching_loss(d["bus_voltage"], _load_current(d), t.t_vds_on_s, t.t_vds_off_s,
                             d["switching_frequency"])  # fmt: skip


def _bootstrap_start(d: dict[str, float]) -> float:
    """Bootstrap voltage (V) just after turn-on: the capacitor charged to V_DRV - V_F, less
    the gate charge it hands to the MOSFET (Q_G / C_BOOT)."""
    return (
        d["gate_drive_voltage"]
        - d["bootstrap_diode_drop"]
        - eq.bootstrap_droop(
            d["mosfet_gate_charge"] + d["level_shift_charge"], d["bootstrap_capacitance"]
        )
    )


def _drain_current(d: dict[str, float], vgs: float) -> float:
    """Current (A) the floating side draws from the bootstrap capacitor while on: quiescent,
    diode and capacitor leakage and the gate-source pull-down at ``vgs``."""
    return (
        d["floating_quiescent_current"]
        + d["bootstrap_diode_leakage"]
        + d["bootstrap_cap_leakage"]
        + vgs / d["gate_source_pulldown"]
    )


def _timing(d: dict[str, float]) -> eq.GateTiming:
    return eq.gate_timing(
        d["gate_drive_voltage"] - d["bootstrap_diode_drop"],
        d["mosfet_plateau"],
        d["driver_source_resistance"],
        d["driver_sink_resistance"],
        d["gate_resistor"],
        d["gate_resistance_internal"],
        d["mosfet_qgd"],
    )


def _vgs_rise(d: dict[str, float]) -> float:
    """Vgs 10-90 % rise time (s) from three first-order charging intervals of the gate
    (TI SLUA618's turn-on sequence): C_iss charged through the turn-on resistance R_on up to
    the plateau, the plateau held while Q_gd flows (``gate_timing``), then the charge left above
    the plateau, C_2 = (Q_G - Q_GS - Q_GD) / (V_test - V_pl), charged through R_on again. The
    gate charge's test voltage is taken as the R_DS(on) rating voltage (datasheets commonly
    rate both at 10 V; common practice, no source)."""
    v_drive = d["gate_drive_voltage"] - d["bootstrap_diode_drop"]
    v_pl, v_top = d["mosfet_plateau"], _bootstrap_start(d)
    r_on = d["driver_source_resistance"] + d["gate_resistor"] + d["gate_resistance_internal"]
    tau1 = r_on * d["mosfet_ciss"]
    q_above = d["mosfet_gate_charge"] - d["mosfet_qgs"] - d["mosfet_qgd"]
    tau2 = r_on * q_above / (d["mosfet_rds_on_vgs"] - v_pl)
    t10 = -tau1 * math.log(1.0 - 0.1 * v_top / v_drive)
    t_plateau_start = -tau1 * math.log(1.0 - v_pl / v_drive)
    t90 = (
        t_plateau_start
        + _timing(d).t_vds_on_s
        + tau2 * math.log((v_drive - v_pl) / (v_drive - 0.9 * v_top))
    )
    return t90 - t10


def predict(analysis: str, board: Board) -> dict[str, float]:
    """Predicted value (in the metric's unit) of each metric of ``analysis`` that has a model."""
    d = board.design
    out: dict[str, float] = {}
    try:
        if analysis == "rail-levels" or analysis == "meter-reading":
            out.update(bus_level=d["bus_voltage"], vdrv_level=d["gate_drive_voltage"],
                       logic_level=d["logic_voltage"])  # fmt: skip
        elif analysis == "first-power":
            out["ramp_voltage"] = d["bus_voltage"]
        elif analysis == "gate-overdrive":
            drop = _load_current(d) * d["mosfet_rds_on"]
            out.update(vgs_on=_bootstrap_start(d), switch_drop=drop, bus_level=d["bus_voltage"],
                       switch_high=d["bus_voltage"] - drop)  # fmt: skip
        elif analysis == "edges":
            t = _timing(d)
            # The drain-source swing is a ramp of duration Q_gd / I (SLUA618): its 10-90 %
            # part is 80 % of it.
            out["switch_rise"] = 0.8 * t.t_vds_on_s
            out["switch_fall"] = 0.8 * t.t_vds_off_s
            out["miller_plateau"] = d["mosfet_plateau"]
            out["vgs_rise"] = _vgs_rise(d)
            out["switching_loss"] = eq.switching_loss(
                d["bus_voltage"], _load_current(d), t.t_vds_on_s, t.t_vds_off_s,
                d["switching_frequency"],
            )  # fmt: skip
        elif analysis == "droop":
            start = _bootstrap_start(d)
            current = _drain_current(d, start)
            t_on = eq.on_time_at_duty(d["duty_max"], d["switching_frequency"])
            droop = eq.bootstrap_droop(current * t_on, d["bootstrap_capacitance"])
            floor = board.targets["vgs_end"].limit.min if "vgs_end" in board.targets else None
            floor = floor if floor is not None else d["mosfet_rds_on_vgs"]
            out.update(vgs_droop=droop, vgs_start=start, vgs_end=start - droop, on_time=t_on,
                       vbs_end=start - droop,
                       uvlo_margin=start - droop - d["driver_uvlo_falling"])  # fmt: skip
            supported = eq.bootstrap_on_time_max(d["bootstrap_capacitance"], start, floor, current)
            if math.isfinite(supported):
                out["on_time_supported"] = supported
        elif analysis == "switching-energy":
            out["switching_power"] = switching_power(d)
        elif analysis == "soak":
            t = _timing(d)
            i = _load_current(d)
            p = eq.switching_loss(d["bus_voltage"], i, t.t_vds_on_s, t.t_vds_off_s,
                                  d["switching_frequency"])  # fmt: skip
            p += eq.conduction_loss(i, d["mosfet_rds_on"], d["duty_max"])
            out["heatsink_final"] = eq.junction_temperature(
                p, d["thermal_resistance"], d["ambient_temperature"]
            )
            out["soak_time_constant"] = d["thermal_time_constant"]
    except (InputError, KeyError, ZeroDivisionError, ValueError):
        return {}  # a design the equations cannot use predicts nothing (it was validated)
    return out


def disagreement(
    measured: float | None, predicted: float | None, unit: str, guard_band: float
) -> str | None:
    """A note when ``measured`` is far from ``predicted`` (both in ``unit``), else None."""
    if measured is None or predicted is None:
        return None
    gap = abs(measured - predicted)
    if gap <= max(DISAGREE_FRACTION * abs(predicted), 3.0 * guard_band):
        return None
    from bringup.analysis.quantities import format_quantity

    return (
        f"measured {format_quantity(measured, unit)} is far from the design's "
        f"{format_quantity(predicted, unit)}: a wrong part fitted, or a probe problem?"
    )
