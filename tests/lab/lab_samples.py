"""Bench logs for the lab tests, made through the log's own API: sessions with noisy, quantised
waveforms, retakes, events and sign-offs (the sign-off bytes are stored as given: the lab
copies them; signing itself is tested with real keys in test_lab_read.py)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np

from bringup.store import SessionLog, StoredWaveform

BOARD = {
    "board": {"name": "DHS-24 demo heater switch", "revision": "B"},
    "design": {"bus_voltage": 24.0, "gate_drive_voltage": 12.0, "bootstrap_capacitance": 1e-6},
}
CHECKLIST = {
    "id": "high-side-bootstrap",
    "stages": [
        {"id": "power-rails", "steps": [{"id": "first-power"}, {"id": "logic-rail"}]},
        {"id": "gate-overdrive", "steps": [{"id": "vgs-on"}]},
    ],
}
BENCH = {"kind": "simulated", "scope": {"resource": "TCPIP0::127.0.0.1::5025::SOCKET"}}


def gate_codes(points: int, seed: int) -> StoredWaveform:
    """A 12 V gate record: RC edges, ringing, noise, quantised to 10 mV int16 codes."""
    rng = np.random.default_rng(seed)
    phase = np.arange(1000) / 1000.0
    period = np.where(
        phase < 0.5, 12 * (1 - np.exp(-phase / 0.02)), 12 * np.exp(-(phase - 0.5) / 0.02)
    )
    period += 0.8 * np.exp(-(phase % 0.5) / 0.01) * np.sin(2 * np.pi * 30 * phase)
    volts = np.resize(period, points) + rng.normal(0.0, 0.03, points)
    codes = np.clip(np.round(volts / 0.01), -32768, 32767).astype("int16")
    return StoredWaveform(codes, x_increment=1e-9, x_origin=-2e-6, y_increment=0.01, y_origin=0.0)


def add_session(log: SessionLog, serial: str, seed: int, points: int = 5000) -> str:
    """One session: two attempts (a fail then a retake), a note, a finish, two sign-offs."""
    sid = log.create_session(
        board=BOARD, checklist=CHECKLIST, bench=BENCH, serial=serial, operator="Ana Ortiz"
    )
    for outcome, rise in (("fail", 61e-9 + seed * 1e-10), ("pass", 38e-9 + seed * 1e-10)):
        log.record_attempt(
            sid,
            stage_id="gate-overdrive",
            step_id="vgs-on",
            operator="Ana Ortiz",
            started_utc="2026-12-01T10:00:00.000000Z",
            finished_utc="2026-12-01T10:00:02.500000Z",
            instruments={"scope": "NULLPOINT,SIMSCOPE-4,0001,1.0"},
            settings={"CH1:SCALe": 2.0},
            metrics={"rise_time_s": {"value": rise, "unit": "s"}, "vgs_on": 11.8 - seed * 0.01},
            predictions={"rise_time_s": 40e-9},
            verdicts={"rise_time_s": {"outcome": outcome}},
            outcome=outcome,
            notes="probe on TP3 — Ω",
            waveforms={"gate": gate_codes(points, seed)},
        )
    log.record_event(sid, kind="note", operator="Ana Ortiz", reason="heatsink touched")
    log.record_event(
        sid, kind="finish", operator="Ana Ortiz", payload={"verdict": "pass", "stages": {}}
    )
    for role, key in (("operator", b"\x01" * 32), ("reviewer", b"\x02" * 32)):
        log.add_signature(
            sid, name=f"{role} person", role=role, signed_utc="2026-12-01T11:00:00Z",
            public_key=key, fingerprint=key.hex()[:16], signature=bytes(range(64)),
            content_digest="0" * 64,
        )  # fmt: skip
    return sid


def make_log(path: Path, sessions: int, *, first_seed: int = 0, points: int = 5000) -> list[str]:
    """A log at ``path`` with ``sessions`` sessions; their ids, oldest first."""
    with SessionLog.open(path) as log:
        return [
            add_session(log, f"DHS24-{first_seed + i:04d}", first_seed + i, points)
            for i in range(sessions)
        ]


def bringup(*args: str, env: dict[str, str], cwd: Path | None = None):
    """Run ``python -m bringup ARGS`` as a real process; the CompletedProcess."""
    return subprocess.run(
        [sys.executable, "-m", "bringup", *args],
        env=env, cwd=cwd, capture_output=True, text=True, timeout=300, check=False,
    )  # fmt: skip


def lab_counts(conn) -> dict[str, int]:
    """Rows in each lab table."""
    tables = ("logs", "sessions", "attempts", "metrics", "waveforms", "events", "signatures")
    return {t: conn.execute(f"SELECT count(*) FROM bringup.{t}").fetchone()[0] for t in tables}


def log_counts(path: Path) -> dict[str, int]:
    """Rows in each table of the bench log (one log: ``logs`` is 1)."""
    import sqlite3

    tables = ("sessions", "attempts", "metrics", "waveforms", "events", "signatures")
    conn = sqlite3.connect(path)
    try:
        found = {t: conn.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in tables}
    finally:
        conn.close()
    return {"logs": 1, **found}
