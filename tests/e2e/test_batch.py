"""``bringup batch`` on a real log of simulated boards (``tests/batch_logs.py``): the weak board
is flagged and the healthy ones are not, a retaken serial shows its latest session with its
history, JSON shape, HTML report, and one-line errors for bad input."""

from __future__ import annotations

import json
import re
import subprocess
import sys

import numpy as np
import pytest
from batch_logs import HEALTHY, WEAK, WEIRD_SERIAL
from scipy import stats

from bringup.batch.collect import collect_batch
from bringup.store import SessionLog

DROOP = "droop-max-on-time.droop.vgs_droop"


def _bringup(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "bringup", *args], capture_output=True, text=True, timeout=120
    )


@pytest.fixture(scope="module")
def batch_json(batch_log):
    done = _bringup("batch", "--db", str(batch_log.db), "--json")
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout)


def _serial(doc: dict, serial: str) -> dict:
    return next(s for s in doc["serials"] if s["serial"] == serial)


def test_weak_board_is_flagged_and_healthy_ones_are_not(batch_json):
    weak = _serial(batch_json, WEAK)
    assert DROOP in weak["outliers"]
    assert weak["values"][DROOP]["outlier"] is True
    assert weak["values"][DROOP]["outcome"] == "fail"
    for serial in HEALTHY:
        assert _serial(batch_json, serial)["outliers"] == [], serial
    droop = next(m for m in batch_json["metrics"] if m["key"] == DROOP)
    assert droop["outliers"] == [WEAK]


def test_statistics_match_numpy_and_scipy_on_the_listed_values(batch_json):
    # the JSON's values of each serial, recomputed with numpy/scipy (reference libraries)
    for metric in batch_json["metrics"]:
        values = [
            s["values"][metric["key"]]["value"]
            for s in batch_json["serials"]
            if metric["key"] in s["values"]
        ]
        assert metric["n"] == len(values)
        assert metric["median"] == pytest.approx(np.median(values))
        assert metric["scaled_mad"] == pytest.approx(
            stats.median_abs_deviation(values, scale="normal"), abs=1e-15
        )
        assert (metric["min"], metric["max"]) == (min(values), max(values))
        assert metric["capability"] is None  # 5 boards: fewer than the 20 capability needs


def test_json_shape(batch_json):
    assert batch_json["board"] == "DHS-24 demo heater switch"
    assert batch_json["revision"] == "B"
    assert batch_json["rule"]["cutoff"] == 3.5
    assert [s["serial"] for s in batch_json["serials"]] == sorted([*HEALTHY, WEAK])
    keys = [m["key"] for m in batch_json["metrics"]]
    assert len(keys) == len(set(keys)) and DROOP in keys
    # a metric judged in several steps gets one column per step, named with its step
    names = {m["name"] for m in batch_json["metrics"] if m["metric"] == "logic_level"}
    assert names == {"logic_level (rails-unloaded)", "logic_level (logic-meter)",
                     "logic_level (rails-loaded)"}  # fmt: skip
    first = _serial(batch_json, "DHS24-0001")
    assert first["signatures"] == [{"role": "operator", "name": "T. Bench"}]
    assert first["bench"] == "simulated" and first["rehearsal"] is True
    assert first["verdict"] == "pass" and first["steps_done"] == first["steps_total"] == 8
    assert _serial(batch_json, "DHS24-0002")["signatures"] == []
    cell = first["values"][DROOP]
    assert set(cell) >= {"value", "outcome", "z", "outlier", "session", "attempt"}


def test_retaken_serial_shows_its_latest_session_with_history(batch_json):
    row = _serial(batch_json, "DHS24-0004")
    assert row["retaken"] is True
    assert len(row["history"]) == 2
    before, after = row["history"]
    assert before["verdict"] == "fail" and after["verdict"] == "pass"  # weak, then reworked
    assert row["session"] == after["session"] and after["shown"] and not before["shown"]
    assert row["values"][DROOP]["session"] == after["session"]
    assert row["values"][DROOP]["outcome"] == "pass"
    # the reading from before the rework is still in the history
    old = [a for a in before["attempts"] if a["step"] == "droop"]
    assert old and old[0]["values"]["vgs_droop"] > 0.3  # over the 300 mV limit


