"""Window times in nights.csv: whole seconds with the offset, never float noise (issue 15.14)."""

from __future__ import annotations

import re
from pathlib import Path

import pandas as pd

from sleepfuse.run.engine import run_study
from sleepfuse.scoring.night_rows import _iso

SAMPLE = Path(__file__).resolve().parents[1] / "sample_records"
STAMP = re.compile(r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d[+-]\d\d:\d\d$")


def test_fractions_are_rounded_to_the_second():
    t = pd.Timestamp("2026-10-28 06:47:30.430999999", tz="America/Chicago")
    assert _iso(t) == "2026-10-28T06:47:30-05:00"
    assert _iso(pd.Timestamp("2026-10-28 06:47:30.5", tz="UTC")) == "2026-10-28T06:47:30+00:00"  # half to even
    # the repeated hour of the DST change (second 01:30, CST): rounded in UTC, the offset kept
    repeated = pd.Timestamp("2026-11-01 07:30:00.6", tz="UTC").tz_convert("America/Chicago")
    assert _iso(repeated) == "2026-11-01T01:30:01-06:00"


def test_every_window_time_of_the_demo_study_is_whole_seconds():
    nights = run_study(SAMPLE, keep_detail=False).nights
    stamps = [s for col in ("window_start", "window_end") for s in nights[col] if s]
    assert stamps and all(STAMP.match(s) for s in stamps), [s for s in stamps if not STAMP.match(s)][:3]
