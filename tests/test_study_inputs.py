"""Issue 12 items 8, 9, 13 and 15: study.toml patterns, odd entries matched by a pattern, unsafe IDs.

The study is a copy of two participants of the invented demo study. The
rules are common practice: patterns are relative to the study; a regular
expression with a repeat inside a repeat can backtrack for ever (a known
property of backtracking matchers such as Python's ``re``); a CSV cell that
starts with = + - @ runs as a formula in a spreadsheet (OWASP, "CSV
injection"; from memory).
"""

from __future__ import annotations

import os
import shutil
import threading
from pathlib import Path

import pytest
from conftest import copy_demo_participants

from sleepfuse.cli.main import main
from sleepfuse.model.config import load_config
from sleepfuse.model.errors import ConfigError
from sleepfuse.model.qc import QCLog
from sleepfuse.study.folder import discover, plan_jobs

SAMPLE = Path(__file__).resolve().parents[1] / "sample_records"


@pytest.fixture
def study(tmp_path):
    root = copy_demo_participants(tmp_path / "study")
    return root


def _toml(root: Path, text: str) -> None:
    with open(root / "study.toml", "a", encoding="utf-8") as fh:
        fh.write("\n" + text + "\n")


def _found(root: Path):
    qc = QCLog()
    found = discover(load_config(root), qc)
    return found, qc.to_frame()


# --- item 8: catastrophic participant_pattern ----------------------------------------------------

@pytest.mark.parametrize("pattern", [r"^(a+)+$", r"(\w*_?)*x", r"(a|ab)*c", r"(.*)*", r"(a?){25}a{25}", r"((P\d)+)+_"])
def test_nested_quantifier_pattern_is_refused_at_load(study, pattern):
    text = (study / "study.toml").read_text().replace("[study]\n", f"[study]\nparticipant_pattern = '{pattern}'\n", 1)
    (study / "study.toml").write_text(text)
    with pytest.raises(ConfigError) as info:
        load_config(study)
    assert info.value.key == "study.participant_pattern"
    assert "repeat" in info.value.allowed


def test_check_with_a_catastrophic_pattern_ends_quickly_with_a_message(study, capsys):
    (study / "psg" / ("a" * 40 + "!.edf")).write_bytes(b"0")  # a name that would backtrack for ever
    text = (study / "study.toml").read_text().replace("[study]\n", "[study]\nparticipant_pattern = '^(a+)+$'\n", 1)
    (study / "study.toml").write_text(text)
    result = {}
    worker = threading.Thread(target=lambda: result.setdefault("code", main(["check", str(study)])), daemon=True)
    worker.start()
    worker.join(20)
    assert not worker.is_alive(), "check hangs on a catastrophic participant_pattern"
    assert result["code"] == 2
    err = capsys.readouterr().err
    assert "participant_pattern" in err and "Traceback" not in err


def test_ordinary_participant_patterns_still_work(study):
    text = (study / "study.toml").read_text().replace(
        "[study]\n", "[study]\nparticipant_pattern = '^(?P<participant>P[0-9]+)_'\n", 1)
    (study / "study.toml").write_text(text)
    found, _ = _found(study)
    assert sorted(found.by_participant) == ["P01", "P02"]


# --- item 9: [files] patterns -----------------------------------------------------------------------

@pytest.mark.parametrize("pattern", ["/tmp/*.edf", "../other/psg/*.edf", "psg/../../*.edf", "~/psg/*.edf",
                                     "C:\\\\data\\\\*.edf"])
def test_absolute_or_outside_file_patterns_are_refused(study, pattern, capsys):
    _toml(study, f'[files]\npsg = "{pattern}"')
    with pytest.raises(ConfigError) as info:
        load_config(study)
    assert info.value.key == "files.psg"
    assert "relative" in info.value.allowed or "inside" in info.value.allowed
    assert main(["check", str(study)]) == 2
    err = capsys.readouterr().err
    assert "files.psg" in err and "Traceback" not in err


def test_outside_pattern_reads_nothing_outside(study, tmp_path):
    outside = tmp_path / "other" / "psg"
    outside.mkdir(parents=True)
    shutil.copy(SAMPLE / "psg" / "P01_20261031.edf", outside / "Z09_x.edf")
    _toml(study, '[files]\npsg = "../other/psg/*.edf"')
    with pytest.raises(ConfigError):
        load_config(study)


# --- item 13: odd entries matched by a pattern ------------------------------------------------------

def test_broken_link_folder_and_pipe_each_get_a_qc_line(study):
    (study / "psg" / "P03_broken.edf").symlink_to(study / "psg" / "does_not_exist.edf")
    (study / "psg" / "P04_folder.edf").mkdir()
    os.mkfifo(study / "actigraphy" / "P05_pipe.csv")
    found, qc = _found(study)
    for name in ("psg/P03_broken.edf", "psg/P04_folder.edf", "actigraphy/P05_pipe.csv"):
        lines = qc[qc.file == name]
        assert len(lines) == 1, name
        assert lines.severity.iloc[0] in ("warning", "error")
    assert "broken link" in qc[qc.file == "psg/P03_broken.edf"].message.iloc[0]
    assert "folder" in qc[qc.file == "psg/P04_folder.edf"].message.iloc[0]
    assert "not a regular file" in qc[qc.file == "actigraphy/P05_pipe.csv"].message.iloc[0]
    assert sorted(found.by_participant) == ["P01", "P02"]


