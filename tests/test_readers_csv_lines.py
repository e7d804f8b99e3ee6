"""Blank lines and odd line ends keep plain CSVs off the pyarrow fast path, so line numbers stay exact.

``_csvtext.read_fast_columns`` skips its two-byte scans for LF-LF when a typed
(non-string) column is read: pyarrow reads a blank line as a row of empty cells,
null in such a column, and the null is rejected. These tests pin that down for
blank lines anywhere and for CR line ends (common practice: RFC 4180 allows
CRLF; a lone CR is an old-Mac line end), and check that the actigraphy record
is then the exact path's. Invented counts only.
"""

from __future__ import annotations

import pyarrow as pa
import pytest

import sleepfuse.readers.actigraphy as act
from sleepfuse.readers._csvtext import read_fast_columns

ROWS = ["timestamp,counts,off_wrist", "2026-05-04T10:00:00,3,0", "2026-05-04T10:00:30,4,0",
        "2026-05-04T10:01:00,5,1", "2026-05-04T10:01:30,6,0"]
TYPED = {"timestamp": pa.timestamp("us"), "counts": pa.float64()}


def text(rows: list[str], end: str = "\n") -> bytes:
    return (end.join(rows) + end).encode()


BLANKED = {
    "blank line in the middle": text(ROWS[:3] + [""] + ROWS[3:]),
    "blank line after the header": text(ROWS[:1] + [""] + ROWS[1:]),
    "blank line at the end": text(ROWS) + b"\n",
    "two blank lines": text(ROWS[:2] + ["", ""] + ROWS[2:]),
    "CRLF blank line": text(ROWS[:3] + [""] + ROWS[3:], "\r\n"),
    "LF blank line in a CRLF file": text(ROWS, "\r\n").replace(b"\r\n2026-05-04T10:01:00", b"\r\n\n2026-05-04T10:01:00"),
    "lone CR": text(ROWS).replace(b"\n2026-05-04T10:01:00", b"\r2026-05-04T10:01:00"),
}


def test_plain_file_takes_the_fast_path():
    got = read_fast_columns(text(ROWS), TYPED, {"off_wrist": pa.string()})
    assert got is not None and list(got[1]["counts"]) == [3.0, 4.0, 5.0, 6.0]
    assert read_fast_columns(text(ROWS, "\r\n"), TYPED) is not None


@pytest.mark.parametrize("name", list(BLANKED))
def test_blank_lines_and_odd_line_ends_leave_the_fast_path(name):
    assert read_fast_columns(BLANKED[name], TYPED, {"off_wrist": pa.string()}) is None


@pytest.mark.parametrize("name", ["blank line in the middle", "blank line at the end"])
def test_string_only_columns_still_scan_for_blank_lines(name):
    assert read_fast_columns(text(ROWS), {"off_wrist": pa.string()}) is not None
    assert read_fast_columns(BLANKED[name], {"off_wrist": pa.string()}) is None


@pytest.mark.parametrize("name", [n for n in BLANKED if n != "lone CR"])
def test_actigraphy_with_blank_lines_is_read_by_the_exact_path(tmp_path, monkeypatch, name):
    path = tmp_path / "P01_wrist.csv"
    path.write_bytes(BLANKED[name])
    fast = act.read_actigraphy(path, "Europe/Berlin")
    monkeypatch.setattr(act, "FAST_PATH", False)
    exact = act.read_actigraphy(path, "Europe/Berlin")
    assert fast.start == exact.start and list(fast.counts) == list(exact.counts) == [3.0, 4.0, 5.0, 6.0]
    assert list(fast.off_wrist) == list(exact.off_wrist)
    assert [(p.severity, p.message) for p in fast.problems] == [(p.severity, p.message) for p in exact.problems]
