"""The bench as the log holds it: the bench file's tables, each instrument's *IDN? answer and
the local UTC offset, as the record (``bringup export --format json``) reads them."""

from __future__ import annotations

import datetime as dt
import json
import re

from bringup.boards.board_file import load_board
from bringup.checklist.load import load_checklist
from bringup.cli import main
from bringup.runner import BenchSource, SessionRunner
from bringup.runner.bench_link import local_utc_offset
from bringup.store import SessionLog


def _bench_file(tmp_path, running) -> str:
    """The simulated bench's file with calibration due dates and without its [simulation]
    table, as a lab's bench file is."""
    text = running.bench_file_text().replace("[simulation]\nenabled = true\n", "")
    assert "[simulation]" not in text
    text = text.replace(
        'profile = "sim-scope"\n', 'profile = "sim-scope"\ncalibration_due = 2027-03-31\n'
    )
    text = text.replace(
        'profile = "sim-supply"\n', 'profile = "sim-supply"\ncalibration_due = "2027-01-15"\n'
    )
    path = tmp_path / "bench.toml"
    path.write_text(text, encoding="utf-8")
    return str(path)


def test_a_bench_file_is_logged_with_its_tables_identities_and_offset(tmp_path):
    from sim_instruments.bench import start_bench

    board, db = load_board("demo"), tmp_path / "log.sqlite"
    with start_bench(board.design, "healthy", 0) as running:
        path = _bench_file(tmp_path, running)
        runner = SessionRunner.create(board=board, checklist=load_checklist(), serial="DHS24-0007",
                                      operator="ana", bench=BenchSource.from_file(path),
                                      db_path=db)  # fmt: skip
        runner.close()
        sid = runner.session_id
        with SessionLog.open(db, create=False) as log:
            bench = log.session(sid).bench
        assert bench["kind"] == "file" and bench["path"] == path
        assert bench["text"] == open(path, encoding="utf-8").read()
        assert bench["scope"]["resource"] == running.resources["scope"]
        assert bench["scope"]["profile"] == "sim-scope"
        assert bench["scope"]["calibration_due"] == "2027-03-31"
        assert bench["supply"]["calibration_due"] == "2027-01-15"
        assert bench["thermometer"]["calibration_due"] is None
        # *IDN? answers: IEEE 488.2 §10.14, four comma-separated fields [memory]
        for role in ("scope", "supply", "thermometer"):
            assert len(bench[role]["idn"].split(",")) == 4
        assert bench["scope"]["channels"]["3"] == {"net": "vgs", "probe_ratio": 50.0,
                                                   "probe": "differential"}  # fmt: skip
        assert bench["scope"]["channels"]["1"]["probe"] == "single-ended"
        # ISO 8601 offset, and the one this machine really has now (from the C library's zone)
        assert re.fullmatch(r"[+-]\d\d:\d\d", bench["utc_offset"])
        now = dt.datetime.now().astimezone().utcoffset()
        hours, minutes = int(bench["utc_offset"][1:3]), int(bench["utc_offset"][4:])
        sign = -1 if bench["utc_offset"][0] == "-" else 1
        assert sign * dt.timedelta(hours=hours, minutes=minutes) == now
        assert "simulation" not in bench  # a real bench's file has no [simulation]

    out = tmp_path / "record.json"
    assert main(["export", sid, "--format", "json", "--db", str(db), "--out", str(out)]) == 0
    record = json.loads(out.read_text(encoding="utf-8"))["content"]
    instruments = {i["id"]: i for i in record["bench"]["instruments"]}
    assert instruments["scope"]["resource"] == running.resources["scope"]
    assert instruments["scope"]["profile"] == "sim-scope"
    assert instruments["scope"]["calibration_due"] == "2027-03-31"
    assert instruments["supply"]["calibration_due"] == "2027-01-15"
    vgs = next(c for c in instruments["scope"]["channels"] if c["net"] == "vgs")
    assert vgs["probe_ratio"] == 50.0 and vgs["probe"] == "differential"
    assert record["bench"]["simulated"] is False
    assert record["log"]["utc_offset_logged"] is True
    assert record["session"]["started"]["offset"] == local_utc_offset()
    # the standard checklist's [checklist] table, carried through the session's snapshot
    assert record["checklist"]["id"] == "high-side-bootstrap"
    assert record["checklist"]["version"] == load_checklist().version == "1.2"


def test_a_simulated_bench_is_logged_with_scenario_seed_and_resources(tmp_path):
    runner = SessionRunner.create(board=load_board("demo"), checklist=load_checklist(),
                                  serial="DHS24-0008", operator="ana",
                                  bench=BenchSource.simulated("slow-gate", seed=4),
                                  db_path=tmp_path / "log.sqlite")  # fmt: skip
    try:
        bench = runner.log.session(runner.session_id).bench
        resources = {role: bench[role]["resource"] for role in ("scope", "supply", "thermometer")}
        # still opened at once: the first step runs on the bench the log describes
        assert runner.bench().identities()["scope"] == bench["scope"]["idn"]
    finally:
        runner.close()
    assert bench["kind"] == "simulated" and bench["scenario"] == "slow-gate" and bench["seed"] == 4
    assert bench["simulation"] == {"enabled": True}
    assert all(re.fullmatch(r"TCPIP::127\.0\.0\.1::\d+::SOCKET", r) for r in resources.values())
    assert bench["thermometer"]["profile"] == "sim-thermometer"
    # resume still finds the bench it was started with
    assert BenchSource.from_description(bench) == BenchSource.simulated("slow-gate", seed=4)


def test_the_offset_is_the_local_zone_s_in_iso_8601_form():
    import os
    import subprocess
    import sys

    # POSIX TZ strings: the number is what is added to local time to reach UTC, so "-5:30" is
    # five and a half hours east [memory: POSIX.1, the TZ environment variable]; written as
    # ISO 8601's time shift ±hh:mm [memory: ISO 8601].
    cases = {"IST-5:30": "+05:30", "EST5": "-05:00", "UTC0": "+00:00", "NPT-5:45": "+05:45"}
    # one child process for every zone (time.tzset re-reads TZ), not one per zone
    code = (
        "import os, sys, time\n"
        "from bringup.runner.bench_link import local_utc_offset\n"
        "for tz in sys.argv[1:]:\n"
        "    os.environ['TZ'] = tz\n"
        "    time.tzset()\n"
        "    print(local_utc_offset())\n"
    )
    out = subprocess.run([sys.executable, "-c", code, *cases], env=dict(os.environ),
                         capture_output=True, text=True, check=True, timeout=60)  # fmt: skip
    assert out.stdout.split() == list(cases.values())