def test_a_pipe_never_blocks_a_batch(study, tmp_path):
    from sleepfuse.run.batch import BatchOptions, run_batch

    os.mkfifo(study / "psg" / "P02_pipe.edf")
    result = run_batch(study, BatchOptions(out=tmp_path / "out", cache=False), argv=["test"])
    qc = result.tables["qc"]
    assert (qc.file == "psg/P02_pipe.edf").sum() == 1


def test_input_through_a_link_outside_the_study_is_read_and_reported(study, tmp_path):
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    target = elsewhere / "night.edf"
    shutil.copy(SAMPLE / "psg" / "P01_20261031.edf", target)
    (study / "psg" / "P02_linked.edf").symlink_to(target)
    inside = study / "psg" / "P01_20261031.edf"
    (study / "psg" / "P01_alias.edf").symlink_to(inside)  # a link inside the study: nothing to say
    found, qc = _found(study)
    assert study / "psg" / "P02_linked.edf" in found.by_participant["P02"]["psg"]
    lines = qc[qc.file == "psg/P02_linked.edf"]
    assert len(lines) == 1 and "outside the study" in lines.message.iloc[0]
    assert (qc.file == "psg/P01_alias.edf").sum() == 0


# --- item 15: formula injection -----------------------------------------------------------------

@pytest.mark.parametrize("lead", ["=", "+", "-", "@"])
def test_participant_id_starting_a_formula_is_refused_naming_the_file(study, lead):
    name = f"{lead}HYPERLINK(1)_wrist.csv"
    shutil.copy(SAMPLE / "actigraphy" / "P01_wrist.csv", study / "actigraphy" / name)
    found, qc = _found(study)
    assert all(not p.startswith(("=", "+", "-", "@")) for p in found.by_participant)
    lines = qc[qc.file.str.contains(name, regex=False)]
    assert len(lines) == 1 and lines.severity.iloc[0] == "error"
    assert "formula" in lines.message.iloc[0]
    assert not lines.file.iloc[0].startswith(("=", "+", "-", "@"))


def test_formula_ids_in_a_combined_diary_are_refused(study, tmp_path):
    (study / "diary" / "diary.csv").write_text(
        "participant,night,bedtime,tried_to_sleep,sol_min,nwak,waso_min,final_awakening,out_of_bed,quality\n"
        "=1+2,2026-10-28,22:40,23:00,15,2,20,06:30,07:00,3\n"
        "P01,2026-10-28,22:40,23:00,15,2,20,06:30,07:00,3\n")
    qc = QCLog()
    jobs, _ = plan_jobs(load_config(study), qc)
    assert "=1+2" not in {j.participant for j in jobs}
    frame = qc.to_frame()
    lines = frame[(frame.file == "diary/diary.csv") & frame.message.str.contains("formula")]
    assert len(lines) == 1 and "line 2" in lines.message.iloc[0]


@pytest.mark.parametrize("pattern, refused", [
    (r"^(P\d+)", False), (r"(?:[A-Z]\d)+", False), (r"^(?P<participant>[A-Z]{1,3}\d{2,4})_", False),
    (r"sub-(\d+)_(\d+)", False), (r"([+*])+", False), (r"(?i)^(p\d+)", False), (r"[(]+(a)", False),
    (r"((ab)?)+", True), (r"(x{1,3})+", True), (r"(\(a+\))+", True), (r"(?:(?:a+))+", True), (r"(a+?)+", True),
])
def test_pattern_check_tells_nested_repeats_from_ordinary_ones(pattern, refused):
    from sleepfuse.model.patterns import regex_problem

    assert bool(regex_problem(pattern)) is refused


# --- item 13: messages quote at most a short excerpt of a file --------------------------------------

def test_messages_quote_only_a_short_excerpt_of_a_file(study):
    from sleepfuse.study.folder import MESSAGE_MAX, load_participant

    secret_run = "Q" * 3000
    (study / "actigraphy" / "P03_wide.csv").write_text(f"{secret_run},counts\n2026-10-28T12:00:00,5\n")
    (study / "diary" / "P03_diary.csv").write_text(
        "night,bedtime,tried_to_sleep,sol_min,nwak,waso_min,final_awakening,out_of_bed,quality\n"
        f"2026-10-28,22:40,23:00,{'7' * 2000}x,2,20,06:30,07:00,3\n"
        f"{'2026-10-29' * 300},22:40,23:00,15,2,20,06:30,07:00,3\n")
    config = load_config(study)
    qc = QCLog()
    found = discover(config, qc)
    load_participant(config, "P03", found.by_participant["P03"], qc)
    lines = [e for e in qc if e.participant == "P03" or "P03" in e.file]
    assert lines
    for e in lines:
        assert len(e.message) <= MESSAGE_MAX
        assert "Q" * 60 not in e.message and "7" * 60 not in e.message
