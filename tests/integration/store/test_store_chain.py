"""The hash chain: it verifies an honest log and points at the first entry changed behind its back.

Tampering is done the way someone with the file would do it: plain sqlite3, dropping the
append-only triggers first.
"""

from __future__ import annotations

import hashlib
import json
import sqlite3

import numpy as np
import pytest
from store_samples import gate_waveform, record

from bringup.store import StoredWaveform, StoreError
from bringup.store.chain_json import sha256_hex
from bringup.store.waveforms import encode_waveform


def tamper(db_path, *statements: str) -> None:
    conn = sqlite3.connect(db_path)
    for (name,) in conn.execute("SELECT name FROM sqlite_master WHERE type = 'trigger'").fetchall():
        conn.execute(f"DROP TRIGGER {name}")
    for sql in statements:
        conn.execute(sql)
    conn.commit()
    conn.close()


@pytest.fixture
def filled(log, session_id):
    """Four entries: a failed attempt with a waveform, its waiver, a passed attempt, a note."""
    record(
        log,
        session_id,
        step="first-power",
        outcome="fail",
        waveforms={"vgs": gate_waveform(20_000)},
    )
    log.record_event(
        session_id,
        kind="waive",
        operator="Ben Ito",
        stage_id="power-rails",
        step_id="first-power",
        reason="known",
    )
    record(log, session_id, step="logic-rail", outcome="pass")
    log.record_event(session_id, kind="note", operator="Ana Ortiz", reason="all rails fine")
    assert log.verify_chain(session_id).ok
    return session_id


