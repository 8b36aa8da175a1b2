"""Per step the record shows each metric by its label with its uncertainty (and how it was
found), and what was probed where: each scope channel as set and as read back."""

from __future__ import annotations

import datetime as dt
import io
import re
from pathlib import Path

import numpy as np
from pypdf import PdfReader
from record_samples import BENCH, CHECKLIST, IDN, _verdict, board_snapshot, switch_wave

from bringup.record.export_html import render_html
from bringup.record.export_pdf import render_pdf
from bringup.record.from_log import record_from_log
from bringup.store import SessionLog

# A GUM budget as the runner logs it (bringup.analysis.uncertainty: components u, combined
# u_c = sqrt(sum u^2), expanded U = k u_c with k = 2, JCGM 100:2008 §5.1.2 and §6.2).
_U = (1.195e-10, 1.023e-10, 0.69e-10)
_UC = float(np.sqrt(sum(u * u for u in _U)))
BUDGET = {
    "quantity": "switch_rise",
    "unit": "s",
    "value": 2.06e-7,
    "k": 2,
    "combined": _UC,
    "expanded": 2 * _UC,
    "components": [
        {"name": "scatter of 3 edges", "evaluation": "type A", "u": _U[0]},
        {"name": "the slowest of 3 noisy edges reads high", "evaluation": "type B, rectangular",
         "u": _U[1]},
        {"name": "crossing choice under noise", "evaluation": "type B, rectangular", "u": _U[2]},
    ],
}  # fmt: skip
SCOPE = {
    "channels": [
        {"channel": 2, "net": "switch", "probe": "single-ended", "range_v": 50, "offset_v": 15,
         "coupling": "DC", "bandwidth_limit": True},
    ],
    "duration_s": 3e-6,
    "points": 2500,  # asked for 1.2 ns per point; the scope sent 3000 points at 1 ns
    "pretrigger_s": 5e-7,
    "trigger": {"net": "switch", "slope": "positive", "level_v": 12},
}  # fmt: skip


def _record(tmp_path: Path) -> dict:
    board = board_snapshot()
    with SessionLog.open(tmp_path / "log.db") as log:
        sid = log.create_session(
            board=board, checklist=CHECKLIST, bench=BENCH, serial="DHS24-0117", operator="R. Okafor"
        )
        end = dt.datetime.now(dt.UTC)
        verdicts = {"switch_rise": _verdict(board, "switch_rise", 2.06e-7)}
        log.record_attempt(
            sid, stage_id="edge-speed", step_id="switch-rise", operator="R. Okafor",
            started_utc=end - dt.timedelta(milliseconds=5), finished_utc=end, instruments=IDN,
            settings={"scope": SCOPE},
            metrics={
                "switch_rise": {"value": 2.06e-7, "unit": "s",
                                "label": "Switch node rise time, 10-90 %"},
                "miller_plateau": {"value": 4.61, "unit": "V", "label": "Miller plateau"},
            },
            predictions={}, verdicts=verdicts, outcome=verdicts["switch_rise"]["outcome"],
            waveforms={"switch": switch_wave(np.random.default_rng(3))},
            extra={"details": {"budgets": {"switch_rise": BUDGET}}},
        )  # fmt: skip
        return record_from_log(log, sid)


def _cells(html: str) -> list[list[str]]:
    return [re.findall(r"<td>(.*?)</td>", row) for row in re.findall(r"<tr>(.*?)</tr>", html)]


def test_metrics_by_label_with_uncertainty_and_scope_as_set_and_read(tmp_path: Path) -> None:
    record = _record(tmp_path)
    html = render_html(record)
    page = html[html.index('id="stage-edge-speed"') : html.index('id="identity"')]
    rows = _cells(page)
    # expanded U = 2 u_c = 2 sqrt(119.5^2 + 102.3^2 + 69^2) ps = 343.55 ps (JCGM 100 §6.2)
    rise = next(r for r in rows if r and r[0] == "Switch node rise time, 10-90 %" and len(r) == 4)
    assert rise[1] == "206 ns" and rise[2] == "343.5 ps"
    assert rise[3].startswith("GUM budget, k = 2: scatter of 3 edges (u = 119.5 ps, type A)")
    assert ["Miller plateau", "4.61 V", "not evaluated", "reported only, not judged"] in rows
    # the verdict row names the target's label, not its id
    assert any(r and r[0] == "Switch node rise time, 10-90 %" and len(r) == 7 for r in rows)
    assert "switch_rise" not in re.sub(r"<details>.*?</details>", "", page, flags=re.S)
    # what was probed where: the probe ratio comes from the bench (channel 2: 10:1)
    assert [
        "2", "switch", "single-ended, 10:1", "50 V", "15 V", "DC", "on",
        "2500 / 3000", "1.2 ns / 1 ns",
    ] in rows  # fmt: skip
    assert (
        "window 3 µs, 500 ns before the trigger; trigger on switch, positive edge at 12 V" in page
    )


