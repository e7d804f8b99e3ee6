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


async def open_clusters(pilot):
    """Press c on the overview and wait for the first fit; returns the clusters screen."""
    await pilot.press("c")
    await settle(pilot)
    return pilot.app.screen


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

        # the default block (all): every (family, K ≤ 5, the command line's default) listed, none
        # fitted, each with its reason
        rows = table_rows(screen)
        assert len(rows) == 15 and {r[0] for r in rows} == {"gaussian", "skewnormal", "t"}
        assert all(r[-1].startswith("too few participants") for r in rows)
        assert "no model could be fitted" in text(screen, "#status")
        assert "1 left out" in text(screen, "#left-out") and "P07" in text(screen, "#left-out")  # P07 has no PSG
        assert "too few participants" in text(screen, "#detail")

        # K max up to 6 and back: the table follows
        await pilot.press("plus")
        await settle(pilot)
        assert screen.kmax == 6 and len(table_rows(screen)) == 18
        await pilot.press("minus")
        await settle(pilot)
        assert screen.kmax == 5

        # the other views say why they are empty: selection off, no participants table in the demo
        await pilot.press("v")
        assert "[selection]" in text(screen, "#view") and "selection is off" in text(screen, "#view")
        await pilot.press("v")
        assert "no participants table" in text(screen, "#view") and "participants.csv" in text(screen, "#view")
        await pilot.press("v", "v")
        assert "[models]" in text(screen, "#view")

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
        screen = await open_clusters(pilot)
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


def test_screen_and_command_line_share_their_defaults():
    # One definition (sleepfuse.explore.names) for both front ends: K max and EM starts.
    import argparse

    from sleepfuse.explore.cli import add_explore_parser
    from sleepfuse.explore.names import DEFAULT_KMAX, DEFAULT_STARTS
    from sleepfuse.tui.screens import explore as screen_module

    parser = argparse.ArgumentParser()
    add_explore_parser(parser.add_subparsers())
    args = parser.parse_args(["explore", "m.csv", "--out", "o"])
    assert screen_module.KMAX_DEFAULT == DEFAULT_KMAX == args.kmax
    assert screen_module.STARTS == DEFAULT_STARTS == args.starts


@pytest.fixture
def cohort(tmp_path, monkeypatch):
    """A small invented clustering cohort (matrix.csv + participants.csv side by side), and a quick screen:
    K max 2 and 2 starts (the defaults are checked above; these keep the default test run fast)."""
    from sleepfuse.explore.simulate import hidden_subgroup_cohort
    from sleepfuse.tui.screens import explore as screen_module

    matrix, participants = hidden_subgroup_cohort(n=120, n_noise=1, seed=1)
    matrix.to_csv(tmp_path / "matrix.csv", index=False)
    participants.drop(columns=["truth"]).to_csv(tmp_path / "participants.csv", index=False)
    monkeypatch.setattr(screen_module, "KMAX_DEFAULT", 2)
    monkeypatch.setattr(screen_module, "STARTS", 2)
    monkeypatch.setenv("NO_COLOR", "1")
    return tmp_path


@run_async
async def test_clusters_screen_on_a_matrix_shows_selection_outcomes_and_profiles(cohort):
    from sleepfuse.tui.app import create_clusters_app

    app = create_clusters_app(cohort / "matrix.csv")
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        assert app.no_color
        screen = app.screen
        assert isinstance(screen, ExploreScreen)
        assert "selection off (s)" in text(screen, "#choice")
        await pilot.press("s")                       # stepwise BIC selection on
        await settle(pilot)
        assert "selection on (s)" in text(screen, "#choice")
        block = screen.result.blocks[0]
        status = text(screen, "#status")
        assert "preferred by BIC" in status and "K=2" in status

        await pilot.press("v")                       # the variable selection: every candidate, yes or no
        rows = {r[0]: r[1] for r in table_rows(screen)}
        assert set(rows) == set(block.selection.columns)
        assert {c for c, v in rows.items() if v == "yes"} == set(block.selection.chosen)
        assert rows["diary_waso_min_mean"] == "no" and rows["diary_sol_min_mean"] == "yes"
        assert "[selection]" in text(screen, "#view") and f"{len(block.selection.chosen)} of 4 selected" in text(
            screen, "#view")

        await pilot.press("v")                       # the clusters against participants.csv beside the matrix
        rows = {r[0]: r for r in table_rows(screen)}
        assert set(rows) == {"reported_group", "site", "age"}
        assert rows["reported_group"][4] == "<0.001" and rows["age"][2] == "Kruskal-Wallis"
        assert "participants.csv" in text(screen, "#detail")

        await pilot.press("v")                       # profiles: n, median and IQR per cluster and column
        rows = table_rows(screen)
        sizes = dict(zip(block.cluster_sizes["cluster"].astype(str), block.cluster_sizes["n_assigned"].astype(str)))
        psg = [r for r in rows if r[2] == "psg_sol_min_mean"]
        assert [r[0] for r in psg] == ["1", "2"] and all(r[1] == sizes[r[0]] for r in psg)
        assert all(" – " in r[4] for r in psg)
        assert any(r[2].startswith("reported_group=") for r in rows)
        assert app.export_screenshot()               # renders at 80×24 without colour

        await pilot.press("q")                       # the only screen: q leaves the app
        await pilot.pause()
    assert app.return_code in (0, None)


