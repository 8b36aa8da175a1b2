"""The result of an attempt: one row per metric with its verdict, measured and predicted values,
limits and margin, laid out to the width it has.

Six columns need about 100 cells; beside the checklist on a 100-column terminal the table has
about 60, and its last columns were cut off the right edge. When the six do not fit, each row
becomes two lines in three columns (``metric`` over ``verdict``, ``measured`` over
``predicted``, ``limits`` over ``margin``): every value is still shown whole, under a header
that names both. A metric's name wraps inside its column, never cut.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from rich.text import Text
from textual.widgets import DataTable

from bringup.tui.literal import literal
from bringup.tui.states import look_of
from bringup.tui.views import MetricRow

__all__ = ["ResultsTable", "ResultsForm", "results_form", "HEADERS", "METRIC_COLUMN"]

HEADERS = ("metric", "verdict", "measured", "predicted", "limits", "margin")
#: width of the metric column, cells: a longer name wraps onto more lines
METRIC_COLUMN = 26
_PAD = 2  # a DataTable cell's padding, both sides together
_SCROLLBAR = 2  # kept free for the vertical scroll bar (it comes when the rows overflow)
_MIN_NAME = 12  # narrowest the name column gets in the two-line form


@dataclass(frozen=True)
class ResultsForm:
    """``paired`` False: six columns of these widths; True: three two-line columns."""

    paired: bool
    widths: tuple[int, ...]


def _verdict_word(m: MetricRow) -> str:
    look = look_of(m.verdict)
    return f"{look.symbol} {look.brief}"


def results_form(metrics: Sequence[MetricRow], width: int) -> ResultsForm:
    """The columns for ``metrics`` in ``width`` cells: six when they fit whole, else three
    two-line columns with the name's column taking what the values leave."""
    cells = [(_verdict_word(m), m.measured, m.predicted, m.limits, m.margin) for m in metrics]
    values = [max([len(h), *(len(row[i]) for row in cells)]) for i, h in enumerate(HEADERS[1:])]
    wide = (METRIC_COLUMN, *values)
    if sum(wide) + _PAD * len(wide) <= width - _SCROLLBAR:
        return ResultsForm(False, wide)
    verdict, measured, predicted, limits, margin = values
    second, third = max(measured, predicted), max(limits, margin)
    first = max(_MIN_NAME, width - _SCROLLBAR - second - third - 3 * _PAD)
    return ResultsForm(True, (max(first, verdict), second, third))


class ResultsTable(DataTable):
    """The metrics of the attempt shown, laid out again when the width changes."""

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id, cursor_type="row", zebra_stripes=True)
        self._metrics: tuple[MetricRow, ...] = ()
        self._laid_for: tuple[int, tuple[MetricRow, ...]] | None = None
        self.form: ResultsForm | None = None

    def on_mount(self) -> None:
        self._lay_out()

    def show_metrics(self, metrics: Sequence[MetricRow]) -> None:
        """Show ``metrics`` (none: the headers alone)."""
        self._metrics = tuple(metrics)
        self._lay_out()

    def on_resize(self) -> None:
        self._lay_out()

    def _lay_out(self) -> None:
        width = self.size.width
        if width <= 0:
            return  # not laid out yet: on_resize comes with the width
        if self._laid_for == (width, self._metrics) and self.columns:
            return
        self._laid_for = (width, self._metrics)
        self.form = form = results_form(self._metrics, width)
        self.clear(columns=True)
        self.header_height = 2 if form.paired else 1
        if form.paired:
            for i, w in enumerate(form.widths):
                self.add_column(f"{HEADERS[2 * i]}\n{HEADERS[2 * i + 1]}", width=w)
        else:
            for header, w in zip(HEADERS, form.widths, strict=True):
                self.add_column(header, width=w)
        for m in self._metrics:
            look = look_of(m.verdict)
            verdict = Text(_verdict_word(m), style=look.style)
            name = literal(m.label, multiline=False)
            values = [literal(c, multiline=False) for c in (m.measured, m.predicted, m.limits,
                                                            m.margin)]  # fmt: skip
            if form.paired:
                cells = (
                    Text.assemble(name, "\n", verdict),
                    Text.assemble(values[0], "\n", values[1]),
                    Text.assemble(values[2], "\n", values[3]),
                )
            else:
                cells = (name, verdict, *values)
            self.add_row(*cells, height=None)  # as many lines as the wrapped name needs
