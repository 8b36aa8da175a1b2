"""The record of one session of the log, and the sign-off stored back into it.

``record_from_log`` gives the whole exported record (content, seal, signatures) and
``sign_session`` adds a signature once nothing is open. The log is opened read-only in
spirit: only ``sign_session`` writes, and only a new signature row.

Both first re-hash the session's chain (``SessionLog.verify_chain``) and refuse, naming the
first broken entry and field, when the log was changed after logging: a record (or a
signature) made from an edited log would present the edit as what was measured.
"""

from __future__ import annotations

import base64
import datetime as _dt
from pathlib import Path

import numpy as np

from bringup.errors import BringupError
from bringup.record.build import assemble_record, build_content
from bringup.record.compare import content_digest
from bringup.record.keys import KeyPair, load_private_key
from bringup.record.schemas import READABLE_SCHEMAS, RECORD_SCHEMA, content_as
from bringup.record.signing import SignOffRefused, make_signature, open_items
from bringup.store.entries import AttemptRecord, SessionData, SignatureRecord
from bringup.store.log import SessionLog

__all__ = [
    "BrokenChain",
    "SignOffRefused",
    "check_chain",
    "open_log",
    "content_from_log",
    "record_from_log",
    "sign_session",
    "signature_entry",
]


class BrokenChain(BringupError):
    """The session's hash chain does not re-hash: the log was changed after logging."""


def open_log(db: str | Path | None, *, read_only: bool = False) -> SessionLog:
    """Open an existing log (``None`` = the default file); never creates one. ``read_only``
    for export and verify: a log on a read-only share is served (``SessionLog.open``)."""
    return SessionLog.open(db, create=False, read_only=read_only)


def signature_entry(sig: SignatureRecord) -> dict:
    """A stored sign-off as the record writes it (with the meaning and local offset its
    statement covered, for a sign-off that stated them)."""
    statement = sig.statement or {}
    return {
        "name": sig.name,
        "role": sig.role,
        "signed_at": sig.signed_utc,
        "key_fingerprint": sig.fingerprint,
        **{k: statement[k] for k in ("meaning", "local_offset") if k in statement},
        "algorithm": "Ed25519",
        "public_key": base64.b64encode(bytes(sig.public_key)).decode("ascii"),
        "signature": base64.b64encode(bytes(sig.signature)).decode("ascii"),
    }


def _local_offset(moment: _dt.datetime) -> str:
    """The UTC offset ``moment`` carries ("+01:00", "-05:30"); a naive one is local time."""
    aware = moment if moment.tzinfo is not None else moment.astimezone()
    offset = aware.utcoffset() or _dt.timedelta(0)
    minutes = int(offset.total_seconds() // 60)
    sign = "-" if minutes < 0 else "+"
    return f"{sign}{abs(minutes) // 60:02d}:{abs(minutes) % 60:02d}"


def content_from_log(log: SessionLog, session_id: str) -> tuple[dict, SessionData]:
    """The record content of ``session_id`` (a full id) and the session data it came from."""
    data = log.session(session_id)

    def load(attempt: AttemptRecord, name: str) -> np.ndarray:
        return log.load_waveform(attempt.id, name).codes

    return build_content(data, load), data


def schema_of(content: dict, signatures: list[SignatureRecord]) -> str:
    """The schema a session's record is written in: today's, unless its sign-offs were all
    made on the content an earlier schema built (``signatures.content_digest``), so that a
    session signed before a schema change exports to a record its signatures still verify."""
    if not signatures:
        return RECORD_SCHEMA
    signed = {s.content_digest for s in signatures}
    for schema in READABLE_SCHEMAS:
        if signed <= {content_digest(content_as(content, schema))}:
            return schema
    return RECORD_SCHEMA


def check_chain(log: SessionLog, session_id: str, doing: str) -> None:
    """Refuse ``doing`` (``"export"``, ``"sign-off"``) unless the session's chain re-hashes.

    ``BrokenChain`` names the log file, the first entry that does not match and the field
    that changed, as ``SessionLog.verify_chain`` reports them.
    """
    report = log.verify_chain(session_id)
    if report.ok:
        return
    named = report.field is None or report.field in (report.problem or "")
    field = "" if named else f" (field {report.field})"
    raise BrokenChain(
        f"{log.path}: {report.problem}{field}; {doing} refused: the log was changed after logging "
        "(`bringup verify --db` names every difference)"
    )


def record_from_log(log: SessionLog, session: str) -> dict:
    """The exported record of the session named by ``session`` (id or unique prefix).

    Refused (``BrokenChain``) when the session's hash chain does not re-hash.
    """
    session_id = log.resolve_session(session)
    check_chain(log, session_id, "export")
    content, data = content_from_log(log, session_id)
    schema = schema_of(content, data.signatures)
    return assemble_record(content, [signature_entry(s) for s in data.signatures], schema)


def _person(name: str) -> str:
    """A name as compared between signers: case and runs of spaces do not make a new person."""
    return " ".join(name.split()).casefold()


def _check_signer(session_id: str, pair: KeyPair, role: str, signed: list[SignatureRecord]) -> None:
    """Refuse a second signature by one key in one role, and one person in both roles.

    One person is one key, or one name written beside two keys: a reviewer who also ran the
    session (or signs with the operator's key) is no independent review.
    """
    mine = pair.public.fingerprint
    for sig in signed:
        if sig.fingerprint == mine and sig.role == role:
            raise SignOffRefused(
                f"--key {mine}: sign-off refused, this key already signed session "
                f"{session_id} as {role} ({sig.name} at {sig.signed_utc})"
            )
        if sig.role != role and (
            sig.fingerprint == mine or _person(sig.name) == _person(pair.name)
        ):
            by = "this key" if sig.fingerprint == mine else f"{sig.name} (key {sig.fingerprint})"
            raise SignOffRefused(
                f"--key {mine}: sign-off refused, {by} signed session {session_id} as "
                f"{sig.role}; the {role} sign-off must come from another person"
            )


def sign_session(
    log: SessionLog,
    session: str,
    key_path: str | Path,
    role: str,
    now: _dt.datetime | None = None,
) -> dict:
    """Sign the session's record content as ``role`` with the key at ``key_path``.

    Refused (``SignOffRefused``, listing each open item) while a step is unfinished or failed
    without a waiver; when this key already signed the session in this role; and when this
    key signed it in the other role (an independent review needs a second person's key).
    Refused (``BrokenChain``) when the session's hash chain does not re-hash. Returns the
    signature entry as the record will carry it.
    """
    pair = load_private_key(Path(key_path))
    session_id = log.resolve_session(session)
    check_chain(log, session_id, "sign-off")
    content, data = content_from_log(log, session_id)
    items = open_items(content)
    if items:
        raise SignOffRefused(
            f"session {session_id}: sign-off refused, {len(items)} open: " + "; ".join(items)
        )
    _check_signer(session_id, pair, role, data.signatures)
    schema = schema_of(content, data.signatures)  # one record: the sign-offs share a schema
    content = content_as(content, schema)
    moment = now or _dt.datetime.now().astimezone()  # local: its offset is the signer's
    signed_at = moment.astimezone(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")
    entry = make_signature(content, pair, role, signed_at, schema, _local_offset(moment))
    log.add_signature(
        session_id,
        name=entry["name"],
        role=entry["role"],
        signed_utc=signed_at,
        public_key=pair.public.raw,
        fingerprint=entry["key_fingerprint"],
        signature=base64.b64decode(entry["signature"]),
        content_digest=content_digest(content),
        statement={k: entry[k] for k in ("meaning", "local_offset")},
    )
    return entry
