"""Headless tests of the terminal app: every screen and key path, at 80×24, with the Pilot (never sleep).

The demo study (invented, sample_records/) is scored once per module and passed
in as ``preloaded``; one test loads through the real worker path.
"""

from __future__ import annotations

import csv
import datetime as dt
import json
from zoneinfo import ZoneInfo

import pytest
from textual.widgets import DataTable, Input, Static

from sleepfuse import RESEARCH_CAUTION
from sleepfuse.run.engine import run_study
from sleepfuse.study.review import default_reviewer
from sleepfuse.tui.app import create_app
from sleepfuse.tui.screens.agreement import AgreementScreen
from sleepfuse.tui.screens.disagreements import DisagreementScreen
from sleepfuse.tui.screens.export import ExportScreen
from sleepfuse.tui.screens.help import HelpScreen
from sleepfuse.tui.screens.night import NightScreen
from sleepfuse.tui.screens.overview import OverviewScreen
from sleepfuse.tui.screens.review import ReviewDialog
from sleepfuse.tui.widgets.timeline import NightTimeline

from tui_helpers import SAMPLE, copy_study, goto_cell, run_async, settle

SIZE = (80, 24)


@pytest.fixture(scope="module")
def demo():
    return run_study(SAMPLE)


def cell(app, participant: str, night: str) -> str:
    screen = app.screen
    table = screen.query_one("#grid", DataTable)
    value = table.get_cell_at((screen.row_pids.index(participant), screen.nights.index(night) + 1))
    return str(value)


@run_async
async def test_overview_loads_in_worker_and_shows_at_once(tmp_path):
    study = copy_study(tmp_path / "study")
    app = create_app(study)
    async with app.run_test(size=SIZE) as pilot:
        assert isinstance(app.screen, OverviewScreen)  # first screen before anything is scored
        await settle(pilot)
        assert app.workspace is not None
        screen = app.screen
        assert screen.row_pids == [f"P0{i}" for i in range(1, 9)]
        assert screen.nights[0] == "2026-10-27" and screen.nights[-1] == "2026-11-04"
        assert not screen.query_one("#loading").display
        assert cell(app, "P01", "2026-10-31") == "PAD "  # all three instruments
        assert cell(app, "P07", "2026-10-31") == "·AD "  # P07 has no PSG
        assert cell(app, "P08", "2026-10-28").endswith("!")  # no lights markers: QC warning
        assert cell(app, "P03", "2026-10-27") == "    "  # before P03's first day


@run_async
async def test_enter_on_a_blank_cell_opens_no_other_night(demo):
    """A cell with no scored night opens nothing in its place: the overview stays and names the nearest
    nights (it used to open P03's nearest night silently: the app must never open the wrong night)."""
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await goto_cell(pilot, "P03", "2026-10-27")  # before P03's first day: a blank cell
        assert cell(app, "P03", "2026-10-27") == "    "
        await pilot.press("enter")
        await settle(pilot)
        assert isinstance(app.screen, OverviewScreen)
        assert app.screen.current() == ("P03", "2026-10-27")
        messages = [n.message for n in app._notifications]
        assert messages == ["P03 has no scored night on 2026-10-27; nearest: 2026-10-28"]


@run_async
async def test_night_view_and_stepping(demo):
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await goto_cell(pilot, "P01", "2026-10-31")
        await pilot.press("enter")
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, NightScreen) and (screen.participant, screen.night) == ("P01", "2026-10-31")
        picture = screen.query_one(NightTimeline).picture
        assert picture is not None and picture.stages is not None and picture.counts is not None
        assert set(picture.windows) == {"psg", "actigraphy", "diary"}
        text = str(screen.query_one(NightTimeline).render())
        assert "█" in text and "├" in text and "T" in text
        params = screen.query_one("#params", DataTable)
        assert params.row_count >= 10
        await pilot.press("right_square_bracket")
        await settle(pilot)
        assert screen.night == "2026-11-01"
        await pilot.press("left_square_bracket", "left_square_bracket")
        await settle(pilot)
        assert screen.night == "2026-10-30"
        assert screen.query_one(NightTimeline).picture.stages is None  # no PSG that night
        await pilot.press("right_curly_bracket")
        await settle(pilot)
        assert screen.participant == "P02" and screen.night == "2026-10-30"
        await pilot.press("left_curly_bracket")
        await settle(pilot)
        assert screen.participant == "P01"
        await pilot.press("q")
        assert isinstance(app.screen, OverviewScreen)


