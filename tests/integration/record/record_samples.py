"""Sessions for the record's tests, written through the real session log into real SQLite files.

The contents are those of a plausible bring-up of the invented demo board: noisy, quantised,
ringing waveforms stored as int8/int16 codes with their scale; verdicts from the project's
ILAC-G8 ``judge``; a gate step that failed (source-follower symptom) and was retaken; an edge
step that failed within its guard band and was waived with a reason; a skipped step; a note.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from bringup.analysis.verdict import Limit, judge
from bringup.boards.board_file import load_board
from bringup.store.log import SessionLog
from bringup.store.waveforms import StoredWaveform

CHECKLIST = {
    "id": "hs-bootstrap-standard",
    "name": "High-side bootstrap stage bring-up",
    "version": "1.2",
    "stages": [
        {
            "id": "power-rails",
            "title": "Power rails",
            "cautions": ["Raise the bus slowly with the current limit set low."],
            "steps": [
                {"id": "bus", "title": "Bus voltage at the board", "targets": ["bus_level"]},
                {
                    "id": "vdrv",
                    "title": "Gate-drive rail",
                    "targets": ["vdrv_level", "vdrv_ripple"],
                },
                {"id": "logic-ripple", "title": "Logic rail ripple", "targets": ["logic_ripple"]},
            ],
        },
        {
            "id": "gate-overdrive",
            "title": "Gate overdrive",
            "cautions": ["Measure Vgs with a differential probe rated for the switch node."],
            "steps": [{"id": "vgs-on", "title": "Vgs while on", "targets": ["vgs_on"]}],
        },
        {
            "id": "edge-speed",
            "title": "Edge speed",
            "steps": [
                {"id": "switch-rise", "title": "Switch node rise", "targets": ["switch_rise"]}
            ],
        },
        {
            "id": "droop-max-on-time",
            "title": "Bootstrap droop at the longest on-time",
            "steps": [{"id": "droop", "title": "Vgs droop", "targets": ["vgs_droop"]}],
        },
        {
            "id": "thermal-soak",
            "title": "Thermal soak",
            "cautions": ["The heatsink gets hot: do not touch it during the soak."],
            "steps": [{"id": "soak", "title": "Heatsink soak", "targets": ["soak_final"]}],
        },
    ],
}

BENCH = {
    "scope": {
        "resource": "TCPIP::127.0.0.1::50101::SOCKET",
        "profile": "simscope",
        "calibration_due": "2027-03-31",
        "channels": {
            "1": {"net": "vgs", "probe_ratio": 10},
            "2": {"net": "switch", "probe_ratio": 10},
            "3": {"net": "vdrv", "probe_ratio": 1},
        },
    },
    "supply": {"resource": "TCPIP::127.0.0.1::50102::SOCKET", "profile": "simsupply"},
    "thermometer": {
        "resource": "TCPIP::127.0.0.1::50103::SOCKET",
        "profile": "simtherm",
        "calibration_due": "2027-01-15",
    },
    "utc_offset": "+01:00",
}
#: the same bench as a simulated one: a session on it is a rehearsal
SIMULATED_BENCH = {**BENCH, "simulation": {"enabled": True}}

IDN = {
    "scope": "NULLPOINT,SIMSCOPE-4,SN0042,1.0",
    "supply": "NULLPOINT,SIMSUPPLY-1,SN0007,1.0",
    "thermometer": "NULLPOINT,SIMTHERM-1,SN0003,1.0",
}


def board_snapshot() -> dict:
    """The demo board as SI values (what the runner stores), plus a soak target for the test."""
    board = load_board("demo")
    targets = {
        tid: {
            "label": t.label,
            "unit": t.unit,
            "min": t.limit.min,
            "max": t.limit.max,
            "uncertainty": t.uncertainty,
            "rule": t.rule,
        }
        for tid, t in board.targets.items()
    }
    targets.setdefault(
        "soak_final",
        {"label": "Settled heatsink temperature", "unit": "degC", "min": None, "max": 70.0,
         "uncertainty": 1.0, "rule": "guarded"},
    )  # fmt: skip
    return {
        "board": {
            "name": board.name,
            "revision": board.revision,
            "serial_pattern": board.serial_pattern,
            "description": board.description,
        },
        "design": dict(board.design),
        "targets": targets,
    }


def _verdict(board: dict, target: str, value: float | None) -> dict:
    t = board["targets"][target]
    limit = Limit(t["min"], t["max"], t["unit"])
    return judge(value, limit, t["uncertainty"], t["rule"]).to_dict()


def _worst(verdicts: dict) -> str:
    order = ("pass", "conditional-pass", "conditional-fail", "fail")
    return max((v["outcome"] for v in verdicts.values()), key=order.index)


def _codes(y: np.ndarray, lsb: float, dtype: str) -> np.ndarray:
    info = np.iinfo(dtype)
    return np.clip(np.round(y / lsb), info.min, info.max).astype(dtype)


def gate_wave(rng: np.random.Generator, high: float, n: int = 4000) -> StoredWaveform:
    """Vgs: 0 V, an edge at 1 us rising to ``high`` with ringing, noise; int16 at 1 mV/code."""
    t = np.arange(n) * 1e-9
    on = (t > 1e-6).astype(float)
    tau = 60e-9
    rise = high * (1 - np.exp(-np.clip(t - 1e-6, 0, None) / tau)) * on
    ring = 0.6 * np.exp(-(t - 1e-6) / 100e-9) * np.sin(2 * np.pi * 30e6 * (t - 1e-6)) * on
    y = rise + ring + rng.normal(0, 0.03, n)
    return StoredWaveform(_codes(y, 1e-3, "int16"), 1e-9, 0.0, 1e-3, 0.0, "V", "s")


def switch_wave(rng: np.random.Generator, n: int = 3000) -> StoredWaveform:
    """Switch node 0 -> 24 V, slow edge (about 210 ns 10-90 %), int8 at 0.25 V/code."""
    t = np.arange(n) * 1e-9 - 0.5e-6
    y = 24.0 / (1 + np.exp(-t / 48e-9)) + rng.normal(0, 0.15, n)
    y += 3.0 * np.exp(-np.clip(t, 0, None) / 80e-9) * np.sin(2 * np.pi * 25e6 * t) * (t > 0)
    return StoredWaveform(_codes(y - 8.0, 0.25, "int8"), 1e-9, -0.5e-6, 0.25, 8.0, "V", "s")


def droop_wave(rng: np.random.Generator, n: int = 5000) -> StoredWaveform:
    """Vgs over the 38 us on-time: 11.6 V drooping linearly by 0.12 V; int16 at 0.5 mV/code."""
    t = np.arange(n) * 10e-9
    on = (t >= 2e-6) & (t <= 40e-6)
    y = np.where(on, 11.6 - 0.12 * (t - 2e-6) / 38e-6, 0.0) + rng.normal(0, 0.02, n)
    return StoredWaveform(_codes(y, 0.5e-3, "int16"), 10e-9, 0.0, 0.5e-3, 0.0, "V", "s")


def soak_wave(rng: np.random.Generator) -> StoredWaveform:
    """Heatsink temperature every 5 s for 20 min, first order to 61 degC (tau 240 s)."""
    t = np.arange(241) * 5.0
    y = 61.0 - (61.0 - 25.0) * np.exp(-t / 240.0) + rng.normal(0, 0.05, t.size)
    return StoredWaveform(_codes(y, 0.01, "int16"), 5.0, 0.0, 0.01, 0.0, "degC", "s")


@dataclass
class Session:
    """A session written into ``db`` and what the tests need to know about it."""

    db: Path
    session_id: str
    serial: str


def _times(k: int) -> tuple[dt.datetime, dt.datetime]:
    """Start and end of an attempt: just before the log stamps it (it was measured just now)."""
    end = dt.datetime.now(dt.UTC)
    return end - dt.timedelta(milliseconds=5), end


def write_session(
    db: Path,
    *,
    complete: bool = True,
    waive: bool = True,
    seed: int = 7,
    simulated: bool = False,
    bench: dict | None = None,
) -> Session:
    """Write the demo session into ``db``; ``complete=False`` stops before the last stages;
    ``simulated``: on a simulated bench (a rehearsal); ``bench``: another bench snapshot."""
    rng = np.random.default_rng(seed)
    board = board_snapshot()
    serial = "DHS24-0117"
    with SessionLog.open(db) as log:
        sid = log.create_session(
            board=board,
            checklist=CHECKLIST,
            bench=bench if bench is not None else SIMULATED_BENCH if simulated else BENCH,
            serial=serial,
            operator="R. Okafor",
        )
        k = 0

        def attempt(stage, step, metrics, predictions, verdict_values, waves=None, notes="",
                    extra=None, settings=None, operator="R. Okafor"):  # fmt: skip
            nonlocal k
            k += 1
            start, end = _times(k)
            verdicts = {t: _verdict(board, t, v) for t, v in verdict_values.items()}
            log.record_attempt(
                sid, stage_id=stage, step_id=step, operator=operator,
                started_utc=start, finished_utc=end, instruments=IDN,
                settings=settings or {"timebase_s": 1e-6, "trigger_level_v": 6.0},
                metrics=metrics, predictions=predictions, verdicts=verdicts,
                outcome=_worst(verdicts), notes=notes, waveforms=waves, extra=extra,
            )  # fmt: skip

        attempt(
            "power-rails",
            "bus",
            {"bus_level": {"value": 24.07, "unit": "V"}},
            {"bus_level": {"value": 24.0, "unit": "V", "basis": "design bus_voltage"}},
            {"bus_level": 24.07},
            settings={"supply_setpoint_v": 24.0, "current_limit_a": 1.0},
        )
        attempt("power-rails", "vdrv",
                # The scope answered 9.91E37 (SCPI NaN) for the overshoot: logged as no value.
                {"vdrv_level": {"value": 11.93, "unit": "V"}, "vdrv_ripple": {"value": 0.084, "unit": "V"},
                 "vdrv_overshoot": {"value": float("nan"), "unit": "V"}},
                {"vdrv_level": {"value": 12.0, "unit": "V", "basis": "design gate_drive_voltage"}},
                {"vdrv_level": 11.93, "vdrv_ripple": 0.084})  # fmt: skip
        log.record_event(
            sid,
            kind="skip",
            stage_id="power-rails",
            step_id="logic-ripple",
            operator="R. Okafor",
            reason="no low-capacitance probe on the bench today",
        )
        # Gate: the first try shows the source-follower symptom (gate tied to the bus).
        attempt(
            "gate-overdrive",
            "vgs-on",
            {"vgs_on": {"value": 4.12, "unit": "V"}},
            {"vgs_on": {"value": 11.4, "unit": "V", "basis": "V_DRV - V_F (bootstrap)"}},
            {"vgs_on": 4.12},
            waves={"vgs": gate_wave(rng, 4.1)},
            notes="Vgs only 4 V: bootstrap diode not fitted; fitted D3 and retook.",
            extra={"markers": {"vgs": [{"kind": "level", "label": "limit 10.5 V", "y": 10.5}]}},
        )
        if complete:
            attempt("gate-overdrive", "vgs-on", {"vgs_on": {"value": 11.58, "unit": "V"}},
                    {"vgs_on": {"value": 11.4, "unit": "V", "basis": "V_DRV - V_F (bootstrap)"}},
                    {"vgs_on": 11.58}, waves={"vgs": gate_wave(rng, 11.6)},
                    extra={"markers": {"vgs": [
                        {"kind": "level", "label": "limit 10.5 V", "y": 10.5},
                        {"kind": "level", "label": "90 %", "y": 10.44},
                        {"kind": "time", "label": "t90", "t": 1.138e-6},
                    ]}})  # fmt: skip
            attempt("edge-speed", "switch-rise",
                    {"switch_rise": {"value": 2.06e-7, "unit": "s"}, "overshoot_pct": {"value": 11.9, "unit": "%"}},
                    {"switch_rise": {"value": 1.9e-7, "unit": "s", "basis": "Q_gd / I_on"}},
                    {"switch_rise": 2.06e-7}, waves={"switch": switch_wave(rng)},
                    extra={"markers": {"switch": [
                        {"kind": "level", "label": "10 %", "y": 2.4},
                        {"kind": "level", "label": "90 %", "y": 21.6},
                        {"kind": "time", "label": "t10", "t": -1.05e-7},
                        {"kind": "time", "label": "t90", "t": 1.01e-7},
                    ]}})  # fmt: skip
            if waive:
                log.record_event(
                    sid,
                    kind="waive",
                    stage_id="edge-speed",
                    step_id="switch-rise",
                    operator="M. Lindqvist",
                    reason="6 ns over, within the guard band; loss budget still met",
                )
            attempt("droop-max-on-time", "droop", {"vgs_droop": {"value": 0.121, "unit": "V"}},
                    {"vgs_droop": {"value": 0.106, "unit": "V", "basis": "Q_total / C_boot"}},
                    {"vgs_droop": 0.121}, waves={"vgs": droop_wave(rng)},
                    extra={"markers": {"vgs": [
                        {"kind": "window", "label": "on-time 38 us", "t": 2e-6, "t_end": 40e-6},
                    ]}})  # fmt: skip
            attempt("thermal-soak", "soak", {"soak_final": {"value": 61.04, "unit": "degC"},
                                             "soak_tau_s": {"value": 238.7, "unit": "s"}},
                    {"soak_final": {"value": 62.5, "unit": "degC", "basis": "T_A + P * R_th"}},
                    {"soak_final": 61.04}, waves={"temperature": soak_wave(rng)},
                    extra={"models": {"temperature": {"kind": "first-order-soak", "final_value": 61.04,
                                                      "initial_value": 25.0, "tau_s": 238.7,
                                                      "start_s": 0.0, "unit": "degC"}}})  # fmt: skip
            log.record_event(
                sid,
                kind="note",
                operator="R. Okafor",
                reason="Ambient 23 degC, board on the standard fixture.",
            )
    return Session(db, sid, serial)


@dataclass
class Keys:
    operator: Path
    reviewer: Path
