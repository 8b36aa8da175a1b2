"""The keys line at the foot of every screen: each key the screen answers now, with what it
does, on as many lines as the terminal's width needs.

Why not Textual's ``Footer``: it is one line that scrolls sideways, so on a 100-column terminal
the last keys (``q quit, supply off``) were cut off the right edge and a newcomer never saw
them. Here the keys wrap between entries (never inside one), the widget grows a line when they
do, and a click on an entry presses its key, as the stock footer's does. What is shown follows
the same rules: bindings with ``show``, one entry per action, a group of keys (``kj step``,
``1234 tabs``) as one entry, a key whose ``check_action`` says False hidden, None dimmed.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import groupby

from rich.text import Text
from textual import events
from textual.geometry import Size
from textual.widget import Widget

__all__ = ["KeyFooter", "FooterEntry", "wrap_entries"]

_GAP = 2  # cells between two entries


@dataclass(frozen=True)
class FooterEntry:
    """One entry: the keys as shown (``"r"``, ``"kj"``), what they do, the key a click
    presses, and whether the action can run now."""

    keys: str
    description: str
    press: str
    enabled: bool = True

    @property
    def width(self) -> int:
        return len(self.keys) + (1 + len(self.description) if self.description else 0)


def wrap_entries(entries: list[FooterEntry], width: int) -> list[list[FooterEntry]]:
    """Entries packed into lines of at most ``width`` cells (a leading space, two between
    entries); an entry wider than a line gets a line of its own."""
    lines: list[list[FooterEntry]] = [[]]
    used = 1
    for entry in entries:
        need = entry.width + (_GAP if lines[-1] else 0)
        if lines[-1] and used + need > width:
            lines.append([])
            used, need = 1, entry.width
        lines[-1].append(entry)
        used += need
    return lines if lines[0] else []


class KeyFooter(Widget, can_focus=False):
    """The screen's keys, wrapped onto more lines when the terminal is narrow."""

    DEFAULT_CSS = """
    KeyFooter {
        dock: bottom;
        height: auto;
        background: #24323b;
        color: #e8eef2;
    }
    """

    def on_mount(self) -> None:
        self.screen.bindings_updated_signal.subscribe(self, self._bindings_changed)

    def on_unmount(self) -> None:
        self.screen.bindings_updated_signal.unsubscribe(self)

    def _bindings_changed(self, _screen) -> None:
        self.refresh(layout=True)

    def entries(self) -> list[FooterEntry]:
        """What the screen answers now, in the order its bindings are declared."""
        by_action: dict[str, tuple] = {}
        for _node, binding, enabled, _tooltip in self.screen.active_bindings.values():
            if binding.show:
                by_action.setdefault(binding.action, (binding, enabled))
        out: list[FooterEntry] = []
        for group, items in groupby(by_action.values(), lambda item: item[0].group):
            items = list(items)
            if group is not None and len(items) > 1:
                keys = "".join(self.app.get_key_display(b) for b, _ in items)
                out.append(FooterEntry(keys, group.description, items[0][0].key,
                                       any(e for _, e in items)))  # fmt: skip
                continue
            for binding, enabled in items:
                out.append(FooterEntry(self.app.get_key_display(binding), binding.description,
                                       binding.key, enabled))  # fmt: skip
        return out

    def _lines(self, width: int) -> list[list[FooterEntry]]:
        return wrap_entries(self.entries(), max(width, 1))

    def get_content_height(self, container: Size, viewport: Size, width: int) -> int:
        return max(1, len(self._lines(width)))

    def render(self) -> Text:
        text = Text(no_wrap=True, overflow="crop", end="")
        for n, line in enumerate(self._lines(self.size.width)):
            if n:
                text.append("\n")
            text.append(" ")
            for i, entry in enumerate(line):
                if i:
                    text.append(" " * _GAP)
                dim = "" if entry.enabled else " dim"
                text.append(entry.keys, style="bold #f2c14e" + dim)
                if entry.description:
                    text.append(" " + entry.description, style="#e8eef2" + dim)
        return text

    def entry_at(self, x: int, y: int) -> FooterEntry | None:
        """The entry drawn at cell (``x``, ``y``) of the widget, if any."""
        lines = self._lines(self.size.width)
        if not 0 <= y < len(lines):
            return None
        at = 1
        for entry in lines[y]:
            if at <= x < at + entry.width:
                return entry
            at += entry.width + _GAP
        return None

    def on_click(self, event: events.Click) -> None:
        entry = self.entry_at(event.x, event.y)
        if entry is None:
            return
        if entry.enabled:
            self.app.simulate_key(entry.press)
        else:
            self.app.bell()