@run_async
async def test_disagreements_rank_and_jump(demo):
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("d")
        screen = app.screen
        assert isinstance(screen, DisagreementScreen)
        expected = app.workspace.disagreements("actigraphy", "psg", "tst_min")
        table = screen.query_one("#ranked", DataTable)
        assert table.row_count == len(expected) == 11
        assert str(table.get_cell_at((0, 1))) == expected.iloc[0]["participant"]
        await pilot.press("p")
        assert app.choice.pair == ("diary", "psg")
        await pilot.press("p")
        assert app.choice.pair == ("diary", "actigraphy")
        top = screen.ranked.iloc[0]
        assert (top["participant"], top["night"]) == ("P04", "2026-11-01")  # 130 min off the wrist
        assert "non-wear" in top["reason"]
        await pilot.press("v")
        assert app.choice.parameter != "tst_min"
        await pilot.press("s")
        assert app.choice.by == "absolute"
        diffs = screen.ranked["abs_difference"].to_numpy()
        assert (diffs[:-1] >= diffs[1:]).all()
        await pilot.press("down", "enter")
        await settle(pilot)
        night = app.screen
        assert isinstance(night, NightScreen)
        assert (night.participant, night.night) == tuple(screen.ranked.iloc[1][["participant", "night"]])
        await pilot.press("q")
        assert app.screen is screen


@run_async
async def test_agreement_screen_points_and_jump(demo):
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("a")
        screen = app.screen
        assert isinstance(screen, AgreementScreen)
        row = app.workspace.agreement_row("actigraphy", "psg", "tst_min")
        assert f"bias {row['bias']:.1f}" in str(screen.query_one("#stats", Static).render())
        assert len(screen.points) == row["n_nights"]
        await pilot.press("right", "right")
        assert screen.selected == 2
        await pilot.press("left")
        assert screen.selected == 1
        target = tuple(screen.points.iloc[1][["participant", "night"]])
        await pilot.press("enter")
        await settle(pilot)
        assert (app.screen.participant, app.screen.night) == target
        await pilot.press("q", "v")
        assert app.choice.parameter == "spt_min"


