"""The status line: one message at a time at the foot of a screen, in the style of its kind.

Kinds: ``info`` (what happened, what to press next), ``good`` (a pass, a note kept), ``warn``
(refused or stopped: nothing bad happened), ``fault`` (an instrument fault or an error: the
bench was made safe). The text is always shown literally (``bringup.tui.literal``).
"""

from __future__ import annotations

from textual.widgets import Static

from bringup.tui.literal import literal

__all__ = ["StatusLine", "KINDS"]

KINDS = ("info", "good", "warn", "fault")


class StatusLine(Static):
    """One line (it wraps when long) saying what just happened and what to do next."""

    DEFAULT_CSS = """
    StatusLine {
        width: 1fr;
        height: auto;
        min-height: 1;
        padding: 0 1;
        background: #1b2329;
        color: #cfe3f0;
    }
    StatusLine.-good { color: #7ee081; text-style: bold; }
    StatusLine.-warn { color: #f2c14e; text-style: bold; }
    StatusLine.-fault { color: #ffffff; background: #7a2418; text-style: bold; }
    """

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__("", id=id)
        self.kind = "info"
        self.message = ""

    def say(self, message: str, kind: str = "info") -> None:
        """Show ``message`` (typed or supplied text is shown as it is) in ``kind``'s style."""
        if kind not in KINDS:
            raise ValueError(f"unknown status kind {kind!r} (one of {', '.join(KINDS)})")
        for name in KINDS:
            self.set_class(name == kind, f"-{name}")
        self.kind, self.message = kind, message
        self.update(literal(message))
