"""Marks stay legible without colour (issue 15.2): the contrast rule of tui/legible.py, on the app's own output."""

from __future__ import annotations

import pytest
from rich.style import Style
from textual.color import Color

from sleepfuse.run.engine import run_study
from sleepfuse.tui.app import create_app
from sleepfuse.tui.legible import MIN_CONTRAST, LegibleMonochrome, legible_style

from tui_helpers import SAMPLE, goto_cell, run_async, settle


def test_dark_hue_on_dark_background_is_lifted():
    dark_bg = Color(38, 38, 38)  # about xterm grey 235, the grid's background
    style = legible_style(Style(color="#8b2f8b", bold=True), dark_bg)  # a dark magenta: grey ~237 in monochrome
    fg = Color.from_rich_color(style.color)
    assert fg.r == fg.g == fg.b  # still grey
    assert abs(fg.brightness - dark_bg.brightness) >= MIN_CONTRAST
    assert style.bold


def test_light_text_and_reverse_video_are_left_alone():
    dark_bg = Color(38, 38, 38)
    light = legible_style(Style(color="#e0e0e0"), dark_bg)
    assert Color.from_rich_color(light.color) == Color(224, 224, 224)
    rev = legible_style(Style(color="#303030", reverse=True), dark_bg)
    assert rev.reverse and Color.from_rich_color(rev.color).brightness < 0.3


@pytest.fixture(scope="module")
def demo():
    return run_study(SAMPLE)


def low_contrast(app) -> list[str]:
    """Visible characters of the screen as drawn (filters applied) whose foreground is too close to the background."""
    update = app.screen._compositor.render_update(full=True, screen_stack=app._background_screens)
    bad = []
    for y, line in enumerate(update.strips):
        for text, style, _ in (segment for strip in line for segment in strip):
            if not text.strip() or style is None or style.color is None or style.bgcolor is None or style.reverse:
                continue
            fg, bg = Color.from_rich_color(style.color), Color.from_rich_color(style.bgcolor)
            if abs(fg.brightness - bg.brightness) < MIN_CONTRAST:
                bad.append(f"row {y}: {text!r}")
    return bad


@run_async
async def test_every_character_on_screen_has_contrast_without_colour(monkeypatch, demo):
    """Overview, night view, agreement under NO_COLOR: no character within MIN_CONTRAST of its background."""
    monkeypatch.setenv("NO_COLOR", "1")
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=(80, 24)) as pilot:
        assert any(isinstance(f, LegibleMonochrome) for f in app._filters)
        await goto_cell(pilot, "P01", "2026-10-31")
        for keys in ((), ("enter",), ("q", "a"), ("q", "d")):
            await pilot.press(*keys)
            await settle(pilot)
            assert low_contrast(app) == [], type(app.screen).__name__


@run_async
async def test_plain_monochrome_would_hide_the_diary(monkeypatch, demo):
    """The check above can fail: with Textual's own monochrome filter the diary's D is too dark."""
    from textual.filter import Monochrome

    monkeypatch.setenv("NO_COLOR", "1")
    app = create_app(SAMPLE, preloaded=demo)
    app._filters = [Monochrome() if isinstance(f, LegibleMonochrome) else f for f in app._filters]
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        assert any("D" in line for line in low_contrast(app))
