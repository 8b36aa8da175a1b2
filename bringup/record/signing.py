"""Sign-off: what a signature covers, how it is made and how it is checked.

A signature is an Ed25519 signature (RFC 8032) over the canonical JSON (RFC 8785 form, see
``canonical``) of a small statement::

    {"purpose": "bringup-record/3 sign-off",  (the record's schema, then " sign-off")
     "content": <the record's content>,
     "signer": {"name", "role", "signed_at", "key_fingerprint", "meaning", "local_offset"}}

so a signature binds the person's printed name, role, time (UTC, and the signer's local UTC
offset) and the meaning of the signature (21 CFR Part 11 §11.50: performed, reviewed and
approved) to the whole content (board, bench, every attempt, the log's chain head) and to
nothing else (§11.70: it cannot be moved to another record): the other signatures are not
part of it, which lets an operator and a reviewer sign the same content in any order.
``meaning`` and ``local_offset`` are in the statement when the entry has them (sign-offs made
before they existed have neither, and their signatures cover the four other fields).
"""

from __future__ import annotations

import base64
import binascii
from dataclasses import dataclass
from typing import Any

from cryptography.exceptions import InvalidSignature

from bringup.errors import BringupError
from bringup.record.keys import KeyPair, fingerprint, public_key_from_raw
from bringup.record.rfc8785 import canonical_bytes
from bringup.record.schemas import RECORD_SCHEMA, sign_purpose

__all__ = [
    "MEANINGS",
    "ROLES",
    "SIGN_PURPOSE",
    "SignOffRefused",
    "make_signature",
    "signed_message",
    "check_signature",
    "open_items",
    "open_item",
]

ROLES = ("operator", "reviewer")
SIGN_PURPOSE = sign_purpose(RECORD_SCHEMA)
#: what a signature in each role means, as the signer's statement says it (§11.50(a)(3))
MEANINGS = {
    "operator": "performed: made the measurements in this record and judged them as shown",
    "reviewer": "reviewed and approved: checked this record and approves its outcome",
}
#: the statement's fields every signature has, then those a newer one has too
_SIGNER_FIELDS = ("name", "role", "signed_at", "key_fingerprint")
_OPTIONAL_FIELDS = ("meaning", "local_offset")


class SignOffRefused(BringupError):
    """The session has open items (unfinished steps, failures without a waiver)."""


def signed_message(content: dict, signer: dict, schema: str = RECORD_SCHEMA) -> bytes:
    """The exact bytes a signature covers (see the module docstring); ``schema`` is the
    record's (a ``bringup-record/1`` signature states that schema's purpose)."""
    fields = {k: signer[k] for k in _SIGNER_FIELDS}
    fields |= {k: signer[k] for k in _OPTIONAL_FIELDS if k in signer}
    purpose = sign_purpose(schema)
    return canonical_bytes({"purpose": purpose, "content": content, "signer": fields})


def make_signature(
    content: dict,
    pair: KeyPair,
    role: str,
    signed_at: str,
    schema: str = RECORD_SCHEMA,
    local_offset: str | None = None,
) -> dict:
    """A signature entry for ``content`` (a ``schema`` record's) by ``pair`` in ``role`` at
    ``signed_at`` (UTC text), stating the role's meaning (``MEANINGS``) and, when given, the
    signer's ``local_offset`` from UTC ("+01:00")."""
    if role not in ROLES:
        raise BringupError(f"--role: unknown role {role!r} (expected {' or '.join(ROLES)})")
    public = pair.public
    signer = {
        "name": pair.name,
        "role": role,
        "signed_at": signed_at,
        "key_fingerprint": public.fingerprint,
        "meaning": MEANINGS[role],
    }
    if local_offset is not None:
        signer["local_offset"] = local_offset
    sig = pair.private.sign(signed_message(content, signer, schema))
    return {
        **signer,
        "algorithm": "Ed25519",
        "public_key": base64.b64encode(public.raw).decode("ascii"),
        "signature": base64.b64encode(sig).decode("ascii"),
    }


@dataclass(frozen=True)
class SignatureCheck:
    """The outcome of checking one signature entry: ``problems`` is empty when it holds."""

    label: str
    problems: tuple[str, ...]
    raw_public_key: bytes | None


def _b64(text: Any) -> bytes | None:
    if not isinstance(text, str):
        return None
    try:
        return base64.b64decode(text, validate=True)
    except (binascii.Error, ValueError):
        return None


def check_signature(
    content: dict, entry: Any, index: int, schema: str = RECORD_SCHEMA
) -> SignatureCheck:
    """Check one signature entry against ``content`` of a ``schema`` record: key,
    fingerprint, signature bytes."""
    if not isinstance(entry, dict):
        return SignatureCheck(f"signature {index + 1}", ("is not an object",), None)
    label = f"signature {index + 1} ({entry.get('role', '?')} {entry.get('name', '?')})"
    missing = [
        k
        for k in ("name", "role", "signed_at", "key_fingerprint", "public_key", "signature")
        if not isinstance(entry.get(k), str)
    ]
    if missing:
        return SignatureCheck(label, (f"lacks {', '.join(missing)}",), None)
    problems: list[str] = []
    for key in _OPTIONAL_FIELDS:
        if key in entry and not isinstance(entry[key], str):
            problems.append(f"{key} is not text")
    meaning = entry.get("meaning")
    if isinstance(meaning, str) and meaning != MEANINGS.get(entry["role"]):
        problems.append(f"meaning {meaning!r} is not what a {entry['role']} signature means")
    if problems:
        return SignatureCheck(label, tuple(problems), None)
    if entry.get("algorithm") != "Ed25519":
        problems.append(f"algorithm {entry.get('algorithm')!r} is not Ed25519")
    if entry["role"] not in ROLES:
        problems.append(f"role {entry['role']!r} is not one of {', '.join(ROLES)}")
    raw = _b64(entry["public_key"])
    sig = _b64(entry["signature"])
    try:
        key = public_key_from_raw(raw) if raw is not None else None
    except ValueError:
        key = None
    if key is None:
        problems.append("public_key is not a base64 Ed25519 public key")
        return SignatureCheck(label, tuple(problems), None)
    if fingerprint(key) != entry["key_fingerprint"]:
        problems.append(
            f"public_key has fingerprint {fingerprint(key)}, "
            f"not the {entry['key_fingerprint']} written beside it"
        )
    if sig is None:
        problems.append("signature is not base64")
    else:
        try:
            key.verify(sig, signed_message(content, entry, schema))
        except InvalidSignature:
            problems.append(
                "does not verify: the content or the signer fields changed since signing"
            )
    return SignatureCheck(label, tuple(problems), raw)


def open_item(stage_id: str, step: dict) -> str | None:
    """Why one step blocks a sign-off (one line), or None when it does not."""
    status, where = step.get("status"), f"{stage_id}/{step.get('id')}"
    if status == "not-started":
        return f"{where}: unfinished (not started)"
    if status == "unfinished":
        return f"{where}: unfinished (last attempt {step.get('outcome') or 'without a verdict'})"
    if status == "rejected":
        return f"{where}: failed ({step.get('outcome')}) without a waiver"
    return None


def open_items(content: dict) -> list[str]:
    """What blocks a sign-off: steps unfinished, or failed without a waiver (one line each)."""
    items = []
    for stage in content.get("stages", []):
        for step in stage.get("steps", []):
            item = open_item(str(stage.get("id")), step)
            if item is not None:
                items.append(item)
    return items