def test_sha256_known_answer():
    # [read: FIPS 180-2, Appendix B.1, SHA-256 of "abc"]
    assert sha256_hex("abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"


def test_the_stored_chain_follows_the_documented_construction(db_path, log, filled):
    # Recomputed here with hashlib and json only, from what is stored, not with the store's code:
    # content_hash = SHA-256(sorted compact JSON of field hashes); chain = SHA-256(prev + content)
    conn = sqlite3.connect(db_path)
    genesis = conn.execute("SELECT genesis_hash FROM sessions").fetchone()[0]
    rows = conn.execute(
        "SELECT seq, field_hashes_json, content_hash, chain_hash FROM attempts"
        " UNION ALL SELECT seq, field_hashes_json, content_hash, chain_hash FROM events ORDER BY seq"
    ).fetchall()
    conn.close()
    previous = genesis
    for _seq, fields, content, link in rows:
        compact = json.dumps(json.loads(fields), sort_keys=True, separators=(",", ":"))
        assert hashlib.sha256(compact.encode()).hexdigest() == content
        assert hashlib.sha256((previous + content).encode()).hexdigest() == link
        previous = link
    report = log.verify_chain(filled)
    assert report.ok and report.entries == 4 and [r[0] for r in rows] == [1, 2, 3, 4]
    assert report.head == previous == log.chain_head(filled) == log.session(filled).chain_head


def test_an_edited_metric_value_is_found(db_path, log, filled):
    tamper(db_path, "UPDATE metrics SET value = 3.30 WHERE name = 'v_logic' AND attempt_id = 1")
    report = log.verify_chain(filled)
    assert not report.ok and report.seq == 1 and report.table == "attempts"
    assert report.field == "metric:v_logic" and "changed after logging" in report.problem


def test_an_edited_metric_in_the_json_is_found(db_path, log, filled):
    tamper(
        db_path,
        "UPDATE attempts SET metrics_json = json_set(metrics_json, '$.v_logic.value', 3.3) WHERE seq = 3",
    )
    report = log.verify_chain(filled)
    assert (report.ok, report.seq, report.field) == (False, 3, "metrics")


def test_a_failure_turned_into_a_pass_is_found(db_path, log, filled):
    tamper(db_path, "UPDATE attempts SET outcome = 'pass' WHERE seq = 1")
    assert (log.verify_chain(filled).seq, log.verify_chain(filled).field) == (1, "outcome")


def test_a_replaced_waveform_is_found(db_path, log, filled):
    other = encode_waveform(gate_waveform(20_000, seed=99))
    conn = sqlite3.connect(db_path)
    for (name,) in conn.execute("SELECT name FROM sqlite_master WHERE type = 'trigger'").fetchall():
        conn.execute(f"DROP TRIGGER {name}")
    # new samples and even a matching digest column: the verifier digests the samples themselves
    conn.execute("UPDATE waveforms SET data = ?, raw_sha256 = ?", [other.data, other.raw_sha256])
    conn.commit()
    conn.close()
    report = log.verify_chain(filled)
    assert (report.ok, report.seq, report.field) == (False, 1, "waveform:vgs")


def test_a_damaged_waveform_blob_is_never_returned_as_samples(db_path, log, filled):
    conn = sqlite3.connect(db_path)
    blob = bytearray(conn.execute("SELECT data FROM waveforms").fetchone()[0])
    conn.close()
    for offset in range(200, len(blob), 997):  # past the 16-byte chunk header: still "valid"
        blob[offset] ^= 0x5A
    conn = sqlite3.connect(db_path)
    conn.execute("DROP TRIGGER waveforms_no_update")
    conn.execute("UPDATE waveforms SET data = ?", [bytes(blob)])
    conn.commit()
    conn.close()
    with pytest.raises(StoreError, match="waveform 'vgs' of attempt 1: waveform blob is damaged"):
        log.load_waveform(1, "vgs")
    assert log.verify_chain(filled).field == "waveform:vgs"


def test_a_rescaled_waveform_is_found(db_path, log, filled):
    tamper(db_path, "UPDATE waveforms SET y_increment = y_increment * 1.1")
    assert log.verify_chain(filled).field == "waveform:vgs"


def test_a_deleted_entry_is_found(db_path, log, filled):
    tamper(db_path, "DELETE FROM events WHERE seq = 2")
    report = log.verify_chain(filled)
    assert not report.ok and report.seq == 3 and "entry 2 is missing" in report.problem


def test_reordered_entries_are_found(db_path, log, filled):
    tamper(
        db_path,
        "UPDATE events SET seq = 100 WHERE seq = 2",
        "UPDATE attempts SET seq = 2 WHERE seq = 3",
        "UPDATE events SET seq = 3 WHERE seq = 100",
    )
    report = log.verify_chain(filled)
    assert not report.ok and report.seq == 2 and report.field == "seq"


def test_an_edited_reason_is_found(db_path, log, filled):
    tamper(db_path, "UPDATE events SET reason = 'approved by the customer' WHERE kind = 'waive'")
    assert (log.verify_chain(filled).seq, log.verify_chain(filled).field) == (2, "reason")


def test_an_edited_board_snapshot_is_found(db_path, log, filled):
    tamper(
        db_path, "UPDATE sessions SET board_json = json_set(board_json, '$.design.bus_voltage', 12)"
    )
    report = log.verify_chain(filled)
    assert not report.ok and "snapshot" in report.problem and report.seq is None


def test_a_rehashed_entry_still_breaks_the_link_to_the_next(db_path, log, filled):
    # Edit entry 3's notes and recompute its field and content hashes as well: its chain hash
    # still commits to the old content, so the link breaks there.
    conn = sqlite3.connect(db_path)
    fields = json.loads(
        conn.execute("SELECT field_hashes_json FROM attempts WHERE seq = 3").fetchone()[0]
    )
    conn.close()
    fields["notes"] = sha256_hex(json.dumps("probe on TP9"))
    compact = json.dumps(fields, sort_keys=True, separators=(",", ":"))
    tamper(
        db_path,
        "UPDATE attempts SET notes = 'probe on TP9' WHERE seq = 3",
        f"UPDATE attempts SET field_hashes_json = '{compact}', content_hash = '{sha256_hex(compact)}' WHERE seq = 3",
    )
    report = log.verify_chain(filled)
    assert (report.ok, report.seq, report.field) == (False, 3, "chain_hash")


def test_dropping_the_newest_entry_shows_only_against_a_sealed_head(db_path, log, filled):
    sealed = log.chain_head(filled)
    tamper(db_path, "DELETE FROM events WHERE seq = 4")
    report = log.verify_chain(filled)
    # a chain cannot see its own truncation; the signed record's sealed head can
    assert report.ok and report.entries == 3 and report.head != sealed


def test_waveform_codes_digest_is_sha256_of_little_endian_bytes(log, session_id):
    wave = gate_waveform(1000)
    attempt_id = record(log, session_id, waveforms={"vgs": wave})
    description = log.attempts(session_id)[0].waveforms["vgs"]
    expected = hashlib.sha256(wave.codes.astype("<i2").tobytes()).hexdigest()
    assert description["raw_sha256"] == expected
    assert np.array_equal(log.load_waveform(attempt_id, "vgs").codes, wave.codes)


def test_negative_zero_reads_back_as_zero_and_the_chain_still_verifies(db_path, log, session_id):
    # SQLite keeps no negative zero in a REAL column [read: sqlite.org/datatype3.html: REAL
    # values with no fractional part may be stored as integers]; a hash over -0.0 would break
    wave = StoredWaveform(
        np.arange(100, dtype=np.int16), 1e-9, x_origin=-0.0, y_origin=np.float32(-0.0)
    )
    attempt_id = record(
        log, session_id, metrics={"offset_v": {"value": -0.0, "unit": "V"}}, waveforms={"vgs": wave}
    )
    assert log.verify_chain(session_id).ok
    stored = log.load_waveform(attempt_id, "vgs")
    assert (stored.x_origin, stored.y_origin) == (0.0, 0.0)
