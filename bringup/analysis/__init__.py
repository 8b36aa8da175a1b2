"""Pure measurement core: numpy arrays in, plain results out. No I/O, no UI.

Waveforms are uniformly sampled records ``y`` (V) with a sample interval ``dt`` (s) and a
first instant ``t0`` (s). scipy is imported lazily, by ``fit_soak`` only.

The names below are loaded on first use (PEP 562 ``__getattr__``): ``bringup calc`` and the
quantity parser need only the standard library, and importing numpy for them would cost
more than the whole command.
"""

from typing import TYPE_CHECKING

from bringup.errors import AnalysisError

if TYPE_CHECKING:
    from bringup.analysis.bootstrap_refresh import (
        Refresh,
        RefreshResult,
        measure_refresh,
    )
    from bringup.analysis.dead_time import (
        Commutations,
        DeadTimeResult,
        OnIntervals,
        Overlap,
        gate_on_intervals,
        measure_dead_time,
    )
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
        shortest_refresh_time,
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
    from bringup.analysis.switch_node_stress import (
        EdgeSet,
        RingFit,
        SwitchNodeResult,
        fit_ring,
        loop_inductance,
        measure_switch_node,
    )
    from bringup.analysis.switching_energy import (
        Deskew,
        SwitchingEnergy,
        deskewed,
        measure_deskew,
        measure_switching_energy,
    )
    from bringup.analysis.verdict import Limit, Verdict, judge

# name -> module of bringup.analysis that defines it
_LAZY = {
    "BootstrapSizing": "design",
    "GateTiming": "design",
    "LossBudget": "design",
    "bootstrap_c_min": "design",
    "bootstrap_charge": "design",
    "bootstrap_charging_drop": "design",
    "bootstrap_droop": "design",
    "bootstrap_dv_max": "design",
    "bootstrap_on_time_max": "design",
    "bootstrap_precharge_time": "design",
    "bootstrap_recharge_time": "design",
    "conduction_loss": "design",
    "estimate_losses": "design",
    "gate_drive_current": "design",
    "gate_drive_loss": "design",
    "gate_timing": "design",
    "junction_temperature": "design",
    "on_time_at_duty": "design",
    "rc_rise_time": "design",
    "size_bootstrap": "design",
    "switching_loss": "design",
    "Refresh": "bootstrap_refresh",
    "RefreshResult": "bootstrap_refresh",
    "measure_refresh": "bootstrap_refresh",
    "shortest_refresh_time": "design",
    "Commutations": "dead_time",
    "DeadTimeResult": "dead_time",
    "OnIntervals": "dead_time",
    "Overlap": "dead_time",
    "gate_on_intervals": "dead_time",
    "measure_dead_time": "dead_time",
    "DroopMetrics": "droop",
    "measure_droop": "droop",
    "EdgeMetrics": "edges",
    "StateLevels": "edges",
    "Transitions": "edges",
    "find_transitions": "edges",
    "measure_edges": "edges",
    "negative_excursion": "edges",
    "state_levels": "edges",
    "PlateauResult": "plateau",
    "find_miller_plateau": "plateau",
    "canonical_unit": "quantities",
    "format_quantity": "quantities",
    "parse_quantity": "quantities",
    "parse_quantity_unit": "quantities",
    "RailMetrics": "rails",
    "measure_rail": "rails",
    "SoakFit": "soak",
    "fit_soak": "soak",
    "EdgeSet": "switch_node_stress",
    "RingFit": "switch_node_stress",
    "SwitchNodeResult": "switch_node_stress",
    "fit_ring": "switch_node_stress",
    "loop_inductance": "switch_node_stress",
    "measure_switch_node": "switch_node_stress",
    "Deskew": "switching_energy",
    "SwitchingEnergy": "switching_energy",
    "deskewed": "switching_energy",
    "measure_deskew": "switching_energy",
    "measure_switching_energy": "switching_energy",
    "Limit": "verdict",
    "Verdict": "verdict",
    "judge": "verdict",
}


def __getattr__(name: str):
    """Import the module that defines ``name`` on first use, and keep the name here."""
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(f"{__name__}.{module}"), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))


__all__ = [
    "AnalysisError",
    "BootstrapSizing",
    "Commutations",
    "DeadTimeResult",
    "Deskew",
    "EdgeSet",
    "RingFit",
    "SwitchNodeResult",
    "SwitchingEnergy",
    "DroopMetrics",
    "EdgeMetrics",
    "GateTiming",
    "Limit",
    "LossBudget",
    "PlateauResult",
    "RailMetrics",
    "Refresh",
    "RefreshResult",
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
    "deskewed",
    "estimate_losses",
    "find_miller_plateau",
    "find_transitions",
    "fit_ring",
    "fit_soak",
    "format_quantity",
    "gate_drive_current",
    "gate_drive_loss",
    "gate_timing",
    "judge",
    "loop_inductance",
    "junction_temperature",
    "measure_droop",
    "measure_edges",
    "measure_rail",
    "measure_refresh",
    "measure_switch_node",
    "measure_switching_energy",
    "gate_on_intervals",
    "measure_dead_time",
    "measure_deskew",
    "negative_excursion",
    "OnIntervals",
    "on_time_at_duty",
    "Overlap",
    "parse_quantity",
    "parse_quantity_unit",
    "rc_rise_time",
    "shortest_refresh_time",
    "size_bootstrap",
    "state_levels",
    "switching_loss",
]
