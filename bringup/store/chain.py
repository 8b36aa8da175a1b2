"""Tamper evidence: a per-session SHA-256 hash chain over every attempt and event.

Each logged entry (attempt or event) has a *content* (a dict of named fields). We hash each
field's canonical JSON separately (``field_hashes``), then

    content_hash = SHA-256(canonical_json(field_hashes))
    chain_hash   = SHA-256(previous chain_hash + content_hash)      (hex text, ASCII)

where the first entry's "previous" is the session's ``genesis_hash``, the SHA-256 of the
session's snapshot (board, checklist, bench, serial, operator). This is the hash-chain
construction of a linked timestamping log (each link commits to everything before it); SHA-256
is FIPS 180-4. Hashing fields one by one lets the verifier say *which* field was changed.

A chain shows that entries were changed, removed or reordered after the fact, but anyone with
write access can rebuild a whole chain: the signed record seals ``chain_head`` (the last
``chain_hash``) with a signature, and only that makes the log tamper-evident end to end.
Truncating the newest entries is visible only against such a sealed head.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from bringup.store.chain_json import canonical_json, sha256_hex

__all__ = [
    "ChainReport",
    "ChainEntry",
    "field_hashes",
    "content_hash",
    "link",
    "genesis_hash",
    "check_chain",
]


def field_hashes(content: dict[str, Any]) -> dict[str, str]:
    """SHA-256 of each field's canonical JSON, keyed by field name."""
    return {name: sha256_hex(canonical_json(value)) for name, value in content.items()}


def content_hash(hashes: dict[str, str]) -> str:
    """SHA-256 of the canonical JSON of the field hashes."""
    return sha256_hex(canonical_json(hashes))


def link(previous_chain_hash: str, entry_content_hash: str) -> str:
    """The next link: SHA-256 of the previous chain hash followed by this content hash."""
    return sha256_hex(previous_chain_hash + entry_content_hash)


def genesis_hash(session_content: dict[str, Any]) -> str:
    """The chain's anchor: SHA-256 of the canonical JSON of the session's snapshot."""
    return sha256_hex(canonical_json(session_content))


@dataclass(frozen=True)
class ChainEntry:
    """One stored entry as the verifier sees it: what is stored and what is recomputed."""

    table: str  # "attempts" or "events"
    row_id: int
    seq: int
    content: dict[str, Any]  # recomputed from the row (and its metrics/waveform rows)
    stored_field_hashes: dict[str, str]
    stored_content_hash: str
    stored_chain_hash: str


@dataclass(frozen=True)
class ChainReport:
    """The result of checking one session's chain.

    ``ok`` is True when every entry re-hashes to its stored hashes and links to the one
    before. Otherwise ``problem`` is a one-line description of the *first* entry that does not
    match, ``seq``/``table``/``row_id`` locate it and ``field`` names the field that changed
    where that can be told (``"metric:rise_time_s"``, ``"waveform:gate"``, ``"outcome"``...).
    ``head`` is the last stored chain hash (what a signature seals); ``entries`` the count.
    """

    ok: bool
    session_id: str
    entries: int
    head: str
    problem: str | None = None
    seq: int | None = None
    table: str | None = None
    row_id: int | None = None
    field: str | None = None


def _first_changed_field(entry: ChainEntry, recomputed: dict[str, str]) -> str | None:
    names = sorted(set(recomputed) | set(entry.stored_field_hashes))
    for name in names:
        if recomputed.get(name) != entry.stored_field_hashes.get(name):
            return name
    return None


def check_chain(
    session_id: str,
    stored_genesis: str,
    recomputed_genesis: str,
    entries: list[ChainEntry],
) -> ChainReport:
    """Check a session's entries (any order; sorted by ``seq`` here) against their hashes."""
    ordered = sorted(entries, key=lambda e: (e.seq, e.table, e.row_id))
    head = ordered[-1].stored_chain_hash if ordered else stored_genesis
    count = len(ordered)

    def bad(problem: str, entry: ChainEntry | None = None, field: str | None = None) -> ChainReport:
        where = f"session {session_id}"
        if entry is not None:
            where += f", entry {entry.seq} ({entry.table} row {entry.row_id})"
        return ChainReport(
            ok=False,
            session_id=session_id,
            entries=count,
            head=head,
            problem=f"{where}: {problem}",
            seq=entry.seq if entry else None,
            table=entry.table if entry else None,
            row_id=entry.row_id if entry else None,
            field=field,
        )

    if stored_genesis != recomputed_genesis:
        return bad("the session's snapshot (board, checklist, bench, serial) was changed")
    previous = stored_genesis
    for position, entry in enumerate(ordered, start=1):
        if entry.seq != position:
            if entry.seq > position:
                return bad(f"entry {position} is missing (removed?)", entry, "seq")
            return bad(f"entry number {entry.seq} appears twice", entry, "seq")
        recomputed = field_hashes(entry.content)
        changed = _first_changed_field(entry, recomputed)
        if changed is not None:
            return bad(
                f"field {changed!r} does not match its hash (changed after logging)", entry, changed
            )
        if content_hash(entry.stored_field_hashes) != entry.stored_content_hash:
            return bad("content hash does not match the field hashes", entry, "content_hash")
        if link(previous, entry.stored_content_hash) != entry.stored_chain_hash:
            return bad(
                "does not link to the entry before it (removed or reordered?)", entry, "chain_hash"
            )
        previous = entry.stored_chain_hash
    return ChainReport(ok=True, session_id=session_id, entries=count, head=head)
