"""Checking an exported record: its form, its seal, every signature and (optionally) the log.

Each problem found is one line naming where it is (which signature, which step and field).
A record holds when the list of findings is empty: the file is the canonical JSON of itself,
the content matches its seal, it carries at least one signature, every signature verifies
with the key it names (and that key is among the trusted keys, when any are given), and,
with the log at hand, the log's chain is intact, ends at the record's chain head and holds
exactly the content and the sign-offs the record shows, and the session's stored state and
verdict columns (outside the chain) say what the chain says.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from bringup.errors import InputError
from bringup.record.compare import diagnose_seal, diff_content
from bringup.record.embedding import EMBEDDED_NAME, html_block_record_text, record_file_bytes
from bringup.record.keys import PublicKey
from bringup.record.rfc8785 import NotCanonicalError, canonical_bytes
from bringup.record.schemas import READABLE_SCHEMAS, content_as, waveform_codes
from bringup.record.signing import check_signature

__all__ = [
    "Carried",
    "check_rendering",
    "read_carried",
    "read_record",
    "record_bytes",
    "verify_record",
]


def record_bytes(record: dict) -> bytes:
    """The bytes of an exported record file: canonical JSON and one newline."""
    return record_file_bytes(record)


#: Deeper than any record bringup writes (about a dozen levels), shallow enough that every
#: recursive walk over the record (canonical form, seal, diff) stays far inside Python's stack.
MAX_DEPTH = 200

#: Digits of the longest integer a record may hold: integers beyond 2**53 have no canonical
#: form anyway (RFC 8785 §3.2.2.3), and Python refuses to parse more than 4300 digits.
_MAX_INT_DIGITS = 16


class _NotJson(ValueError):
    """A number the record format does not allow; ``token`` is its text in the file."""

    def __init__(self, token: str, problem: str) -> None:
        super().__init__(problem)
        self.token = token


def _no_constant(token: str) -> Any:
    # Python's json reads NaN and Infinity, which RFC 8259 JSON (and a record) never holds.
    raise _NotJson(token, f"{token} is not a JSON value; a record writes null with a reason")


def _int(token: str) -> int:
    if len(token.lstrip("-")) > _MAX_INT_DIGITS:
        raise _NotJson(
            token[:24],
            f"an integer of {len(token.lstrip('-'))} digits; a record holds none beyond 2**53",
        )
    return int(token)


def _float(token: str) -> float:
    value = float(token)
    if not math.isfinite(value):
        raise _NotJson(
            token[:24], f"{token[:24]} is beyond the range of a double; a record cannot hold it"
        )
    return value


def _line_of(text: str, token: str) -> int:
    """The line of ``token``'s first appearance in ``text`` (1 when it cannot be found)."""
    at = text.find(token)
    return text.count("\n", 0, at) + 1 if at >= 0 else 1


def _depth(value: Any) -> int:
    """How deeply lists and objects nest in ``value`` (a scalar is 0), without recursion."""
    deepest, stack = 0, [(value, 1)]
    while stack:
        node, level = stack.pop()
        if not isinstance(node, dict | list):
            continue
        deepest = max(deepest, level)
        if deepest > MAX_DEPTH:
            return deepest
        children = node.values() if isinstance(node, dict) else node
        stack.extend((child, level + 1) for child in children)
    return deepest


@dataclass(frozen=True)
class Carried:
    """A record as read from a file: the record file itself (``kind`` "json"), or the record an
    HTML or PDF rendering carries (``embedding``). ``data``: the record file's bytes (what the
    form check compares); ``file``: the whole file as read (what the rendering check compares)."""

    record: dict
    data: bytes
    kind: str
    file: bytes


def read_record(path: str | Path) -> tuple[dict, bytes]:
    """Read a record file (or the record an HTML or PDF record carries); one-line
    ``InputError`` when it is missing or not a record. See ``read_carried``."""
    carried = read_carried(path)
    return carried.record, carried.data


