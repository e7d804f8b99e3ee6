"""``sleepfuse inspect`` on a mixed folder (issue 14): what it prints, and a snapshot of the study.toml it
proposes. Invented files only."""

from __future__ import annotations

import datetime as dt
import shutil

from lab_files import SAMPLE
from sleepfuse.cli.main import main

MIXED = {
    "actigraphy/A1_wrist.csv": "Export (invented)\nEpoch length: 60\n\nDate;Time;Activity\n"
    + "".join(f"{d:02d}.11.2026;{h:02d}:{m:02d}:00;{(d * h + m) % 97},5\n"
              for d in range(14, 16) for h in range(24) for m in range(60))
    + "Total;;999\n",
    "psg/A1_night.txt": "Start: 14/11/2026 23:00:00\nEpoch\tStage\n" + "".join(f"{i}\t{s}\n" for i, s in
                                                                                 enumerate("WW1223R2W", 1)),
    "diary/diary.xlsx": None,
    "diary/A2_diary.csv": "night,tried_to_sleep,out_of_bed\n03/04/2026,22:00,07:00\n",  # day or month first?
}

SNAPSHOT = '''# study.toml proposed by 'sleepfuse inspect': check every line, then keep it.
# sleepfuse is for research; it does not diagnose.
[study]
name = "mixed"
timezone = "America/Chicago"   # this machine's zone: set the zone of the devices' clocks
# The dates of diary/A2_diary.csv fit both day-first and month-first: say which, e.g.
# date_order = "day-first"   # or "month-first"
'''


def mixed_folder(root):
    import pandas as pd

    for rel, text in MIXED.items():
        (root / rel).parent.mkdir(parents=True, exist_ok=True)
        if text is not None:
            (root / rel).write_text(text, encoding="utf-8")
    pd.DataFrame({"ID": ["A1"], "Night": [dt.date(2026, 11, 14)], "Lights off": [dt.time(23, 0)],
                  "Out of bed": [dt.time(7, 0)]}).to_excel(root / "diary/diary.xlsx", index=False)
    shutil.copy(SAMPLE / "psg" / "P01_20261031.edf", root / "psg" / "A1_20261031.edf")
    return root


def test_inspect_prints_what_it_detected_and_writes_a_proposal(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("TZ", "America/Chicago")
    root = mixed_folder(tmp_path / "mixed")
    assert main(["inspect", str(root)]) == 0
    out = capsys.readouterr().out
    lines, out = out, " ".join(out.split())  # phrases may wrap at 78 columns
    assert "actigraphy/A1_wrist.csv [actigraphy] (A1)" in out
    assert "semicolon-delimited" in out and "header on line 4" in out and "'Activity' → counts" in out
    assert "D.M.YYYY hh:mm:ss (day-first, settled by the values)" in out and "epoch length: 60 s" in out
    assert "psg/A1_night.txt [psg] (A1)" in out and "epoch numbers from a start" in out
    assert "diary/diary.xlsx [diary]" in out and "workbook" in out
    assert "NOT READ" in out and "date_order" in out
    assert "nights per instrument:" in out
    table = out.split("nights per instrument:")[1].split("notes:")[0]
    assert "A1 2 3 1" in table and " ? " not in table  # psg: EDF + text; diary from the workbook's ID column
    assert max(len(line) for line in lines.splitlines()) <= 80  # readable in an 80-column terminal
    assert (root / "study.toml").read_text() == SNAPSHOT


def test_inspect_never_replaces_an_existing_study_toml_unless_forced(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("TZ", "America/Chicago")
    root = mixed_folder(tmp_path / "mixed")
    (root / "study.toml").write_text('[study]\ntimezone = "Europe/Berlin"\n')
    assert main(["inspect", str(root)]) == 0
    assert (root / "study.toml").read_text() == '[study]\ntimezone = "Europe/Berlin"\n'
    assert "exists and is kept" in capsys.readouterr().out
    assert main(["inspect", str(root), "--force"]) == 0
    assert 'timezone = "Europe/Berlin"   # IANA zone' in (root / "study.toml").read_text()


def test_the_proposal_keeps_every_setting_of_an_existing_study_toml(tmp_path):
    import tomllib

    from sleepfuse.model.config import build_config, load_config
    from sleepfuse.study.inspect import propose_toml, survey

    root = tmp_path / "study"
    shutil.copytree(SAMPLE, root, ignore=shutil.ignore_patterns("generate.py"))
    with open(root / "study.toml", "a", encoding="utf-8") as fh:
        fh.write('\n[diary]\ncolumns = {tried_to_sleep = "settled at"}\nsheet = "Entries"\n'
                 '[psg]\nlabels = {"Stage X" = "unscored"}\n')
    before = load_config(root)
    proposal = propose_toml(survey(root, before))
    after = build_config(root, tomllib.loads(proposal))
    assert {k: v for k, v in after.to_dict().items() if k != "source"} == {
        k: v for k, v in before.to_dict().items() if k != "source"}
