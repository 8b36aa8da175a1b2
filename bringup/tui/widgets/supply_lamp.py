"""The supply lamp: one cell at the foot of the session screen saying what is known of the
supply output, so that after STOP the operator reads when it is confirmed OFF.

States (a word and a symbol first; the colour only helps): ``off`` between steps (every step
ends with the output switched off and read back), ``live`` while a step that energises runs,
``stopping`` from the STOP key until the read-back, ``confirmed`` once the supply has answered
that its output is OFF (with the time), ``unconfirmed`` when it could not be read back.
"""

from __future__ import annotations

import time

from rich.text import Text
from textual.reactive import reactive
from textual.widgets import Static

from bringup.tui.literal import literal

__all__ = ["SupplyLamp"]

_WORDS = {
    "off": "■ supply OFF",
    "live": "⚡ supply may be ON · x: STOP",
    "stopping": "⏻ STOP: switching the supply OFF…",
    "confirmed": "■ supply OFF, confirmed",
    "unconfirmed": "⚠ supply OFF NOT CONFIRMED: switch it off at the supply",
}


class SupplyLamp(Static):
    """What the notebook knows of the supply output (see the module doc)."""

    DEFAULT_CSS = """
    SupplyLamp {
        width: auto;
        height: auto;
        padding: 0 1;
        background: #1b2329;
        color: #9fb3c1;
    }
    SupplyLamp.-live { background: #5a4d12; color: #ffffff; text-style: bold; }
    SupplyLamp.-stopping { background: #7a2418; color: #ffffff; text-style: bold; }
    SupplyLamp.-confirmed { background: #1d4d2a; color: #ffffff; text-style: bold; }
    SupplyLamp.-unconfirmed { background: #7a2418; color: #ffffff; text-style: bold reverse; }
    """

    #: one of the states in the module doc
    state: reactive[str] = reactive("off")

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__("", id=id)
        self.detail = ""  # the time of a confirmation, or the problem that stopped it

    def set_state(self, state: str, detail: str = "") -> None:
        """Show ``state``; ``detail``: the problem when unconfirmed."""
        if state not in _WORDS:
            raise ValueError(f"unknown supply lamp state {state!r}")
        if state == "confirmed" and not detail:
            detail = "at " + time.strftime("%H:%M:%S")
        self.detail = detail
        self.state = state
        self.mutate_reactive(SupplyLamp.state)  # the same state again still redraws the time

    def watch_state(self, state: str) -> None:
        for name in _WORDS:
            self.set_class(name == state, f"-{name}")
        text = Text(_WORDS[state])
        if self.detail:
            text.append(" ")
            text.append_text(literal(self.detail, multiline=False))
        self.update(text)

    @property
    def text(self) -> str:
        """What the lamp says now (plain text)."""
        return _WORDS[self.state] + (f" {self.detail}" if self.detail else "")