def read_carried(path: str | Path) -> Carried:
    """Read a record from a ``.json`` record file, or from the HTML or PDF record carrying it
    (told by the file's first bytes, whatever its name); one-line ``InputError`` when it is
    missing or not a record.

    Refused as not a record (naming the file and, where it can be told, the line): an HTML
    page or a PDF without the embedded record, text that is not JSON, NaN or Infinity (which
    Python's reader would accept), integers beyond what a record can hold, numbers beyond a
    double's range, and nesting deeper than ``MAX_DEPTH``.
    """
    path = Path(path)
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise InputError(f"{path}: no such record file") from None
    except OSError as exc:
        raise InputError(f"{path}: cannot read the record ({exc.strerror})") from None
    if data.startswith(b"%PDF-"):
        inner = _pdf_attachment(path, data)
        return Carried(_parse(inner, f"{path} (embedded record)"), inner, "pdf", data)
    head = data[:64].lstrip(b"\xef\xbb\xbf \t\r\n").lower()
    if head.startswith((b"<!doctype html", b"<html")):
        text = html_block_record_text(data.decode("utf-8", errors="replace"))
        if text is None:
            raise InputError(
                f"{path}: an HTML page without one bringup record data block; "
                "not a record bringup can verify"
            )
        inner = text.encode("utf-8")
        return Carried(_parse(inner, f"{path} (embedded record)"), inner, "html", data)
    return Carried(_parse(data, str(path)), data, "json", data)


def _pdf_attachment(path: Path, data: bytes) -> bytes:
    """The bytes of the PDF's embedded record (``EMBEDDED_NAME``); ``InputError`` when the PDF
    cannot be read or carries none, or more than one."""
    import io
    import logging

    from pypdf import PdfReader

    logging.getLogger("pypdf").setLevel(logging.ERROR)  # a damaged file is told in one line
    try:
        found = PdfReader(io.BytesIO(data)).attachments.get(EMBEDDED_NAME)
    except Exception as exc:  # noqa: BLE001 - pypdf raises many kinds on a damaged file
        raise InputError(
            f"{path}: a PDF that cannot be read ({type(exc).__name__}: {exc})"
        ) from None
    if not found:
        raise InputError(
            f"{path}: a PDF without an embedded bringup record ({EMBEDDED_NAME}); "
            "not a record bringup can verify"
        )
    if len(found) != 1:
        raise InputError(f"{path}: a PDF carrying {len(found)} files named {EMBEDDED_NAME}")
    return found[0]


def _parse(data: bytes, where: str) -> dict:
    """The record in ``data`` (a record file's bytes); ``where`` names it in an error."""
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(f"{where}: not UTF-8 text, not a record") from None
    try:
        record = json.loads(text, parse_constant=_no_constant, parse_int=_int, parse_float=_float)
    except json.JSONDecodeError as exc:
        raise InputError(f"{where}:{exc.lineno}: not valid JSON ({exc.msg})") from None
    except _NotJson as exc:
        raise InputError(f"{where}:{_line_of(text, exc.token)}: not a record ({exc})") from None
    except RecursionError:
        raise InputError(f"{where}: nested too deeply to be a record") from None
    if _depth(record) > MAX_DEPTH:
        raise InputError(
            f"{where}: nested more than {MAX_DEPTH} levels deep, too deep to be a record"
        )
    if not isinstance(record, dict) or not isinstance(record.get("content"), dict):
        raise InputError(f"{where}: not a bringup record (no 'content' object)")
    try:
        canonical_bytes(record)
    except NotCanonicalError as exc:
        # bringup never writes such a value (an integer beyond 2**53, say): not a record.
        raise InputError(f"{where}: not a record ({exc})") from None
    if record.get("schema") not in READABLE_SCHEMAS:
        raise InputError(
            f"{where}: schema {record.get('schema')!r} is not one this bringup reads "
            f"({', '.join(READABLE_SCHEMAS)})"
        )
    return record


def _snippet(a: str, b: str) -> tuple[str, str]:
    """The stretch of ``a`` and ``b`` around their first difference (about 30 characters)."""
    at = next(
        (i for i, (x, y) in enumerate(zip(a, b, strict=False)) if x != y), min(len(a), len(b))
    )
    start = max(0, at - 12)
    return a[start : at + 18], b[start : at + 18]


def _first_line_difference(shown: list[str], rendered: list[str]) -> tuple[int, str, str] | None:
    """(line number from 1, the stretch shown, the stretch rendered) of the first line that
    differs, or None when the lines are the same."""
    for n, (a, b) in enumerate(zip(shown, rendered, strict=False), start=1):
        if a != b:
            return (n, *_snippet(a, b))
    if len(shown) != len(rendered):
        n = min(len(shown), len(rendered)) + 1
        tail = lambda lines: lines[n - 1][:30] if len(lines) >= n else "(nothing)"  # noqa: E731
        return n, tail(shown), tail(rendered)
    return None


