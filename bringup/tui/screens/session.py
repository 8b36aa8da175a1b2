"""The session screen: the checklist, the step at hand, its result, trace, attempts and notes.

Instrument I/O runs in one thread worker per step (group "bench"); the worker only calls the
session link and posts messages; every widget is touched here, on the UI thread.
"""

from __future__ import annotations

import threading

from rich.text import Text
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import Screen
from textual.widgets import (
    DataTable,
    Input,
    OptionList,
    ProgressBar,
    Static,
    TabbedContent,
    TabPane,
)
from textual.worker import Worker, WorkerState

from bringup.errors import BringupError
from bringup.runner import RunnerError
from bringup.tui.literal import literal, visible
from bringup.tui.messages import (
    StepFaulted,
    StepFinished,
    StepProgressed,
    StepStopped,
    SupplySwitchedOff,
)
from bringup.tui.screens.step_actions import StepActions
from bringup.tui.states import LEGEND, look_of
from bringup.tui.views import AttemptView, Progress, StepDetail
from bringup.tui.widgets.checklist_column import ChecklistColumn
from bringup.tui.widgets.key_footer import KeyFooter
from bringup.tui.widgets.results_table import ResultsTable
from bringup.tui.widgets.status_line import StatusLine
from bringup.tui.widgets.supply_lamp import SupplyLamp
from bringup.tui.widgets.waveform_plot import PlotMarks, WaveformPlot

__all__ = ["SessionScreen"]


def _verdict_text(verdict: str) -> Text:
    return look_of(verdict).text()


