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


KEY_NAMES = {"escape": "Esc", "enter": "Enter", "left": "←", "right": "→", "up": "↑", "down": "↓",
             "question_mark": "?", "left_square_bracket": "[", "right_square_bracket": "]",
             "left_curly_bracket": "{", "right_curly_bracket": "}", "plus": "+", "minus": "−", "slash": "/",
             "pageup": "PgUp", "pagedown": "PgDn", "home": "Home", "end": "End", "tab": "Tab"}
KEY_WIDTH, INDENT = 15, 2


def key_names(b: Binding) -> str:
    """Every key of a binding as printed on the keyboard ('Esc q', '← h', 'Ctrl+Q')."""
    names = []
    for key in b.key.split(","):
        key = key.strip()
        if key.startswith("ctrl+"):
            names.append("Ctrl+" + KEY_NAMES.get(key[5:], key[5:].upper()))
        else:
            names.append(KEY_NAMES.get(key, key))
    return " ".join(dict.fromkeys(names))


def _wrap(words: str, width: int) -> list[str]:
    import textwrap

    return textwrap.wrap(words, width=max(width, 20), break_on_hyphens=False) or [""]


def _entry(t: Text, key: str, what: str, width: int, key_width: int = KEY_WIDTH) -> None:
    """One key and its meaning; continuation lines start under the meaning, never at column 0."""
    lines = _wrap(what, width - INDENT - key_width)
    t.append(" " * INDENT + f"{key:<{key_width}}", style="bold")
    t.append(lines[0] + "\n")
    for line in lines[1:]:
        t.append(" " * (INDENT + key_width) + line + "\n")


def help_text(sections: list[tuple[str, list[Binding], list[tuple[str, str]]]], width: int = 80) -> Text:
    """Every key of every screen, the glyphs and the caution, wrapped to ``width`` with hanging indents."""
    t = Text()
    for title, bindings, extra in sections:
        t.append(f"{title}\n", style="bold underline")
        for b in bindings:
            _entry(t, key_names(b), f"{b.description}" + (f" — {b.tooltip}" if b.tooltip else ""), width)
        for key, what in extra:
            _entry(t, key, what, width)
        t.append("\n")
    t.append("Glyphs\n", style="bold underline")
    for name, what in GLYPHS:
        _entry(t, name, what, width, key_width=17)
    t.append("\nResearch use\n", style="bold underline")
    for line in _wrap(RESEARCH_CAUTION, width - INDENT):
        t.append(" " * INDENT + line + "\n")
    return t


class HelpScreen(Screen):
    """Keys and glyphs; Esc or q goes back."""

    CSS_PATH = tcss("help")
    BINDINGS = [
        Binding("escape,q", "back", "Back", key_display="q"),
        Binding("j,down", "scroll(1)", "Scroll down", show=False),
        Binding("k,up", "scroll(-1)", "Scroll up", show=False),
        Binding("pagedown,space", "scroll(6)", "Page down", show=False),
        Binding("pageup", "scroll(-6)", "Page up", show=False),
    ]

    def compose(self) -> ComposeResult:
        yield AppBar(self.app.study_name, "help")
        with VerticalScroll(id="help-body"):
            yield Static(help_text(self.app.help_sections(), self._width()), id="help-text")
        yield Footer()

    def _width(self) -> int:
        return max((self.app.size.width or 80) - 4, 40)  # the body's padding and scroll bar

    def on_mount(self) -> None:
        self.query_one("#help-body").focus()

    def on_resize(self) -> None:
        self.query_one("#help-text", Static).update(help_text(self.app.help_sections(), self._width()))

    def action_scroll(self, step: int) -> None:
        body = self.query_one("#help-body", VerticalScroll)
        body.scroll_relative(y=step * 3, animate=False)

    def action_back(self) -> None:
        self.app.pop_screen()