def check_rendering(carried: Carried) -> list[str]:
    """For an HTML or PDF record: is the file exactly what its embedded record renders to?
    The exports are byte-reproducible, so any edit of the visible page (a digit, a name) is
    named: the HTML by line, the PDF by page and text line (one finding, the first
    difference). A JSON record file renders nothing: no finding."""
    if carried.kind == "json":
        return []
    if carried.kind == "html":
        from bringup.record.export_html import render_html

        rendered = render_html(carried.record).encode("utf-8")
        if rendered == carried.file:
            return []
        shown = carried.file.decode("utf-8", errors="replace").split("\n")
        found = _first_line_difference(shown, rendered.decode("utf-8").split("\n"))
        if found is None:
            return ["page: the HTML's bytes are not what its embedded record renders"]
        n, a, b = found
        return [
            f"page: line {n} of the HTML shows {a!r} where its embedded record renders {b!r} "
            "(the page was edited, or made by another version of bringup)"
        ]
    from bringup.record.export_pdf import render_pdf

    rendered = render_pdf(carried.record)
    if rendered == carried.file:
        return []
    return [_pdf_difference(carried.file, rendered)]


def _pdf_difference(shown: bytes, rendered: bytes) -> str:
    """One line naming the first page (and text line) where two PDFs differ."""
    import io

    from pypdf import PdfReader

    try:
        pages_shown = [p.extract_text() for p in PdfReader(io.BytesIO(shown)).pages]
    except Exception as exc:  # noqa: BLE001 - pypdf raises many kinds on a damaged file
        return f"page: the PDF's pages cannot be read ({type(exc).__name__})"
    pages_rendered = [p.extract_text() for p in PdfReader(io.BytesIO(rendered)).pages]
    if len(pages_shown) != len(pages_rendered):
        return (
            f"page: the PDF has {len(pages_shown)} pages, its embedded record renders "
            f"{len(pages_rendered)}"
        )
    for n, (a, b) in enumerate(zip(pages_shown, pages_rendered, strict=True), start=1):
        found = _first_line_difference(a.split("\n"), b.split("\n"))
        if found is not None:
            line, x, y = found
            return (
                f"page {n}: text line {line} shows {x!r} where its embedded record renders "
                f"{y!r} (the page was edited, or made by another version of bringup)"
            )
    return (
        "page: the PDF's bytes are not what its embedded record renders, though its text is "
        "(a drawing, the metadata or the structure changed, or another version of bringup "
        "made it)"
    )


def _check_form(record: dict, data: bytes) -> list[str]:
    try:
        expected = record_bytes(record)
    except NotCanonicalError as exc:
        return [f"form: {exc}"]
    if data != expected:
        return ["form: the file is not in canonical form (re-serialised or edited by hand)"]
    return []


def _check_signatures(
    content: dict, signatures: Any, trusted: list[PublicKey], schema: str
) -> list[str]:
    if not isinstance(signatures, list) or not signatures:
        return ["signatures: the record carries no signature (sign it with `bringup sign`)"]
    findings = []
    trusted_raw = {k.raw: k for k in trusted}
    seen: dict[bytes, tuple[int, str]] = {}  # raw key -> (first signature number, its role)
    for i, entry in enumerate(signatures):
        result = check_signature(content, entry, i, schema)
        findings += [f"{result.label}: {p}" for p in result.problems]
        if trusted and result.raw_public_key is not None:
            known = trusted_raw.get(result.raw_public_key)
            if known is None:
                findings.append(
                    f"{result.label}: signed with a key that is not among the given --key files"
                )
            elif isinstance(entry, dict) and known.name != entry.get("name"):
                findings.append(
                    f"{result.label}: the key belongs to {known.name!r}, "
                    f"not to {entry.get('name')!r} as written"
                )
        if result.problems or result.raw_public_key is None:
            continue  # a signature that does not verify was not made by the key it carries
        role = str(entry.get("role"))
        if result.raw_public_key not in seen:
            seen[result.raw_public_key] = (i + 1, role)
            continue
        # One key, one role, once; and a review is a second person's (see SCHEMA.md).
        first, first_role = seen[result.raw_public_key]
        how = (
            f"in the same role {role}"
            if first_role == role
            else f"as {first_role}: the {role} sign-off is not another person's"
        )
        findings.append(f"{result.label}: signature {first} is by the same key {how}")
    return findings


