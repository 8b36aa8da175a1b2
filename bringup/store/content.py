"""What an entry's hashed content is, and how stored rows become records again.

The same functions build an entry's content when it is logged and rebuild it from the stored
rows when the chain is verified, so the two can only differ if the rows were changed.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
from typing import Any

from bringup.errors import StoreError
from bringup.names import control_character
from bringup.store.chain_json import loads, utc_text
from bringup.store.entries import AttemptRecord, EventRecord, SignatureRecord

__all__ = [
    "required",
    "name_text",
    "time_text",
    "metric_rows",
    "attempt_content",
    "attempt_content_from_rows",
    "event_content_from_row",
    "attempt_record",
    "event_record",
    "signature_record",
    "WAVEFORM_SCALE_COLUMNS",
]

WAVEFORM_SCALE_COLUMNS = (
    "dtype",
    "points",
    "x_increment",
    "x_origin",
    "y_increment",
    "y_origin",
    "y_unit",
    "x_unit",
)


def required(value: object, what: str) -> str:
    """``value`` as stripped text; a ``StoreError`` naming ``what`` when it is blank."""
    text = "" if value is None else str(value).strip()
    if not text:
        raise StoreError(f"the {what} is required and was empty")
    return text


def name_text(value: object, what: str) -> str:
    """``value`` as stripped, non-empty, one-line text (``bringup.names.control_character``):
    a ``StoreError`` naming ``what`` for a blank name or one with a refused character."""
    text = required(value, what)
    bad = control_character(text)
    if bad is not None:
        raise StoreError(
            f"the {what} {text!r} contains the control character {bad} (one line of text)"
        )
    return text


def time_text(moment: str | _dt.datetime, what: str) -> str:
    """ISO 8601 UTC text for a datetime, or validated ISO 8601 text as given."""
    if isinstance(moment, _dt.datetime):
        try:
            return utc_text(moment)
        except TypeError as error:
            raise StoreError(f"{what}: {error}") from None
    try:
        _dt.datetime.fromisoformat(str(moment))
    except ValueError:
        raise StoreError(f"{what}: {moment!r} is not an ISO 8601 time") from None
    return str(moment)


def metric_rows(metrics: dict[str, Any]) -> list[tuple[str, float | None, str]]:
    """(name, value, unit) for each numeric (or null) metric, sorted by name.

    A metric is a number/None, or a dict with ``value`` (number/None) and optional ``unit``.
    Anything else (text, lists) stays in the JSON only.
    """
    rows = []
    for name, item in metrics.items():
        unit = ""
        value = item
        if isinstance(item, dict):
            value = item.get("value")
            unit = str(item.get("unit") or "")
        if value is None or (isinstance(value, (int, float)) and not isinstance(value, bool)):
            number = None if value is None else float(value)
            rows.append(
                (str(name), number if number is None or math.isfinite(number) else None, unit)
            )
    return sorted(rows)


def attempt_content(
    session_id: str,
    seq: int,
    stage_id: str,
    step_id: str,
    attempt_no: int,
    operator: str,
    recorded_utc: str,
    outcome: str,
    plain: dict[str, Any],
    metrics_table: list[tuple[str, float | None, str]],
    waveforms: dict[str, dict[str, Any]],
) -> dict[str, Any]:
    """The fields hashed for an attempt; metric rows and waveforms get one field each."""
    content: dict[str, Any] = {
        "kind": "attempt",
        "session_id": session_id,
        "seq": seq,
        "stage_id": stage_id,
        "step_id": step_id,
        "attempt_no": attempt_no,
        "operator": operator,
        "recorded_utc": recorded_utc,
        "outcome": outcome,
        **{key: plain[key] for key in sorted(plain)},
        "metric_names": [name for name, _, _ in metrics_table],
        "waveform_names": sorted(waveforms),
    }
    for name, value, unit in metrics_table:
        content[f"metric:{name}"] = {"value": value, "unit": unit}
    for name, description in waveforms.items():
        content[f"waveform:{name}"] = description
    return content


def attempt_content_from_rows(
    row: dict[str, Any],
    metric_table_rows: list[dict[str, Any]],
    waveform_descriptions: dict[str, dict[str, Any]],
) -> dict[str, Any]:
    """Rebuild an attempt's content from its stored rows (for verification)."""
    plain = {
        "started_utc": row["started_utc"],
        "finished_utc": row["finished_utc"],
        "instruments": loads(row["instruments_json"]),
        "settings": loads(row["settings_json"]),
        "metrics": loads(row["metrics_json"]),
        "predictions": loads(row["predictions_json"]),
        "verdicts": loads(row["verdicts_json"]),
        "notes": row["notes"],
        "extra": loads(row["extra_json"]),
    }
    table = sorted(
        (m["name"], None if m["value"] is None else float(m["value"]), m["unit"])
        for m in metric_table_rows
    )
    return attempt_content(
        row["session_id"], row["seq"], row["stage_id"], row["step_id"], row["attempt_no"],
        row["operator"], row["recorded_utc"], row["outcome"], plain, table, waveform_descriptions,
    )  # fmt: skip


