"""The uncertainty budget of one metric (GUM, JCGM 100:2008), one key away from a result.

Every contribution on its own row: what it is, its type (A: from the data's own scatter; B:
from a specification, a bound or a model), the input's standard uncertainty u(x_i), the
sensitivity coefficient c_i and the contribution |c_i| u(x_i) to the result; then the
combined standard uncertainty u_c, the coverage factor k and the expanded uncertainty U = k u_c
that the decision used (the larger of it and the board file's declared one), and the
contribution to work on first.
"""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Static

from bringup.tui.literal import literal
from bringup.tui.views import BudgetView
from bringup.tui.widgets.key_footer import KeyFooter

__all__ = ["BudgetScreen"]


class BudgetScreen(Screen[None]):
    """Read-only view of one metric's uncertainty budget."""

    BINDINGS = [
        Binding("escape,u", "app.pop_screen", "back to the result"),
        Binding("q", "app.quit_safely", "quit (supply off)"),
    ]

    def __init__(self, budget: BudgetView) -> None:
        super().__init__()
        self.budget = budget

    def compose(self) -> ComposeResult:
        yield Static("", id="budget-title")
        yield DataTable(id="budget", cursor_type="row", zebra_stripes=True)
        yield Static("", id="budget-total")
        yield KeyFooter()

    def on_mount(self) -> None:
        b = self.budget
        self.query_one("#budget-title", Static).update(
            literal(f"Uncertainty budget (GUM) · {b.title}", "bold", multiline=False)
        )
        table = self.query_one("#budget", DataTable)
        table.add_columns("contribution", "type", "u(xᵢ)", "cᵢ", "|cᵢ|·u(xᵢ)")
        for row in b.rows:
            table.add_row(*(literal(cell, multiline=False) for cell in row))
        total = (
            f"combined standard uncertainty u_c = {b.combined}   coverage factor k = {b.k}   "
            f"expanded uncertainty U = k·u_c = {b.expanded}"
        )
        if b.main:
            total += f"\nlargest contribution: {b.main}"
        if b.used:
            total += f"\n{b.used}"
        self.query_one("#budget-total", Static).update(literal(total))
        table.focus()
