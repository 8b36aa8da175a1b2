"""Each scenario against the board's targets, measured the way the checklist's steps record it.

The plan (stages run in order; a failed stage stops the later ones): a fault scenario passes
every stage before its own with margin and fails its own; healthy passes everything. "With
margin" is three guard bands beyond the limit, so that neither scope noise nor a different seed
can move a verdict (the guarded decision rule of ILAC-G8:09/2019 §4.2, REFERENCES §6).
"""

from __future__ import annotations

import pytest

from bringup.boards.board_file import load_board
from sim_instruments.scenarios import SCENARIOS

STAGES = {
    "power-rails": ["ramp_current", "bus_level", "vdrv_level", "vdrv_ripple", "logic_level",
                    "logic_ripple"],
    "gate-overdrive": ["vgs_on", "switch_drop"],
    "edge-speed": ["switch_rise", "switch_fall", "vgs_rise", "switch_overshoot",
                   "switch_negative_excursion", "switching_loss"],
    "droop-max-on-time": ["vgs_droop", "vgs_end", "on_time_supported", "uvlo_margin"],
    "thermal": ["heatsink_final"],
}  # fmt: skip
RAIL_METRICS = {"bus_level", "vdrv_level", "vdrv_ripple", "logic_level", "logic_ripple"}
MARGIN_GUARD_BANDS = 3.0


def _values(metrics: dict[str, float], target_id: str) -> list[float]:
    if target_id in RAIL_METRICS:  # judged unloaded and loaded
        net, kind = target_id.split("_")
        return [metrics[f"{net}_{kind}_unloaded"], metrics[f"{net}_{kind}_loaded"]]
    return [metrics[target_id]] if metrics.get(target_id) is not None else []


def _passes_with_margin(value: float, target) -> bool:
    w = MARGIN_GUARD_BANDS * target.uncertainty
    lo, hi = target.limit.min, target.limit.max
    return (lo is None or value >= lo + w) and (hi is None or value <= hi - w)


def _fails_with_margin(value: float, target) -> bool:
    w = MARGIN_GUARD_BANDS * target.uncertainty
    lo, hi = target.limit.min, target.limit.max
    return (lo is not None and value < lo - w) or (hi is not None and value > hi + w)


@pytest.mark.parametrize("name", sorted(SCENARIOS))
def test_scenario_passes_earlier_stages_and_fails_its_own(name, scenario_metrics):
    board = load_board("demo")
    metrics = scenario_metrics(name)
    fails = SCENARIOS[name].fails
    order = list(STAGES)
    before = order if fails is None else order[: order.index(fails)]
    for stage in before:
        for tid in STAGES[stage]:
            values = _values(metrics, tid)
            assert values, f"{name}: {tid} was not measured"
            for v in values:
                assert _passes_with_margin(v, board.targets[tid]), f"{name}: {tid} = {v:.4g}"
    if fails is not None:
        failing = [
            tid
            for tid in STAGES[fails]
            if any(_fails_with_margin(v, board.targets[tid]) for v in _values(metrics, tid))
        ]
        assert failing, f"{name} should fail {fails} by three guard bands: {metrics}"
