"""Round trip (issue 14): a clean study re-saved the ways labs save files gives the same night table,
with a study.toml that holds nothing but the time zone. Invented demo data only."""

from __future__ import annotations

import shutil

import pandas as pd
import pytest

from lab_files import SAMPLE, actigraphy_styles, clean_study, diary_styles, psg_as_text, resave
from sleepfuse.run.engine import run_study

PAIRS = list(zip(actigraphy_styles(), [*diary_styles(), "workbook_xlsx"]))


@pytest.fixture(scope="module")
def clean(tmp_path_factory):
    root = clean_study(tmp_path_factory.mktemp("lab") / "clean", ("P02",))
    shutil.copy(SAMPLE / "diary" / "diary.csv", root / "diary" / "diary.csv")  # a participant column (P07)
    shutil.copy(SAMPLE / "actigraphy" / "P07_wrist.csv", root / "actigraphy" / "P07_wrist.csv")
    result = run_study(root, keep_detail=False)
    return root, result.nights, problems(result)


def problems(result):
    """Warnings and errors by participant and night (line numbers differ in a workbook: not compared)."""
    return sorted((e.participant, str(e.night), e.severity) for e in result.qc if e.severity != "info")


@pytest.mark.parametrize("actigraphy_style,diary_style", PAIRS)
def test_resaved_study_gives_the_same_night_table(clean, tmp_path, actigraphy_style, diary_style):
    root, nights, clean_problems = clean
    messy = resave(root, tmp_path / "messy", actigraphy_style, diary_style)
    assert (messy / "study.toml").read_text() == '[study]\ntimezone = "America/Chicago"\n'
    assert not list((messy / "actigraphy").glob("*.csv")) or actigraphy_style != "utf16_tab_month_first_12h"
    result = run_study(messy, keep_detail=False)
    assert len(nights) > 20 and set(nights["source"]) == {"psg", "actigraphy", "diary"}
    pd.testing.assert_frame_equal(result.nights, nights)
    assert problems(result) == clean_problems


def test_psg_saved_as_text_hypnograms_gives_the_same_psg_nights(clean, tmp_path):
    root, nights, _ = clean
    messy = tmp_path / "messy"
    shutil.copytree(root, messy)
    for edf in sorted((messy / "psg").glob("*.edf")):
        psg_as_text(edf, edf)  # tab-separated, day-first date-times with microseconds, lights rows
        edf.unlink()
    got = run_study(messy, keep_detail=False).nights
    psg, ref = got[got.source == "psg"].reset_index(drop=True), nights[nights.source == "psg"].reset_index(drop=True)
    assert len(ref) == 2
    # The text holds microseconds; the EDF's float onsets can carry nanoseconds: the window ends agree to 1 µs.
    ends = (pd.to_datetime(psg.pop("window_end"), format="ISO8601", utc=True)
            - pd.to_datetime(ref.pop("window_end"), format="ISO8601", utc=True))
    assert (ends.abs() < pd.Timedelta(microseconds=1)).all()
    pd.testing.assert_frame_equal(psg, ref)


@pytest.mark.slow
@pytest.mark.parametrize("actigraphy_style", list(actigraphy_styles()))
@pytest.mark.parametrize("diary_style", list(diary_styles()))
def test_the_whole_demo_study_resaved_every_way_gives_the_same_night_table(tmp_path, actigraphy_style, diary_style):
    clean = clean_study(tmp_path / "clean", tuple(f"P0{i}" for i in range(1, 9)))
    shutil.copy(SAMPLE / "diary" / "diary.csv", clean / "diary" / "diary.csv")
    expected = run_study(clean, keep_detail=False)
    got = run_study(resave(clean, tmp_path / "messy", actigraphy_style, diary_style), keep_detail=False)
    pd.testing.assert_frame_equal(got.nights, expected.nights)
    assert problems(got) == problems(expected)
