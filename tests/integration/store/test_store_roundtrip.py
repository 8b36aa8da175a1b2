"""Round trips through a real SQLite file: snapshots, attempts, waveforms of every sample type."""

from __future__ import annotations

import datetime as dt
import json
import sqlite3

import numpy as np
import pytest
from store_samples import BENCH, BOARD, CHECKLIST, gate_waveform, record

from bringup.store import SessionLog, StoredWaveform, StoreError
from bringup.store.waveforms import DTYPES


def test_session_snapshot_and_summary_round_trip(db_path, log, session_id):
    data = log.session(session_id)
    assert data.board == BOARD and data.checklist == CHECKLIST and data.bench == BENCH
    summary = data.summary
    assert (summary.serial, summary.operator, summary.board_name, summary.board_revision) == (
        "DHS24-0001",
        "Ana Ortiz",
        "DHS-24 demo heater switch",
        "B",
    )
    assert summary.checklist_id == "high-side-bootstrap"
    assert summary.steps_total == 3 and summary.steps_done == 0 and not summary.finished
    # the id is short and typable: date, dash, four characters without look-alikes
    assert len(session_id) == 11 and session_id[6] == "-" and not set(session_id[7:]) & set("01ilo")
    assert log.resolve_session(session_id[:9]) == session_id
    # the same file read by a second, independent connection sees the same session
    with SessionLog.open(db_path) as other:
        assert [s.id for s in other.sessions()] == [session_id]


def test_attempt_fields_round_trip(log, session_id):
    started = dt.datetime(2026, 12, 1, 11, 0, 0, tzinfo=dt.timezone(dt.timedelta(hours=2)))
    attempt_id = record(log, session_id, started_utc=started, extra={"typed_reading": "3.30 V"})
    (attempt,) = log.attempts(session_id)
    assert attempt.id == attempt_id and attempt.attempt_no == 1 and attempt.seq == 1
    # an aware local time is stored as the same instant in UTC [computed: 11:00 +02:00 = 09:00Z]
    assert attempt.started_utc == "2026-12-01T09:00:00.000000Z"
    assert attempt.metrics == {
        "v_logic": {"value": 3.31, "unit": "V"},
        "ripple_pp": {"value": 0.012, "unit": "V"},
    }
    assert attempt.settings == {"CH1:SCALe": 1.0, "TIMebase:SCALe": 1e-6}
    assert attempt.extra == {"typed_reading": "3.30 V"} and attempt.notes == "probe on TP3"
    assert log.attempts(session_id, stage_id="power-rails", step_id="logic-rail") == [attempt]
    assert log.attempts(session_id, step_id="first-power") == []


@pytest.mark.parametrize("dtype", DTYPES)
def test_waveform_of_each_sample_type_round_trips_exactly(log, session_id, dtype):
    sent = gate_waveform(points=50_001, dtype=dtype, seed=3)
    attempt_id = record(log, session_id, waveforms={"vgs": sent})
    got = log.load_waveform(attempt_id, "vgs")
    assert got.codes.dtype == np.dtype(dtype) and np.array_equal(got.codes, sent.codes)
    # volts = code * y_increment + y_origin, time = index * x_increment + x_origin
    # [read: sim_instruments/README.md, TRACe:PREamble?], recomputed here with numpy directly
    expected = sent.codes.astype(np.float64) * sent.y_increment + sent.y_origin
    assert np.array_equal(got.volts(), expected)
    assert got.times()[10] == pytest.approx(-2e-6 + 10 * 1e-9, rel=1e-12)
    (description,) = log.attempts(session_id)[0].waveforms.values()
    assert description["points"] == 50_001 and description["dtype"] == dtype


def test_big_endian_codes_are_stored_as_their_values(log, session_id):
    # IEEE 488.2 NORMal byte order is big-endian: '>i2' from PyVISA must keep its values
    codes = np.array([-32768, -1, 0, 1, 258, 32767], dtype=">i2")
    attempt_id = record(
        log, session_id, waveforms={"sw": StoredWaveform(codes, 2e-9, 0.0, 0.5, 1.0)}
    )
    got = log.load_waveform(attempt_id, "sw")
    assert got.codes.tolist() == [-32768, -1, 0, 1, 258, 32767]
    assert got.volts().tolist() == [-16383.0, 0.5, 1.0, 1.5, 130.0, 16384.5]  # [computed: c*0.5+1]


