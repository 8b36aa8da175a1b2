"""What the log hands back: plain, frozen records of sessions, attempts, events, signatures.

JSON columns come back parsed (dicts), times as ISO 8601 UTC text (``...Z``), waveforms only
as their descriptions (load the samples with ``SessionLog.load_waveform``).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

__all__ = [
    "ATTEMPT_OUTCOMES",
    "FAILED_OUTCOMES",
    "EVENT_KINDS",
    "SessionSummary",
    "AttemptRecord",
    "EventRecord",
    "SignatureRecord",
    "SessionData",
]

#: Outcomes an attempt may record: the verdict outcomes (ILAC-G8, see analysis/verdict.py),
#: "not-run" (refused: no reading) and "error" (the step could not complete).
ATTEMPT_OUTCOMES = ("pass", "conditional-pass", "conditional-fail", "fail", "not-run", "error")
#: Outcomes that make a step "failed": only these can be waived, and these cannot be skipped.
FAILED_OUTCOMES = ("fail", "conditional-fail")
#: Kinds of event. skip/waive change a step's latest outcome to "skipped"/"waived".
#: ``energise`` is logged just before a step switches the supply output ON (so an attempt cut
#: short by a SIGKILL or a power cut leaves a trace); ``found-on``: the output was found ON
#: when the bench was next opened, and switched off.
EVENT_KINDS = (
    "skip", "waive", "note", "go-back", "abort", "resume", "finish", "energise", "found-on",
)  # fmt: skip


def rehearsal_bench(bench: Any) -> bool:
    """True when a logged bench snapshot is a simulated bench's: ``kind`` "simulated" (one the
    runner started) or a ``simulation`` table with ``enabled`` true (a bench file's)."""
    if not isinstance(bench, dict):
        return False
    simulation = bench.get("simulation")
    return bench.get("kind") == "simulated" or (
        isinstance(simulation, dict) and simulation.get("enabled") is True
    )


@dataclass(frozen=True)
class SessionSummary:
    """One line of ``bringup sessions``.

    ``progress`` counts steps by their latest outcome ("pass", "fail", "skipped", "waived", ...);
    ``steps_total`` is the number of steps in the checklist snapshot (None if it has no
    ``stages[].steps[]`` list). ``state``, ``verdict``, ``stage_verdicts`` and
    ``last_activity_utc`` are worked out from the session's chained entries on every read
    (``bringup.store.derived``): a finished session's verdicts are its finish event's, an
    unfinished one's the worst of its steps' latest entries (None when there is nothing to
    judge).
    """

    id: str
    created_utc: str
    board_name: str
    board_revision: str | None
    serial: str
    operator: str
    checklist_id: str
    state: str  # "open", "aborted", "finished"
    verdict: str | None
    stage_verdicts: dict[str, str] | None
    progress: dict[str, int]
    steps_total: int | None
    attempts: int
    last_activity_utc: str
    #: stored listing columns that disagree with the chain (``derived.disagreements``): a
    #: sign that the ``sessions`` row was edited; empty when they agree
    altered: tuple[str, ...] = ()
    #: the session ran on a simulated bench (``rehearsal_bench``): whatever it judged, no
    #: board was measured
    rehearsal: bool = False

    @property
    def finished(self) -> bool:
        """True once a finish event was logged."""
        return self.state == "finished"

    @property
    def steps_done(self) -> int:
        """Steps with any latest outcome (attempted, skipped or waived)."""
        return sum(self.progress.values())


@dataclass(frozen=True)
class AttemptRecord:
    """One stored attempt of one step (never changed once logged)."""

    id: int
    session_id: str
    seq: int
    stage_id: str
    step_id: str
    attempt_no: int
    operator: str
    started_utc: str
    finished_utc: str
    recorded_utc: str
    outcome: str
    instruments: dict[str, Any]
    settings: dict[str, Any]
    metrics: dict[str, Any]
    predictions: dict[str, Any]
    verdicts: dict[str, Any]
    notes: str
    extra: dict[str, Any] | None
    #: name -> description (dtype, points, scale, units, stored_bytes, raw_sha256)
    waveforms: dict[str, dict[str, Any]]
    content_hash: str
    chain_hash: str
    kind: str = field(default="attempt")


@dataclass(frozen=True)
class EventRecord:
    """One stored event: skip, waive, note, go-back, abort, resume or finish."""

    id: int
    session_id: str
    seq: int
    kind: str
    stage_id: str | None
    step_id: str | None
    operator: str
    reason: str
    payload: dict[str, Any] | None
    recorded_utc: str
    content_hash: str
    chain_hash: str


@dataclass(frozen=True)
class SignatureRecord:
    """A sign-off stored by the record (keys and signatures as raw bytes)."""

    id: int
    session_id: str
    name: str
    role: str
    signed_utc: str
    public_key: bytes
    fingerprint: str
    signature: bytes
    content_digest: str
    recorded_utc: str
    #: further fields the signature covers ({"meaning", "local_offset"}); None before schema 2
    statement: dict | None = None


@dataclass(frozen=True)
class SessionData:
    """Everything about one session: the snapshots and every entry in logged order."""

    summary: SessionSummary
    board: dict[str, Any]
    checklist: dict[str, Any]
    bench: dict[str, Any] | None
    genesis_hash: str
    attempts: list[AttemptRecord]
    events: list[EventRecord]
    signatures: list[SignatureRecord]

    @property
    def id(self) -> str:
        return self.summary.id

    @property
    def timeline(self) -> list[AttemptRecord | EventRecord]:
        """Attempts and events merged in chain order (``seq``)."""
        return sorted([*self.attempts, *self.events], key=lambda entry: entry.seq)

    @property
    def chain_head(self) -> str:
        """The last chain hash (the genesis hash when nothing was logged yet)."""
        timeline = self.timeline
        return timeline[-1].chain_hash if timeline else self.genesis_hash
