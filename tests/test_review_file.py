"""Issue 12 item 5: a damaged review file (sleepfuse-review.csv) never stops batch or the app.

Each bad line is reported with its number and reason, the good lines are
applied, and decisions for participants or nights the study does not hold
are warned about (common practice: report and carry on, never drop silently).
"""

from __future__ import annotations

import csv
from pathlib import Path

import pytest
from conftest import copy_demo_participants

from sleepfuse.model.qc import QCLog
from sleepfuse.run.batch import BatchOptions, run_batch
from sleepfuse.study.review import REVIEW_FILE, load_decisions, record_decision

from tui_helpers import run_async, settle

SAMPLE = Path(__file__).resolve().parents[1] / "sample_records"
HEADER = "participant,night,source,decision,reason,decided_at\n"  # an older file, without reviewer
GOOD = "P01,2026-10-28,actigraphy,exclude,watch left on the charger,2026-11-10T10:00:00+00:00\n"
BAD_LINES = [
    "P01,2026-10-29,actigraphy,delete,oops,\n",            # line 3: unknown decision
    "P01,31/10/2026,psg,exclude,date format,\n",          # line 4: not an ISO date
    "P02,2026-10-29,watch,exclude,wrong source,\n",       # line 5: unknown source
    "P02,2026-10-29\n",                                     # line 6: too few fields
    "P02,2026-10-29,psg,exclude,a,b,c,d\n",                 # line 7: too many fields
    ",2026-10-29,psg,exclude,no one,\n",                    # line 8: no participant
]
UNKNOWN = [
    "Z99,2026-10-28,psg,exclude,not in this study,\n",      # line 9: unknown participant
    "P02,2030-01-01,psg,exclude,no such night,\n",          # line 10: unknown night
]


@pytest.fixture
def study(tmp_path):
    root = copy_demo_participants(tmp_path / "study")
    (root / REVIEW_FILE).write_text(HEADER + GOOD + "".join(BAD_LINES) + "".join(UNKNOWN), encoding="utf-8")
    return root


def _check_report(qc_frame):
    review = qc_frame[qc_frame.file == REVIEW_FILE]
    errors = review[review.severity == "error"]
    assert sorted(int(m.split()[1].rstrip(":")) for m in errors.message) == [3, 4, 5, 6, 7, 8]
    reasons = " ".join(errors.message)
    for word in ("'delete'", "'31/10/2026'", "'watch'", "fewer fields", "more fields", "no participant"):
        assert word in reasons
    warnings = review[review.severity == "warning"].message
    assert len(warnings) == 2
    assert any("'Z99'" in w and "not in this study" in w for w in warnings)
    assert any("2030-01-01" in w and "no psg night" in w for w in warnings)


def test_batch_applies_good_lines_and_reports_bad_ones(study, tmp_path):
    result = run_batch(study, BatchOptions(out=tmp_path / "out", cache=False), argv=["t"])
    nights = result.tables["nights"]
    row = nights[(nights.participant == "P01") & (nights.night == "2026-10-28") & (nights.source == "actigraphy")]
    assert not bool(row.included.iloc[0]) and "watch left on the charger" in row.qc.iloc[0]
    _check_report(result.tables["qc"])


def test_cli_batch_exits_normally_with_a_bad_review_line(study, tmp_path, capsys):
    from sleepfuse.cli.main import main

    assert main(["batch", str(study), "--out", str(tmp_path / "out"), "--no-cache"]) == 0
    err = capsys.readouterr().err
    assert f"{REVIEW_FILE}: line 3:" in err and "Traceback" not in err


def test_unreadable_or_headerless_review_file_is_one_error_and_no_decision(study):
    (study / REVIEW_FILE).write_bytes(b"\xff\xfe garbage \x00\x01")
    qc = QCLog()
    assert load_decisions(study, qc) == []
    assert [e.severity for e in qc] == ["error"]
    (study / REVIEW_FILE).write_text("who,when\nP01,2026-10-28\n")
    qc = QCLog()
    assert load_decisions(study, qc) == [] and "lacks the columns" in qc.entries[0].message


def test_saving_a_decision_keeps_lines_it_cannot_read(study):
    before = (study / REVIEW_FILE).read_text()
    record_decision(study, "P02", "2026-10-29", "psg", "exclude", "electrode off")
    after = (study / REVIEW_FILE).read_text()
    old_lines, new_lines = before.splitlines(), after.splitlines()
    assert new_lines[0] == HEADER.strip() + ",reviewer"  # an older file's header gains the new column
    kept = list(csv.reader(new_lines[1:len(old_lines)]))
    assert [k[:len(o)] for k, o in zip(kept, csv.reader(old_lines[1:]))] == list(csv.reader(old_lines[1:]))
    assert len(kept) == len(old_lines) - 1  # nothing the user wrote is lost, bad lines included
    last = list(csv.DictReader(after.splitlines()))[-1]
    assert (last["participant"], last["reason"]) == ("P02", "electrode off")


def test_workspace_opens_and_reports_the_review_file(study):
    from sleepfuse.run.session import Workspace

    ws = Workspace.load(study)
    _check_report(ws.qc.to_frame())
    row = ws.nights[(ws.nights.participant == "P01") & (ws.nights.night == "2026-10-28")
                    & (ws.nights.source == "actigraphy")]
    assert not bool(row.included.iloc[0])
    ws.decide("P02", "2026-10-29", "psg", "exclude", "electrode off")  # saving still works, no duplicate QC lines
    _check_report(ws.qc.to_frame())


def test_a_preloaded_study_reports_the_review_file_once(study):
    # run_study already read the review file into its QC log; wrapping the result must not read it in again
    from sleepfuse.run.engine import run_study
    from sleepfuse.run.session import Workspace

    result = run_study(study)
    _check_report(result.qc.to_frame())
    _check_report(Workspace.from_result(study, result).qc.to_frame())


@run_async
async def test_app_opens_a_study_with_a_bad_review_file(study):
    from sleepfuse.tui.app import create_app
    from sleepfuse.tui.screens.overview import OverviewScreen

    app = create_app(study)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(pilot)
        assert app.workspace is not None and isinstance(app.screen, OverviewScreen)
        _check_report(app.workspace.qc.to_frame())