@pytest.mark.slow
@run_async
async def test_clusters_screen_on_the_200_participant_cohort_with_the_command_line_defaults(tmp_path, monkeypatch):
    # The README's clustering cohort (sample_records/clustering_cohort.py, invented, seed 17), opened as
    # 'sleepfuse open clustering_cohort/matrix.csv' would, with the shared defaults (K max 5, 20 starts)
    # and the selection on: the fit runs in the worker, and the screen shows the three parts.
    import subprocess
    import sys

    from sleepfuse.tui.app import create_clusters_app

    script = SAMPLE / "clustering_cohort.py"
    subprocess.run([sys.executable, str(script), str(tmp_path)], check=True, capture_output=True, timeout=120)
    monkeypatch.setenv("NO_COLOR", "1")
    app = create_clusters_app(tmp_path / "matrix.csv")
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot)
        screen = app.screen
        await pilot.press("s")
        await settle(pilot)
        assert "K=2" in text(screen, "#status")
        await pilot.press("v")
        chosen = [r[0] for r in table_rows(screen) if r[1] == "yes"]
        assert sorted(chosen) == sorted(["diary_sol_min_mean", "actigraphy_sol_min_mean", "psg_sol_min_mean"])
        await pilot.press("v")
        assert {r[0] for r in table_rows(screen)} == {"reported_group", "site", "age"}
        await pilot.press("v")
        assert len(table_rows(screen)) > 0


def test_open_takes_a_study_folder_or_a_matrix_csv(tmp_path):
    import argparse

    from sleepfuse.cli.open_command import study_or_matrix

    (tmp_path / "matrix.csv").write_text("participant,a\nA,1\n")
    (tmp_path / "notes.txt").write_text("x")
    assert study_or_matrix(str(tmp_path / "matrix.csv")) == tmp_path / "matrix.csv"
    assert study_or_matrix(str(tmp_path)) == tmp_path
    with pytest.raises(argparse.ArgumentTypeError, match="not a .csv"):
        study_or_matrix(str(tmp_path / "notes.txt"))
    with pytest.raises(argparse.ArgumentTypeError, match="not a folder"):
        study_or_matrix(str(tmp_path / "missing"))


@run_async
async def test_study_participants_table_is_the_outcomes_source(demo, tmp_path):
    # The study's participants.csv (the table 'explore --outcomes' would read) feeds the outcomes view.
    from tui_helpers import copy_study

    study = copy_study(tmp_path / "study")
    (study / "participants.csv").write_text("participant,reported_group\n" +
                                            "".join(f"P0{i},{'a' if i % 2 else 'b'}\n" for i in range(1, 9)))
    app = create_app(study, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        screen = await open_clusters(pilot)
        await pilot.press("slash")
        screen.query_one("#columns", Input).value = TWO
        await pilot.press("enter")
        await settle(pilot)
        await pilot.press("v", "v")
        rows = table_rows(screen)
        assert [r[0] for r in rows] == ["reported_group"] and rows[0][2] == "none"   # one cluster: nothing to test
        assert str(study / "participants.csv") in text(screen, "#detail")
        await pilot.press("v")
        assert any(r[2] == "reported_group=a" for r in table_rows(screen))
