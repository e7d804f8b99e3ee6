"""Disagreements: every paired night ranked by how far the chosen pair disagrees on the chosen parameter.

Ranked by |difference − bias| relative to the half-width of the limits of
agreement (or by the absolute difference; ``s`` switches), with the likely
reason when one is known (sleepfuse.fusion.disagreement). Enter opens the night.
"""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Static

from sleepfuse.model.definitions import PARAMETERS
from ..widgets.appbar import AppBar
from ..widgets.table import CursorTable
from sleepfuse.model.numbers import fmt, format_number
from .choice import choice_line
from . import tcss


class DisagreementScreen(Screen):
    """Nights ranked by disagreement."""

    CSS_PATH = tcss("disagreements")
    BINDINGS = [
        Binding("enter", "open_night", "Night", tooltip="open the night view of the highlighted row"),
        Binding("p", "next_pair", "Pair", tooltip="next instrument pair (actigraphy−PSG, diary−PSG, diary−actigraphy)"),
        Binding("v", "next_parameter(1)", "Parameter", tooltip="next sleep parameter"),
        Binding("V", "next_parameter(-1)", "Prev parameter", show=False),
        Binding("s", "toggle_sort", "Sort", tooltip="rank by difference relative to the limits of agreement, or absolute"),
        Binding("escape,q", "back", "Back", key_display="q"),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.ranked = None
        self.version = -1

    def compose(self) -> ComposeResult:
        yield AppBar(self.app.study_name, "disagreements")
        yield Static("", id="choice")
        yield CursorTable(id="ranked", cursor_type="row", zebra_stripes=True)
        yield Static("×LoA = (diff − bias) / half the LoA width; * beyond the limits",
                     id="ranked-note")
        yield Footer()

    def on_mount(self) -> None:
        table = self.query_one("#ranked", DataTable)
        for label, width in (("#", 3), ("id", 4), ("night", 10), ("test", 6), ("ref", 6), ("diff", 7),
                             ("×LoA", 6), ("likely reason", 22)):
            table.add_column(label, width=width, key=label)
        self.fill()
        table.focus()

    def on_screen_resume(self) -> None:
        if self.app.workspace.version != self.version:
            self.fill()

    def fill(self) -> None:
        ws, choice = self.app.workspace, self.app.choice
        self.version = ws.version
        test, ref = choice.pair
        self.ranked = ws.disagreements(test, ref, choice.parameter, by=choice.by)
        order = "×LoA" if choice.by == "relative" else "|diff|"
        self.query_one("#choice", Static).update(
            choice_line(choice, f"{len(self.ranked)} nights by {order} (s)"))
        unit = PARAMETERS[choice.parameter].unit
        rows = []
        for k, r in enumerate(self.ranked.itertuples(index=False), start=1):
            ratio = r.loa_ratio
            flag = bool(r.beyond_loa)
            rows.append([
                str(k), r.participant, r.night,
                Text(fmt(r.test_value, unit), justify="right"), Text(fmt(r.reference_value, unit), justify="right"),
                Text(fmt(r.difference, unit, signed=True), justify="right"),
                Text(format_number(ratio, 1, signed=True) + ("*" if flag else " "),
                     justify="right", style="bold red" if flag else ""),
                Text(r.reason or "", style="yellow"),
            ])
        table = self.query_one("#ranked", DataTable)
        table.clear()
        table.add_rows(rows)

    def action_next_pair(self) -> None:
        self.app.choice.next_pair()
        self.fill()

    def action_next_parameter(self, step: int) -> None:
        self.app.choice.next_parameter(step)
        self.fill()

    def action_toggle_sort(self) -> None:
        self.app.choice.by = "absolute" if self.app.choice.by == "relative" else "relative"
        self.fill()

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        """A mouse click on a row (Enter is the screen's own binding)."""
        event.stop()
        self.action_open_night(event.cursor_row)

    def action_open_night(self, row: int | None = None) -> None:
        if self.ranked is None or self.ranked.empty:
            return
        row = self.query_one("#ranked", DataTable).cursor_row if row is None else row
        r = self.ranked.iloc[row]
        self.app.open_night(r["participant"], r["night"])

    def action_back(self) -> None:
        self.app.pop_screen()
