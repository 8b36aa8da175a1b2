"""The record of a half-bridge session: a headless run of the half-bridge checklist on the
simulated half-bridge, signed, exported in every format and verified against the log; the
record names its checklist and carries the half-bridge's stages, its design values (the
half-bridge keys with their units) and the current trace in amperes."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from bringup.cli import main
from bringup.record.keys import generate_key_pair


def test_a_half_bridge_session_exports_and_verifies(tmp_path: Path, capsys) -> None:
    db = tmp_path / "log.db"
    run = ["run", "--sim", "--board", "demo-half-bridge", "--checklist", "half-bridge-bootstrap",
           "--serial", "PLB48-0200", "--operator", "R. Okafor", "--db", str(db), "--auto"]  # fmt: skip
    assert main(run) == 0, capsys.readouterr().err
    key = tmp_path / "okafor.key"
    generate_key_pair("R. Okafor", key)
    assert main(["sign", "--last", "--db", str(db), "--key", str(key), "--role", "operator"]) == 0
    for fmt in ("json", "html", "pdf"):
        out = tmp_path / f"record.{fmt}"
        assert main(["export", "--last", "--db", str(db), "--format", fmt, "--out", str(out)]) == 0
        capsys.readouterr()
        assert main(["verify", str(out), "--key", f"{key}.pub", "--db", str(db)]) == 0
        said = capsys.readouterr().out
        assert "holds" in said and "CHANGED" not in said, said
    record = json.loads((tmp_path / "record.json").read_text())
    text = json.dumps(record)
    assert "half-bridge-bootstrap" in text
    for stage in ("low-side-gate", "dead-time", "bootstrap-refresh", "switch-node",
                  "switching-energy"):  # fmt: skip
        assert f'"{stage}"' in text, stage
    assert '"dead_time"' in text and '"load_current"' in text  # the half-bridge design keys
    units = {w.get("name"): w.get("y_unit") for w in _waves(record)}
    assert units.get("i_switch") == "A" and units.get("switch") == "V"
    html = (tmp_path / "record.html").read_text()
    assert "dead_time_high_to_low" in html or "Dead time, high side off" in html


def _waves(node):
    """Every waveform object of the record, wherever it sits."""
    if isinstance(node, dict):
        if "raw_sha256" in node:  # a waveform, whichever encoding its codes have
            yield node
        for value in node.values():
            yield from _waves(value)
    elif isinstance(node, list):
        for value in node:
            yield from _waves(value)


@pytest.fixture(autouse=True)
def _locks(tmp_path, monkeypatch):
    monkeypatch.setenv("BRINGUP_LOCK_DIR", str(tmp_path / "locks"))
