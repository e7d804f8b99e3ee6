"""Legible without colour: under NO_COLOR every mark keeps a clear contrast with its background.

Textual's own NO_COLOR filter turns each colour into the grey of the same
brightness, so a mark drawn in a dark hue (the diary's magenta, for one) became
a dark grey on a dark grey, nearly invisible. This filter does the same
conversion and then lifts any foreground that sits too close to its
background to a light grey (on a dark background) or a dark grey (on a light
one). Marks differ by letter and shape everywhere in the app (P A D, T O F U,
█ · × ?, ├─┤); colour only repeats what the glyph says.
"""

from __future__ import annotations

from rich.segment import Segment
from rich.style import Style
from textual.color import Color
from textual.filter import LineFilter, Monochrome, monochrome_style

MIN_CONTRAST = 0.45  # brightness difference (0-1) below which a mark is lifted; common practice, chosen by eye
LIGHT, DARK = Color(230, 230, 230), Color(25, 25, 25)


def legible_style(style: Style, background: Color) -> Style:
    """The monochrome style with its foreground lifted away from the background where they are too close."""
    style = monochrome_style(style)
    if style.color is None or style.reverse:
        return style
    fg = Color.from_rich_color(style.color)
    bg = Color.from_rich_color(style.bgcolor) if style.bgcolor is not None else background
    if abs(fg.brightness - bg.brightness) >= MIN_CONTRAST:
        return style
    lifted = LIGHT if bg.brightness < 0.5 else DARK
    return style + Style(color=lifted.rich_color)


class LegibleMonochrome(LineFilter):
    """Monochrome with a minimum contrast between each character and its background."""

    def apply(self, segments: list[Segment], background: Color) -> list[Segment]:
        return [Segment(text, legible_style(style, background) if style is not None else None, None)
                for text, style, _ in segments]


def use_legible_monochrome(filters: list[LineFilter]) -> list[LineFilter]:
    """The app's filters with Textual's Monochrome replaced by LegibleMonochrome."""
    return [LegibleMonochrome(enabled=f.enabled) if isinstance(f, Monochrome) else f for f in filters]
