"""The app's export dialog (e): folder, report, figures, workers and format, keyboard only, at 80×24."""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest
from textual.widgets import Checkbox, Input, Static

from sleepfuse.run.engine import run_study
from sleepfuse.tui.app import create_app
from sleepfuse.tui.recent import remember_export, remembered_export
from sleepfuse.tui.screens.export import ExportScreen

from conftest import make_messy_study
from tui_helpers import run_async, settle

SIZE = (80, 24)


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    """Two good participants of the demo study plus bad files (fast to export)."""
    root = make_messy_study(tmp_path_factory.mktemp("export") / "study")
    return root, run_study(root)


def _status(app) -> str:
    return str(app.screen.query_one("#export-status", Static).render())


@run_async
async def test_keyboard_only_export_with_the_report(small, tmp_path, monkeypatch):
    study, result = small
    monkeypatch.chdir(tmp_path)  # the folder is typed relative to where the app runs
    out = tmp_path / "chosen"
    app = create_app(study, preloaded=result)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("e")
        assert isinstance(app.screen, ExportScreen)
        folder = app.screen.query_one("#out", Input)
        assert app.focused is folder
        assert folder.value == str(study.resolve().parent / "study-sleepfuse-out")  # the app's default
        await pilot.press("ctrl+a", "ctrl+k", *"chosen")
        await pilot.press("tab", "space")  # tick the report
        assert app.screen.query_one("#report", Checkbox).value
        assert not app.screen.query_one("#plots", Checkbox).value
        await pilot.press("ctrl+s")
        await settle(pilot)
        status = _status(app)
        assert "wrote 8 files" in status and "report.html" in status
        await pilot.press("escape")
    assert (out / "report.html").is_file() and (out / "provenance.json").is_file()
    assert not (out / "plots").exists()
    # remembered for the next session of this study
    assert remembered_export(study) == out.resolve()


@run_async
async def test_options_reach_the_batch_run(small, tmp_path, monkeypatch):
    study, result = small
    seen = {}

    class Done:
        written = [tmp_path / "x" / "nights.parquet"]

    def fake_run_batch(study_, options, **kwargs):
        seen["options"] = options
        kwargs["step_progress"]("figures")("diary-psg_tst_min", 3, 25)
        return Done()

    monkeypatch.setattr("sleepfuse.run.batch.run_batch", fake_run_batch)
    app = create_app(study, preloaded=result, export_dir=tmp_path / "x")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("e", "ctrl+f", "tab", "tab", "space", "tab")  # parquet; figures ticked
        assert app.focused is app.screen.query_one("#workers", Input)
        await pilot.press("backspace", "2", "enter")
        await settle(pilot)
    options = seen["options"]
    assert (options.format, options.plots, options.report, options.workers) == ("parquet", True, False, 2)
    assert options.out == tmp_path / "x"


@run_async
async def test_the_study_folder_and_bad_workers_are_refused(small, tmp_path, monkeypatch):
    study, result = small
    monkeypatch.setattr("sleepfuse.run.batch.run_batch", lambda *a, **k: pytest.fail("export started"))
    app = create_app(study, preloaded=result, export_dir=study)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("e", "enter")
        assert "cannot start" in _status(app) and "study folder itself" in _status(app)
        app.screen.query_one("#out", Input).value = str(tmp_path / "fine")
        await pilot.press("tab", "tab", "tab", "backspace", "0", "enter")
        assert "workers: give 1 or more" in _status(app)
        assert not app.screen.running


@run_async
async def test_remembered_folder_comes_first_unless_one_is_given(small, tmp_path):
    study, result = small
    assert remember_export(study, tmp_path / "last")
    app = create_app(study, preloaded=result)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("e")
        assert app.screen.query_one("#out", Input).value == str((tmp_path / "last").resolve())
    app = create_app(study, preloaded=result, export_dir=tmp_path / "given")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("e")
        assert app.screen.query_one("#out", Input).value == str(tmp_path / "given")


@run_async
async def test_folder_names_are_completed(small, tmp_path):
    study, result = small
    (tmp_path / "results-2026").mkdir()
    app = create_app(study, preloaded=result, export_dir=tmp_path / "zz")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("e")
        app.screen.query_one("#out", Input).value = str(tmp_path / "re")
        await pilot.press("end", "s")  # typed: the suggestion follows the keys
        await pilot.pause()
        await pilot.press("right")
        assert app.screen.query_one("#out", Input).value == str(tmp_path / "results-2026") + "/"


@run_async
async def test_dialog_fits_80_by_24_without_colour(small, tmp_path, monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")
    study, result = small
    app = create_app(study, preloaded=result, export_dir=tmp_path / "o")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("e")
        screen = app.screen
        for widget in ("#out", "#report", "#plots", "#workers", "#export-format", "#export-status"):
            region = screen.query_one(widget).region
            assert region.width > 0 and region.right <= 80 and region.bottom <= 24, widget
        text = app.export_screenshot().replace("&#160;", " ")
        for words in ("Folder", "study report", "figures", "Workers", "format: csv"):
            assert words in text, words


def test_the_demo_export_folder_is_ignored_by_git():
    root = Path(__file__).resolve().parents[1]
    if shutil.which("git") is None or not (root / ".git").exists():
        pytest.skip("not a git clone")
    ignored = subprocess.run(["git", "check-ignore", "-q", "sample_records-sleepfuse-out/nights.csv"], cwd=root)
    assert ignored.returncode == 0


@run_async
async def test_ticked_and_unticked_options_differ_without_colour(small, tmp_path, monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")
    study, result = small
    app = create_app(study, preloaded=result, export_dir=tmp_path / "o")
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("e", "tab", "space")
        report, plots = app.screen.query_one("#report", Checkbox), app.screen.query_one("#plots", Checkbox)
        assert report.value and not plots.value
        assert "✓" in str(report.render()) and "✓" not in str(plots.render())
