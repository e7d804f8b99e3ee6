"""Keys typed ahead: every key acts on the state the key before it left (issue 15.1).

Over SSH, keys typed quickly arrive together. ``burst`` puts them all in the
app's queue before any is handled (``pilot.press`` would wait for the app to
idle after each one and hide the bug). Each screen with a cursor is checked:
moves before Enter are never overtaken, and keys after Enter act on the
screen Enter opened.
"""

from __future__ import annotations

import pytest
from textual.widgets import DataTable

from sleepfuse.run.engine import run_study
from sleepfuse.tui.app import create_app
from sleepfuse.tui.screens.agreement import AgreementScreen
from sleepfuse.tui.screens.disagreements import DisagreementScreen
from sleepfuse.tui.screens.help import HelpScreen
from sleepfuse.tui.screens.night import NightScreen
from sleepfuse.tui.screens.overview import OverviewScreen

from tui_helpers import SAMPLE, burst, goto_cell, run_async

SIZE = (80, 24)


@pytest.fixture(scope="module")
def demo():
    return run_study(SAMPLE)


def opened(app) -> tuple[str, str]:
    assert isinstance(app.screen, NightScreen), type(app.screen).__name__
    return app.screen.participant, app.screen.night


@run_async
async def test_overview_moves_then_enter_in_one_burst(demo):
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await goto_cell(pilot, "P01", "2026-10-31")
        await burst(pilot, "j", "enter")
        assert opened(app) == ("P02", "2026-10-31")
        await burst(pilot, "q")
        assert app.screen.current() == ("P02", "2026-10-31")  # the move was kept
        await burst(pilot, "l", "l", "l", "enter")
        assert opened(app) == ("P02", "2026-11-03")
        await burst(pilot, "q", "down", "left", "enter")
        assert opened(app) == ("P03", "2026-11-02")


@run_async
async def test_keys_after_enter_act_on_the_night_view(demo):
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await goto_cell(pilot, "P01", "2026-10-31")
        await burst(pilot, "enter", "j")  # j belongs to the night view, not the overview cursor
        assert opened(app) == ("P01", "2026-10-31")
        await burst(pilot, "q")
        assert app.screen.current() == ("P01", "2026-10-31")
        await burst(pilot, "enter", "q")  # q closes the night just opened; it does not quit the app
        assert app.is_running and isinstance(app.screen, OverviewScreen)
        await burst(pilot, "enter", "]", "]", "q", "j")  # 19.8: back on the night ended on, then one down
        assert isinstance(app.screen, OverviewScreen)
        assert app.screen.current() == ("P02", "2026-11-02")


@run_async
async def test_night_view_steps_in_one_burst(demo):
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await goto_cell(pilot, "P01", "2026-10-31")
        await burst(pilot, "enter", "}", "}", "[")
        assert opened(app) == ("P03", "2026-10-30")
        await burst(pilot, "{", "q")
        assert app.screen.current() == ("P02", "2026-10-30")


@run_async
async def test_disagreements_moves_then_enter_in_one_burst(demo):
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await burst(pilot, "d", "down", "down", "enter")
        screen = app.screen_stack[-2]
        assert isinstance(screen, DisagreementScreen)
        third = screen.ranked.iloc[2]
        assert opened(app) == (third["participant"], third["night"])
        await burst(pilot, "q", "up", "enter", "down", "down")  # the downs act on the night view
        second = screen.ranked.iloc[1]
        assert opened(app) == (second["participant"], second["night"])
        await burst(pilot, "q")
        assert screen.query_one("#ranked", DataTable).cursor_row == 1


@run_async
async def test_agreement_moves_then_enter_in_one_burst(demo):
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await burst(pilot, "a", "right", "right", "enter")
        screen = app.screen_stack[-2]
        assert isinstance(screen, AgreementScreen)
        third = screen.points.iloc[2]
        assert opened(app) == (third["participant"], third["night"])
        await burst(pilot, "q", "left", "enter")
        second = screen.points.iloc[1]
        assert opened(app) == (second["participant"], second["night"])


@run_async
async def test_help_opens_and_closes_in_one_burst(demo):
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await goto_cell(pilot, "P01", "2026-10-31")
        await burst(pilot, "?", "j", "j", "q", "j")  # j scrolls the help, the last one moves the cursor
        assert isinstance(app.screen, OverviewScreen)
        assert app.screen.current() == ("P02", "2026-10-31")
        await burst(pilot, "?")
        assert isinstance(app.screen, HelpScreen)


@run_async
async def test_messages_never_pile_up(demo):
    """Issue 15.13: stepping past the last night three times leaves one message on screen, not three."""
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await goto_cell(pilot, "P01", "2026-11-04")
        await burst(pilot, "enter", "]", "]", "]")
        assert opened(app) == ("P01", "2026-11-04")
        assert len(app._notifications) == 1
        assert "no later night" in next(iter(app._notifications)).message


@run_async
async def test_a_reason_typed_right_after_x_reaches_the_dialog(tmp_path, demo):
    """x opens the review dialog; the letters typed behind it in the same burst are its reason."""
    from sleepfuse.tui.screens.review import ReviewDialog

    from tui_helpers import copy_study

    study = copy_study(tmp_path / "study")
    app = create_app(study, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await goto_cell(pilot, "P04", "2026-11-01")
        await burst(pilot, "x", *"watch off", "enter")
        assert isinstance(app.screen, OverviewScreen)  # saved and closed: the reason was there
        assert "watch off" in (study / "sleepfuse-review.csv").read_text()
        await burst(pilot, "x", "a", "escape", "a")  # 'a' is text in the dialog, then opens agreement after Esc
        assert isinstance(app.screen, AgreementScreen)
        assert not any(isinstance(s, ReviewDialog) for s in app.screen_stack)



@run_async
async def test_clusters_screen_keys_in_one_burst(demo):
    """The clusters screen's model table: moves typed in one burst all count, and q leaves after them."""
    from sleepfuse.tui.screens.explore import ExploreScreen

    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await burst(pilot, "c")
        assert isinstance(app.screen, ExploreScreen)
        table = app.screen.query_one("#models", DataTable)
        assert table.row_count >= 3  # two families × K = 1..3 on the demo matrix
        await burst(pilot, "down", "down")
        assert table.cursor_row == 2
        await burst(pilot, "up", "q", "j")
        assert isinstance(app.screen, OverviewScreen)
