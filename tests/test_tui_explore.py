"""Headless tests of the clusters screen (sleepfuse/tui/screens/explore.py), at 80×24, with the Pilot.

The demo study (invented, sample_records/) has 8 participants: whole blocks cannot be
fitted (too few participants per column), which the screen must say; two columns give
K = 1 fits. The numbers themselves are checked in tests/test_explore_*.py.
"""

from __future__ import annotations

import numpy as np
import pytest
from textual.widgets import DataTable, Input, Static

from sleepfuse.explore.names import EXPLORATORY_CAUTION
from sleepfuse.run.engine import run_study
from sleepfuse.tui.app import create_app
from sleepfuse.tui.screens.explore import ExploreScreen
from sleepfuse.tui.screens.help import HelpScreen
from sleepfuse.tui.screens.overview import OverviewScreen
from sleepfuse.run.session import Workspace

from tui_helpers import SAMPLE, run_async, settle

SIZE = (80, 24)
TWO = "actigraphy_tst_min_mean,diary_sol_min_mean"


@pytest.fixture(scope="module")
def demo():
    return run_study(SAMPLE)


def text(screen, selector: str) -> str:
    return str(screen.query_one(selector, Static).render())


def table_rows(screen) -> list[list[str]]:
    table = screen.query_one("#models", DataTable)
    return [[str(c) for c in table.get_row_at(i)] for i in range(table.row_count)]


def test_workspace_matrix_keeps_rhythm(demo):
    """The workspace matrix is the batch matrix: one row per participant, rest-activity rhythm included."""
    ws = Workspace.from_result(SAMPLE, demo)
    m = ws.matrix()
    assert list(m["participant"]) == ws.participants
    assert np.isfinite(m["actigraphy_is"].astype(float)).all()  # IS from the scored participants, not empty
    assert (m["psg_nights"] >= 0).all() and m.loc[m["participant"] == "P07", "psg_nights"].item() == 0


@run_async
async def test_clusters_screen_blocks_columns_and_back(demo):
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("c")
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, ExploreScreen)
        assert text(screen, "#caution") == EXPLORATORY_CAUTION  # always in view
        region = screen.query_one("#caution").region
        assert region.height >= 1 and region.y < SIZE[1]

        # the default block (all): every (family, K ≤ 3) listed, none fitted, each with its reason
        rows = table_rows(screen)
        assert len(rows) == 9 and {r[0] for r in rows} == {"gaussian", "skewnormal", "t"}
        assert all(r[-1].startswith("too few participants") for r in rows)
        assert "no model could be fitted" in text(screen, "#status")
        assert "1 left out" in text(screen, "#left-out") and "P07" in text(screen, "#left-out")  # P07 has no PSG
        assert "too few participants" in text(screen, "#detail")

        # K max up to 4 and back: the table follows
        await pilot.press("plus")
        await settle(pilot)
        assert screen.kmax == 4 and len(table_rows(screen)) == 12
        await pilot.press("minus")
        await settle(pilot)
        assert screen.kmax == 3

        # the next block after all is diary (all 8 participants have diaries)
        await pilot.press("b")
        await settle(pilot)
        assert screen.block == "diary" and "none left out" in text(screen, "#left-out")

        # two columns typed: the K = 1 models fit, and the preferred model is K = 1
        await pilot.press("slash")
        assert screen.query_one("#columns", Input).has_focus
        screen.query_one("#columns", Input).value = TWO
        await pilot.press("enter")
        await settle(pilot)
        assert screen.columns == TWO
        status = text(screen, "#status")
        assert "preferred by BIC" in status and "K=1" in status
        fitted = [r for r in table_rows(screen) if r[-1] == "fitted"]
        assert fitted and all(r[1] == "1" for r in fitted)
        assert "1: 8" in text(screen, "#sizes")
        assert screen.result.blocks[0].preferred.n_components == 1

        # a pattern matching nothing: a clear message, no crash
        await pilot.press("slash")
        screen.query_one("#columns", Input).value = "zzz*"
        await pilot.press("enter")
        await settle(pilot)
        assert "'zzz*'" in text(screen, "#status") and table_rows(screen) == []

        await pilot.press("q")
        await pilot.pause()
        assert isinstance(app.screen, OverviewScreen)


@run_async
async def test_clusters_keys_in_help_and_escape_leaves_the_field(demo):
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("c")
        await settle(pilot)
        screen = app.screen
        await pilot.press("slash")
        assert screen.query_one("#columns", Input).has_focus
        await pilot.press("q")  # typed into the field, not "back"
        assert isinstance(app.screen, ExploreScreen) and screen.query_one("#columns", Input).value == "q"
        await pilot.press("escape")  # leaves the field first
        assert screen.query_one("#models", DataTable).has_focus and isinstance(app.screen, ExploreScreen)
        await pilot.press("question_mark")
        await pilot.pause()
        assert isinstance(app.screen, HelpScreen)
        help_text = str(app.screen.query_one("#help-text", Static).render())
        assert "Clusters (c)" in help_text and "next instrument block" in help_text
        assert "exploratory clustering preview" in help_text  # the overview's c key
