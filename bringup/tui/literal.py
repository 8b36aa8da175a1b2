"""Text a person typed or a file supplied, made safe to show: exactly what was typed, never markup.

Textual reads square brackets in a plain ``str`` as content markup (``[bold red]``, ``[@click=...]``
runs an action, ``[/]`` with nothing open raises), and a terminal obeys escape sequences. Every
operator name, serial, note, reason, board or checklist text, instrument reply and fault message
goes through :func:`literal` before a widget shows it: the result is a Rich ``Text`` (never parsed
as markup) in which characters that would act instead of print are replaced by a visible stand-in
(``bringup.literal_text.visible``, shared with the HTML and PDF records):

- C0/C1 control characters (ESC of an ANSI sequence, BEL, ...) show as their Unicode control
  pictures (U+2400 block, ESC as ``␛``) or as ``⟨U+0085⟩`` beyond that block;
- bidirectional embedding, override and isolate characters (U+202A..U+202E, U+2066..U+2069,
  U+200E, U+200F, U+061C; Unicode Standard Annex #9) show as ``⟨U+202E⟩``, so they cannot
  reorder what follows them on screen;
- line and paragraph separators (U+2028, U+2029) likewise; newlines are kept only where the
  widget shows several lines (``multiline=True``), tabs become spaces.
"""

from __future__ import annotations

from rich.text import Text

from bringup.literal_text import BIDI_CONTROLS, visible

__all__ = ["literal", "visible", "BIDI_CONTROLS"]


def literal(text: object, style: str = "", *, multiline: bool = True) -> Text:
    """``text`` as a Rich ``Text`` shown exactly as typed: no markup, no escape sequences, no
    direction overrides (``style`` applies to the whole of it)."""
    return Text(visible(str(text), multiline=multiline), style=style, end="")
