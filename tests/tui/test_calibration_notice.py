"""The notebook says an instrument's calibration is past due as the session screen opens,
before the first step is run (issue 13)."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from tui_pilot import status_text, sync, wait_for_session

from bringup.tui.app import BringupApp
from bringup.tui.launch import Launcher


@sync
async def test_a_past_due_scope_is_said_before_the_first_step(log_path, bench_file):
    bench, path = bench_file("healthy")
    past = dt.datetime.now(dt.UTC).date() - dt.timedelta(days=3)
    text = Path(path).read_text().replace("[simulation]\nenabled = true\n", "")
    text = text.replace('profile = "sim-scope"\n',
                        f'profile = "sim-scope"\ncalibration_due = {past.isoformat()}\n')  # fmt: skip
    Path(path).write_text(text)
    values = {"board": "demo", "checklist": None, "bench_file": path, "scenario": None,
              "serial": "DHS24-0103", "operator": "tester"}  # fmt: skip
    app = BringupApp(Launcher(log_path), open_new=values)
    async with app.run_test(size=(130, 40)) as pilot:
        screen = await wait_for_session(pilot)
        said = status_text(app)
        assert "calibration: the scope is PAST DUE" in said, said
        assert screen.link.attempts(screen.viewed) == ()  # nothing run yet
    assert bench.supply.output_on is False
