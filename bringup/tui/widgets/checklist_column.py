"""The checklist column: stages and their steps, each with a state symbol and word, names that
wrap inside the column instead of being cut.

Built on Textual's ``OptionList`` (a tree's labels are one line and get cut at the column's
edge): a stage is a disabled option (a heading the cursor passes over), a step an option whose
id is the step id. Each row starts with a marker, the state, the attempt count and the number;
a long name wraps onto further lines under its own column (wrapped again when the column's width
changes). Highlighting a step posts
``OptionList.OptionHighlighted`` with ``option_id`` = the step id.
"""

from __future__ import annotations

from dataclasses import replace

from rich.text import Text
from textual.widgets import OptionList
from textual.widgets.option_list import Option

from bringup.tui.literal import visible
from bringup.tui.states import look_of
from bringup.tui.views import StageRow

__all__ = ["ChecklistColumn"]

_STAGE = "stage:"  # option ids of stage headings


_PREFIX = 19  # marker 1, state 10 ("✔ passed  "), count 3 ("×2 "), number 5 ("1.4  ")


def _row(number: str, title: str, state: str, width: int, attempts: int = 0,
         current: bool = False, stage: bool = False) -> Text:  # fmt: skip
    """'➤✔ passed ×2 1.2  Rail levels and ripple,' then the rest of the name on further lines
    under the name's own column (``width``: the column's width in cells). The state comes first
    so a narrow column never hides it; the attempt count (from the second) stands apart."""
    import textwrap

    look = look_of(state)
    text = Text(end="")
    text.append("➤" if current else " ", style="bold #f2c14e")
    text.append(f"{look.symbol} {look.brief:<7} ", style=look.style)
    text.append(f"×{attempts:<2}" if attempts > 1 else "   ", style="bold")
    strong = "bold" if (current or stage) else ""
    text.append(f"{number:<4} ", style=strong)
    lines = textwrap.wrap(visible(title, multiline=False), max(8, width - _PREFIX),
                          break_long_words=True, break_on_hyphens=False) or [""]  # fmt: skip
    text.append(lines[0], style=strong)
    for line in lines[1:]:
        text.append("\n" + " " * _PREFIX)
        text.append(line, style=strong)
    return text


def _stage_state(stage: StageRow) -> str:
    """A stage's state as shown: "running" only while one of its steps runs; "started" when
    some of its steps are done and none runs now."""
    if any(s.state in ("in-progress", "running") for s in stage.steps):
        return "in-progress"
    if stage.state in ("in-progress", "running"):
        return "started"
    return stage.state


class ChecklistColumn(OptionList):
    """Stages as headings, steps as the options; an option's id is its step id."""

    DEFAULT_CSS = """
    ChecklistColumn {
        height: 1fr;
        max-height: 100%;
        border: none;
        padding: 0;
        background: #0f1417;
        /* the scroll bar's cells kept whether it shows or not: names are wrapped to a width
           that does not change when it comes (it came a frame after, and a word of a long
           name showed at the column's left edge) */
        scrollbar-gutter: stable;
    }
    ChecklistColumn:focus { border: none; }
    ChecklistColumn > .option-list--option-disabled { color: #e8eef2; }
    """

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id, markup=False)
        self._shown: tuple[StageRow, ...] = ()
        self._numbers: dict[str, str] = {}
        self._args: tuple[tuple[StageRow, ...], str | None] | None = None

    def show_stages(
        self, stages: tuple[StageRow, ...], current: str | None, running: str | None = None
    ) -> None:
        """Redraw the rows (rebuilt when the checklist changed). ``current``: the step to do
        next (marked ➤); ``running``: the step whose worker runs now (▶ running)."""
        if running is not None:
            stages = tuple(
                replace(stage, steps=tuple(
                    replace(s, state="in-progress") if s.id == running else s
                    for s in stage.steps))
                for stage in stages
            )  # fmt: skip
        self._args = (stages, current)
        width = self.scrollable_content_region.width
        laid_out = width > 0
        if not laid_out:
            # not laid out yet: the rows are wrapped once the column's width is known (rows
            # wrapped at a guessed width showed, for a moment, a word at the column's edge)
            width = 40
            self.call_after_refresh(self._wrap_again)
        shape = [(s.id, [p.id for p in s.steps]) for s in stages]
        rows: list[tuple[str, Text, bool]] = []
        numbers: dict[str, str] = {}
        for i, stage in enumerate(stages, 1):
            prompt = _row(str(i), stage.title, _stage_state(stage), width, stage=True)
            rows.append((_STAGE + stage.id, prompt, True))
            for j, step in enumerate(stage.steps, 1):
                numbers[step.id] = f"{i}.{j}"
                prompt = _row(f"{i}.{j}", step.title, step.state, width, step.attempts,
                              step.id == current)  # fmt: skip
                rows.append((step.id, prompt, False))
        if not laid_out:
            self._numbers = numbers
            return
        if shape != [(s.id, [p.id for p in s.steps]) for s in self._shown] or not self.option_count:
            highlighted = self.highlighted_step
            self.clear_options()
            self.add_options(Option(p, id=i, disabled=d) for i, p, d in rows)
            if highlighted in numbers:
                self.select_step(highlighted)
        else:
            for option_id, prompt, _ in rows:
                self.replace_option_prompt(option_id, prompt)
        self._shown, self._numbers = stages, numbers

    def on_resize(self) -> None:
        # the names are wrapped to the column's width: wrap them again at the new one
        if self._args is not None:
            self.show_stages(*self._args)

    def _wrap_again(self) -> None:
        if self._args is not None and self.scrollable_content_region.width > 0:
            self.show_stages(*self._args)

    @property
    def highlighted_step(self) -> str | None:
        """The step under the cursor (None on nothing)."""
        option = self.highlighted_option
        if option is None or option.id is None or option.id.startswith(_STAGE):
            return None
        return option.id

    def select_step(self, step_id: str | None) -> None:
        """Move the cursor to ``step_id``'s row."""
        if step_id in self._numbers or (step_id and self.option_count):
            try:
                self.highlighted = self.get_option_index(str(step_id))
            except Exception:  # an id not in the list: leave the cursor where it is
                return

    def move_to_step(self, direction: int) -> None:
        """Move the cursor to the next (+1) or previous (-1) step, over the stage headings,
        stopping at the first and the last step."""
        steps = [i for i in range(self.option_count) if not self.get_option_at_index(i).disabled]
        if not steps:
            return
        at = self.highlighted
        if at is None:
            self.highlighted = steps[0]
            return
        ahead = [i for i in steps if (i > at if direction > 0 else i < at)]
        if ahead:
            self.highlighted = ahead[0] if direction > 0 else ahead[-1]

    def number_of(self, step_id: str) -> str:
        """'2.3' for the third step of the second stage ('' when unknown)."""
        return self._numbers.get(step_id, "")
