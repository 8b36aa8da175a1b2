"""A run whose scope profile reads the record with a wrong scale (signed bytes where the
instrument sends unsigned bytes from a reference code) is never judged: the first step that
fetches a record is logged as not run, naming the profile key most likely wrong, and no
volt of that record reaches a verdict or the log."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

from bringup.instruments.profiles import BUILTIN_DIR
from bringup.store import SessionLog

ANSWERS = Path(__file__).resolve().parents[2] / "checklists" / "answers-demo.toml"


def test_a_wrong_scale_is_logged_as_not_run_naming_the_key(demo_design, tmp_path):
    from sim_instruments.bench import start_bench

    folder = tmp_path / "profiles"
    folder.mkdir()
    text = (BUILTIN_DIR / "rigol-ds1000z.toml").read_text()
    for old, new in (('datatype = "uint8"', 'datatype = "int8"'), ("format_uint8", "format_int8")):
        assert old in text
        text = text.replace(old, new)
    (folder / "rigol-ds1000z.toml").write_text(text)
    running = start_bench(dict(demo_design), dialects={"scope": "tenfield"})
    try:
        bench = tmp_path / "bench.toml"
        bench.write_text(running.bench_file_text())
        db = tmp_path / "log.sqlite"
        env = {**os.environ, "BRINGUP_PROFILES": str(folder)}
        done = subprocess.run(
            [sys.executable, "-m", "bringup", "run", "--bench", str(bench), "--board", "demo",
             "--serial", "DHS24-0043", "--operator", "tester", "--db", str(db),
             "--answers", str(ANSWERS), "--auto", "--json"],
            capture_output=True, text=True, env=env, timeout=240,
        )  # fmt: skip
        assert not running.supply.output_on  # switched off on the way out
    finally:
        running.stop()
    assert done.returncode != 0 and "Traceback" not in done.stderr
    summary = json.loads(done.stdout)
    assert summary["verdict"] != "pass"
    with SessionLog.open(db, create=False) as log:
        attempts = log.session(summary["session"]).attempts
    scoped = [a for a in attempts if a.settings.get("scope")]
    assert scoped, "the checklist fetched no record"
    first = scoped[0]
    assert first.outcome == "not-run"
    assert first.waveforms == {} and not any(m.get("value") for m in first.metrics.values())
    message = json.dumps(first.extra) + str(getattr(first, "notes", ""))
    assert "block.datatype" in message, message[:400]
    # no attempt that fetched a record was judged pass or fail
    assert all(a.outcome == "not-run" for a in scoped)