def test_collect_uses_only_the_readers_public_methods(batch_log):
    # the batch reads through sessions/attempts/signatures alone (a lab database's reader
    # offers the same): a reader with nothing else gives the same rows
    class OnlyPublic:
        def __init__(self, log):
            self._log, self.calls = log, set()

        def sessions(self):
            self.calls.add("sessions")
            return self._log.sessions()

        def attempts(self, session_id):
            self.calls.add("attempts")
            return self._log.attempts(session_id)

        def signatures(self, session_id):
            self.calls.add("signatures")
            return self._log.signatures(session_id)

    with SessionLog.open(batch_log.db, create=False, read_only=True) as log:
        reader = OnlyPublic(log)
        batch = collect_batch(reader, "DHS-24 demo heater switch", "B")
    assert reader.calls == {"sessions", "attempts", "signatures"}
    assert [r.serial for r in batch.rows] == sorted([*HEALTHY, WEAK])


def test_text_listing(batch_log):
    done = _bringup("batch", "--db", str(batch_log.db))
    assert done.returncode == 0, done.stderr
    lines = done.stdout.splitlines()
    assert lines[0].startswith("batch: DHS-24 demo heater switch rev B, 5 serials")
    weak = next(line for line in lines if line.startswith(WEAK))
    assert "vgs_droop" in weak
    for serial in ("DHS24-0001", "DHS24-0002"):
        assert next(line for line in lines if line.startswith(serial)).rstrip().endswith("-")
    assert any(line.startswith("DHS24-0004") and "retaken: 2 sessions" in line for line in lines)
    assert any(re.match(rf"\s+{WEAK} vgs_droop: .* \(fail\), M = \+", line) for line in lines)


def test_html_report(batch_log, batch_json, tmp_path):
    out = tmp_path / "batch.html"
    done = _bringup("batch", "--db", str(batch_log.db), "--html", str(out))
    assert done.returncode == 0, done.stderr
    page = out.read_text(encoding="utf-8")
    assert "<script" not in page.lower() and "http://" not in page.replace(
        'xmlns="http://www.w3.org/2000/svg"', ""
    )
    # the serial as typed, escaped: never as markup
    assert WEIRD_SERIAL not in page
    assert "&lt;i&gt;&quot;R&amp;D&quot; 7&lt;/i&gt;" in page
    # one strip per metric, each titled with the metric's name
    assert page.count("<svg") == len(batch_json["metrics"])
    strips = re.findall(r'<figure class="strip"><svg .*?</svg>', page)
    assert len(strips) == len(batch_json["metrics"])
    droop = next(s for s in strips if "<title>vgs_droop</title>" in s)
    assert droop.count("<circle") == len(HEALTHY) and droop.count("<rect x=") == 2  # + frame
    assert f">{WEAK}</text>" in droop  # the outlier named beside its mark
    assert "max 300 mV" in droop  # the limit drawn and labelled
    # the retaken serial's history, folded under its name
    assert "<summary>DHS24-0004: 2 sessions, 16 attempts</summary>" in page


def test_board_file_and_revision_select_the_same_batch(batch_log, batch_json):
    by_file = _bringup("batch", "--db", str(batch_log.db), "--board", str(batch_log.board_file),
                       "--json")  # fmt: skip
    assert by_file.returncode == 0, by_file.stderr
    assert json.loads(by_file.stdout)["serials"] == batch_json["serials"]


@pytest.mark.parametrize(
    ("args", "says"),
    [
        (("--board", "No Such Board"), "no sessions of board 'No Such Board'"),
        (("--revision", "Z"), "no sessions of any board at revision 'Z'"),
        (("--board", "DHS-24 demo heater switch", "--revision", "C"), "at revision 'C'"),
        (("--board", ""), "--board '': empty"),
    ],
)
def test_bad_choice_is_one_line(batch_log, args, says):
    done = _bringup("batch", "--db", str(batch_log.db), *args)
    assert done.returncode == 2
    assert done.stdout == ""
    assert done.stderr.count("\n") == 1 and "Traceback" not in done.stderr
    assert says in done.stderr
    assert "DHS-24 demo heater switch' rev 'B'" in done.stderr or "empty" in done.stderr


