"""Pure measurement core: numpy arrays in, plain results out. No I/O, no UI.

Waveforms are uniformly sampled records ``y`` (V) with a sample interval ``dt`` (s) and a
first instant ``t0`` (s). scipy is imported lazily, by ``fit_soak`` only.
"""

from bringup.analysis.design import (
    BootstrapSizing,
    GateTiming,
    LossBudget,
    bootstrap_c_min,
    bootstrap_charge,
    bootstrap_charging_drop,
    bootstrap_droop,
    bootstrap_dv_max,
    bootstrap_on_time_max,
    bootstrap_precharge_time,
    bootstrap_recharge_time,
    conduction_loss,
    estimate_losses,
    gate_drive_current,
    gate_drive_loss,
    gate_timing,
    junction_temperature,
    on_time_at_duty,
    rc_rise_time,
    size_bootstrap,
    switching_loss,
)
from bringup.analysis.droop import DroopMetrics, measure_droop
from bringup.analysis.edges import (
    EdgeMetrics,
    StateLevels,
    Transitions,
    find_transitions,
    measure_edges,
    negative_excursion,
    state_levels,
)
from bringup.analysis.plateau import PlateauResult, find_miller_plateau
from bringup.analysis.quantities import (
    canonical_unit,
    format_quantity,
    parse_quantity,
    parse_quantity_unit,
)
from bringup.analysis.rails import RailMetrics, measure_rail
from bringup.analysis.soak import SoakFit, fit_soak
from bringup.analysis.verdict import Limit, Verdict, judge
from bringup.errors import AnalysisError

__all__ = [
    "AnalysisError",
    "BootstrapSizing",
    "DroopMetrics",
    "EdgeMetrics",
    "GateTiming",
    "Limit",
    "LossBudget",
    "PlateauResult",
    "RailMetrics",
    "SoakFit",
    "StateLevels",
    "Transitions",
    "Verdict",
    "bootstrap_c_min",
    "bootstrap_charge",
    "bootstrap_charging_drop",
    "bootstrap_droop",
    "bootstrap_dv_max",
    "bootstrap_on_time_max",
    "bootstrap_precharge_time",
    "bootstrap_recharge_time",
    "canonical_unit",
    "conduction_loss",
    "estimate_losses",
    "find_miller_plateau",
    "find_transitions",
    "fit_soak",
    "format_quantity",
    "gate_drive_current",
    "gate_drive_loss",
    "gate_timing",
    "judge",
    "junction_temperature",
    "measure_droop",
    "measure_edges",
    "measure_rail",
    "negative_excursion",
    "on_time_at_duty",
    "parse_quantity",
    "parse_quantity_unit",
    "rc_rise_time",
    "size_bootstrap",
    "state_levels",
    "switching_loss",
]
