"""Sample content for the session-log tests: a board, a checklist, noisy quantised waveforms."""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np

from bringup.store import SessionLog, StoredWaveform

BOARD = {
    "board": {
        "name": "DHS-24 demo heater switch",
        "revision": "B",
        "serial_pattern": "^DHS24-[0-9]{4}$",
    },
    "design": {"bus_voltage": 24.0, "gate_drive_voltage": 12.0, "bootstrap_capacitance": 1e-6},
    "targets": {"vgs_on": {"label": "Vgs while on", "unit": "V", "min": 10.0, "max": 15.0}},
}
CHECKLIST = {
    "id": "high-side-bootstrap",
    "name": "High-side switch with bootstrap drive",
    "stages": [
        {"id": "power-rails", "steps": [{"id": "first-power"}, {"id": "logic-rail"}]},
        {"id": "gate-overdrive", "steps": [{"id": "vgs-on"}]},
    ],
}
BENCH = {"scope": {"resource": "TCPIP0::127.0.0.1::5025::SOCKET", "idn": "NULLPOINT,SIMSCOPE"}}


def gate_waveform(points: int = 20_000, dtype: str = "int16", seed: int = 0) -> StoredWaveform:
    """A gate-source record as a scope would send it: RC edges, ringing, noise, quantised codes.

    A 12 V, 1 MHz pattern (so that a short record holds many edges), 1 ns sampling; codes step
    10 mV (int16/int32/uint16), 100 mV (8-bit) or raw volts (float32/float64, y_increment 1).
    """
    rng = np.random.default_rng(seed)
    phase = np.arange(1000) / 1000.0  # one 1 us period at 1 ns, tiled below
    period = np.where(
        phase < 0.5, 12 * (1 - np.exp(-phase / 0.02)), 12 * np.exp(-(phase - 0.5) / 0.02)
    )
    period += 0.8 * np.exp(-(phase % 0.5) / 0.01) * np.sin(2 * np.pi * 30 * phase)  # ringing
    volts = np.resize(period, points)
    volts += rng.normal(0.0, 0.03, points)  # noise
    if dtype in ("float32", "float64"):
        return StoredWaveform(volts.astype(dtype), x_increment=1e-9, x_origin=-2e-6)
    step = 0.1 if dtype in ("int8", "uint8") else 0.01
    offset = 128 if dtype == "uint8" else (32768 if dtype == "uint16" else 0)
    origin = -offset * step
    info = np.iinfo(dtype)
    codes = np.clip(np.round((volts - origin) / step), info.min, info.max).astype(dtype)
    return StoredWaveform(
        codes, x_increment=1e-9, x_origin=-2e-6, y_increment=step, y_origin=origin
    )


def record(
    log: SessionLog, session_id: str, step: str = "logic-rail", outcome: str = "pass", **over
) -> int:
    """Log one attempt of ``power-rails/<step>`` with plausible content; ``over`` overrides."""
    fields = {
        "stage_id": "power-rails",
        "step_id": step,
        "operator": "Ana Ortiz",
        "started_utc": "2026-12-01T10:00:00.000000Z",
        "finished_utc": "2026-12-01T10:00:02.500000Z",
        "instruments": {"scope": "NULLPOINT,SIMSCOPE-4,0001,1.0"},
        "settings": {"CH1:SCALe": 1.0, "TIMebase:SCALe": 1e-6},
        "metrics": {
            "v_logic": {"value": 3.31, "unit": "V"},
            "ripple_pp": {"value": 0.012, "unit": "V"},
        },
        "predictions": {"v_logic": 3.3},
        "verdicts": {"v_logic": {"outcome": outcome, "margin": 0.14}},
        "outcome": outcome,
        "notes": "probe on TP3",
    }
    fields.update(over)
    return log.record_attempt(session_id, **fields)


def file_digest(path: Path) -> str:
    """SHA-256 of a file's bytes (to show a refused file was not modified)."""
    return hashlib.sha256(path.read_bytes()).hexdigest()
