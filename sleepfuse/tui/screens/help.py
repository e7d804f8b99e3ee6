"""Help: every key of every screen (read from the screens' bindings, so it never goes stale) and the caution."""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import Screen
from textual.widgets import Footer, Static

from sleepfuse import RESEARCH_CAUTION
from ..widgets.appbar import AppBar
from . import tcss

GLYPHS = [
    ("overview cell", "P A D in fixed places = PSG, actigraphy, diary have the night; · missing; × excluded; "
                      "! the QC log has a warning or error for that night"),
    ("night: axis", "┊ an hour in the study's time zone; ╪ the first hour after a clock change (daylight saving), "
                    "with the new zone's abbreviation where it fits"),
    ("night: PSG rows", "one row per stage (W, R, N1, N2, N3): the block sits at the stage's height; ? unscored"),
    ("night: counts", "activity counts per column, ▁ to █ (95th percentile of the night = █)"),
    ("night: wrist", "█ sleep · wake × off-wrist ? unscored (per-minute scoring)"),
    ("night: diary", "T tried to sleep, O estimated onset (T + SOL), F final awakening, U out of bed"),
    ("night: win", "├──┤ the sleep opportunity of PSG, actigraphy and diary"),
    ("night: table", "* a difference beyond the study's limits of agreement for that pair"),
    ("agreement plot", "• a night (● several), ◆ selected, ─ bias, ╌ limits of agreement, · zero, "
                       "╱ ╲ regression of the difference on the mean where proportional bias is flagged"),
]


def _key(b: Binding) -> str:
    return b.key_display or b.key


def help_text(sections: list[tuple[str, list[Binding], list[tuple[str, str]]]]) -> Text:
    t = Text()
    for title, bindings, extra in sections:
        t.append(f"{title}\n", style="bold underline")
        for b in bindings:
            t.append(f"  {_key(b):<14}", style="bold")
            t.append(f"{b.description}" + (f" — {b.tooltip}" if b.tooltip else "") + "\n")
        for key, what in extra:
            t.append(f"  {key:<14}", style="bold")
            t.append(f"{what}\n")
        t.append("\n")
    t.append("Glyphs\n", style="bold underline")
    for name, what in GLYPHS:
        t.append(f"  {name:<16}", style="bold")
        t.append(f"{what}\n")
    t.append("\nResearch use\n", style="bold underline")
    t.append(f"  {RESEARCH_CAUTION}\n")
    return t


class HelpScreen(Screen):
    """Keys and glyphs; Esc or q goes back."""

    CSS_PATH = tcss("help")
    BINDINGS = [
        Binding("escape,q", "back", "Back", key_display="q"),
        Binding("j,down", "scroll(1)", "Scroll down", show=False),
        Binding("k,up", "scroll(-1)", "Scroll up", show=False),
    ]

    def compose(self) -> ComposeResult:
        yield AppBar(self.app.study_name, "help")
        with VerticalScroll(id="help-body"):
            yield Static(help_text(self.app.help_sections()), id="help-text")
        yield Footer()

    def on_mount(self) -> None:
        self.query_one("#help-body").focus()

    def action_scroll(self, step: int) -> None:
        body = self.query_one("#help-body", VerticalScroll)
        body.scroll_relative(y=step * 3, animate=False)

    def action_back(self) -> None:
        self.app.pop_screen()
