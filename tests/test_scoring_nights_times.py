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


def _reference(t: pd.Timestamp) -> str:
    """pandas' Timestamp.round("s") of the UTC time, back in the zone, as datetime.isoformat writes it."""
    import datetime as dt

    if t.tz is None:
        return dt.datetime.isoformat(t.round("s"))
    return dt.datetime.isoformat(t.tz_convert("UTC").round("s").tz_convert(t.tz))


def test_iso_seconds_of_many_times_in_one_pass_is_pandas_rounding_and_isoformat():
    """Source: pandas ``Timestamp.round`` (half to even) and Python's ``datetime.isoformat``, time by time;
    mixed zones, naive times, DST changes (EU and US rules), half-second ties and an LMT offset
    (Berlin 1850, +00:53:28) in one call."""
    import numpy as np

    from sleepfuse.scoring.night_rows import iso_seconds

    rng = np.random.default_rng(7)
    times = []
    for tz in ("Europe/Berlin", "America/Chicago", "Australia/Lord_Howe", "UTC", None):
        base = pd.Timestamp("2026-03-01", tz=tz).value
        for ns in rng.integers(0, 300 * 86400 * 10**9, 150).tolist():
            ns -= ns % 500_000_000 if ns % 3 == 0 else 0  # some exact half seconds
            t = pd.Timestamp(base + ns, tz="UTC")
            times.append(t.tz_convert(tz) if tz else t.tz_localize(None))
    for text in ("2026-03-29 00:59:59.5", "2026-10-25 00:30:00.5", "2026-10-25 01:30:00.5"):  # around EU changes
        times.append(pd.Timestamp(text, tz="UTC").tz_convert("Europe/Berlin"))
    times.append(pd.Timestamp("1850-01-01 12:00:00.7", tz="Europe/Berlin"))
    got = iso_seconds(times)
    assert got == [_reference(t) for t in times]
    assert got[-1] == "1850-01-01T12:00:01+00:53:28"