class SessionScreen(StepActions, Screen[None]):
    """One board going through its checklist."""

    _STEPS = Binding.Group("step", compact=True)
    _TABS = Binding.Group("tabs", compact=True)
    BINDINGS = [
        Binding("r", "take", "run/retake"),
        Binding("x", "cancel", "STOP (supply off)"),
        Binding("t", "stop_soak", "finish soak"),
        Binding("s", "skip", "skip"),
        Binding("w", "waive", "waive"),
        Binding("n", "note", "note"),
        Binding("b", "back", "back"),
        Binding("k", "previous_step", "previous step", group=_STEPS),
        Binding("j", "next_step", "next step", group=_STEPS),
        Binding("1", "tab('tab-result')", "result", group=_TABS),
        Binding("2", "tab('tab-trace')", "trace", group=_TABS),
        Binding("3", "tab('tab-attempts')", "attempts", group=_TABS),
        Binding("4", "tab('tab-notes')", "notes", group=_TABS),
        Binding("p", "next_trace", "trace"),
        Binding("z", "zoom", "zoom"),
        Binding("u", "budget", "budget"),
        Binding("m", "summary", "summary"),
        Binding("q", "app.quit_safely", "quit, supply off"),
    ]
    #: actions refused while a step runs (they are hidden from the footer then)
    _IDLE_ONLY = {"take", "skip", "waive", "back", "summary"}

    def __init__(self) -> None:
        super().__init__()
        self.viewed: str | None = None  # the step shown on the right
        self.running: str | None = None  # the step whose worker is running
        self._cancel = threading.Event()
        self._stop_soak = threading.Event()
        self._trace_index = 0
        self._found: tuple[str, ...] = ()  # found on opening the bench (see ``say``)
        self._attempt: AttemptView | None = None
        self._soak_t: list[float] = []
        self._running_kind = ""
        self._finals: list[float] = []  # the soak's successive predictions of its final value
        self._predictions: list[tuple[float, float, float]] = []  # (s, °C, ± K) of each fit
        self._soak_view = "prediction"  # or "log": what the trace tab shows while soaking
        self._soak_shown: Progress | None = None
        self._history: dict[str, AttemptView] = {}
        self._stopping = False  # STOP pressed during the running step
        self._asking = False  # a step's prompts are being answered (StepActions)
        self._writing = 0  # log writes in flight (StepActions)
        self._soak_temp: list[float] = []

    @property
    def link(self):  # the app's SessionLink
        return self.app.link  # type: ignore[attr-defined]

    # -- layout ---------------------------------------------------------------------------
    def compose(self) -> ComposeResult:
        yield Static("", id="titlebar")
        with Horizontal(id="session-body"):
            with Vertical(id="checklist-pane"):
                yield Static("CHECKLIST", classes="pane-title")
                yield ChecklistColumn(id="checklist")
                yield Static(LEGEND, id="legend")
            with Vertical(id="step-pane"):
                yield Static("", id="step-title")
                with VerticalScroll(id="step-brief"):
                    yield Static("", id="step-instructions")
                    yield Static("", id="step-cautions", classes="caution")
                    yield Static("", id="step-settings")
                with Vertical(id="live"):
                    yield ProgressBar(total=1.0, show_eta=False, id="live-bar")
                    yield Static("", id="live-text")
                with TabbedContent(initial="tab-result", id="tabs"):
                    with TabPane("1 result", id="tab-result"):
                        yield Static("", id="verdict-banner")
                        # six columns, or three of two lines on a narrow terminal; the verdict
                        # beside the name either way, so it never scrolls off
                        yield ResultsTable(id="results")
                        yield Static("", id="metric-detail")
                    with TabPane("2 trace", id="tab-trace"):
                        yield WaveformPlot(id="plot")
                    with TabPane("3 attempts", id="tab-attempts"):
                        attempts = DataTable(id="attempts", cursor_type="row")
                        attempts.add_columns("#", "verdict", "when", "by", "summary")
                        yield attempts
                    with TabPane("4 notes", id="tab-notes"):
                        yield Static("", id="notes-list")
                        yield Input(placeholder="type a note, Enter to keep it", id="note-input")
        with Horizontal(id="foot"):
            yield StatusLine(id="status")
            yield SupplyLamp(id="supply-lamp")
        yield KeyFooter()

    def on_mount(self) -> None:
        self.query_one("#live").display = False
        self.refresh_all(select=self.link.current_step_id())
        self.query_one("#checklist", ChecklistColumn).focus()
        if self.link.bench_notices_pending():  # an output found ON, a calibration past due
            self.say("Read this before the first step.", "warn")

    # -- showing ---------------------------------------------------------------------------
    def say(self, message: str, kind: str = "info") -> None:
        """Put a one-line message in the status line (faults in their own style). What the
        bench was found in when it opened (an output left ON by an unclean stop) leads every
        message until the next step starts, and stays in a notification."""
        found = self.link.new_bench_notices()
        for notice in found:
            self.app.notify(visible(notice), title="Found on opening the bench",
                            severity="warning", timeout=120)  # fmt: skip
        self._found = (*self._found, *found)
        if self._found:
            message = f"{' '.join(self._found)} | {message}"
            kind = "warn" if kind == "info" else kind
        self.query_one(StatusLine).say(message, kind)

    def refresh_all(self, select: str | None = None) -> None:
        """Redraw the title, the checklist and the viewed step from the link."""
        self.query_one("#titlebar", Static).update(literal(self.link.header(), multiline=False))
        tree = self.query_one("#checklist", ChecklistColumn)
        current = self.link.current_step_id()
        tree.show_stages(self.link.stages(), self.running or current, running=self.running)
        target = select or self.viewed or current
        if target is not None:
            if select is not None:
                # after the tree has laid out its new labels, or the cursor lands on line 0
                self.call_after_refresh(tree.select_step, select)
            self.show_step(target)
        elif current is None and self.viewed is None:
            self.say("Every step has a verdict. Press m for the summary.", "good")

    def show_step(self, step_id: str) -> None:
        """Show ``step_id``'s brief, its latest attempt, history and notes."""
        self.viewed = step_id
        try:
            detail: StepDetail = self.link.detail(step_id)
        except BringupError as exc:
            self.say(str(exc), "fault")
            return
        number = self.query_one("#checklist", ChecklistColumn).number_of(step_id)
        look = look_of(detail.state)
        title = Text()
        title.append(f"{number}  {visible(detail.title)}", style="bold")
        title.append(f"    {look.label()}", style=look.style)
        self.query_one("#step-title", Static).update(title)
        self.query_one("#step-instructions", Static).update(literal(detail.instructions or ""))
        cautions = self.query_one("#step-cautions", Static)
        cautions.update(literal("\n".join(f"⚠ {c}" for c in detail.cautions)))
        cautions.display = bool(detail.cautions)
        settings = self.query_one("#step-settings", Static)
        lines = [f"  {inst:<12} {name:<28} {value}" for inst, name, value in detail.settings]
        if detail.energise is not None:
            from bringup.analysis.quantities import format_quantity

            lines.append(
                f"  {'supply':<12} {'output ON at':<28} "
                f"{format_quantity(detail.energise.voltage_v, 'V')}, limit "
                f"{format_quantity(detail.energise.current_limit_a, 'A')}"
            )
        settings.update(literal("Will be sent:\n" + "\n".join(lines) if lines else ""))
        settings.display = bool(lines)
        attempts = self.link.attempts(step_id)
        self._show_attempts(attempts)
        self._show_attempt(attempts[-1] if attempts else None)
        self._show_notes(step_id, attempts)

    def _show_attempts(self, attempts: tuple[AttemptView, ...]) -> None:
        table = self.query_one("#attempts", DataTable)
        table.clear()
        self._history = {str(a.number): a for a in attempts}
        for a in reversed(attempts):
            summary = a.message or ", ".join(f"{m.label} {m.measured}" for m in a.metrics[:2])
            table.add_row(
                str(a.number), _verdict_text(a.verdict), literal(a.when),
                literal(a.operator, multiline=False), literal(summary, multiline=False),
                key=str(a.number),
            )  # fmt: skip

    @on(DataTable.RowSelected, "#attempts")
    def _attempt_selected(self, event: DataTable.RowSelected) -> None:
        """Enter (or a click) on an earlier attempt shows its result and trace."""
        attempt = self._history.get(str(event.row_key.value))
        if attempt is not None:
            self._show_attempt(attempt)
            self.action_tab("tab-result")
            self.say(f"Showing attempt {attempt.number} of this step (the latest is on top).")

    def _show_attempt(self, attempt: AttemptView | None) -> None:
        self._attempt = attempt
        self._trace_index = 0
        table = self.query_one("#results", ResultsTable)
        table.show_metrics(attempt.metrics if attempt is not None else ())
        banner = self.query_one("#verdict-banner", Static)
        if attempt is None:
            banner.update("No attempt yet: r runs the step.")
            banner.set_classes("banner-todo")
        else:
            look = look_of(attempt.verdict)
            banner.update(
                literal(
                    f" {look.symbol} {look.word.upper()}  ·  attempt {attempt.number}  ·  "
                    f"{attempt.when}  ·  {attempt.operator}"
                    + (f"\n {attempt.message}" if attempt.message else "")
                )
            )
            banner.set_classes(f"banner-{look.key}")
        if attempt is None:
            self.query_one("#plot", WaveformPlot).clear("no attempt yet: press r to run the step")
            return
        self._show_metric_detail(0)
        self._show_trace()

    def _show_metric_detail(self, row: int) -> None:
        detail = self.query_one("#metric-detail", Static)
        attempt = self._attempt
        if attempt is None or not (0 <= row < len(attempt.metrics)):
            detail.update("")
            return
        m = attempt.metrics[row]
        detail.update(literal(f"{m.label}: {m.reason}" if m.reason else m.label))

    @on(DataTable.RowHighlighted, "#results")
    def _metric_highlighted(self, event: DataTable.RowHighlighted) -> None:
        self._show_metric_detail(event.cursor_row)

    def _show_trace(self) -> None:
        plot = self.query_one("#plot", WaveformPlot)
        attempt = self._attempt
        if attempt is None or not attempt.traces:
            plot.clear("this attempt has no waveform")
            return
        trace = attempt.traces[self._trace_index % len(attempt.traces)]
        more = f"   (p: next of {len(attempt.traces)})" if len(attempt.traces) > 1 else ""
        plot.show(
            trace.t,
            trace.v,
            PlotMarks(
                levels=trace.levels,
                crossings=trace.crossings,
                window=trace.window,
                band=not trace.crossings and trace.window is None and trace.unit == "V",
            ),
            title=f"{trace.title}  · attempt {attempt.number}{more}",
            unit=trace.unit,
        )

    def _show_notes(self, step_id: str, attempts: tuple[AttemptView, ...]) -> None:
        notes = [f"#{a.number}: {n}" for a in attempts for n in a.notes]
        notes += [f"step: {n}" for n in self.link.step_notes(step_id)]
        self.query_one("#notes-list", Static).update(
            literal("\n".join(notes) if notes else "No notes on this step yet.")
        )

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        """Show only the keys that do something now: stop and finish while a step runs."""
        if action == "cancel":
            return self.running is not None
        if action == "stop_soak":
            return self.running is not None and self._running_kind == "soak"
        if action in self._IDLE_ONLY:
            return self.running is None and not self._asking
        return True

    def action_zoom(self) -> None:
        """Toggle between the whole record and the first edge's crossings."""
        plot = self.query_one("#plot", WaveformPlot)
        plot.zoomed = not plot.zoomed
        self.action_tab("tab-trace")

    # -- navigation ------------------------------------------------------------------------
    @on(OptionList.OptionHighlighted, "#checklist")
    def _highlighted(self, event: OptionList.OptionHighlighted) -> None:
        step = event.option_list.highlighted_step  # type: ignore[attr-defined]
        if step is not None and step != self.viewed:
            self.show_step(step)

    @on(OptionList.OptionSelected, "#checklist")
    def _selected(self, event: OptionList.OptionSelected) -> None:
        step = event.option_list.highlighted_step  # type: ignore[attr-defined]
        if step is not None:
            self.show_step(step)

    def action_next_step(self) -> None:
        """Cursor to the next step, over the stage headings."""
        self.query_one("#checklist", ChecklistColumn).move_to_step(+1)

    def action_previous_step(self) -> None:
        """Cursor to the previous step, over the stage headings."""
        self.query_one("#checklist", ChecklistColumn).move_to_step(-1)

    def action_tab(self, tab: str) -> None:
        self.query_one("#tabs", TabbedContent).active = tab

    def action_next_trace(self) -> None:
        if self.running is not None and self._running_kind == "soak":
            # a soak running: between its prediction and its temperature log
            self._soak_view = "log" if self._soak_view == "prediction" else "prediction"
            self._show_soak()
            self.action_tab("tab-trace")
            return
        self._trace_index += 1
        self._show_trace()
        self.action_tab("tab-trace")

    def action_budget(self) -> None:
        """The uncertainty budget of the metric under the result table's cursor."""
        from bringup.tui.screens.budget import BudgetScreen

        attempt = self._attempt
        row = self.query_one("#results", DataTable).cursor_row
        if attempt is None or not (0 <= row < len(attempt.metrics)):
            self.say("No result yet: run the step first (r).")
            return
        m = attempt.metrics[row]
        if m.budget is None:
            self.say(f"{visible(m.label)}: no computed uncertainty budget (the declared "
                     "uncertainty of the board file stands).")  # fmt: skip
            return
        self.app.push_screen(BudgetScreen(m.budget))

    def action_summary(self) -> None:
        from bringup.tui.screens.summary import SummaryScreen

        self.app.push_screen(SummaryScreen())

    # -- taking a step ---------------------------------------------------------------------
    def _start(self, detail: StepDetail, answers: dict[str, object]) -> None:
        self.running = detail.id
        self._running_kind = detail.kind
        self._stopping = False
        self.refresh_bindings()
        lamp = self.query_one(SupplyLamp)
        lamp.set_state("live" if detail.energise is not None else "off")
        self._cancel = threading.Event()
        self._stop_soak = threading.Event()
        self._soak_t, self._soak_temp = [], []
        self._finals = []
        self._predictions: list[tuple[float, float, float]] = []  # (s, °C, ± K) of each fit
        self._soak_view = "prediction"
        self._soak_shown = None
        self._found = ()  # the last step's bench notices have been seen by now
        live = self.query_one("#live")
        live.display = True
        bar = self.query_one("#live-bar", ProgressBar)
        bar.update(total=1.0, progress=0.0)
        self.query_one("#live-text", Static).update("starting: sending the settings…")
        if detail.kind == "soak":
            self.action_tab("tab-trace")
            self.say(
                "Soaking until the prediction settles. t: finish early and judge the prediction "
                "(not before the minimum soak); x: abandon the soak, supply off."
                + (
                    "  Simulated bench: its clock runs as the header says (×N = N s of soak per s)."
                    if self.link.simulated
                    else ""
                )
            )
        else:
            self.say("Acquiring: x stops and puts the bench in its safe state.")
        self.query_one("#checklist", ChecklistColumn).show_stages(
            self.link.stages(), detail.id, running=detail.id
        )
        self._run_worker(detail.id, answers, self._cancel, self._stop_soak)

    @work(thread=True, exclusive=True, exit_on_error=False, group="bench")
    def _run_worker(
        self,
        step_id: str,
        answers: dict[str, object],
        cancel: threading.Event,
        stop_soak: threading.Event,
    ) -> None:
        """Blocking instrument I/O; talks back only through ``post_message``."""

        def progress(p: Progress) -> None:
            self.post_message(StepProgressed(step_id, p))

        try:
            attempt = self.link.run(step_id, answers, cancel, stop_soak, progress)
        except RunnerError as exc:  # refused (order, another step running): nothing was done
            self.post_message(StepStopped(step_id, f"refused: {exc}"))
            return
        except BringupError as exc:
            # the runner leaves the supply off on every way out of a step
            self.post_message(StepFaulted(step_id, str(exc)))
            return
        except Exception as exc:  # never a traceback: one line in the status bar
            self.post_message(
                StepFaulted(step_id, f"unexpected fault: {type(exc).__name__}: {exc}")
            )
            return
        if cancel.is_set():
            # what the interrupted acquisition saw is in the attempt's history, not the status
            self.post_message(StepStopped(step_id))
        else:
            self.post_message(StepFinished(step_id, attempt))

    def on_step_progressed(self, message: StepProgressed) -> None:
        p = message.progress
        bar = self.query_one("#live-bar", ProgressBar)
        if p.fraction is None:
            bar.update(total=None)
        else:
            bar.update(total=1.0, progress=max(0.0, min(1.0, p.fraction)))
        readings = "   ".join(f"{name}: {value}" for name, value in p.readings)
        text = p.text + (f"\n{readings}" if readings else "")
        if p.predicted_final:
            settled = (
                "settled: finishing"
                if p.settled
                else "not settled: it ends by itself once settled; t ends it sooner, after "
                "the minimum soak, and an unsettled prediction fails"
            )
            if (
                p.soak_final_c is not None
                and p.soak_t
                and (not self._finals or abs(self._finals[-1] - p.soak_final_c) > 1e-9)
            ):
                self._finals.append(float(p.soak_final_c))
                sigma = p.soak_sigma_c if p.soak_sigma_c is not None else float("nan")
                self._predictions.append((p.soak_t[-1], float(p.soak_final_c), 2 * sigma))
            trail = " → ".join(f"{v:.2f}" for v in self._finals[-4:])
            text += f"\npredicted final {p.predicted_final}\n  so far: {trail} °C  ({settled})"
        self.query_one("#live-text", Static).update(literal(text))
        if p.soak_t:
            self._soak_shown = p
            self._show_soak()

    def _show_soak(self) -> None:
        """The live soak on the trace tab: the predicted final temperature at each refit with
        its ± band (k = 2) narrowing as the log grows, or (p) the temperature log itself."""
        import numpy as np

        p, plot = self._soak_shown, self.query_one("#plot", WaveformPlot)
        if p is None:
            return
        if self._soak_view == "prediction":
            if not self._predictions:
                plot.clear("predicted final temperature: no fit yet, the first comes once a "
                           "few readings are in   (p: the temperature log)")  # fmt: skip
                return
            t, final, u = np.asarray(self._predictions, dtype=float).T
            # the view: the latest prediction ± 4 U, at least ± 1 K; the first fits' bands (up
            # to thousands of kelvin) would otherwise flatten the rest into one line
            half = max(1.0, 4.0 * u[-1]) if np.isfinite(u[-1]) else 1.0
            lo, hi = final[-1] - half, final[-1] + half
            clipped = bool(np.any(final - u < lo) or np.any(final + u > hi))
            note = f"view ± {half:.2g} K around the latest" + (
                "; a band beyond it is drawn at its edge" if clipped else ""
            )
            plot.show(t, np.clip(final, lo, hi),
                      PlotMarks(edges=(tuple(np.clip(final - u, lo, hi)),
                                       tuple(np.clip(final + u, lo, hi))),
                                extra_legend=("bright: the prediction at each fit; dim: its "
                                              f"± U (k = 2, from the fit alone); {note}",)),
                      title=f"predicted final temperature and its band, {len(t)} fits"
                            "   (p: the temperature log)",
                      unit="degC")  # fmt: skip
            return
        levels = []
        if p.soak_limit_c is not None:
            levels.append(("limit", float(p.soak_limit_c)))
        if p.soak_final_c is not None:
            levels.append(("→ final", float(p.soak_final_c)))
        plot.show(
            np.asarray(p.soak_t, dtype=float),
            np.asarray(p.soak_temp, dtype=float),
            PlotMarks(levels=tuple(levels)),
            title=f"heatsink temperature, live: {len(p.soak_t)} readings   (p: the prediction)",
            unit="degC",
        )

    def _finish(self, select_next: bool) -> None:
        self.running = None
        lamp = self.query_one(SupplyLamp)
        if lamp.state == "live":
            # every way out of a step switches the output off and reads it back (the runner)
            lamp.set_state("off")
        self.refresh_bindings()
        self.query_one("#live").display = False
        self.refresh_all(select=self.link.current_step_id() if select_next else self.viewed)

    def on_step_finished(self, message: StepFinished) -> None:
        """The cursor follows the work: after a pass it moves to the next step (so r runs that
        one); after a failure it stays on the failed step."""
        step = message.step_id
        look = look_of(message.attempt.verdict)
        passed = look.key in ("pass", "cond")
        following = self.link.current_step_id()
        move_on = passed and following is not None and following != step
        self._finish(select_next=move_on)
        if not move_on:
            self.show_step(step)
        tree = self.query_one("#checklist", ChecklistColumn)
        if following is None:
            nxt = " Every step now has a verdict: m shows the summary."
        elif move_on:
            nxt = (
                f" Next: {tree.number_of(following)} {self.link.detail(following).title}: "
                "r runs it (k goes back to this one)."
            )
        elif passed:
            nxt = " r retakes it."
        else:
            nxt = " r retakes it; w waives it (reason and the name of who accepts it)."
        self.say(
            f"Attempt {message.attempt.number}: {look.label()}.{nxt}", "good" if passed else "fault"
        )

    def on_step_faulted(self, message: StepFaulted) -> None:
        self._finish(select_next=False)
        self.say(f"Fault, bench made safe: {message.message}", "fault")

    def on_step_stopped(self, message: StepStopped) -> None:
        self._finish(select_next=False)
        extra = f" ({message.message})" if message.message else ""
        lamp = self.query_one(SupplyLamp)
        supply = (
            f"supply OFF, confirmed {lamp.detail}" if lamp.state == "confirmed" else "supply OFF"
        )
        self.say(f"Stopped: {supply} and nothing was judged{extra}.", "warn")

    def action_cancel(self) -> None:
        """STOP: the supply output OFF at once (from a thread of its own: the step's thread may
        be blocked in an instrument call), then the step ends at its next check."""
        if self.running is None:
            self.say("Nothing is running.")
            return
        self._cancel.set()
        if self._stopping:
            return
        self._stopping = True
        self.query_one(SupplyLamp).set_state("stopping")
        self.say("STOP: switching the supply output OFF now…", "warn")
        self._switch_off()

    @work(thread=True, group="stop", exit_on_error=False)
    def _switch_off(self) -> None:
        """Switch the supply off and read it back, beside the step's own worker."""
        try:
            off = self.link.switch_off_now()
        except Exception as exc:  # one line: the operator must know it is not confirmed
            self.post_message(SupplySwitchedOff(f"{type(exc).__name__}: {exc}"))
            return
        if off.confirmed:
            self.post_message(SupplySwitchedOff(None, f"{off.at_utc[11:19]} UTC"))
        else:
            self.post_message(SupplySwitchedOff(off.problem or "not confirmed"))

    def on_supply_switched_off(self, message: SupplySwitchedOff) -> None:
        lamp = self.query_one(SupplyLamp)
        if message.confirmed:
            lamp.set_state("confirmed", f"at {message.clock}" if message.clock else "")
            if self.running is not None:
                self.say(
                    f"STOP: supply output OFF, confirmed {lamp.detail}. The step ends once its "
                    "instrument answers; nothing will be judged.",
                    "warn",
                )
        else:
            lamp.set_state("unconfirmed", message.problem or "")
            self.say(
                f"STOP: the supply did not confirm OFF ({message.problem}): switch it off at "
                "the supply now.",
                "fault",
            )

    def action_stop_soak(self) -> None:
        if self.running is None:
            self.say("No soak is running.")
            return
        self._stop_soak.set()
        self.say("Finishing the soak (once its minimum duration is reached), then judging it…")

    def on_worker_state_changed(self, event: Worker.StateChanged) -> None:
        if event.worker.group == "bench" and event.state == WorkerState.ERROR and self.running:
            self._finish(select_next=False)
            self.say(f"Fault, bench made safe: {event.worker.error}", "fault")

    @on(Input.Submitted, "#note-input")
    def _note_submitted(self, event: Input.Submitted) -> None:
        text = event.value.strip()
        if not text or self.viewed is None:
            return
        step = self.viewed

        def done(_: object) -> None:
            if self.query_one("#note-input", Input).value.strip() == text:
                self.query_one("#note-input", Input).value = ""
            if self.viewed == step:
                self.show_step(step)
            self.say("Note kept.")
            self.query_one("#checklist", ChecklistColumn).focus()

        self._log_decision("note", lambda: self.link.add_note(step, text), done)
