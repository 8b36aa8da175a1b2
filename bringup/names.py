"""What a name may hold: one line of text that reads the same in every viewer.

Names (operator, serial number, board name and revision, a waiver's and a signer's name) go
into the one-line session header, the log, the record and its signatures. Two kinds of
character are refused in them:

- control characters (Unicode general category Cc: newlines, tabs, escapes) and the line and
  paragraph separators (Zl, Zp): they break the line or drive a terminal;
- the bidirectional embedding, override and isolate characters U+202A-U+202E and
  U+2066-U+2069 (Unicode's ``Bidi_Control`` characters, UAX #9 section 2): invisible, they make
  a name display in another order than it is stored, so ``"ana\\u202eredoR"`` would show as
  ``"anaRoder"`` on screen and in the record.

No dependencies: every layer (checklist, store, record, runner, commands) may use it.
"""

from __future__ import annotations

import unicodedata

__all__ = ["BIDI_CONTROLS", "control_character", "same_person"]

#: LRE, RLE, PDF, LRO, RLO and LRI, RLI, FSI, PDI (UAX #9 explicit formatting characters).
BIDI_CONTROLS = frozenset(chr(c) for c in (*range(0x202A, 0x202F), *range(0x2066, 0x206A)))


def control_character(text: str) -> str | None:
    """The first refused character in ``text`` as ``"U+000A"``, or None when there is none.

    Refused: control characters (category Cc), line and paragraph separators (Zl, Zp) and the
    bidirectional override and isolate characters (``BIDI_CONTROLS``); see the module docstring.
    """
    for char in text:
        if char in BIDI_CONTROLS or unicodedata.category(char) in ("Cc", "Zl", "Zp"):
            return f"U+{ord(char):04X}"
    return None


def same_person(a: str, b: str) -> bool:
    """True when names ``a`` and ``b`` name one person as far as text can tell: case and runs
    of spaces do not make a new person ("Ana  Ortiz" = "ana ortiz"; Unicode case folding)."""
    return " ".join(a.split()).casefold() == " ".join(b.split()).casefold()
