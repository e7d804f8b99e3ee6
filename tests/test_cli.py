"""The command line: check, score and batch on the demo study and on a messy study (bad files mixed in)."""

from __future__ import annotations

import pandas as pd
import pytest

from sleepfuse import __version__
from sleepfuse.cli.main import main
from pathlib import Path

SAMPLE = Path(__file__).resolve().parents[1] / "sample_records"

DEMO_PARTICIPANTS = [f"P0{i}" for i in range(1, 9)]


def test_version(capsys):
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0 and __version__ in capsys.readouterr().out


def test_help_lists_commands(capsys):
    with pytest.raises(SystemExit):
        main(["--help"])
    out = capsys.readouterr().out
    for cmd in ("check", "score", "batch"):
        assert cmd in out
    assert "research" in out.lower()


def test_check_demo_names_every_participant(capsys):
    assert main(["check", str(SAMPLE)]) == 0
    out = capsys.readouterr().out
    for pid in DEMO_PARTICIPANTS:
        assert pid in out
    assert "does not diagnose" in out


def test_check_messy_study_reports_every_problem(messy_study, capsys):
    assert main(["check", str(messy_study)]) == 0
    out = capsys.readouterr().out
    assert "P03_truncated.edf" in out and "truncated" in out
    assert "P04_garbage.edf" in out
    assert "P03_empty.csv" in out
    assert "P04_wrongcols.csv" in out and "moment, level" in out.replace("'", "")
    assert "X99" in out and "not in [study] participants" in out
    assert "rejected" in out and "P05" in out
    assert "lots" in out  # the bad number is named


def test_check_empty_folder_exits_nonzero(tmp_path, capsys):
    assert main(["check", str(tmp_path)]) == 1
    assert "no input files" in capsys.readouterr().out


def test_check_not_a_folder(tmp_path, capsys):
    with pytest.raises(SystemExit) as info:
        main(["check", str(tmp_path / "nope")])
    assert info.value.code == 2
    assert "not a folder" in capsys.readouterr().err


def test_bad_study_toml_is_a_usage_error(tmp_path, capsys):
    (tmp_path / "study.toml").write_text('[study]\ntimezone = "Nowhere/Town"\n')
    assert main(["check", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "study.timezone" in err and "Nowhere/Town" in err


def test_score_writes_night_table(tmp_path, messy_study):
    out = tmp_path / "nights.csv"
    assert main(["score", str(messy_study), "--out", str(out)]) == 0
    nights = pd.read_csv(out)
    assert set(nights["participant"]) == {"P01", "P02", "P05"}
    assert set(nights["source"]) == {"psg", "actigraphy", "diary"}


def test_batch_on_messy_study_completes_and_names_each_problem(tmp_path, messy_study):
    out = tmp_path / "out"
    assert main(["batch", str(messy_study), "--out", str(out)]) == 0
    qc = pd.read_csv(out / "qc.csv").fillna("")
    text = "\n".join(qc["file"] + " | " + qc["participant"] + " | " + qc["night"] + " | " + qc["message"])
    for name in ("P03_truncated.edf", "P04_garbage.edf", "P03_empty.csv", "P04_wrongcols.csv", "X99_wrist.csv"):
        assert name in text
    rejected = qc[qc["message"].str.contains("rejected")]
    assert ((rejected["participant"] == "P05") & (rejected["night"] == "2026-10-29")).any()
    nights = pd.read_csv(out / "nights.csv")
    assert {"P01", "P02"} <= set(nights["participant"])
    assert (nights[nights.participant == "P01"]["source"].nunique()) == 3


def test_batch_nothing_to_process_exits_nonzero(tmp_path):
    (tmp_path / "study").mkdir()
    assert main(["batch", str(tmp_path / "study"), "--out", str(tmp_path / "out")]) == 1


def test_batch_bad_option_is_usage_error(tmp_path):
    with pytest.raises(SystemExit) as info:
        main(["batch", str(SAMPLE), "--out", str(tmp_path), "--workers", "0"])
    assert info.value.code == 2
