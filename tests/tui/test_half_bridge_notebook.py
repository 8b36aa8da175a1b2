"""The half-bridge checklist in the notebook, through its Pilot on the simulated half-bridge:
the stages in their order, the steps run by keys, the dead-time step judged on its own metrics
(and failed on a board whose gates overlap), the current trace in amperes; what was done is
read back from the log."""

from __future__ import annotations

from tui_pilot import session_screen, sync, take_step, wait_for_session

from bringup.store import SessionLog
from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher

STEPS = ["power-rails.first-power", "power-rails.rails-unloaded", "power-rails.logic-meter",
         "power-rails.rails-loaded", "low-side-gate.vgs-low-on", "high-side-gate.vgs-high-on",
         "dead-time.dead-times"]  # fmt: skip


@sync
async def test_a_half_bridge_session_up_to_its_dead_time(log_path):
    values = {"board": "demo-half-bridge", "checklist": "half-bridge-bootstrap",
              "bench_file": None, "scenario": "shoot-through", "serial": "PLB48-0101",
              "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(130, 40)) as pilot:
        screen = await wait_for_session(pilot)
        link = screen.link
        assert [s.id for s in link.runner.checklist.stages] == [
            "power-rails", "low-side-gate", "high-side-gate", "dead-time", "bootstrap-refresh",
            "switch-node", "switching-energy", "thermal"]  # fmt: skip
        for step in STEPS:
            assert session_screen(app).viewed == step
            await take_step(pilot, reading="3.31" if step.endswith("logic-meter") else None,
                            timeout=60.0)  # fmt: skip
        dead = link.attempts("dead-time.dead-times")[-1]
        assert dead.verdict == "fail"
        rows = {m.label: m for m in dead.metrics}
        overlap = next(m for label, m in rows.items() if "overlap" in label.lower())
        assert overlap.verdict == "fail" and "ns" in overlap.measured
        current = [t for t in dead.traces if "i_switch" in t.title]
        assert current and current[0].unit == "A"
        session_id = link.session_id
    with SessionLog.open(log_path) as log:
        verdicts = {a.stage_id: a.outcome for a in log.attempts(session_id)}
        units = {name: d.get("y_unit") for a in log.attempts(session_id, "dead-time")
                 for name, d in a.waveforms.items()}  # fmt: skip
    assert units == {"vgs": "V", "vgs_low": "V", "i_switch": "A"}
    assert verdicts["low-side-gate"] == verdicts["high-side-gate"] == "pass"
    assert verdicts["dead-time"] == "fail"