def test_missing_or_empty_log_is_one_line(tmp_path):
    missing = _bringup("batch", "--db", str(tmp_path / "none.db"))
    assert missing.returncode == 2 and missing.stderr.count("\n") == 1
    assert "none.db: no session log there" in missing.stderr
    assert not (tmp_path / "none.db").exists()  # nothing created
    empty = tmp_path / "empty.db"
    SessionLog.open(empty).close()
    done = _bringup("batch", "--db", str(empty))
    assert done.returncode == 2 and done.stderr.count("\n") == 1
    assert "empty.db: no sessions in this log" in done.stderr
    bad_board = _bringup("batch", "--db", str(empty), "--board", str(tmp_path / "b.toml"))
    assert bad_board.returncode == 2 and "b.toml" in bad_board.stderr
    assert "Traceback" not in bad_board.stderr + done.stderr + missing.stderr


def test_capability_from_twenty_boards(batch_log, tmp_path):
    # 24 boards: copies of a real healthy session's attempts through the log's write API,
    # each metric moved by about 1 % (the spread of a batch); Cp/Cpk checked against numpy
    # with the NIST/SEMATECH 6.1.6 formulas [read; REFERENCES §13], one-sided for a max only
    rng = np.random.default_rng(24)
    db = tmp_path / "twenty.db"
    with SessionLog.open(batch_log.db, create=False, read_only=True) as log:
        source = log.session(next(s.id for s in log.sessions() if s.serial == "DHS24-0001"))
    with SessionLog.open(db) as log:
        for k in range(24):
            sid = log.create_session(board=source.board, checklist=source.checklist,
                                     bench=source.bench, serial=f"DHS24-{k + 100:04d}",
                                     operator="T. Bench")  # fmt: skip
            for a in source.attempts:
                metrics = {
                    name: {**m, "value": m["value"] * (1 + 0.01 * rng.standard_normal())}
                    if isinstance(m.get("value"), float) else m
                    for name, m in a.metrics.items()
                }  # fmt: skip
                log.record_attempt(sid, stage_id=a.stage_id, step_id=a.step_id,
                                   operator=a.operator, started_utc=a.started_utc,
                                   finished_utc=a.finished_utc, instruments=a.instruments,
                                   settings=a.settings, metrics=metrics,
                                   predictions=a.predictions, verdicts=a.verdicts,
                                   outcome=a.outcome)  # fmt: skip
    done = _bringup("batch", "--db", str(db), "--json")
    assert done.returncode == 0, done.stderr
    doc = json.loads(done.stdout)
    by_key = {m["key"]: m for m in doc["metrics"]}

    def values(key):
        return np.array([s["values"][key]["value"] for s in doc["serials"]])

    bus = by_key["power-rails.rails-unloaded.bus_level"]  # 22.8 V .. 25.2 V
    x, s = values(bus["key"]), np.std(values(bus["key"]), ddof=1)
    cap = bus["capability"]
    assert cap["n"] == 24
    assert cap["cp"] == pytest.approx((25.2 - 22.8) / (6 * s))
    assert cap["cpk"] == pytest.approx(min(25.2 - x.mean(), x.mean() - 22.8) / (3 * s))
    lo, hi = cap["cp_interval_95"]
    assert lo < cap["cp"] < hi
    rise = by_key["edge-speed.edges.switch_rise"]  # <= 200 ns only
    x = values(rise["key"])
    assert rise["capability"]["cp"] is None and rise["capability"]["cpl"] is None
    assert rise["capability"]["cpk"] == pytest.approx((200e-9 - x.mean()) / (3 * np.std(x, ddof=1)))
    text = _bringup("batch", "--db", str(db)).stdout
    assert re.search(r"^bus_level \(rails-unloaded\) .* \d+\.\d\d \(\d+\.\d\d\.\.\d+\.\d\d\)", text,
                     flags=re.M)  # fmt: skip
