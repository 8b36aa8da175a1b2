"""The analyses a checklist step may name, and the metrics each one produces.

The runner implements each analysis (``bringup.runner.analyses``); this catalogue is what the
checklist loader validates against, so a step that names an unknown analysis, or a target its
analysis cannot produce, is refused on load. Metric ids are the target ids of a board file.
Nets are those of DEVELOPERS.md: gate, switch, vgs, vbs, bus, vdrv, logic, vgs_low, i_switch.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["AnalysisSpec", "ANALYSES", "NETS", "FLOATING_NETS", "CURRENT_NETS", "RAIL_NETS",
           "metrics_of"]  # fmt: skip

NETS = ("gate", "switch", "vgs", "vbs", "bus", "vdrv", "logic", "vgs_low", "i_switch")
#: Nets that float (not referred to ground): only a differential probe may measure them.
FLOATING_NETS = ("vgs", "vbs")
#: Nets that carry a current (amperes): only a current probe measures them.
CURRENT_NETS = ("i_switch",)
#: Nets that are supply rails (a level and a ripple each).
RAIL_NETS = ("bus", "vdrv", "logic")


@dataclass(frozen=True)
class AnalysisSpec:
    """One analysis: what it needs acquired and the metrics (ids, units) it yields."""

    name: str
    summary: str
    metrics: dict[str, str]  # metric id -> unit
    needs_nets: tuple[str, ...] = ()
    needs_supply_ramp: bool = False
    needs_soak: bool = False
    needs_reading: bool = False


_RAIL_METRICS = {f"{net}_{kind}": "V" for net in RAIL_NETS for kind in ("level", "ripple")}

ANALYSES: dict[str, AnalysisSpec] = {
    spec.name: spec
    for spec in (
        AnalysisSpec(
            "first-power",
            "stepped voltage ramp with a low current limit; stops at once on a short",
            {"ramp_current": "A", "ramp_voltage": "V"},
            needs_supply_ramp=True,
        ),
        AnalysisSpec(
            "rail-levels",
            "mean and peak-to-peak ripple of each rail acquired (net_level, net_ripple)",
            _RAIL_METRICS,
        ),
        AnalysisSpec(
            "meter-reading",
            "a value read on a meter (typed by the operator, or read by the simulated bench)",
            {f"{net}_level": "V" for net in RAIL_NETS},
            needs_reading=True,
        ),
        AnalysisSpec(
            "gate-overdrive",
            "Vgs high level while on; switch node high level against the bus",
            {"vgs_on": "V", "switch_drop": "V", "switch_high": "V", "bus_level": "V"},
            needs_nets=("vgs", "switch"),
        ),
        AnalysisSpec(
            "edges",
            "IEEE 181 transition durations, overshoot, Miller plateau, negative excursion, "
            "switching loss at the design frequency",
            {
                "switch_rise": "s",
                "switch_fall": "s",
                "vgs_rise": "s",
                "vgs_fall": "s",
                "switch_overshoot": "%",
                "switch_negative_excursion": "V",
                "miller_plateau": "V",
                "switching_loss": "W",
            },
            needs_nets=("vgs", "switch"),
        ),
        AnalysisSpec(
            "droop",
            "Vgs and bootstrap droop over the longest on-time, the on-time the capacitor "
            "supports, margin to the driver's UVLO",
            {
                "vgs_droop": "V",
                "vgs_start": "V",
                "vgs_end": "V",
                "on_time_supported": "s",
                "vbs_end": "V",
                "uvlo_margin": "V",
                "on_time": "s",
            },
            needs_nets=("vgs", "vbs"),
        ),
        AnalysisSpec(
            "low-side-gate",
            "low-side Vgs high and low levels while switching; the switch node's low level "
            "while the low side conducts",
            {"vgs_low_on": "V", "vgs_low_off": "V", "switch_low": "V"},
            needs_nets=("vgs_low", "switch"),
        ),
        AnalysisSpec(
            "dead-time",
            "dead time at both commutations (threshold to threshold) over every edge, gate "
            "overlap (shoot-through) with its current spike, body-diode loss of the dead times",
            {
                "dead_time_high_to_low": "s",
                "dead_time_low_to_high": "s",
                "dead_time_high_to_low_median": "s",
                "dead_time_low_to_high_median": "s",
                "gate_overlap": "s",
                "shoot_through_current": "A",
                "body_diode_loss": "W",
            },
            needs_nets=("vgs", "vgs_low"),
        ),
        AnalysisSpec(
            "bootstrap-refresh",
            "the bootstrap voltage over many periods at the longest on-time: its lowest level "
            "against the driver's falling UVLO, its recovery during the low-side on-time",
            {
                "vbs_uvlo_margin": "V",
                "vbs_min": "V",
                "vbs_refreshed": "V",
                "refresh_on_time_min": "s",
                "refresh_on_time": "s",
            },
            needs_nets=("vbs", "vgs_low"),
        ),
        AnalysisSpec(
            "switch-node",
            "switch-node undershoot and overshoot, ringing frequency and damping, the loop "
            "inductance they imply, dv/dt of each edge",
            {
                "switch_min": "V",
                "switch_max": "V",
                "switch_negative_margin": "V",
                "ring_frequency": "Hz",
                "ring_damping": "",
                "loop_inductance": "H",
                "switch_dv_dt_rise": "V/s",
                "switch_dv_dt_fall": "V/s",
            },
            needs_nets=("switch",),
        ),
        AnalysisSpec(
            "switching-energy",
            "turn-on and turn-off energy of the switch, integral of v_DS i_D after deskew, and "
            "the switching loss (E_on + E_off) f_sw beside the predicted one",
            {
                "switching_energy_on": "J",
                "switching_energy_off": "J",
                "switching_power": "W",
                "switching_power_predicted": "W",
            },
            needs_nets=("switch", "i_switch"),
        ),
        AnalysisSpec(
            "soak",
            "heatsink temperature at full load, final value predicted by a first-order fit",
            {"heatsink_final": "degC", "soak_time_constant": "s", "heatsink_last": "degC"},
            needs_soak=True,
        ),
    )
}


def metrics_of(analysis: str) -> dict[str, str]:
    """Metric ids (with units) that ``analysis`` produces; KeyError if unknown."""
    return ANALYSES[analysis].metrics
