"""Canonical JSON for the record: the same data always gives the same bytes.

The form follows the JSON Canonicalization Scheme (RFC 8785): object members sorted by the
UTF-16 code units of their names, no insignificant whitespace, strings escaped as ECMAScript's
``JSON.stringify`` does (only ``"``, ``\\`` and control characters), and numbers printed as
ECMAScript's ``Number.prototype.toString`` prints an IEEE 754 double: the shortest digit string
that reads back to the same double, in plain notation from 1e-6 up to 1e21 and in exponent
notation outside. Python's ``repr(float)`` gives the same shortest digits, so only the layout
of the digits is done here. NaN and infinities have no JSON form: the record writes ``null``
with a reason beside it, and this module refuses them so that none slips through.

The session log's hash chain uses another form (``bringup.store.chain_json``, Python's
``repr`` floats): see DEVELOPERS.md, "Two canonical JSON forms", for why both exist.
"""

from __future__ import annotations

import json
import math
from decimal import Decimal
from typing import Any

from bringup.errors import BringupError

__all__ = ["canonical_bytes", "canonical_text", "format_number", "NotCanonicalError"]

# Integers above 2**53 cannot be carried by a JSON reader that uses doubles (RFC 8785 §3.2.2.3).
_MAX_SAFE_INT = 2**53


class NotCanonicalError(BringupError):
    """A value that has no canonical JSON form (NaN, infinity, an unsupported type)."""


def format_number(value: float | int) -> str:
    """Print ``value`` as ECMAScript's Number.prototype.toString does (RFC 8785 §3.2.2.3).

    Examples: 1.0 -> "1", 1e-7 -> "1e-7", 1e21 -> "1e+21", 0.000001 -> "0.000001",
    -0.0 -> "0", 123456789012345680000.0 -> "123456789012345680000".
    """
    if isinstance(value, bool):
        raise NotCanonicalError(f"a boolean is not a number: {value!r}")
    if isinstance(value, int):
        if abs(value) > _MAX_SAFE_INT:
            raise NotCanonicalError(f"integer {value} is beyond 2**53 and cannot be kept exactly")
        return str(value)
    x = float(value)
    if not math.isfinite(x):
        raise NotCanonicalError(f"{x!r} has no JSON form; the record writes null with a reason")
    if x == 0.0:
        return "0"
    sign = "-" if x < 0 else ""
    # repr gives the shortest round-trip digits; Decimal splits them into digits and exponent.
    digits_tuple, exponent = Decimal(repr(abs(x))).as_tuple()[1:]
    digits = "".join(str(d) for d in digits_tuple).rstrip("0") or "0"
    trailing = len("".join(str(d) for d in digits_tuple)) - len(digits)
    exponent += trailing
    k = len(digits)
    n = k + exponent  # the value is 0.digits * 10**n
    if k <= n <= 21:
        body = digits + "0" * (n - k)
    elif 0 < n <= 21:
        body = digits[:n] + "." + digits[n:]
    elif -6 < n <= 0:
        body = "0." + "0" * (-n) + digits
    else:
        e = n - 1
        mantissa = digits[0] + ("." + digits[1:] if k > 1 else "")
        body = f"{mantissa}e{'+' if e >= 0 else '-'}{abs(e)}"
    return sign + body


def _encode(value: Any, out: list[str], where: str) -> None:
    if value is None:
        out.append("null")
    elif value is True:
        out.append("true")
    elif value is False:
        out.append("false")
    elif isinstance(value, str):
        # ensure_ascii=False escapes exactly what JSON.stringify escapes.
        out.append(json.dumps(value, ensure_ascii=False))
    elif isinstance(value, int | float):
        try:
            out.append(format_number(value))
        except NotCanonicalError as exc:
            raise NotCanonicalError(f"{where}: {exc}") from None
    elif isinstance(value, dict):
        for key in value:
            if not isinstance(key, str):
                raise NotCanonicalError(f"{where}: object key {key!r} is not a string")
        out.append("{")
        for i, key in enumerate(sorted(value, key=lambda k: k.encode("utf-16-be"))):
            if i:
                out.append(",")
            out.append(json.dumps(key, ensure_ascii=False))
            out.append(":")
            _encode(value[key], out, f"{where}.{key}")
        out.append("}")
    elif isinstance(value, list | tuple):
        out.append("[")
        for i, item in enumerate(value):
            if i:
                out.append(",")
            _encode(item, out, f"{where}[{i}]")
        out.append("]")
    else:
        raise NotCanonicalError(f"{where}: {type(value).__name__} has no JSON form")


def canonical_text(value: Any) -> str:
    """The canonical JSON text of ``value`` (dicts, lists, str, int, float, bool, None)."""
    out: list[str] = []
    _encode(value, out, "$")
    return "".join(out)


def canonical_bytes(value: Any) -> bytes:
    """The canonical JSON of ``value`` as UTF-8 bytes: what is hashed and signed."""
    return canonical_text(value).encode("utf-8")
