"""After an unclean stop the supply may still be ON: the notebook says so when it opens the bench.

The runner switches a supply found ON off when it opens the bench and keeps a one-line notice
(``SessionRunner.bench_notices``); the headless run printed it, the notebook did not. Here the
test-owned simulated supply is left ON at 5 V over its own PyVISA connection, as a killed
process would leave it, before the notebook's first step opens the bench.
"""

from __future__ import annotations

from tui_pilot import status_text, sync, take_step, wait_for_session

from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher


@sync
async def test_an_output_found_on_is_switched_off_and_said(log_path, bench_file, visa_rm):
    bench, path = bench_file("healthy")
    supply = visa_rm.open_resource(bench.resources["supply"], read_termination="\n",
                                   write_termination="\n", timeout=5000)  # fmt: skip
    try:
        supply.write("VOLT 5;:CURR 0.2;:OUTP ON")
        assert supply.query("OUTP?").strip() in ("1", "ON")
    finally:
        supply.close()
    values = {"board": "demo", "checklist": None, "bench_file": path, "scenario": None,
              "serial": "DHS24-0102", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(130, 40)) as pilot:
        screen = await wait_for_session(pilot)
        # opening the session opened the bench: the notice is said as the screen opens,
        # before the first step can be run
        said = status_text(app)
        assert "found ON" in said, said
        await take_step(pilot)
        assert "Attempt 1" in status_text(app)  # the step's own result
        assert screen.link.new_bench_notices() == ()  # said once
    assert bench.supply.output_on is False
