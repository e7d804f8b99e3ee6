"""The app bar: tool, study name and screen on the left, the research-use caution always visible on the right."""

from __future__ import annotations

from rich.text import Text
from textual.widget import Widget

CAUTION_SHORT = "research use only · not a diagnosis"


class AppBar(Widget):
    """One line at the top of every screen; the study name is shortened to keep the caution in view."""

    DEFAULT_CSS = """
    AppBar { dock: top; height: 1; background: $primary; color: $text; }
    """

    def __init__(self, study: str, screen: str = "") -> None:
        super().__init__()
        self.study, self.screen_name = study, screen

    def render(self) -> Text:
        width = self.size.width or 80
        left = Text()
        left.append(" sleepfuse ", style="bold reverse")
        if self.screen_name:
            left.append(f" {self.screen_name} ", style="bold")
        room = width - left.cell_len - len(CAUTION_SHORT) - 3
        study = self.study if len(self.study) <= room else self.study[: max(room - 1, 0)] + "…"
        left.append(f"│ {study}" if room > 3 else "")
        pad = max(width - left.cell_len - len(CAUTION_SHORT) - 1, 1)
        left.append(" " * pad)
        left.append(CAUTION_SHORT, style="italic")
        return left
