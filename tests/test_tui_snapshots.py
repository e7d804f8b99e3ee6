"""SVG snapshots of the main screens at 80×24 on the invented demo study (pytest-textual-snapshot).

Update after a deliberate change of the look with ``pytest tests/test_tui_snapshots.py --snapshot-update``
and check the new SVGs by eye.
"""

from __future__ import annotations

import pytest

from sleepfuse.run.engine import run_study
from sleepfuse.tui.app import create_app

from tui_helpers import SAMPLE, goto_cell, settle

SIZE = (80, 24)


@pytest.fixture(scope="module")
def demo():
    return run_study(SAMPLE)


def test_overview(snap_compare, demo):
    async def before(pilot):
        await goto_cell(pilot, "P08", "2026-10-28")

    assert snap_compare(create_app(SAMPLE, preloaded=demo), terminal_size=SIZE, run_before=before)


def test_night_view(snap_compare, demo):
    async def before(pilot):
        await goto_cell(pilot, "P01", "2026-10-31")
        await pilot.press("enter")
        await settle(pilot)

    assert snap_compare(create_app(SAMPLE, preloaded=demo), terminal_size=SIZE, run_before=before)


def test_disagreements(snap_compare, demo):
    assert snap_compare(create_app(SAMPLE, preloaded=demo), terminal_size=SIZE, press=["d", "p", "p"])


def test_agreement(snap_compare, demo):
    assert snap_compare(create_app(SAMPLE, preloaded=demo), terminal_size=SIZE, press=["a", "right"])


@pytest.fixture
def no_color(monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")  # read (and removed) by the app when it is created


def test_overview_without_colour(snap_compare, demo, no_color):
    """NO_COLOR: the diary's D and every other mark stay light on the dark grid (issue 15.2)."""
    async def before(pilot):
        assert pilot.app.no_color
        await goto_cell(pilot, "P08", "2026-10-28")

    assert snap_compare(create_app(SAMPLE, preloaded=demo), terminal_size=SIZE, run_before=before)


def test_night_view_without_colour(snap_compare, demo, no_color):
    async def before(pilot):
        await goto_cell(pilot, "P01", "2026-10-31")
        await pilot.press("enter")
        await settle(pilot)

    assert snap_compare(create_app(SAMPLE, preloaded=demo), terminal_size=SIZE, run_before=before)


def test_agreement_without_colour(snap_compare, demo, no_color):
    assert snap_compare(create_app(SAMPLE, preloaded=demo), terminal_size=SIZE, press=["a", "right"])
