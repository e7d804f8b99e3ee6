"""CSV dialects a lab's files come in (issue 14): each variant written by the test, read the same way.

The reference for every file is the same counts read from the plain contract
file; instants are cross-checked against ``datetime.strptime`` with explicit
formats (Python standard library). Invented values only.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from sleepfuse.model.errors import ReadError
from sleepfuse.readers._dialect import decode, sniff_delimiter, split_lines
from sleepfuse.readers.actigraphy import read_actigraphy

TZ = "Europe/Berlin"
WALL = [dt.datetime(2026, 5, 14, 22, 0) + dt.timedelta(seconds=30 * i) for i in range(6)]
COUNTS = [0, 12, 7, 130, 5, 0]


def plain(tmp_path):
    path = tmp_path / "plain.csv"
    path.write_text("timestamp,counts\n" + "".join(f"{t:%Y-%m-%dT%H:%M:%S},{c}\n" for t, c in zip(WALL, COUNTS)))
    return read_actigraphy(path, TZ)


def write(tmp_path, name, lines, *, encoding="utf-8", newline="\n"):
    path = tmp_path / name
    path.write_bytes(newline.join(lines + [""]).encode(encoding))
    return path


def same_record(rec, ref):
    assert rec.start == ref.start and rec.epoch_s == ref.epoch_s
    np.testing.assert_array_equal(rec.counts, ref.counts)


ISO_ROWS = [f"{t:%Y-%m-%dT%H:%M:%S}" for t in WALL]


@pytest.mark.parametrize("delimiter,name", [(",", "comma"), (";", "semicolon"), ("\t", "tab"), ("|", "pipe")])
def test_each_delimiter(tmp_path, delimiter, name):
    path = write(tmp_path, "a.csv", [f"timestamp{delimiter}counts"] + [f"{t}{delimiter}{c}" for t, c in zip(ISO_ROWS, COUNTS)])
    same_record(read_actigraphy(path, TZ), plain(tmp_path))
    assert sniff_delimiter(path.read_text().splitlines()) == delimiter


def test_decimal_comma(tmp_path):
    path = write(tmp_path, "a.csv", ["timestamp;counts"] + [f"{t};{c},0" for t, c in zip(ISO_ROWS, COUNTS)])
    rec = read_actigraphy(path, TZ)
    same_record(rec, plain(tmp_path))
    assert "decimal comma" in rec.detected["dialect"]


@pytest.mark.parametrize("encoding,label", [("utf-8", "ascii"), ("utf-8-sig", "utf-8 with BOM"),
                                            ("utf-16", "utf-16"), ("utf-16-le", "utf-16"), ("latin-1", "latin-1")])
def test_each_encoding(tmp_path, encoding, label):
    note = "Gerät: Handgelenk ñ" if encoding != "utf-8" else "device: wrist"
    path = write(tmp_path, "a.csv", [f"# {note}", "timestamp,counts"] + [f"{t},{c}" for t, c in zip(ISO_ROWS, COUNTS)],
                 encoding=encoding)
    rec = read_actigraphy(path, TZ)
    same_record(rec, plain(tmp_path))
    assert rec.detected["dialect"].startswith(label)
    assert decode(path.read_bytes())[1] == label


@pytest.mark.parametrize("newline,label", [("\r\n", "CRLF"), ("\r", "CR"), ("\n", "LF")])
def test_line_ends(tmp_path, newline, label):
    path = write(tmp_path, "a.csv", ["timestamp;counts"] + [f"{t};{c}" for t, c in zip(ISO_ROWS, COUNTS)], newline=newline)
    rec = read_actigraphy(path, TZ)
    same_record(rec, plain(tmp_path))
    assert split_lines(path.read_bytes().decode())[1] == label and f"{label} line ends" in rec.detected["dialect"]


def test_metadata_lines_above_and_summary_lines_below(tmp_path):
    lines = ["Export of an invented recording", "Participant: X1", "Epoch length: 30", "",
             "timestamp,counts"] + [f"{t},{c}" for t, c in zip(ISO_ROWS, COUNTS)] + ["", "Total,154", "End of file"]
    rec = read_actigraphy(write(tmp_path, "a.csv", lines), TZ)
    same_record(rec, plain(tmp_path))
    assert "header on line 5" in rec.detected["dialect"] and "2 summary line(s)" in rec.detected["dialect"]
    assert rec.detected["epoch from header"] == "30 s"
    info = [p for p in rec.problems if p.severity == "info"]
    assert len(info) == 1 and "read as" in info[0].message  # the dialect goes to the QC log as info
    assert not [p for p in rec.problems if p.severity != "info"]


def test_detection_is_deterministic(tmp_path):
    lines = ["Recording; invented", "Datum;Uhrzeit;Aktivität"] + [
        f"{t:%d.%m.%Y};{t:%H:%M:%S};{c},0" for t, c in zip(WALL, COUNTS)]
    path = write(tmp_path, "a.csv", lines, encoding="latin-1", newline="\r\n")
    # 'Aktivität' is no name we know: counts must be mapped, and the message says so
    with pytest.raises(ReadError, match="counts"):
        read_actigraphy(path, TZ)
    first = read_actigraphy(path, TZ, columns={"date": "Datum", "time": "Uhrzeit", "counts": "Aktivität"})
    second = read_actigraphy(path, TZ, columns={"date": "Datum", "time": "Uhrzeit", "counts": "Aktivität"})
    assert first.detected == second.detected
    same_record(first, plain(tmp_path))


def test_plain_contract_file_logs_nothing_new(tmp_path):
    rec = plain(tmp_path)
    assert rec.problems == []


def test_na_counts_are_missing_like_empty_cells(tmp_path):
    na = write(tmp_path, "na.csv", ["timestamp;counts"] + [f"{t};{'NA' if i == 2 else c}" for i, (t, c) in
                                                           enumerate(zip(ISO_ROWS, COUNTS))])
    empty = write(tmp_path, "empty.csv", ["timestamp;counts"] + [f"{t};{'' if i == 2 else c}" for i, (t, c) in
                                                                 enumerate(zip(ISO_ROWS, COUNTS))])
    a, b = read_actigraphy(na, TZ), read_actigraphy(empty, TZ)
    np.testing.assert_array_equal(a.counts, b.counts)
    assert np.isnan(a.counts[2]) and [p.message for p in a.problems if p.severity == "warning"] == [
        p.message for p in b.problems if p.severity == "warning"]
