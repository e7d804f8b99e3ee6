"""The review file records who decided and when, in the study's zone (issue 19.7)."""

from __future__ import annotations

import csv
import datetime as dt
from zoneinfo import ZoneInfo

from sleepfuse.study.review import REVIEW_FILE, load_decisions, record_decision


def test_reviewer_and_zone_offset_are_written(tmp_path):
    d = record_decision(tmp_path, "P01", "2026-10-31", "psg", "exclude", "electrode off", reviewer="A. Lind",
                        timezone="Australia/Lord_Howe")  # a half-hour offset (+10:30 or +11:00) shows the zone is used
    when = dt.datetime.fromisoformat(d.decided_at)
    assert when.utcoffset() == when.astimezone(ZoneInfo("Australia/Lord_Howe")).utcoffset()
    assert when.utcoffset() in (dt.timedelta(hours=10, minutes=30), dt.timedelta(hours=11))
    with open(tmp_path / REVIEW_FILE, newline="") as fh:
        row = next(csv.DictReader(fh))
    assert row["reviewer"] == "A. Lind" and row["decided_at"] == d.decided_at


def test_without_a_zone_the_time_is_utc_and_without_a_name_the_system_user(tmp_path, monkeypatch):
    import getpass

    monkeypatch.setattr(getpass, "getuser", lambda: "labtech3")
    d = record_decision(tmp_path, "P01", "2026-10-31", "psg", "include", "")
    assert d.reviewer == "labtech3" and d.decided_at.endswith("+00:00")


def test_a_file_written_before_the_reviewer_column_still_loads(tmp_path):
    (tmp_path / REVIEW_FILE).write_text("participant,night,source,decision,reason,decided_at\n"
                                        "P02,2026-10-28,diary,exclude,travel,2026-11-05T10:00:00+00:00\n")
    [d] = load_decisions(tmp_path)
    assert (d.participant, d.reason, d.reviewer) == ("P02", "travel", "")
    record_decision(tmp_path, "P02", "2026-10-28", "diary", "include", "", reviewer="B")
    with open(tmp_path / REVIEW_FILE, newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["reviewer"] for r in rows] == ["", "B"]  # the old line is kept, now with an empty reviewer
