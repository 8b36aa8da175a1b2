"""How each step state and verdict is shown: a symbol and a word, then a colour class.

The symbol and the word carry the meaning; the colour (a CSS class ``state-<key>``) only
helps. Words are our own, short enough for a narrow checklist column.
"""

from __future__ import annotations

from dataclasses import dataclass

from rich.text import Text

__all__ = ["StateLook", "look_of", "STATE_LOOKS", "COLOURS", "LEGEND"]


@dataclass(frozen=True)
class StateLook:
    """Symbol, word and CSS class key of one state."""

    symbol: str
    word: str
    key: str
    short: str = ""

    @property
    def brief(self) -> str:
        """At most 7 characters, for the checklist column."""
        return self.short or self.word

    def label(self) -> str:
        """'✔ passed'."""
        return f"{self.symbol} {self.word}"

    @property
    def style(self) -> str:
        """Rich style of the symbol and word (colour only reinforces them)."""
        return COLOURS.get(self.key, "")

    def text(self) -> Text:
        """The label as Rich text in its style."""
        return Text(self.label(), style=self.style)


# Chosen to read on a dark bench terminal at arm's length; never the only cue.
COLOURS = {
    "todo": "#9aa5b1",
    "running": "bold #7cc4ff",
    "pass": "bold #7ee081",
    "fail": "bold #ff8a65",
    "cond": "bold #e6d36a",
    "condfail": "bold #ffb347",
    "skipped": "#b39ddb",
    "waived": "#80cbc4",
}


STATE_LOOKS: dict[str, StateLook] = {
    "not-started": StateLook("○", "to do", "todo"),
    "in-progress": StateLook("▶", "running", "running"),
    # a stage with some steps done and nothing running in it
    "started": StateLook("◐", "started", "todo"),
    "pass": StateLook("✔", "passed", "pass"),
    "fail": StateLook("✘", "FAILED", "fail"),
    "conditional-pass": StateLook("≈", "pass, inside guard band", "cond", "c.pass"),
    "conditional-fail": StateLook("≉", "FAIL, inside guard band", "condfail", "c.FAIL"),
    "skipped": StateLook("»", "skipped", "skipped"),
    "waived": StateLook("◇", "waived", "waived"),
    "not-run": StateLook("–", "not run", "todo"),
    "cancelled": StateLook("■", "stopped", "skipped"),
    "error": StateLook("!", "fault", "fail"),
    "reported": StateLook("·", "reported, not judged", "todo", "info"),
}

# spellings the runner or store may use for the same state
_ALIASES = {
    "pending": "not-started",
    "todo": "not-started",
    "not_started": "not-started",
    "new": "not-started",
    "running": "in-progress",
    "in_progress": "in-progress",
    "active": "in-progress",
    "current": "in-progress",
    "passed": "pass",
    "failed": "fail",
    "conditional_pass": "conditional-pass",
    "conditional_fail": "conditional-fail",
    "skip": "skipped",
    "waive": "waived",
    "not_run": "not-run",
    "aborted": "cancelled",
    "canceled": "cancelled",
    "fault": "error",
}


def look_of(state: str | None) -> StateLook:
    """The look of ``state`` (a verdict or step state, any common spelling)."""
    key = (state or "not-started").strip().lower()
    key = _ALIASES.get(key, key)
    return STATE_LOOKS.get(key, StateLook("?", key, "todo"))


#: the key to the symbols, shown under the checklist
LEGEND = (
    "○ to do  ◐ started  ▶ running  ✔ passed  ✘ FAILED  ≈ pass/≉ fail inside guard band  "
    "» skipped  ◇ waived"
)