def test_numpy_scalars_reach_sqlite_as_numbers_not_blobs(db_path, log, session_id):
    # np.float32/np.int64 bound directly by sqlite3 become raw bytes ([read: STACK.md, sqlite-utils 4])
    record(
        log,
        session_id,
        metrics={
            "rise_time_s": {"value": np.float32(41.5e-9), "unit": "s"},
            "edges": np.int64(12),
            "ok": np.bool_(True),
            "lost": float("nan"),
        },
        settings={"points": np.int32(10_000), "scale": np.float64(2.0)},
        waveforms={
            "g": StoredWaveform(np.arange(8, dtype=np.int16), np.float32(1e-9), np.float64(0))
        },
    )
    conn = sqlite3.connect(db_path)
    types = dict(conn.execute("SELECT name, typeof(value) FROM metrics").fetchall())
    assert types == {"rise_time_s": "real", "edges": "real", "lost": "null"}
    assert conn.execute(
        "SELECT typeof(x_increment), typeof(x_origin) FROM waveforms"
    ).fetchone() == (
        "real",
        "real",
    )
    # the JSON columns are strict JSON that SQLite's own JSON functions read
    row = conn.execute(
        "SELECT json_extract(settings_json, '$.points'), json_type(settings_json, '$.points'),"
        " json_extract(metrics_json, '$.lost'), json_extract(metrics_json, '$.ok')"
        " FROM attempts"
    ).fetchone()
    assert row == (10_000, "integer", None, 1)
    assert (
        conn.execute(
            "SELECT count(*) FROM attempts WHERE typeof(metrics_json) = 'blob'"
        ).fetchone()[0]
        == 0
    )
    conn.close()
    value = log.attempts(session_id)[0].metrics["rise_time_s"]["value"]
    assert value == float(np.float32(41.5e-9))


def test_metrics_are_queryable_with_plain_sqlite(db_path, log, session_id):
    record(log, session_id, metrics={"v_logic": {"value": 3.28, "unit": "V"}})
    record(log, session_id, metrics={"v_logic": {"value": 3.31, "unit": "V"}})
    conn = sqlite3.connect(db_path)
    rows = conn.execute(
        "SELECT a.attempt_no, m.value, m.unit FROM metrics m JOIN attempts a ON a.id = m.attempt_id"
        " WHERE m.name = 'v_logic' ORDER BY a.attempt_no"
    ).fetchall()
    assert rows == [(1, 3.28, "V"), (2, 3.31, "V")]
    assert json.loads(conn.execute("SELECT metrics_json FROM attempts LIMIT 1").fetchone()[0])
    conn.close()


def test_ten_megapoint_int16_takes_under_40_percent_of_float64(log, session_id, db_path):
    wave = gate_waveform(points=10_000_000, dtype="int16", seed=1)
    attempt_id = record(log, session_id, waveforms={"vgs": wave})
    stored = log.attempts(session_id)[0].waveforms["vgs"]["stored_bytes"]
    float64_bytes = 10_000_000 * 8  # [computed: 8 bytes per IEEE 754 double]
    assert stored < 0.40 * float64_bytes
    assert np.array_equal(log.load_waveform(attempt_id, "vgs").codes, wave.codes)


def test_bad_content_is_refused_in_one_line(log, session_id):
    with pytest.raises(StoreError, match="outcome 'passed' is not one of"):
        record(log, session_id, outcome="passed")
    with pytest.raises(StoreError, match="naive datetime"):
        record(log, session_id, started_utc=dt.datetime(2026, 12, 1, 10, 0))
    with pytest.raises(StoreError, match="not an ISO 8601 time"):
        record(log, session_id, finished_utc="yesterday")
    with pytest.raises(StoreError, match="cannot store a value of type bytes"):
        record(log, session_id, extra={"raw": b"\x00\x01"})
    with pytest.raises(StoreError, match="no session 'nope'"):
        record(log, "nope")
    with pytest.raises(StoreError, match="operator is required"):
        record(log, session_id, operator="  ")
    assert log.attempts(session_id) == []  # nothing half-logged by a refusal
    for error in ("outcome", "naive"):
        assert "\n" not in error


def test_non_ascii_text_round_trips_and_hashes_as_utf8(db_path, log, session_id):
    record(log, session_id, operator="Zoë Ångström", notes="Vgs ≈ 11.8 V, probe Ω-rated")
    (attempt,) = log.attempts(session_id)
    assert attempt.operator == "Zoë Ångström" and attempt.notes == "Vgs ≈ 11.8 V, probe Ω-rated"
    conn = sqlite3.connect(db_path)
    stored = conn.execute("SELECT notes FROM attempts").fetchone()[0]
    conn.close()
    assert stored == "Vgs ≈ 11.8 V, probe Ω-rated" and log.verify_chain(session_id).ok


def test_session_ids_resolve_from_a_unique_prefix_only(log, session_id):
    other = log.create_session(
        board=BOARD, checklist=CHECKLIST, bench=None, serial="DHS24-0002", operator="Ana"
    )
    assert other != session_id and log.resolve_session(other) == other
    with pytest.raises(StoreError, match="matches 2 sessions; type more of the id"):
        log.resolve_session(session_id[:6])
    with pytest.raises(StoreError, match="no session 'zzzz' in this log"):
        log.resolve_session("zzzz")
    with pytest.raises(StoreError, match="no session id given"):
        log.resolve_session("  ")
    assert [s.serial for s in log.sessions()] == [
        "DHS24-0002",
        "DHS24-0001",
    ]  # latest activity first