def verify_record(
    record: dict, data: bytes, *, log: Any = None, trusted: list[PublicKey] | None = None
) -> list[str]:
    """Every finding about ``record`` (parsed) read from ``data`` (its bytes); empty = holds.

    ``log`` is an open ``SessionLog`` to compare with; ``trusted`` the public keys the
    signatures must come from (none given: any key that verifies is accepted and named).
    """
    content, schema = record["content"], str(record.get("schema"))
    findings = _check_form(record, data)
    findings += [f"content: {f}" for f in diagnose_seal(content, record.get("seal"))]
    findings += _check_waveforms(content)
    findings += _check_signatures(content, record.get("signatures"), trusted or [], schema)
    if log is not None:
        findings += _check_log(content, log, schema)
        findings += _check_log_signatures(record.get("signatures"), content, log)
    return findings


def _check_waveforms(content: dict) -> list[str]:
    """Each waveform's codes decode (``schemas.waveform_codes``) and hash to its
    ``raw_sha256``: the digest names a changed sample even where the seal cannot say which."""
    import hashlib

    findings = []
    for stage in content.get("stages") or []:
        for step in (stage.get("steps") or []) if isinstance(stage, dict) else []:
            for attempt in (step.get("attempts") or []) if isinstance(step, dict) else []:
                for wave in (attempt.get("waveforms") or []) if isinstance(attempt, dict) else []:
                    if not isinstance(wave, dict):
                        continue
                    where = (
                        f"content: stage {stage.get('id')} / step {step.get('id')} / attempt "
                        f"{attempt.get('number')} / waveform {wave.get('name')}"
                    )
                    try:
                        raw = waveform_codes(wave)
                    except ValueError as exc:
                        findings.append(f"{where}: {exc}")
                        continue
                    if hashlib.sha256(raw).hexdigest() != wave.get("raw_sha256"):
                        findings.append(f"{where}: the codes do not hash to raw_sha256")
    return findings


def _session_id(content: dict) -> Any:
    """The session id the content names (whatever was written there), or None."""
    session = content.get("session")
    return session.get("id") if isinstance(session, dict) else None


def _check_log_signatures(signatures: Any, content: dict, log: Any) -> list[str]:
    """The record carries exactly the sign-offs the log holds (none dropped, none added)."""
    from bringup.errors import StoreError
    from bringup.record.from_log import signature_entry

    session_id = _session_id(content)
    if not isinstance(session_id, str) or not isinstance(signatures, list):
        return []
    try:
        logged = [signature_entry(s) for s in log.signatures(session_id)]
    except StoreError as exc:
        return [f"log: {exc}"]

    def key(entry: Any) -> str:
        value = entry.get("signature", "") if isinstance(entry, dict) else ""
        return value if isinstance(value, str) else ""

    in_record = {key(e) for e in signatures}
    findings = [
        f"signatures: the log holds a sign-off by {e['role']} {e['name']} at {e['signed_at']} "
        "that the record does not carry"
        for e in logged
        if key(e) not in in_record
    ]
    in_log = {key(e) for e in logged}
    findings += [
        f"signatures: signature {i + 1} is not in the log"
        for i, e in enumerate(signatures)
        if key(e) not in in_log
    ]
    return findings


def _check_log(content: dict, log: Any, schema: str) -> list[str]:
    from bringup.errors import StoreError
    from bringup.record.from_log import content_from_log

    session_id = _session_id(content)
    if not isinstance(session_id, str):
        return ["log: the record names no session id"]
    try:
        report = log.verify_chain(session_id)
        fresh, _ = content_from_log(log, session_id)
        fresh = content_as(fresh, schema)  # a record of an earlier schema holds that content
        # The sessions row's state and verdict columns are outside the chain: an edit there
        # breaks no link, so it is compared with what the chain says.
        edited = log.summary_disagreements(session_id)
    except StoreError as exc:
        return [f"log: {exc}"]
    findings = []
    if not report.ok:
        findings.append(f"log chain: {report.problem}")
    findings += [f"log summary: {line} (edited outside bringup?)" for line in edited]
    log_part = content.get("log")
    head = log_part.get("chain_head") if isinstance(log_part, dict) else None
    if report.head != head:
        findings.append(
            f"log chain: the log ends at {report.head[:16]}... ({report.entries} entries), "
            f"the record's chain head is {str(head)[:16]}..."
        )
    findings += [f"log: {d}" for d in diff_content(content, fresh, ("record", "log"))]
    return findings