def test_pdf_shows_the_same_details(tmp_path: Path) -> None:
    pages = [p.extract_text() for p in PdfReader(io.BytesIO(render_pdf(_record(tmp_path)))).pages]
    stage = next(t for t in pages if "Stage: Edge speed" in t)
    flat = " ".join(stage.split())
    assert "Switch node rise time, 10-90 % 206 ns 343.5 ps GUM budget, k = 2" in flat
    assert "2 switch single-ended, 10:1 50 V 15 V DC on 2500 / 3000 1.2 ns / 1 ns" in flat
    assert "switch_rise" not in flat.split("Settings")[0]


def test_design_table_names_steps_and_metrics_as_people_read_them(tmp_path: Path) -> None:
    board = board_snapshot()
    with SessionLog.open(tmp_path / "log.db") as log:
        sid = log.create_session(
            board=board, checklist=CHECKLIST, bench=BENCH, serial="DHS24-0117", operator="R. Okafor"
        )
        end = dt.datetime.now(dt.UTC)
        log.record_attempt(
            sid, stage_id="power-rails", step_id="bus", operator="R. Okafor",
            started_utc=end - dt.timedelta(milliseconds=5), finished_utc=end, instruments=IDN,
            settings={}, predictions={"bus_level": {"value": 24.0, "unit": "V",
                                                    "basis": "design bus_voltage"}},
            metrics={"bus_level": {"value": 24.07, "unit": "V", "label": "Bus level, mean"}},
            verdicts={"bus_level": _verdict(board, "bus_level", 24.07)}, outcome="pass",
        )  # fmt: skip
        record = record_from_log(log, sid)
    html = render_html(record)
    design = _cells(html[html.index('id="design"') : html.index('class="stage"')])
    title = next(s["title"] for s in CHECKLIST["stages"][0]["steps"] if s["id"] == "bus")
    # deviation (24.07 - 24) / 24 = +0.29 %
    assert [title, "Bus level, mean", "24 V", "design bus_voltage", "24.07 V", "+0.3 %",
            ""] in design  # fmt: skip


def test_the_record_carries_each_budget_with_its_main_contribution(tmp_path: Path) -> None:
    # A budget as the runner now logs it: each component with its type, u(x_i) in the input's
    # unit and the sensitivity c_i (GUM §5.1.3: contribution |c_i| u(x_i)), and the largest.
    budget = dict(BUDGET, main="scatter of 3 edges")
    budget["components"] = [dict(c) for c in BUDGET["components"]]
    budget["components"][0].update(type="A", sensitivity=0.5, u_input=2 * _U[0], input_unit="s")
    board = board_snapshot()
    with SessionLog.open(tmp_path / "log.db") as log:
        sid = log.create_session(
            board=board, checklist=CHECKLIST, bench=BENCH, serial="DHS24-0118", operator="R. Okafor"
        )
        end = dt.datetime.now(dt.UTC)
        verdicts = {"switch_rise": _verdict(board, "switch_rise", 2.06e-7)}
        log.record_attempt(
            sid, stage_id="edge-speed", step_id="switch-rise", operator="R. Okafor",
            started_utc=end - dt.timedelta(milliseconds=5), finished_utc=end, instruments=IDN,
            settings={}, metrics={"switch_rise": {"value": 2.06e-7, "unit": "s",
                                                  "label": "Switch node rise time, 10-90 %"}},
            predictions={}, verdicts=verdicts, outcome=verdicts["switch_rise"]["outcome"],
            extra={"details": {"budgets": {"switch_rise": budget}}},
        )  # fmt: skip
        record = record_from_log(log, sid)
    html = render_html(record)
    page = html[html.index('id="stage-edge-speed"') : html.index('id="identity"')]
    rows = _cells(page)
    rise = next(r for r in rows if r and r[0] == "Switch node rise time, 10-90 %" and len(r) == 4)
    # u_c = sqrt(119.5^2 + 102.3^2 + 69^2) ps = 171.8 ps [computed]
    assert rise[3].endswith("(u_c = 171.8 ps; largest: scatter of 3 edges)"), rise[3]
    assert "Uncertainty budgets (GUM)" in page
    label = "Switch node rise time, 10-90 %"
    assert [label, "scatter of 3 edges", "type A", "239 ps", "0.5", "119.5 ps"] in rows
    assert [label, "combined u_c; expanded U = k u_c", "k = 2", "171.8 ps", "",
            "343.5 ps"] in rows  # fmt: skip
