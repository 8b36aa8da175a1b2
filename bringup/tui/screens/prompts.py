"""Modal prompts: the energising confirmation, a reason (skip, waive), a typed reading."""

from __future__ import annotations

from collections.abc import Callable
from typing import TypeVar

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Button, Input, Label, Static

from bringup.analysis.quantities import format_quantity
from bringup.errors import BringupError
from bringup.tui.literal import literal
from bringup.tui.views import Energise
from bringup.tui.widgets.key_footer import KeyFooter

__all__ = ["BenchPrompt", "EnergisePrompt", "ReasonPrompt", "ConfirmPrompt"]

_Answer = TypeVar("_Answer")

HAZARD_NOTICE = (
    "HAZARD: above 60 V DC. Touching the bus or the switch node can injure or kill. "
    "Work to your local electrical codes and your lab's licensed practice; keep one hand "
    "away, use insulated probes, and discharge the bus capacitors after switching off."
)


class BenchPrompt(ModalScreen[_Answer]):
    """A question in a box over an opaque screen: the operator reads only the question (and the
    screen below is not re-rendered while it is up)."""

    DEFAULT_CSS = """
    BenchPrompt {
        align: center middle;
        background: #0b0f12;
    }
    BenchPrompt .prompt-box {
        width: 76;
        height: auto;
        border: thick #f2c14e;
        background: #1b2329;
        padding: 1 2;
    }
    BenchPrompt .prompt-title { color: #f2c14e; text-style: bold; margin-bottom: 1; }
    BenchPrompt .prompt-buttons { height: auto; margin-top: 1; }
    BenchPrompt .prompt-buttons Button { margin-right: 2; }
    BenchPrompt .hazard {
        margin-top: 1;
        padding: 0 1;
        background: #7a2418;
        color: #ffffff;
        text-style: bold;
    }
    BenchPrompt .problem { color: #ff8a65; text-style: bold; height: auto; }
    BenchPrompt #energise-hands { margin-bottom: 1; color: #ffd27a; }
    """


class EnergisePrompt(BenchPrompt[bool]):
    """Ask before the supply output is switched on; names the voltage and current limit."""

    BINDINGS = [
        Binding("y", "answer(True)", "yes, switch on"),
        Binding("n,escape", "answer(False)", "no, keep it off"),
    ]

    def __init__(self, step_title: str, energise: Energise, by_hand: str = "") -> None:
        """``by_hand``: what the operator confirms has been done first (one question for both)."""
        super().__init__()
        self.step_title = step_title
        self.energise = energise
        self.by_hand = by_hand

    def compose(self) -> ComposeResult:
        volts = format_quantity(self.energise.voltage_v, "V")
        amps = format_quantity(self.energise.current_limit_a, "A")
        with Vertical(id="energise-box", classes="prompt-box"):
            yield Label("⚡ ENERGISE THE BOARD?", classes="prompt-title")
            if self.by_hand:
                yield Static(literal(f"First, by hand: {self.by_hand}"), id="energise-hands")
            ramp = ""
            if self.energise.ramp_v:
                steps = ", ".join(format_quantity(v, "V") for v in self.energise.ramp_v)
                ramp = f"\nIt ramps in steps ({steps}) and stops at once if the current says short."
            yield Static(
                literal(
                    f"Step: {self.step_title}\n\n"
                    f"The supply output will be switched ON at {volts} "
                    f"with the current limit at {amps}.{ramp}\n"
                    "Check the probes and the load are in place and hands are clear."
                ),
                id="energise-text",
            )
            if self.energise.hazardous:
                notice = self.energise.hazard or HAZARD_NOTICE
                yield Static(literal(f"⚠ {notice}"), id="hazard-notice", classes="hazard")
            if self.energise.unmet_gates:
                gates = "\n".join(f"  - {g}" for g in self.energise.unmet_gates)
                yield Static(
                    literal(f"⚠ Earlier safety gates waived or not passed:\n{gates}"),
                    id="unmet-gates",
                    classes="hazard",
                )
            with Horizontal(classes="prompt-buttons"):
                yield Button(
                    f"Y  {'done, ' if self.by_hand else ''}switch on at {volts}",
                    id="yes",
                    variant="warning",
                )
                yield Button("N  keep it off", id="no", variant="primary")
        yield KeyFooter()

    def on_mount(self) -> None:
        self.query_one("#no", Button).focus()

    def on_button_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        self.dismiss(event.button.id == "yes")

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)


