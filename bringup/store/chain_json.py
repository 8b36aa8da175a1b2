"""Plain values at the store boundary and the canonical JSON the hash chain is built on.

Everything that enters the log goes through :func:`to_plain` first: numpy scalars become
Python ``int``/``float``/``bool`` (sqlite3 would otherwise bind ``np.float32`` as raw bytes,
a silent corruption), arrays become lists, tuples become lists, mapping keys become ``str``,
-0.0 becomes 0.0, and non-finite floats (NaN, +/-inf) become ``None`` so that every stored JSON document is
strict RFC 8259 JSON that SQLite's own ``json_extract`` can read.

:func:`canonical_json` is the byte string that is hashed: keys sorted, no spaces, UTF-8,
floats in Python's shortest round-trip form (``repr``), so re-reading a stored document and
serialising it again gives the same bytes.

This is not the record's canonical form (``bringup.record.rfc8785``, RFC 8785): it prints
``1.0`` and ``1e-07`` where RFC 8785 prints ``1`` and ``1e-7``. It stays as it is because every
chain hash already logged was computed over these bytes (DEVELOPERS.md, "Two canonical JSON
forms").
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import math
from collections.abc import Mapping
from pathlib import PurePath
from typing import Any

import numpy as np

__all__ = ["to_plain", "canonical_json", "sha256_hex", "dumps", "loads"]


def to_plain(value: Any) -> Any:
    """Return ``value`` as JSON-able plain Python data (see the module docstring).

    Raises ``TypeError`` naming the type for anything that has no faithful plain form
    (bytes, arbitrary objects): the caller turns it into a ``StoreError``.
    """
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        # "+ 0.0" turns -0.0 into 0.0: SQLite stores a REAL -0.0 as 0, so a hash over -0.0
        # would not match the value read back
        number = float(value) + 0.0
        return number if math.isfinite(number) else None
    if isinstance(value, np.ndarray):
        return [to_plain(item) for item in value.tolist()]
    if isinstance(value, Mapping):
        return {str(key): to_plain(item) for key, item in value.items()}
    if isinstance(value, (list, tuple)):
        return [to_plain(item) for item in value]
    if isinstance(value, (set, frozenset)):
        return sorted(to_plain(item) for item in value)
    if isinstance(value, _dt.datetime):
        return utc_text(value)
    if isinstance(value, PurePath):
        return str(value)
    raise TypeError(f"cannot store a value of type {type(value).__name__}")


def utc_text(moment: _dt.datetime | str) -> str:
    """ISO 8601 UTC text ``YYYY-MM-DDTHH:MM:SS.ffffffZ`` for an aware datetime (or pass text)."""
    if isinstance(moment, str):
        return moment
    if moment.tzinfo is None:
        raise TypeError("a naive datetime has no time zone: pass an aware datetime in UTC")
    return moment.astimezone(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def now_utc() -> str:
    """The current time as :func:`utc_text`."""
    return utc_text(_dt.datetime.now(_dt.UTC))


def canonical_json(value: Any) -> str:
    """Sorted-key, no-space, strict JSON of ``to_plain(value)``: the text that gets hashed."""
    return json.dumps(
        to_plain(value), sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
    )


def dumps(value: Any) -> str:
    """The JSON stored in a ``*_json`` column (canonical too, so it re-hashes identically)."""
    return canonical_json(value)


def loads(text: str | None) -> Any:
    """Inverse of :func:`dumps`; ``None`` stays ``None``."""
    return None if text is None else json.loads(text)


def sha256_hex(text: str | bytes) -> str:
    """SHA-256 (FIPS 180-4) of UTF-8 text or bytes, as 64 lowercase hex digits."""
    data = text.encode("utf-8") if isinstance(text, str) else text
    return hashlib.sha256(data).hexdigest()
