"""The session log: SQLite (via sqlite-utils) with schema migrations, a hash chain and compact waveforms.

Public API (see ``log.py`` for the guarantees)::

    from bringup.store import SessionLog, StoredWaveform, StoreError
"""

from bringup.errors import StoreError
from bringup.store.chain import ChainReport
from bringup.store.entries import (
    ATTEMPT_OUTCOMES,
    EVENT_KINDS,
    FAILED_OUTCOMES,
    AttemptRecord,
    EventRecord,
    SessionData,
    SessionSummary,
    SignatureRecord,
)
from bringup.store.log import SessionLog
from bringup.store.opening import default_db_path
from bringup.store.schema import CURRENT_VERSION
from bringup.store.waveforms import StoredWaveform

__all__ = [
    "SessionLog",
    "StoreError",
    "StoredWaveform",
    "ChainReport",
    "SessionSummary",
    "SessionData",
    "AttemptRecord",
    "EventRecord",
    "SignatureRecord",
    "ATTEMPT_OUTCOMES",
    "EVENT_KINDS",
    "FAILED_OUTCOMES",
    "CURRENT_VERSION",
    "default_db_path",
]