class _Field(Input):
    """A prompt's text field: its Enter (submit) is shown at the foot of the prompt. Not a
    priority binding on the screen: that would act on Enter before the field has taken the
    characters typed just before it."""

    BINDINGS = [Binding("enter", "submit", "record it", key_display="enter")]


class ReasonPrompt(BenchPrompt[tuple[str, str] | None]):
    """Ask for a reason (and, when ``ask_name``, who takes responsibility)."""

    BINDINGS = [
        # Enter: a focused field takes it (``_Field``: so the foot names it there too)
        Binding("enter", "submit", "record it", key_display="enter"),
        Binding("escape", "cancel", "cancel"),
    ]

    def __init__(
        self,
        title: str,
        explain: str,
        *,
        ask_name: bool = False,
        name_default: str = "",
        placeholder: str = "reason",
        empty_problem: str = "A reason is needed: type one, or Esc to cancel.",
        allow_empty: bool = False,
        validate: Callable[[str], object] | None = None,
        validate_name: Callable[[str], object] | None = None,
    ) -> None:
        super().__init__()
        self.title_text = title
        self.explain = explain
        self.ask_name = ask_name
        self.name_default = name_default
        self.placeholder = placeholder
        self.empty_problem = empty_problem
        self.allow_empty = allow_empty
        self.validate = validate
        self.validate_name = validate_name

    def compose(self) -> ComposeResult:
        with Vertical(classes="prompt-box"):
            yield Label(literal(self.title_text), classes="prompt-title")
            yield Static(literal(self.explain))
            yield _Field(placeholder=self.placeholder, id="reason")
            if self.ask_name:
                yield _Field(
                    value=self.name_default,
                    placeholder="who accepts it (not the operator)",
                    id="who",
                )
            yield Static("", id="prompt-problem", classes="problem")
            with Horizontal(classes="prompt-buttons"):
                yield Button("Enter  record it", id="ok", variant="primary")
                yield Button("Esc  cancel", id="cancel")
        yield KeyFooter()

    def on_mount(self) -> None:
        self.query_one("#reason", Input).focus()

    def _submit(self) -> None:
        reason = self.query_one("#reason", Input).value.strip()
        who = self.query_one("#who", Input).value.strip() if self.ask_name else ""
        problem = self.query_one("#prompt-problem", Static)
        if not reason and not self.allow_empty:
            problem.update(self.empty_problem)
            self.query_one("#reason", Input).focus()
            return
        if reason and self.validate is not None:
            try:
                self.validate(reason)
            except BringupError as exc:
                problem.update(literal(str(exc)))
                self.query_one("#reason", Input).focus()
                return
        if self.ask_name and not who:
            problem.update("A name is needed for a waiver.")
            self.query_one("#who", Input).focus()
            return
        if self.ask_name and self.validate_name is not None:
            try:
                self.validate_name(who)
            except BringupError as exc:
                problem.update(literal(str(exc)))
                self.query_one("#who", Input).focus()
                return
        self.dismiss((reason, who))

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        if self.ask_name and event.input.id == "reason":
            self.query_one("#who", Input).focus()
            return
        self._submit()

    def on_button_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        if event.button.id == "ok":
            self._submit()
        else:
            self.dismiss(None)

    def action_submit(self) -> None:
        """Enter: on a button, that button; in the reason field of a waiver, on to the name;
        otherwise record the answer."""
        focused = self.focused
        if isinstance(focused, Button):
            focused.press()
        elif self.ask_name and focused is self.query_one("#reason", Input):
            self.query_one("#who", Input).focus()
        else:
            self._submit()

    def action_cancel(self) -> None:
        self.dismiss(None)


class ConfirmPrompt(BenchPrompt[bool]):
    """A yes/no question the step asks by hand ("Is the load connected?")."""

    BINDINGS = [
        Binding("y", "answer(True)", "yes, done"),
        Binding("n,escape", "answer(False)", "no, stop here"),
    ]

    def __init__(self, title: str, question: str) -> None:
        super().__init__()
        self.title_text = title
        self.question = question

    def compose(self) -> ComposeResult:
        with Vertical(classes="prompt-box"):
            yield Label(literal(self.title_text), classes="prompt-title")
            yield Static(literal(self.question))
            with Horizontal(classes="prompt-buttons"):
                yield Button("Y  yes, done", id="yes", variant="primary")
                yield Button("N  no, stop here", id="no")
        yield KeyFooter()

    def on_button_pressed(self, event: Button.Pressed) -> None:
        event.stop()
        self.dismiss(event.button.id == "yes")

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)
