"""The actigraphy reader's fast path (plain files through pyarrow) gives the exact path's record.

sleepfuse.readers.actigraphy reads plain CSVs with pyarrow and everything
else with the careful line-by-line path; for any file both can read, the
record (start, epoch, counts, flags, problems) must be the same. Invented
counts only (seeded), written here; times from zoneinfo (IANA tz data, PEP 495).
"""

from __future__ import annotations

import datetime as dt
from zoneinfo import ZoneInfo

import numpy as np
import pytest

import sleepfuse.readers.actigraphy as act


def wall(start_utc: dt.datetime, n: int, epoch_s: int, tz: str) -> list[str]:
    z = ZoneInfo(tz)
    return [(start_utc + dt.timedelta(seconds=i * epoch_s)).astimezone(z).replace(tzinfo=None).isoformat()
            for i in range(n)]


def both(path, tz, monkeypatch, **kw):
    fast = act.read_actigraphy(path, tz, **kw)
    monkeypatch.setattr(act, "FAST_PATH", False)
    exact = act.read_actigraphy(path, tz, **kw)
    monkeypatch.setattr(act, "FAST_PATH", True)
    return fast, exact


def assert_same(a, b):
    assert a.start == b.start and a.epoch_s == b.epoch_s
    np.testing.assert_array_equal(a.counts, b.counts)
    for x, y in ((a.off_wrist, b.off_wrist), (a.marker, b.marker)):
        assert (x is None) == (y is None)
        if x is not None:
            np.testing.assert_array_equal(x, y)
    assert [(p.severity, p.message, p.time) for p in a.problems] == [(p.severity, p.message, p.time) for p in b.problems]


UTC = dt.timezone.utc
CASES = [
    # zone, UTC start, epochs, epoch_s: plain days, spring forward, fall back (IANA rules)
    ("Europe/Berlin", dt.datetime(2026, 5, 4, 10, 0, tzinfo=UTC), 2000, 30),
    ("America/Chicago", dt.datetime(2026, 3, 8, 0, 0, tzinfo=UTC), 1500, 30),
    ("America/Chicago", dt.datetime(2026, 11, 1, 0, 0, tzinfo=UTC), 1500, 60),
    ("Australia/Lord_Howe", dt.datetime(2026, 4, 4, 10, 0, tzinfo=UTC), 1500, 15),  # a 30-min DST change
]


@pytest.mark.parametrize("tz,start,n,epoch_s", CASES)
@pytest.mark.parametrize("flags", [False, True])
@pytest.mark.parametrize("damage", ["none", "gap", "duplicate", "backwards", "crlf"])
def test_fast_path_equals_exact_path(tmp_path, monkeypatch, tz, start, n, epoch_s, flags, damage):
    rng = np.random.default_rng(n + epoch_s)
    stamps = wall(start, n, epoch_s, tz)
    counts = rng.poisson(30, n).tolist()
    rows = [[s, str(c)] + ([str(int(rng.random() < 0.1)), str(int(rng.random() < 0.01))] if flags else [])
            for s, c in zip(stamps, counts)]
    if damage == "gap":
        del rows[100:140]
    elif damage == "duplicate":
        rows.insert(50, list(rows[50]))
    elif damage == "backwards":
        rows[70], rows[71] = rows[71], rows[70]
    header = ["timestamp", "counts"] + (["off_wrist", "marker"] if flags else [])
    end = "\r\n" if damage == "crlf" else "\n"
    path = tmp_path / "P01_wrist.csv"
    path.write_bytes((end.join(",".join(r) for r in [header, *rows]) + end).encode())
    fast, exact = both(path, tz, monkeypatch)
    assert_same(fast, exact)


@pytest.mark.parametrize("cell", ["00", " 1", "true", "", "2"])
def test_unusual_flag_values_take_the_exact_path(tmp_path, monkeypatch, cell):
    stamps = wall(dt.datetime(2026, 5, 4, 10, 0, tzinfo=UTC), 20, 60, "UTC")
    flags = ["0"] * 20
    flags[7] = cell
    path = tmp_path / "a.csv"
    path.write_text("timestamp,counts,off_wrist\n" + "".join(f"{s},5,{f}\n" for s, f in zip(stamps, flags)))
    fast, exact = both(path, "UTC", monkeypatch)
    assert_same(fast, exact)


@pytest.mark.parametrize("cell", ["", "x", "-3", "nan", "1e400", "2026-02-30T10:07:00", "2026-05-04T10:07:00Z"])
def test_unusual_cells_take_the_exact_path(tmp_path, monkeypatch, cell):
    stamps = wall(dt.datetime(2026, 5, 4, 10, 0, tzinfo=UTC), 20, 60, "UTC")
    counts = ["5"] * 20
    if cell.startswith("2026"):
        stamps[7] = cell
    else:
        counts[7] = cell
    path = tmp_path / "a.csv"
    path.write_text("timestamp,counts\n" + "".join(f"{s},{c}\n" for s, c in zip(stamps, counts)))
    fast, exact = both(path, "UTC", monkeypatch)
    assert_same(fast, exact)


def test_study_toml_column_names_and_missing_optional_column(tmp_path, monkeypatch):
    stamps = wall(dt.datetime(2026, 5, 4, 10, 0, tzinfo=UTC), 20, 60, "UTC")
    path = tmp_path / "a.csv"
    path.write_text("Time,Activity\n" + "".join(f"{s},{i}\n" for i, s in enumerate(stamps)))
    cols = {"timestamp": "time", "counts": "Activity", "off_wrist": "worn"}
    fast, exact = both(path, "UTC", monkeypatch, columns=cols)
    assert_same(fast, exact)
    assert any("'worn'" in p.message for p in fast.problems)
