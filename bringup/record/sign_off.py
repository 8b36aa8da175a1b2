"""Who did what: the record's outcome as its signatures make it (21 CFR Part 11 §11.50, §11.70).

The content says what was measured and judged (``summary.overall``: ``passed``, ``rejected``...).
Accepting a board takes more: the operator's signature (performed) and a second person's
(reviewed and approved), each made with its own key over this very content. ``sign_off_state``
reads the record's signatures, checks each one (a signature that does not verify counts for
nothing and is shown as such) and says in one headline which of these states the record is in:

- measured and judged, not signed;
- signed by the operator (performed), awaiting a review;
- reviewed and approved by someone other than everyone who performed it: ACCEPTED.

A rehearsal (a simulated bench) is never accepted, whoever signs it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from bringup.record.keys import key_id
from bringup.record.schemas import is_rehearsal
from bringup.record.signing import MEANINGS, check_signature
from bringup.record.view import fmt_time

__all__ = ["SignOff", "judged_overall", "sign_off_state"]

#: earlier schemas' words for what version 3 calls "passed"
_EARLIER_WORDS = {
    "accepted": "passed",
    "accepted-with-exceptions": "passed-with-exceptions",
}
#: the short meaning shown beside a signature
MEANING_WORDS = {"operator": "performed", "reviewer": "reviewed and approved"}


@dataclass(frozen=True)
class SignOff:
    """``headline``: the outcome in one line; ``who``: one line per part (performed by, reviewed
    by, or who is still missing); ``rows``: one row per signature (role, meaning, printed name,
    time in UTC and local, key id, whether it verifies); ``accepted``: a board accepted."""

    headline: str
    who: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    accepted: bool


def judged_overall(content: dict) -> str:
    """The content's overall word in version 3's terms (``passed``, ``rehearsed``...), whatever
    schema built it."""
    summary = content.get("summary") if isinstance(content.get("summary"), dict) else {}
    overall = str(summary.get("overall") or "incomplete")
    overall = _EARLIER_WORDS.get(overall, overall)
    if is_rehearsal(content):
        overall = {
            "passed": "rehearsed",
            "passed-with-exceptions": "rehearsed-with-exceptions",
        }.get(overall, overall)
    return overall


def _person(name: Any) -> str:
    return " ".join(str(name or "").split()).casefold()


def _signed_time(entry: dict) -> str:
    """'2026-12-04 18:24:13 UTC (local UTC+01:00)', or without the offset when not stated."""
    return fmt_time({"utc": entry.get("signed_at"), "offset": entry.get("local_offset")})


def _row(entry: Any, holds: bool) -> tuple[str, ...]:
    if not isinstance(entry, dict):
        return ("?", "-", "-", "-", "-", "does NOT verify: not a signature entry")
    role = str(entry.get("role") or "?")
    meaning = MEANING_WORDS.get(role, "?")
    if entry.get("meaning") is None:
        meaning += " (by its role; the signature states no meaning)"
    return (
        role,
        meaning,
        str(entry.get("name") or "-"),
        _signed_time(entry),
        key_id(str(entry.get("key_fingerprint") or "-")),
        "verifies" if holds else "does NOT verify: it counts for nothing",
    )


def _valid(record: dict) -> tuple[list[dict], tuple[tuple[str, ...], ...]]:
    """The signatures that verify over the content, and a row for every signature."""
    content, schema = record.get("content") or {}, str(record.get("schema"))
    valid, rows = [], []
    for i, entry in enumerate(record.get("signatures") or []):
        try:
            holds = not check_signature(content, entry, i, schema).problems
        except (TypeError, ValueError):
            holds = False
        rows.append(_row(entry, holds))
        if holds:
            valid.append(entry)
    return valid, tuple(rows)


_HEADLINES = {
    "passed": "PASSED",
    "passed-with-exceptions": "PASSED WITH EXCEPTIONS (waived or skipped steps, see below)",
    "rehearsed": "REHEARSAL PASSED on a simulated bench",
    "rehearsed-with-exceptions": "REHEARSAL PASSED WITH EXCEPTIONS on a simulated bench",
    "rejected": "NOT ACCEPTED: a step failed and carries no waiver",
    "incomplete": "INCOMPLETE: steps not finished",
}


def sign_off_state(record: dict) -> SignOff:
    """The record's outcome as its content and its verified signatures make it."""
    content = record.get("content") or {}
    overall = judged_overall(content)
    valid, rows = _valid(record)
    performers = [s for s in valid if s.get("role") == "operator"]
    done_by = {_person(s.get("name")) for s in performers}
    done_by |= {_person(n) for n in (content.get("session") or {}).get("operators") or []}
    keys = {s.get("key_fingerprint") for s in performers}
    reviewers = [
        s
        for s in valid
        if s.get("role") == "reviewer"
        and s.get("key_fingerprint") not in keys
        and _person(s.get("name")) not in done_by
    ]
    who = [f"Performed by {s['name']}, signed {_signed_time(s)}" for s in performers] or [
        "Not signed by the operator yet."
    ]
    who += [f"Reviewed and approved by {s['name']}, signed {_signed_time(s)}" for s in reviewers]
    if not reviewers:
        who.append("Not reviewed by a second person yet.")
    base = _HEADLINES.get(overall, overall.upper())
    accepted = False
    if overall in ("passed", "passed-with-exceptions"):
        if performers and reviewers:
            accepted = True
            base = "ACCEPTED" + (" WITH EXCEPTIONS" if overall.endswith("exceptions") else "")
            headline = f"{base}: measured, judged, signed by the operator and reviewed"
        elif performers:
            headline = (
                f"{base}, SIGNED BY THE OPERATOR: not accepted until a second person reviews it"
            )
        elif reviewers:
            headline = f"{base}, REVIEWED: not accepted until the operator signs it"
        else:
            headline = (
                f"{base}, NOT SIGNED: measured and judged; not accepted until signed and reviewed"
            )
    elif overall.startswith("rehearsed"):
        signed = "reviewed" if reviewers else "signed" if performers else "not signed"
        headline = f"{base} ({signed}): no board was measured, none accepted"
    else:
        headline = base
    return SignOff(headline, tuple(who), rows, accepted)


__all__ += ["MEANING_WORDS", "MEANINGS"]
