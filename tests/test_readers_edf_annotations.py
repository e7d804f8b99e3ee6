"""EDF+ annotation signals read over all data records at once (``_edfplus.read_annotation_lists``).

Expected values are worked by hand from the EDF+ TAL grammar
``+onset[\\x15duration]\\x14text\\x14...\\x00``, the first TAL of each data record
being the time-keeping TAL with an empty first text (Kemp & Olivan 2003, Clin
Neurophysiol 114:1755-1761, section 2.2). Whole files are checked against
pyedflib and MNE in tests/test_readers_edf.py. Invented bytes only.
"""

from __future__ import annotations

import datetime as dt
import math
from pathlib import Path

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from sleepfuse.readers import _edfplus as edfplus


def header(widths: list[int], n_records: int, labels: list[str] | None = None) -> edfplus.EdfHeader:
    """A header for records holding one signal per entry of ``widths`` (bytes per record)."""
    labels = labels or [edfplus.ANNOTATION_LABEL] * len(widths)
    signals, offset = [], 0
    for label, width in zip(labels, widths):
        signals.append(edfplus.SignalHeader(label, -1.0, 1.0, -32768, 32767, n_samples=width // 2, offset=offset))
        offset += width
    return edfplus.EdfHeader(dt.datetime(2031, 3, 4, 22, 0, 0), "EDF+C", 256 * (1 + len(widths)), n_records, 30.0,
                             offset, tuple(signals))


def records_of(blocks: list[list[bytes]], widths: list[int]) -> np.ndarray:
    """Data records (n_records × record bytes) from per-record byte strings of each signal, NUL-padded."""
    rows = []
    for per_signal in zip(*blocks):
        rows.append(b"".join(raw[:w].ljust(w, b"\x00") for raw, w in zip(per_signal, widths)))
    return np.frombuffer(b"".join(rows), dtype=np.uint8).reshape(len(rows), sum(widths))


def read(h, records):
    found = edfplus.read_annotation_lists(Path("x.edf"), h, records)
    return list(zip(found.onsets_s, found.durations_s, found.texts)), found


def test_time_keeping_tals_give_record_onsets_and_other_texts_are_annotations():
    per_record = [b"+0\x14\x14\x00+0\x1530\x14Sleep stage W\x14\x00",
                  b"+30\x14\x14\x00",
                  b"+60.5\x14\x14Recording note\x14\x00+61\x14lights off\x14second text\x14\x00",
                  b"+90\x14\x14\x00+90\x15\x14stage with empty duration\x14\x00"]
    h = header([64], len(per_record))
    annotations, found = read(h, records_of([per_record], [64]))
    np.testing.assert_array_equal(found.record_onsets_s, [0.0, 30.0, 60.5, 90.0])
    assert annotations == [(0.0, 30.0, "Sleep stage W"), (60.5, None, "Recording note"),
                           (61.0, None, "lights off"), (61.0, None, "second text"),
                           (90.0, None, "stage with empty duration")]
    assert found.notes == []


def test_malformed_tals_are_skipped_and_counted_never_read():
    per_record = [b"+0\x14\x14\x00garbage\x00+1\x14ok\x14\x00",  # a malformed TAL between good ones
                  b"+30\x14not a keeper\x14\x00",  # first TAL has text: no time-keeping TAL
                  b"\x00\x00+60\x14\x14\x00",  # leading NULs
                  b"+9x\x14\x14\x00+90\x14\x14\x00",  # bad first TAL: the next good one keeps time
                  b"+120\n\x14\x14\x00",  # a newline is no part of a TAL number
                  b"+150\x14\x14+151\x14x\x14"]  # fills the record: no NUL, one TAL "+150..x" with texts
    h = header([len(max(per_record, key=len))], len(per_record))
    annotations, found = read(h, records_of([per_record], [h.record_bytes]))
    assert annotations == [(1.0, None, "ok"), (30.0, None, "not a keeper"), (150.0, None, "+151"),
                           (150.0, None, "x")]
    np.testing.assert_array_equal(found.record_onsets_s[[0, 2, 3, 5]], [0.0, 60.0, 90.0, 150.0])
    assert math.isnan(found.record_onsets_s[1]) and math.isnan(found.record_onsets_s[4])
    assert found.notes == ["malformed annotation lists (TALs) skipped: 3",
                           "data records without the EDF+ time-keeping annotation: 1"]


def test_two_annotation_signals_interleave_record_by_record():
    first = [b"+0\x14\x14\x00+0\x1530\x14Sleep stage 1\x14\x00", b"+30\x14\x14\x00+30\x14A\x14\x00"]
    second = [b"+5\x14B\x14\x00", b"+35\x14C\x14\x00+36\x14D\x14\x00"]
    h = header([40, 20], 2)
    annotations, found = read(h, records_of([first, second], [40, 20]))
    assert [a[2] for a in annotations] == ["Sleep stage 1", "B", "A", "C", "D"]
    np.testing.assert_array_equal(found.record_onsets_s, [0.0, 30.0])


def test_no_annotation_signal_gives_contiguous_onsets():
    h = header([8], 3, labels=["Hypnogram"])
    annotations, found = read(h, np.zeros((3, 8), dtype=np.uint8))
    assert annotations == []
    np.testing.assert_array_equal(found.record_onsets_s, [0.0, 30.0, 60.0])


def test_block_reader_follows_the_same_grammar():
    # parse_tals reads one block: the spec's forms, and the malformed ones counted.
    tals, bad = edfplus.parse_tals(b"+0\x14\x14\x00-1.5\x152\x14a\x14b\x14\x00+3\x14\x00+.5\x14\x00+4\x15x\x14\x00+\x14\x00")
    assert tals == [(0.0, None, [""]), (-1.5, 2.0, ["a", "b"]), (3.0, None, []), (0.5, None, [])]
    assert bad == 2


_PIECES = [b"+", b"-", b"0", b"3", b"30", b".", b".5", b"e1", b"\x15", b"\x14", b"\x00", b"\n", b" ",
           b"Sleep stage W", b"\xff\xfe", "é".encode(), b"x"]


@settings(max_examples=200, deadline=None)
@given(n_records=st.integers(1, 6), width=st.integers(1, 24).map(lambda k: 2 * k), data=st.data())
def test_arbitrary_bytes_give_annotations_or_counted_problems_record_by_record(n_records, width, data):
    # Reading the whole signal at once equals reading each record's block with parse_tals
    # (the same grammar, one record at a time), whatever the bytes.
    per_record = [b"".join(data.draw(st.lists(st.sampled_from(_PIECES), max_size=8))) for _ in range(n_records)]
    h = header([width], n_records)
    records = records_of([per_record], [width])
    annotations, found = read(h, records)
    expected, bad, missing = [], 0, 0
    for r in range(n_records):
        tals, n_bad = edfplus.parse_tals(records[r].tobytes())
        bad += n_bad
        for t, (onset, duration, texts) in enumerate(tals):
            if t == 0:
                if texts and texts[0] == "":
                    assert found.record_onsets_s[r] == onset
                    texts = texts[1:]
                else:
                    missing += 1
            expected += [(onset, duration, text) for text in texts if text]
    assert annotations == expected
    assert (f"malformed annotation lists (TALs) skipped: {bad}" in found.notes) == (bad > 0)
    assert (f"data records without the EDF+ time-keeping annotation: {missing}" in found.notes) == (missing > 0)
