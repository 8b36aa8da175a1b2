"""The record's schema names, and the content each one holds (see ``SCHEMA.md``).

``bringup-record/2`` added the rehearsal mark: ``session.rehearsal`` (true when the session
ran on a simulated bench) and, for a rehearsal, the overall words ``rehearsed`` and
``rehearsed-with-exceptions`` where a board would read ``accepted`` and
``accepted-with-exceptions``: a rehearsal that passed can never read as an accepted board.

A ``bringup-record/1`` record (signed before the change) still verifies: its signatures cover
the content as that version built it, which ``content_as`` gives back from today's content.
"""

from __future__ import annotations

import copy

__all__ = [
    "RECORD_SCHEMA",
    "READABLE_SCHEMAS",
    "REHEARSAL_OVERALL",
    "content_as",
    "is_rehearsal",
    "sign_purpose",
]

RECORD_SCHEMA = "bringup-record/2"
#: every schema ``bringup verify`` reads, newest first
READABLE_SCHEMAS = ("bringup-record/2", "bringup-record/1")

#: a board's overall word -> a rehearsal's
REHEARSAL_OVERALL = {
    "accepted": "rehearsed",
    "accepted-with-exceptions": "rehearsed-with-exceptions",
}


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


def content_as(content: dict, schema: str) -> dict:
    """Today's ``content`` as a ``schema`` record holds it (a copy; the same when current)."""
    if schema == RECORD_SCHEMA:
        return content
    if schema != "bringup-record/1":
        raise ValueError(f"unknown record schema {schema!r}")
    old = copy.deepcopy(content)
    session = old.get("session")
    if isinstance(session, dict):
        session.pop("rehearsal", None)
    summary = old.get("summary")
    if isinstance(summary, dict):
        back = {v: k for k, v in REHEARSAL_OVERALL.items()}
        summary["overall"] = back.get(summary.get("overall"), summary.get("overall"))
    return old
