"""Text a person typed or a file supplied, made safe to show as exactly what was typed.

Operator names, serials, notes, reasons, board and checklist text and instrument replies reach
the notebook (``bringup.tui.literal``), the HTML and the PDF records. Characters that would act
instead of print are replaced by a visible stand-in wherever such text is shown:

- C0/C1 control characters (ESC of an ANSI sequence, BEL, ...) show as their Unicode control
  pictures (U+2400 block, ESC as ``␛``) or as ``⟨U+0085⟩`` beyond that block;
- bidirectional embedding, override and isolate characters (U+202A..U+202E, U+2066..U+2069,
  U+200E, U+200F, U+061C; Unicode Standard Annex #9) show as ``⟨U+202E⟩``, so they cannot
  reorder what follows them;
- line and paragraph separators (U+2028, U+2029) likewise; newlines are kept only where several
  lines are shown (``multiline=True``), tabs become spaces.

Markup (``[bold]``, ``<b>``) is left as characters here: each output escapes it its own way
(Rich ``Text``, ``html.escape``). No dependencies: every layer may use it.
"""

from __future__ import annotations

import unicodedata

__all__ = ["visible", "BIDI_CONTROLS"]

#: Unicode bidirectional formatting characters (UAX #9, section 2): embeddings, overrides,
#: isolates and the implicit marks.
BIDI_CONTROLS = frozenset(
    "\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069\u200e\u200f\u061c"
)


def _stand_in(char: str) -> str:
    code = ord(char)
    if code < 0x20:
        return chr(0x2400 + code)  # ␀..␟ (U+2400 block, "Control Pictures")
    if code == 0x7F:
        return "\u2421"  # ␡
    return f"⟨U+{code:04X}⟩"


def visible(text: str, *, multiline: bool = False) -> str:
    """``text`` with every character that would act on the terminal or the text direction
    replaced by a visible stand-in (see the module doc). Newlines stay when ``multiline``."""
    out: list[str] = []
    for char in text:
        if char == "\n" and multiline:
            out.append(char)
        elif char == "\t":
            out.append("    ")
        elif char in BIDI_CONTROLS or unicodedata.category(char) in ("Cc", "Zl", "Zp"):
            out.append(_stand_in(char))
        else:
            out.append(char)
    return "".join(out)
