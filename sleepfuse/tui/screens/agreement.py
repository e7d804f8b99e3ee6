"""Agreement: the agreement.csv statistics of one parameter and pair, and its Bland–Altman scatter.

Left/right (h/l) select a point (in order of the mean of the two
instruments); Enter opens that point's night.
"""

from __future__ import annotations

import math

import numpy as np
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import Footer, Static

from sleepfuse.fusion.agreement import PROPORTIONAL_P
from sleepfuse.model.definitions import PARAMETERS, SOURCE_NAMES
from sleepfuse.model.numbers import format_number, format_p
from ..widgets.appbar import AppBar
from ..widgets.scatter import BlandAltmanPlot
from .choice import choice_line
from . import tcss


def _n(v, digits: int = 1) -> str:
    try:
        return format_number(float(v), digits)
    except (TypeError, ValueError):
        return format_number(math.nan)


def proportional_line(row: dict) -> tuple[float, float] | None:
    """(intercept, slope) of the difference on the mean where proportional bias is flagged (p < PROPORTIONAL_P)."""
    try:
        p, a, b = float(row["prop_p"]), float(row["prop_intercept"]), float(row["prop_slope"])
    except (KeyError, TypeError, ValueError):
        return None
    if math.isfinite(p) and p < PROPORTIONAL_P and math.isfinite(a) and math.isfinite(b):
        return a, b
    return None


def stats_text(row: dict) -> Text:
    """agreement.csv for one parameter and pair: three lines, then its notes in full (they wrap)."""
    t = Text()
    if not row:
        return Text("no agreement row", style="dim")
    t.append(f" n {int(row['n_nights'])} nights, {int(row['n_participants'])} participants   ")
    t.append(f"bias {_n(row['bias'])} [{_n(row['bias_ci_low'])}, {_n(row['bias_ci_high'])}]  ", style="bold")
    t.append(f"SD {_n(row['sd'])}\n")
    t.append(f" limits of agreement {_n(row['loa_low'])} to {_n(row['loa_high'])}", style="bold")
    t.append(f"   multi-night {_n(row['mn_loa_low'])} to {_n(row['mn_loa_high'])}\n")
    p = format_p(row.get("prop_p"))
    p = p if p.startswith("<") else f"= {p}"
    t.append(f" CCC {_n(row['ccc'], 2)}  ICC {_n(row['icc'], 2)}  prop. slope {_n(row['prop_slope'], 2)} (p {p})")
    if proportional_line(row) is not None:
        t.append("  proportional bias", style="bold")
    note = row.get("note") or ""
    # the table's note repeats the proportional-bias p in its own format; the line above already says it
    notes = [n for n in note.split("; ") if n and not n.startswith("proportional bias")] if isinstance(note, str) else []
    if notes:
        t.append(f"\n note: {'; '.join(notes)}", style="italic")
    return t


class AgreementScreen(Screen):
    """Statistics and Bland–Altman scatter."""

    CSS_PATH = tcss("agreement")
    BINDINGS = [
        Binding("left,h", "select(-1)", "Prev point", key_display="←", tooltip="select the previous point (by mean)"),
        Binding("right,l", "select(1)", "Next point", key_display="→", tooltip="select the next point (by mean)"),
        Binding("enter", "open_night", "Night", tooltip="open the night of the selected point"),
        Binding("p", "next_pair", "Pair", tooltip="next instrument pair"),
        Binding("v", "next_parameter(1)", "Parameter", tooltip="next sleep parameter"),
        Binding("V", "next_parameter(-1)", "Prev parameter", show=False),
        Binding("escape,q", "back", "Back", key_display="q"),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.points = None
        self.row: dict = {}
        self.selected = 0
        self.version = -1

    def compose(self) -> ComposeResult:
        yield AppBar(self.app.study_name, "agreement")
        yield Static("", id="choice")
        yield Static("", id="stats")
        yield BlandAltmanPlot(id="scatter")
        yield Static("", id="point")
        yield Footer()

    def on_mount(self) -> None:
        self.fill()

    def on_screen_resume(self) -> None:
        if self.app.workspace.version != self.version:
            self.fill()

    def fill(self) -> None:
        ws, choice = self.app.workspace, self.app.choice
        self.version = ws.version
        test, ref = choice.pair
        self.query_one("#choice", Static).update(choice_line(choice))
        row = ws.agreement_row(test, ref, choice.parameter)
        self.query_one("#stats", Static).update(stats_text(row))
        pts = ws.agreement_points(test, ref, choice.parameter)
        self.points = pts.sort_values(["mean", "participant", "night"]).reset_index(drop=True)
        self.selected = min(self.selected, max(len(self.points) - 1, 0))
        self.row = row
        self._draw()

    def _draw(self) -> None:
        ws, choice = self.app.workspace, self.app.choice
        bias, low, high = ws.limits(choice.pair_label, choice.parameter)
        pts = self.points
        sel = self.selected if len(pts) else None
        test, ref = (SOURCE_NAMES[s] for s in choice.pair)
        unit = PARAMETERS[choice.parameter].unit if choice.parameter in PARAMETERS else ""
        self.query_one(BlandAltmanPlot).show(pts["mean"].to_numpy(float), pts["difference"].to_numpy(float),
                                             bias, low, high, sel, line=proportional_line(self.row or {}),
                                             x_label=f"mean of {test} and {ref} [{unit}]",
                                             y_label=f"{test} − {ref} [{unit}]")
        info = self.query_one("#point", Static)
        if sel is None:
            info.update("no paired nights")
            return
        p = pts.iloc[sel]
        beyond = np.isfinite(low) and (p["difference"] < low or p["difference"] > high)
        text = Text()
        text.append(f" ◆ {p['participant']} {p['night']}", style="bold")
        text.append(f"  mean {format_number(p['mean'], 1)}  difference {format_number(p['difference'], 1, signed=True)}")
        if beyond:
            text.append("  beyond the limits", style="bold red")
        text.append(f"   point {sel + 1} of {len(pts)}", style="dim")
        info.update(text)

    def action_select(self, step: int) -> None:
        if self.points is not None and len(self.points):
            self.selected = (self.selected + step) % len(self.points)
            self._draw()

    def action_next_pair(self) -> None:
        self.app.choice.next_pair()
        self.selected = 0
        self.fill()

    def action_next_parameter(self, step: int) -> None:
        self.app.choice.next_parameter(step)
        self.selected = 0
        self.fill()

    def action_open_night(self) -> None:
        if self.points is None or not len(self.points):
            return
        p = self.points.iloc[self.selected]
        self.app.open_night(p["participant"], p["night"])

    def action_back(self) -> None:
        self.app.pop_screen()
