"""Shared fixtures: paths to the demo study and an invented messy study with bad files mixed in."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_records"


def copy_demo_participants(root: Path, participants=("P01", "P02")) -> Path:
    """A study folder at ``root`` with the demo's study.toml and the files of a few demo participants."""
    for sub in ("psg", "actigraphy", "diary"):
        (root / sub).mkdir(parents=True)
    shutil.copy(SAMPLE / "study.toml", root / "study.toml")
    for pid in participants:
        for src in SAMPLE.glob(f"*/{pid}_*"):
            shutil.copy(src, root / src.parent.name / src.name)
    return root


def make_messy_study(root: Path) -> Path:
    """Two good participants from the demo study plus one bad file of every kind."""
    root.mkdir(parents=True, exist_ok=True)
    shutil.copy(SAMPLE / "study.toml", root / "study.toml")
    with open(root / "study.toml", "a", encoding="utf-8") as fh:
        fh.write('\n# participants of this study; files of anyone else are reported\n')
    text = (root / "study.toml").read_text().replace(
        'timezone = "America/Chicago"', 'timezone = "America/Chicago"\nparticipants = ["P01", "P02", "P03", "P04", "P05"]'
    )
    (root / "study.toml").write_text(text)
    for sub in ("psg", "actigraphy", "diary"):
        (root / sub).mkdir()
    for pid in ("P01", "P02"):
        for src in SAMPLE.glob(f"*/{pid}_*"):
            shutil.copy(src, root / src.parent.name / src.name)
    good = (SAMPLE / "psg" / "P01_20261031.edf").read_bytes()
    (root / "psg" / "P03_truncated.edf").write_bytes(good[: len(good) // 2])  # truncated EDF
    (root / "psg" / "P04_garbage.edf").write_bytes(b"this is not an EDF file at all\n" * 20)
    (root / "actigraphy" / "P03_empty.csv").write_bytes(b"")  # empty CSV
    (root / "actigraphy" / "P04_wrongcols.csv").write_text("moment,level\n2026-10-27T12:00:00,5\n")  # no name we know
    (root / "diary" / "P05_diary.csv").write_text(
        "night,bedtime,tried_to_sleep,sol_min,nwak,waso_min,final_awakening,out_of_bed,quality\n"
        "2026-10-28,22:40,23:00,15,2,20,06:30,07:00,3\n"
        "2026-10-29,22:40,23:00,15,2,20,06:30,21:00,3\n"  # out of bed before tried to sleep
        "2026-10-30,22:40,23:00,lots,2,20,06:30,07:00,3\n"  # not a number
    )
    shutil.copy(SAMPLE / "actigraphy" / "P06_wrist.csv", root / "actigraphy" / "X99_wrist.csv")  # unknown participant
    return root


@pytest.fixture(autouse=True)
def _private_config_home(tmp_path_factory, monkeypatch):
    """The app remembers export folders in the user's configuration folder: never the real one in tests."""
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path_factory.mktemp("config-home")))


@pytest.fixture
def messy_study(tmp_path) -> Path:
    return make_messy_study(tmp_path / "messy")
