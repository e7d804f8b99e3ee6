"""The EDF+ annotation reader's bulk path gives the careful record-by-record path's result.

``_edfplus.read_annotations`` cuts every TAL out of the annotation signal at once
and reads the usual TAL shape with one pattern; ``read_annotations_careful``
calls ``parse_tals`` per data record, following the EDF+ TAL grammar
``+onset[\\x15duration]\\x14text\\x14...\\x00`` (Kemp & Olivan 2003,
Clin Neurophysiol 114:1755-1761, section 2.2). For any bytes both must give
the same annotations (in the same order), time-keeping onsets and notes.
Invented bytes only; no real recording.
"""

from __future__ import annotations

import datetime as dt
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


def assert_same(h: edfplus.EdfHeader, records: np.ndarray) -> edfplus.AnnotationSet:
    fast = edfplus.read_annotations(Path("x.edf"), h, records)
    careful = edfplus.read_annotations_careful(Path("x.edf"), h, records)
    assert fast.annotations == careful.annotations
    assert fast.notes == careful.notes
    np.testing.assert_array_equal(fast.record_onsets_s, careful.record_onsets_s)
    return fast


def test_spec_shaped_records_read_the_same_and_keep_time_keeping_onsets():
    # Time-keeping TAL first in every record, then stage TALs (EDF+ spec, section 2.2.4).
    per_record = [b"+0\x14\x14\x00+0\x1530\x14Sleep stage W\x14\x00",
                  b"+30\x14\x14\x00",
                  b"+60.5\x14\x14Recording note\x14\x00+61\x14lights off\x14second text\x14\x00",
                  b"+90\x14\x14\x00+90\x15\x14stage with empty duration\x14\x00"]
    h = header([64], len(per_record))
    out = assert_same(h, records_of([per_record], [64]))
    np.testing.assert_array_equal(out.record_onsets_s, [0.0, 30.0, 60.5, 90.0])
    assert [a.text for a in out.annotations] == ["Sleep stage W", "Recording note", "lights off", "second text",
                                                 "stage with empty duration"]
    assert out.annotations[0].duration_s == 30.0 and out.annotations[-1].duration_s is None
    assert out.notes == []


def test_malformed_and_keeperless_records_are_counted_like_the_careful_path():
    per_record = [b"+0\x14\x14\x00garbage\x00+1\x14ok\x14\x00",  # a malformed TAL between good ones
                  b"+30\x14not a keeper\x14\x00",  # first TAL has text: no time-keeping TAL
                  b"\x00\x00+60\x14\x14\x00",  # leading NULs
                  b"+9x\x14\x14\x00+90\x14\x14\x00",  # bad first TAL: the next good one keeps time
                  b"+120\n\x14\x14\x00",  # the careful number pattern accepts a trailing newline
                  b"+150\x14\x14+151\x14x\x14"]  # fills the record: no NUL at its end
    h = header([len(max(per_record, key=len))], len(per_record))
    out = assert_same(h, records_of([per_record], [h.record_bytes]))
    assert any("malformed" in n for n in out.notes) and any("time-keeping" in n for n in out.notes)


def test_two_annotation_signals_interleave_record_by_record():
    first = [b"+0\x14\x14\x00+0\x1530\x14Sleep stage 1\x14\x00", b"+30\x14\x14\x00+30\x14A\x14\x00"]
    second = [b"+5\x14B\x14\x00", b"+35\x14C\x14\x00+36\x14D\x14\x00"]
    h = header([40, 20], 2)
    out = assert_same(h, records_of([first, second], [40, 20]))
    assert [a.text for a in out.annotations] == ["Sleep stage 1", "B", "A", "C", "D"]


def test_no_annotation_signal_gives_contiguous_onsets():
    h = header([8], 3, labels=["Hypnogram"])
    out = assert_same(h, np.zeros((3, 8), dtype=np.uint8))
    np.testing.assert_array_equal(out.record_onsets_s, [0.0, 30.0, 60.0])


_PIECES = [b"+", b"-", b"0", b"3", b"30", b".", b".5", b"e1", b"\x15", b"\x14", b"\x00", b"\n", b" ",
           b"Sleep stage W", b"\xff\xfe", "é".encode(), b"x"]


@settings(max_examples=300, deadline=None)
@given(
    n_records=st.integers(1, 6),
    widths=st.lists(st.integers(0, 24).map(lambda k: 2 * k), min_size=1, max_size=3),
    data=st.data(),
)
def test_arbitrary_tal_like_bytes_read_the_same(n_records, widths, data):
    def block_bytes(width):
        tokens = st.lists(st.sampled_from(_PIECES), max_size=12).map(b"".join)
        return data.draw(st.lists(tokens.map(lambda b: b[:width]), min_size=n_records, max_size=n_records))

    blocks = [block_bytes(w) for w in widths]
    h = header(widths, n_records)
    if h.record_bytes == 0:
        return
    assert_same(h, records_of(blocks, widths))
