"""The record of one session of the log, and the sign-off stored back into it.

``record_from_log`` gives the whole exported record (content, seal, signatures) and
``sign_session`` adds a signature once nothing is open. The log is opened read-only in
spirit: only ``sign_session`` writes, and only a new signature row.
"""

from __future__ import annotations

import base64
import datetime as _dt
from pathlib import Path

import numpy as np

from bringup.record.build import assemble_record, build_content
from bringup.record.compare import content_digest
from bringup.record.keys import load_private_key
from bringup.record.signing import SignOffRefused, make_signature, open_items
from bringup.store.entries import AttemptRecord, SessionData, SignatureRecord
from bringup.store.log import SessionLog

__all__ = ["open_log", "content_from_log", "record_from_log", "sign_session", "signature_entry"]


def open_log(db: str | Path | None) -> SessionLog:
    """Open an existing log (``None`` = the default file); never creates one."""
    return SessionLog.open(db, create=False)


def signature_entry(sig: SignatureRecord) -> dict:
    """A stored sign-off as the record writes it."""
    return {
        "name": sig.name,
        "role": sig.role,
        "signed_at": sig.signed_utc,
        "key_fingerprint": sig.fingerprint,
        "algorithm": "Ed25519",
        "public_key": base64.b64encode(bytes(sig.public_key)).decode("ascii"),
        "signature": base64.b64encode(bytes(sig.signature)).decode("ascii"),
    }


def content_from_log(log: SessionLog, session_id: str) -> tuple[dict, SessionData]:
    """The record content of ``session_id`` (a full id) and the session data it came from."""
    data = log.session(session_id)

    def load(attempt: AttemptRecord, name: str) -> np.ndarray:
        return log.load_waveform(attempt.id, name).codes

    return build_content(data, load), data


def record_from_log(log: SessionLog, session: str) -> dict:
    """The exported record of the session named by ``session`` (id or unique prefix)."""
    session_id = log.resolve_session(session)
    content, data = content_from_log(log, session_id)
    return assemble_record(content, [signature_entry(s) for s in data.signatures])


def sign_session(
    log: SessionLog,
    session: str,
    key_path: str | Path,
    role: str,
    now: _dt.datetime | None = None,
) -> dict:
    """Sign the session's record content as ``role`` with the key at ``key_path``.

    Refused (``SignOffRefused``, listing each open item) while a step is unfinished or failed
    without a waiver. Returns the signature entry as the record will carry it.
    """
    pair = load_private_key(Path(key_path))
    session_id = log.resolve_session(session)
    content, _ = content_from_log(log, session_id)
    items = open_items(content)
    if items:
        raise SignOffRefused(
            f"session {session_id}: sign-off refused, {len(items)} open: " + "; ".join(items)
        )
    moment = now or _dt.datetime.now(_dt.UTC)
    signed_at = moment.astimezone(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")
    entry = make_signature(content, pair, role, signed_at)
    log.add_signature(
        session_id,
        name=entry["name"],
        role=entry["role"],
        signed_utc=signed_at,
        public_key=pair.public.raw,
        fingerprint=entry["key_fingerprint"],
        signature=base64.b64decode(entry["signature"]),
        content_digest=content_digest(content),
    )
    return entry
