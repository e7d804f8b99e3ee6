"""One QC log, one count (issue 15.4): check, score and batch print the same counts; check lists everything.

The demo study (invented) has one rejected diary row (error), two clock offsets
found by epoch agreement, an unknown stage label and a PSG file without
lights markers (warnings).
"""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd

from sleepfuse.cli.console import nights_label
from sleepfuse.cli.main import main
from sleepfuse.model.definitions import instrument_nights
from sleepfuse.model.numbers import plural
from sleepfuse.model.qc import QCLog, qc_summary

SAMPLE = Path(__file__).resolve().parents[1] / "sample_records"


def _summary(text: str) -> str:
    found = re.findall(r"QC log: (\d+ errors?, \d+ warnings?, \d+ notes?)", text)
    assert len(found) == 1, text
    return found[0]


def test_check_score_and_batch_give_the_same_counts(tmp_path, capsys):
    assert main(["check", str(SAMPLE)]) == 0
    check = capsys.readouterr().out
    assert main(["score", str(SAMPLE), "--out", str(tmp_path / "nights.csv")]) == 0
    score = capsys.readouterr().err
    assert main(["batch", str(SAMPLE), "--out", str(tmp_path / "out"), "--no-cache"]) == 0
    batch = capsys.readouterr().err
    qc = pd.read_csv(tmp_path / "out" / "qc.csv", keep_default_na=False)
    expected = qc_summary(qc["severity"])
    assert _summary(check) == _summary(score) == _summary(batch) == expected
    assert expected.startswith("1 error, 4 warnings")
    # check lists every error and warning of batch's qc table, the epoch agreement ones included
    for _, e in qc[qc["severity"] != "info"].iterrows():
        assert e["message"] in check
    assert "lights off and lights on marker missing" in check and "clock shifted" in check


def test_batch_counts_instrument_nights(tmp_path, capsys):
    assert main(["batch", str(SAMPLE), "--out", str(tmp_path), "--no-cache"]) == 0
    err = capsys.readouterr().err
    nights = pd.read_csv(tmp_path / "nights.csv")
    inc = nights[nights["included"]]
    n = {s: int((inc["source"] == s).sum()) for s in ("psg", "actigraphy", "diary")}
    assert f"{len(inc)} instrument-nights ({n['psg']} PSG, {n['actigraphy']} actigraphy, {n['diary']} diary)" in err


def test_counts_are_worded_in_the_singular_and_plural():
    assert plural(1, "error") == "1 error" and plural(0, "error") == "0 errors" and plural(2, "night") == "2 nights"
    log = QCLog()
    log.error("a")
    log.warning("b")
    log.warning("c")
    assert qc_summary(log) == "1 error, 2 warnings, 0 notes"
    empty = pd.DataFrame({"source": [], "included": []})
    assert instrument_nights(empty) == "0 instrument-nights (0 PSG, 0 actigraphy, 0 diary)"


def test_check_names_the_nights_rather_than_a_range():
    assert nights_label(["2026-11-02", "2026-10-28"]) == "2 nights: 2026-10-28, 2026-11-02"
    assert nights_label(["2026-10-28"]) == "1 night: 2026-10-28"
    days = [f"2026-10-{d}" for d in range(27, 32)]
    assert nights_label(days) == "5 nights, every night 2026-10-27 to 2026-10-31"
    assert nights_label(days[:2] + days[3:]) == "4 nights between 2026-10-27 and 2026-10-31"
    assert nights_label([]) == "none"