def event_content_from_row(row: dict[str, Any]) -> dict[str, Any]:
    """An event's hashed fields, from its row (the same dict it was logged with)."""
    return {
        "kind": row["kind"],
        "session_id": row["session_id"],
        "seq": row["seq"],
        "stage_id": row["stage_id"],
        "step_id": row["step_id"],
        "operator": row["operator"],
        "reason": row["reason"],
        "payload": loads(row["payload_json"]),
        "recorded_utc": row["recorded_utc"],
    }


def attempt_record(row: dict[str, Any], waveforms: dict[str, dict[str, Any]]) -> AttemptRecord:
    """An ``AttemptRecord`` from an ``attempts`` row and its waveform descriptions."""
    return AttemptRecord(
        id=row["id"],
        session_id=row["session_id"],
        seq=row["seq"],
        stage_id=row["stage_id"],
        step_id=row["step_id"],
        attempt_no=row["attempt_no"],
        operator=row["operator"],
        started_utc=row["started_utc"],
        finished_utc=row["finished_utc"],
        recorded_utc=row["recorded_utc"],
        outcome=row["outcome"],
        instruments=loads(row["instruments_json"]),
        settings=loads(row["settings_json"]),
        metrics=loads(row["metrics_json"]),
        predictions=loads(row["predictions_json"]),
        verdicts=loads(row["verdicts_json"]),
        notes=row["notes"],
        extra=loads(row["extra_json"]),
        waveforms=waveforms,
        content_hash=row["content_hash"],
        chain_hash=row["chain_hash"],
    )


def event_record(row: dict[str, Any]) -> EventRecord:
    """An ``EventRecord`` from an ``events`` row."""
    return EventRecord(
        id=row["id"],
        session_id=row["session_id"],
        seq=row["seq"],
        kind=row["kind"],
        stage_id=row["stage_id"],
        step_id=row["step_id"],
        operator=row["operator"],
        reason=row["reason"],
        payload=loads(row["payload_json"]),
        recorded_utc=row["recorded_utc"],
        content_hash=row["content_hash"],
        chain_hash=row["chain_hash"],
    )


def signature_record(row: dict[str, Any]) -> SignatureRecord:
    """A ``SignatureRecord`` from a ``signatures`` row."""
    return SignatureRecord(
        id=row["id"],
        session_id=row["session_id"],
        name=row["name"],
        role=row["role"],
        signed_utc=row["signed_utc"],
        public_key=bytes(row["public_key"]),
        fingerprint=row["fingerprint"],
        signature=bytes(row["signature"]),
        content_digest=row["content_digest"],
        recorded_utc=row["recorded_utc"],
        statement=_statement(row.get("statement_json")),
    )


def _statement(text: Any) -> dict | None:
    """A sign-off's further signed fields (schema 2 on; None before or when unreadable: the
    signature then fails to verify, which names the sign-off)."""
    if not isinstance(text, str):
        return None
    try:
        value = json.loads(text)
    except ValueError:
        return None
    return value if isinstance(value, dict) else None
