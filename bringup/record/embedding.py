"""The signed record inside its HTML and PDF renderings, so that every format can be verified.

The record file is the canonical JSON of the record and one newline (``record_file_bytes``).
The PDF carries exactly those bytes as an embedded file (a PDF attachment, ISO 32000-1
§7.11.4) named ``EMBEDDED_NAME``. The HTML carries them in a data block,
``<script type="application/json" id="bringup-record">`` (HTML Living Standard §4.12.1.2: a
script of a JSON type is data, never run), with ``<``, ``>`` and ``&`` written as the JSON
escapes ``\\u003c``, ``\\u003e``, ``\\u0026``: canonical JSON holds those characters only inside
strings, where the escape means the same character, so no text (``</script>``, ``<!--``) can
end the block early. The characters that reorder text (bidirectional embeddings, overrides,
isolates and marks) are escaped the same way, so that the page's source shows typed text in
its order. ``html_block_record_text`` undoes exactly those escapes and gives back the record
file's text.
"""

from __future__ import annotations

import re

from bringup.record.rfc8785 import canonical_bytes

__all__ = [
    "EMBEDDED_NAME",
    "HTML_BLOCK_OPEN",
    "HTML_BLOCK_CLOSE",
    "html_data_block",
    "html_block_record_text",
    "record_file_bytes",
]

#: the attachment's file name in the PDF
EMBEDDED_NAME = "bringup-record.json"
HTML_BLOCK_OPEN = '<script type="application/json" id="bringup-record">'
HTML_BLOCK_CLOSE = "</script>"

_ESCAPED = (
    "<>&\u061c\u200e\u200f"
    + "".join(map(chr, range(0x202A, 0x202F)))
    + "".join(map(chr, range(0x2066, 0x206A)))
)
_ESCAPES = {c: f"\\u{ord(c):04x}" for c in _ESCAPED}
_BACK = {f"{ord(c):04x}": c for c in _ESCAPED}
# An escape is one only after an even run of backslashes (an odd run escapes the backslash
# before "u": the text then holds a literal "\u003c" a person typed, left as it is).
_UNESCAPE = re.compile(r"(?<!\\)((?:\\\\)*)\\u(" + "|".join(_BACK) + ")")


def record_file_bytes(record: dict) -> bytes:
    """The bytes of an exported record file: canonical JSON (RFC 8785) and one newline."""
    return canonical_bytes(record) + b"\n"


def html_data_block(record: dict) -> str:
    """The HTML data block carrying ``record``'s file text (see the module docstring)."""
    text = record_file_bytes(record).decode("utf-8").rstrip("\n")
    for char, escape in _ESCAPES.items():
        text = text.replace(char, escape)
    return f"{HTML_BLOCK_OPEN}{text}{HTML_BLOCK_CLOSE}"


def html_block_record_text(html: str) -> str | None:
    """The record file's text carried by the one data block of ``html`` (None when there is no
    block, or more than one); the escapes ``html_data_block`` wrote are undone."""
    if html.count(HTML_BLOCK_OPEN) != 1:
        return None
    start = html.index(HTML_BLOCK_OPEN) + len(HTML_BLOCK_OPEN)
    end = html.find(HTML_BLOCK_CLOSE, start)
    if end < 0:
        return None
    text = _UNESCAPE.sub(lambda m: m.group(1) + _BACK[m.group(2)], html[start:end])
    return text + "\n"
