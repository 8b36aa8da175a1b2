"""The checklist column: stages and their steps, each with a state symbol and word."""

from __future__ import annotations

from dataclasses import replace

from rich.text import Text
from textual.widgets import Tree

from bringup.tui.literal import visible
from bringup.tui.states import look_of
from bringup.tui.views import StageRow

__all__ = ["ChecklistTree"]


def _label(number: str, title: str, state: str, attempts: int = 0, current: bool = False) -> Text:
    """'➤✔ passed ×2 1.2 Bus voltage, loaded': the state first so a narrow column never hides
    it; the attempt count (from the second attempt) in a column of its own before the number."""
    look = look_of(state)
    text = Text()
    text.append("➤" if current else " ", style="bold #f2c14e")
    text.append(f"{look.symbol} {look.brief:<7} ", style=look.style)
    text.append(f"×{attempts:<2}" if attempts > 1 else "   ", style="bold")
    text.append(f"{number} {visible(title, multiline=False)}", style="bold" if current else "")
    return text


def _stage_state(stage: StageRow) -> str:
    """A stage's state as shown: "running" only while one of its steps runs; "started" when
    some of its steps are done and none runs now."""
    if any(s.state in ("in-progress", "running") for s in stage.steps):
        return "in-progress"
    if stage.state in ("in-progress", "running"):
        return "started"
    return stage.state


class ChecklistTree(Tree[str]):
    """Stages as branches, steps as leaves; a leaf's data is the step id."""

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__("checklist", id=id)
        self.show_root = False
        self.guide_depth = 2
        self._shown: tuple[StageRow, ...] = ()
        self._current: str | None = None

    def show_stages(
        self, stages: tuple[StageRow, ...], current: str | None, running: str | None = None
    ) -> None:
        """Rebuild the labels (and the nodes when the checklist changed). ``current``: the step
        to do next (marked ➤); ``running``: the step whose worker runs now (▶ running)."""
        if running is not None:
            stages = tuple(
                replace(
                    stage,
                    steps=tuple(
                        replace(s, state="in-progress") if s.id == running else s
                        for s in stage.steps
                    ),
                )
                for stage in stages
            )
        same_shape = [(s.id, [p.id for p in s.steps]) for s in stages] == [
            (s.id, [p.id for p in s.steps]) for s in self._shown
        ]
        if not same_shape:
            self.clear()
            for i, stage in enumerate(stages, 1):
                branch = self.root.add(
                    _label(str(i), stage.title, _stage_state(stage)), expand=True
                )
                for j, step in enumerate(stage.steps, 1):
                    branch.add_leaf(_label(f"{i}.{j}", step.title, step.state), data=step.id)
        branches = list(self.root.children)
        for i, (stage, branch) in enumerate(zip(stages, branches, strict=False), 1):
            branch.set_label(_label(str(i), stage.title, _stage_state(stage)))
            for j, (step, leaf) in enumerate(zip(stage.steps, branch.children, strict=False), 1):
                leaf.set_label(
                    _label(f"{i}.{j}", step.title, step.state, step.attempts, step.id == current)
                )
        self._shown = stages
        self._current = current

    def select_step(self, step_id: str | None) -> None:
        """Move the cursor to ``step_id``'s leaf."""
        for branch in self.root.children:
            for leaf in branch.children:
                if leaf.data == step_id:
                    self.move_cursor(leaf)
                    return

    def move_to_step(self, direction: int) -> None:
        """Move the cursor to the next (+1) or previous (-1) step leaf, skipping stage rows."""
        leaves = [leaf for branch in self.root.children for leaf in branch.children]
        current = self.cursor_node
        if current is None or current.data is None:
            # on a stage row: its first step going down, the previous stage's last going up
            line = self.cursor_line
            candidates = [leaf for leaf in leaves if (leaf.line > line) == (direction > 0)]
            if candidates:
                self.move_cursor(candidates[0] if direction > 0 else candidates[-1])
            return
        index = next(i for i, leaf in enumerate(leaves) if leaf is current)
        target = index + direction
        if 0 <= target < len(leaves):
            self.move_cursor(leaves[target])

    def number_of(self, step_id: str) -> str:
        """'2.3' for the third step of the second stage ('' when unknown)."""
        for i, stage in enumerate(self._shown, 1):
            for j, step in enumerate(stage.steps, 1):
                if step.id == step_id:
                    return f"{i}.{j}"
        return ""