@run_async
async def test_exclude_with_reason_saved_reloaded_and_exported(tmp_path, demo):
    study = copy_study(tmp_path / "study")
    out = tmp_path / "out"
    app = create_app(study, preloaded=demo, export_dir=out, reviewer="R. Okafor")
    async with app.run_test(size=SIZE) as pilot:
        await goto_cell(pilot, "P04", "2026-11-01")
        await pilot.press("x")
        assert isinstance(app.screen, ReviewDialog)
        await pilot.press("enter")  # no reason yet: refused
        assert isinstance(app.screen, ReviewDialog)
        assert not (study / "sleepfuse-review.csv").exists()
        assert app.screen.initial == "actigraphy"
        await pilot.press(*"watch off 2 h")
        await pilot.press("enter")
        assert isinstance(app.screen, OverviewScreen)
        assert cell(app, "P04", "2026-11-01") == "·×D "
        with open(study / "sleepfuse-review.csv", newline="") as fh:
            rows = list(csv.DictReader(fh))
        assert [(r["participant"], r["night"], r["source"], r["decision"], r["reason"]) for r in rows] == [
            ("P04", "2026-11-01", "actigraphy", "exclude", "watch off 2 h")]
        assert rows[0]["reviewer"] == "R. Okafor"  # issue 19.7: who decided, and when in the study's zone
        decided = dt.datetime.fromisoformat(rows[0]["decided_at"])
        zone = ZoneInfo("America/Chicago")  # the demo study's [study] timezone
        assert decided.utcoffset() == decided.astimezone(zone).utcoffset()
        assert abs((dt.datetime.now(dt.timezone.utc) - decided).total_seconds()) < 600
        await pilot.press("e")
        assert isinstance(app.screen, ExportScreen)
        assert app.screen.query_one(Input).value == str(out)
        await pilot.press("enter")
        await settle(pilot)
        assert "wrote 7 files" in str(app.screen.query_one("#export-status", Static).render())
        await pilot.press("escape")
        assert isinstance(app.screen, OverviewScreen)
    names = sorted(p.name for p in out.iterdir())
    assert names == sorted(["nights.csv", "agreement.csv", "epochs_agreement.csv", "matrix.csv", "codebook.csv",
                            "qc.csv", "provenance.json"])
    with open(out / "nights.csv", newline="") as fh:
        row = next(r for r in csv.DictReader(fh)
                   if (r["participant"], r["night"], r["source"]) == ("P04", "2026-11-01", "actigraphy"))
    assert row["included"] == "False" and "excluded by review: watch off 2 h" in row["qc"]
    prov = json.loads((out / "provenance.json").read_text())
    assert prov["review_decisions"]["decisions"][0]["reason"] == "watch off 2 h"

    restarted = create_app(study, preloaded=demo)  # a new session over the same folder
    async with restarted.run_test(size=SIZE) as pilot:
        assert cell(restarted, "P04", "2026-11-01") == "·×D "
        await goto_cell(pilot, "P04", "2026-11-01")
        await pilot.press("i")
        assert restarted.screen.initial == "actigraphy"  # the excluded instrument is offered first
        await pilot.press("enter")  # a reason is optional to re-include
        assert cell(restarted, "P04", "2026-11-01") == "·AD "
    with open(study / "sleepfuse-review.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["decision"] for r in rows] == ["exclude", "include"]
    assert rows[1]["reviewer"] == default_reviewer() and rows[1]["reviewer"]  # no --reviewer: the system user


@run_async
async def test_exclude_from_night_view_and_cancel(tmp_path, demo):
    study = copy_study(tmp_path / "study")
    app = create_app(study, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await goto_cell(pilot, "P08", "2026-10-28")
        await pilot.press("enter")
        await settle(pilot)
        await pilot.press("x")
        assert app.screen.initial == "psg"
        await pilot.press("escape")
        assert isinstance(app.screen, NightScreen)
        assert not (study / "sleepfuse-review.csv").exists()
        await pilot.press("x", "down")
        assert app.screen.initial == "actigraphy"
        await pilot.press("up", *"no lights markers", "enter")
        await settle(pilot)
        assert app.workspace.row("P08", "2026-10-28", "psg")["included"] == False  # noqa: E712
        assert "PSG: excluded" in str(app.screen.query_one("#night-title", Static).render())
        await pilot.press("q")
        assert cell(app, "P08", "2026-10-28").startswith("×")  # overview redrawn on return


@run_async
async def test_help_lists_every_key_and_the_caution(demo):
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("question_mark")
        assert isinstance(app.screen, HelpScreen)
        text = str(app.screen.query_one("#help-text", Static).render())
        for _, bindings, _ in app.help_sections():
            for b in bindings:
                assert b.description, f"binding {b.key} has no description"
                assert b.description in text
        assert " ".join(RESEARCH_CAUTION.split()[:8]) in " ".join(text.split())
        await pilot.press("q")
        assert isinstance(app.screen, OverviewScreen)


@run_async
async def test_every_screen_works_without_colour(monkeypatch, demo):
    monkeypatch.setenv("NO_COLOR", "1")
    app = create_app(SAMPLE, preloaded=demo)
    async with app.run_test(size=SIZE) as pilot:
        assert app.no_color
        for keys in (("enter",), ("q", "d"), ("q", "a"), ("q", "question_mark")):
            await pilot.press(*keys)
            await settle(pilot)
            assert app.export_screenshot()  # renders at 80×24 monochrome without error
        await pilot.press("q")
        await goto_cell(pilot, "P01", "2026-10-31")
        assert "PAD" in cell(app, "P01", "2026-10-31")


def test_cli_without_terminal_says_so_and_exits_2(tmp_path):
    import subprocess
    import sys

    code = (
        "import argparse, sys\n"
        "from sleepfuse.cli.open_command import add_open_parser\n"
        "p = argparse.ArgumentParser(); sub = p.add_subparsers(); add_open_parser(sub)\n"
        f"a = p.parse_args(['open', {str(SAMPLE)!r}])\n"
        "rc = a.func(a)\n"
        "print('textual' in sys.modules)\n"
        "sys.exit(rc)\n"
    )
    r = subprocess.run([sys.executable, "-c", code], stdin=subprocess.DEVNULL, capture_output=True, text=True,
                       timeout=60)
    assert r.returncode == 2
    assert "needs an interactive terminal" in r.stderr and "sleepfuse batch" in r.stderr
    assert r.stdout.strip() == "False"  # the driver was never started, textual never imported


def test_cli_with_stderr_redirected_says_so_on_stdout_and_exits_2(tmp_path):
    """Issue 15.10: 'sleepfuse open STUDY 2>log' would draw into the log; it says so on the terminal instead."""
    import os
    import pty
    import subprocess
    import sys

    main, child = pty.openpty()
    log = tmp_path / "log"
    with open(log, "w") as err:
        r = subprocess.run([sys.executable, "-m", "sleepfuse", "open", str(SAMPLE)], stdin=child, stdout=child,
                           stderr=err, timeout=60)
    os.close(child)
    shown = b""
    while True:
        try:
            chunk = os.read(main, 4096)
        except OSError:
            break
        if not chunk:
            break
        shown += chunk
        if b"2>log" in shown.replace(b"\r\n", b""):
            break
    os.close(main)
    assert r.returncode == 2
    assert b"standard error" in shown and b"sleepfuse batch" in shown
    assert "\x1b[" not in log.read_text()  # nothing was drawn into the log
