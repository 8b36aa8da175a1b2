"""Text a person typed or a file supplied, made safe to show: exactly what was typed, never markup.

Textual reads square brackets in a plain ``str`` as content markup (``[bold red]``, ``[@click=...]``
runs an action, ``[/]`` with nothing open raises), and a terminal obeys escape sequences. Every
operator name, serial, note, reason, board or checklist text, instrument reply and fault message
goes through :func:`literal` before a widget shows it: the result is a Rich ``Text`` (never parsed
as markup) in which characters that would act instead of print are replaced by a visible stand-in:

- C0/C1 control characters (ESC of an ANSI sequence, BEL, ...) show as their Unicode control
  pictures (U+2400 block, ESC as ``␛``) or as ``⟨U+0085⟩`` beyond that block;
- bidirectional embedding, override and isolate characters (U+202A..U+202E, U+2066..U+2069,
  U+200E, U+200F, U+061C; Unicode Standard Annex #9) show as ``⟨U+202E⟩``, so they cannot
  reorder what follows them on screen;
- line and paragraph separators (U+2028, U+2029) likewise; newlines are kept only where the
  widget shows several lines (``multiline=True``), tabs become spaces.
"""

from __future__ import annotations

import unicodedata

from rich.text import Text

__all__ = ["literal", "visible", "BIDI_CONTROLS"]

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


def literal(text: object, style: str = "", *, multiline: bool = True) -> Text:
    """``text`` as a Rich ``Text`` shown exactly as typed: no markup, no escape sequences, no
    direction overrides (``style`` applies to the whole of it)."""
    return Text(visible(str(text), multiline=multiline), style=style, end="")
