"""Night view: one participant-night, every instrument on one time axis, parameters side by side.

The epoch detail is fetched in a worker (it may be re-scored from the files
for big studies) and comes back as ``NightScored``; the parameter table
shows each source's value and the pair differences, with '*' where a
difference lies beyond the study's limits of agreement.
"""

from __future__ import annotations

import datetime as dt

from rich.text import Text
from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Static

from sleepfuse.model.definitions import PAIRS, pair_name
from sleepfuse.run.session import SOURCES
from ..messages import NightScored
from ..widgets.appbar import AppBar
from sleepfuse.model.numbers import fmt
from ..widgets.timeline import NightTimeline, night_picture
from . import tcss

SHORT = {"psg": "PSG", "actigraphy": "act", "diary": "diary"}
PAIR_SHORT = {"actigraphy-psg": "A−P", "diary-psg": "D−P", "diary-actigraphy": "D−A"}


class NightScreen(Screen):
    """One participant-night."""

    CSS_PATH = tcss("night")
    BINDINGS = [
        Binding("left_square_bracket", "step_night(-1)", "Night −1", key_display="[", tooltip="previous night of this participant"),
        Binding("right_square_bracket", "step_night(1)", "Night +1", key_display="]", tooltip="next night of this participant"),
        Binding("left_curly_bracket", "step_participant(-1)", "Id −1", key_display="{", tooltip="previous participant, same night"),
        Binding("right_curly_bracket", "step_participant(1)", "Id +1", key_display="}", tooltip="next participant, same night"),
        Binding("x", "exclude", "Excl", tooltip="exclude this night for one instrument, with a reason"),
        Binding("i", "include", "Incl", tooltip="re-include an excluded night for one instrument"),
        Binding("escape,q", "back", "Back", key_display="q"),
    ]

    def __init__(self, participant: str, night: str) -> None:
        super().__init__()
        self.participant, self.night = participant, night
        self.version = -1

    def compose(self) -> ComposeResult:
        yield AppBar(self.app.study_name, "night")
        yield Static("", id="night-title")
        yield NightTimeline(id="timeline")
        yield DataTable(id="params", cursor_type="row", zebra_stripes=True)
        yield Footer()

    def on_mount(self) -> None:
        table = self.query_one("#params", DataTable)
        table.add_column("parameter", width=17, key="parameter")
        for s in SOURCES:
            table.add_column(SHORT[s], width=6, key=s)
        for t, r in PAIRS:
            table.add_column(PAIR_SHORT[pair_name(t, r)], width=7, key=pair_name(t, r))
        self.show_night()
        table.focus()

    def on_screen_resume(self) -> None:
        if self.app.workspace.version != self.version:
            self.show_night()

    def show_night(self) -> None:
        """Title and parameter table now; the timeline when its worker reports back."""
        ws = self.app.workspace
        self.version = ws.version
        nights = ws.participant_nights(self.participant)
        k = nights.index(self.night) + 1 if self.night in nights else 0
        day = dt.date.fromisoformat(self.night)
        title = Text()
        title.append(f" {self.participant}", style="bold")
        title.append(f"  night of {day:%a} {self.night}  ({k} of {len(nights)})  ")
        for s in SOURCES:
            row = ws.row(self.participant, self.night, s)
            if row is None:
                title.append(f"{SHORT[s]}: – ", style="dim")
            elif bool(row["included"]):
                title.append(f"{SHORT[s]}: ok ", style="green")
            else:
                title.append(f"{SHORT[s]}: excluded ", style="bold red")
        self.query_one("#night-title", Static).update(title)
        self._fill_parameters()
        self.query_one(NightTimeline).show(None)
        self.score_night(self.participant, self.night)

    def _fill_parameters(self) -> None:
        ws = self.app.workspace
        table = self.query_one("#params", DataTable)
        table.clear()
        rows = []
        for line in ws.night_parameters(self.participant, self.night):
            row: list = [line.parameter]
            row += [Text(fmt(line.values[s], line.unit), justify="right") for s in SOURCES]
            for t, r in PAIRS:
                name = pair_name(t, r)
                d = line.differences.get(name)
                if d is None:  # a source without the value: the same dash as a missing value
                    row.append(Text(fmt(None, line.unit) + " ", justify="right"))
                    continue
                flag = line.beyond.get(name, False)
                row.append(Text(fmt(d, line.unit, signed=True) + ("*" if flag else " "), justify="right",
                                style="bold red" if flag else ""))
            rows.append(row)
        table.add_rows(rows)

    @work(thread=True, exclusive=True, exit_on_error=False)
    def score_night(self, participant: str, night: str) -> None:
        ws = self.app.workspace
        picture = night_picture(ws.detail(participant), night, ws.config.timezone)
        self.post_message(NightScored(participant, night, picture))

    def on_night_scored(self, message: NightScored) -> None:
        if (message.participant, message.night) == (self.participant, self.night):
            self.query_one(NightTimeline).show(message.picture)

    # --- navigation -------------------------------------------------------------------
    def action_step_night(self, step: int) -> None:
        nights = self.app.workspace.participant_nights(self.participant)
        if self.night not in nights:
            return
        i = nights.index(self.night) + step
        if 0 <= i < len(nights):
            self.night = nights[i]
            self.show_night()
        else:
            self.notify("no earlier night" if step < 0 else "no later night")

    def action_step_participant(self, step: int) -> None:
        ws = self.app.workspace
        pids = ws.participants
        i = pids.index(self.participant) + step
        while 0 <= i < len(pids) and not ws.participant_nights(pids[i]):
            i += step
        if not 0 <= i < len(pids):
            self.notify("no earlier participant" if step < 0 else "no later participant")
            return
        self.participant = pids[i]
        nights = ws.participant_nights(self.participant)
        here = dt.date.fromisoformat(self.night)
        self.night = min(nights, key=lambda n: abs((dt.date.fromisoformat(n) - here).days))
        self.show_night()

    def action_exclude(self) -> None:
        from .review import review_night

        review_night(self, self.participant, self.night, "exclude", on_saved=self.show_night)

    def action_include(self) -> None:
        from .review import review_night

        review_night(self, self.participant, self.night, "include", on_saved=self.show_night)

    def action_back(self) -> None:
        """Back to the screen below; the overview puts its cursor on the night shown last (after any [ ] { })."""
        self.app.pop_screen()
        move_to = getattr(self.app.screen, "move_to", None)
        if move_to is not None:  # at once, so a key typed behind q moves on from this night
            move_to(self.participant, self.night)
