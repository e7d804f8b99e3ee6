"""The help screen (issues 15.7, 15.12): every key, continuation lines indented, one meaning per letter."""

from __future__ import annotations

from sleepfuse.tui.app import SleepfuseApp
from sleepfuse.tui.screens.help import INDENT, KEY_WIDTH, help_text, key_names

from textual.binding import Binding


def _sections():
    return SleepfuseApp(".").help_sections()


def test_every_key_of_every_binding_is_listed():
    text = str(help_text(_sections(), 80))
    for _, bindings, extra in _sections():
        for b in bindings:
            assert key_names(b) in text and b.description in text
        for key, _ in extra:
            assert key in text
    assert "Esc q" in text  # both keys of Back, not only the one the footer shows


def test_no_line_is_wider_than_the_screen_and_continuations_are_indented():
    for width in (60, 76, 116):
        lines = str(help_text(_sections(), width)).splitlines()
        assert max(len(line) for line in lines) <= width
        headings = {title for title, _, _ in _sections()} | {"Glyphs", "Research use"}
        for line in lines:
            if line and line not in headings:
                assert line.startswith(" " * INDENT), repr(line)
        # a wrapped meaning continues under the meaning, not under the key
        wrapped = [line for line in lines if line.startswith(" " * (INDENT + KEY_WIDTH)) and line.strip()]
        assert wrapped


def test_key_names_read_as_on_the_keyboard():
    assert key_names(Binding("escape,q", "back", "Back")) == "Esc q"
    assert key_names(Binding("left_square_bracket", "x", "y")) == "["
    assert key_names(Binding("ctrl+q", "quit", "Quit")) == "Ctrl+Q"


def test_k_means_up_wherever_it_is_bound():
    """j/k move down/up in the overview and scroll the help; no screen gives k or K another meaning
    (the clusters screen changes K max with + and −)."""
    for title, bindings, _ in _sections():
        for b in bindings:
            keys = [k.strip() for k in b.key.split(",")]
            if "k" in keys or "K" in keys:
                assert "up" in b.description.lower(), f"{title}: {b.key} means {b.description!r}"
