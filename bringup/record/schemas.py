"""The record's schema names, and the content each one holds (see ``SCHEMA.md``).

``bringup-record/2`` added the rehearsal mark: ``session.rehearsal`` (true when the session
ran on a simulated bench) and, for a rehearsal, the overall words ``rehearsed`` and
``rehearsed-with-exceptions`` where a board would read ``accepted`` and
``accepted-with-exceptions``: a rehearsal that passed can never read as an accepted board.

``bringup-record/3`` made the record smaller and said who did what: each waveform's codes are
zlib-compressed (``codes_zlib_b64`` in place of ``codes_b64``; ``raw_sha256`` still hashes the
decoded codes), the content's overall word says what was measured and judged (``passed``,
``passed-with-exceptions``: acceptance is a reviewer's signature, not the content's word), and
each bench instrument carries its calibration certificate and state on the session's day.

A record of an earlier schema (signed before a change) still verifies: its signatures cover
the content as that version built it, which ``content_as`` gives back from today's content.
"""

from __future__ import annotations

import base64
import copy
import zlib

__all__ = [
    "RECORD_SCHEMA",
    "READABLE_SCHEMAS",
    "REHEARSAL_OVERALL",
    "content_as",
    "waveform_codes",
    "is_rehearsal",
    "sign_purpose",
]

RECORD_SCHEMA = "bringup-record/3"
#: every schema ``bringup verify`` reads, newest first
READABLE_SCHEMAS = ("bringup-record/3", "bringup-record/2", "bringup-record/1")

#: a board's overall word -> a rehearsal's
REHEARSAL_OVERALL = {
    "passed": "rehearsed",
    "passed-with-exceptions": "rehearsed-with-exceptions",
}
#: version 3's overall words -> version 2's (which said "accepted" before anyone reviewed)
_OVERALL_2 = {"passed": "accepted", "passed-with-exceptions": "accepted-with-exceptions"}
#: the keys version 3 added to each bench instrument
_CALIBRATION_KEYS = ("calibration_certificate", "calibration")


def waveform_codes(wave: dict) -> bytes:
    """The raw codes' bytes (little-endian) of a record waveform of any schema: zlib
    (RFC 1950) inside base64 (RFC 4648) in ``codes_zlib_b64``, else plain base64 in
    ``codes_b64``. ``ValueError`` when neither decodes."""
    try:
        if "codes_zlib_b64" in wave:
            return zlib.decompress(base64.b64decode(wave["codes_zlib_b64"], validate=True))
        return base64.b64decode(wave["codes_b64"], validate=True)
    except (KeyError, TypeError, zlib.error) as exc:
        raise ValueError(f"codes cannot be decoded ({exc})") from None


def sign_purpose(schema: str) -> str:
    """The ``purpose`` a signature of a ``schema`` record states (``"<schema> sign-off"``)."""
    return f"{schema} sign-off"


def is_rehearsal(content: dict) -> bool:
    """True when the content comes from a session on a simulated bench (any schema: the
    ``bringup-record/1`` content says it only in ``bench.simulated``)."""
    session, bench = content.get("session"), content.get("bench")
    if isinstance(session, dict) and session.get("rehearsal") is True:
        return True
    return isinstance(bench, dict) and bench.get("simulated") is True


def _as_version_2(content: dict) -> dict:
    """Version 3 content as version 2 held it (a copy): plain base64 codes, "accepted" for
    "passed", no calibration certificate or state."""
    old = copy.deepcopy(content)
    for stage in old.get("stages") or []:
        for step in stage.get("steps") or []:
            for attempt in step.get("attempts") or []:
                for wave in attempt.get("waveforms") or []:
                    if isinstance(wave, dict) and "codes_zlib_b64" in wave:
                        raw = waveform_codes(wave)
                        del wave["codes_zlib_b64"]
                        wave["codes_b64"] = base64.b64encode(raw).decode("ascii")
    summary = old.get("summary")
    if isinstance(summary, dict):
        summary["overall"] = _OVERALL_2.get(summary.get("overall"), summary.get("overall"))
    for inst in (old.get("bench") or {}).get("instruments") or []:
        for key in _CALIBRATION_KEYS:
            inst.pop(key, None)
    return old


def content_as(content: dict, schema: str) -> dict:
    """Today's ``content`` as a ``schema`` record holds it (a copy; the same when current)."""
    if schema == RECORD_SCHEMA:
        return content
    if schema not in ("bringup-record/2", "bringup-record/1"):
        raise ValueError(f"unknown record schema {schema!r}")
    old = _as_version_2(content)
    if schema == "bringup-record/2":
        return old
    session = old.get("session")
    if isinstance(session, dict):
        session.pop("rehearsal", None)
    summary = old.get("summary")
    if isinstance(summary, dict):  # version 1 said "accepted" for a rehearsal too
        back = {"rehearsed": "accepted", "rehearsed-with-exceptions": "accepted-with-exceptions"}
        summary["overall"] = back.get(summary.get("overall"), summary.get("overall"))
    return old
