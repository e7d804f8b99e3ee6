"""The EDF reader split into modules keeps its names and lookups, and the counted time-keeping
shortcut reads what the general time-keeping path reads, exactly.

``edf.py`` and ``_edfplus.py`` were split into ``_edfheader``, ``_edftals``, ``_edftimes``,
``_edfstages`` and ``_edfsignal``; every name the tests and the package use stays importable
where it was, and the module attributes the equivalence tests patch are still looked up at call
time (else those tests would compare the fast path with itself).

``_edftals._counted_keepers`` reads the time-keeping TALs ``+0``, ``+d``, ``+2d``, ... of a
contiguous EDF+ file (the TAL grammar of the EDF+ specification, Kemp & Olivan 2003, Clin
Neurophysiol 114:1755-1761, section 2.2.4) by comparing the record heads with the expected
bytes; it is checked against the general checks and ``float`` reading of ``_plain_keepers``
(the shortcut switched off) and against ``read_annotations_careful`` (``parse_tals`` record
by record). Invented bytes and recordings only.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from edf_builders import tal, write_edf_plus, write_signal_hypnogram
from sleepfuse.model.errors import ReadError
from sleepfuse.readers import _edfheader, _edfplus, _edfsignal, _edfstages, _edftals, _edftimes, edf

START = dt.datetime(2031, 3, 4, 22, 16, 52)


# --- the split: names and call-time lookups ---------------------------------------------------------


def test_names_stay_importable_where_they_were():
    assert edf.__all__ == ["read_hypnogram", "DEFAULT_STAGE_LABELS", "DEFAULT_SIGNAL_CODES", "stage_code"]
    for name in edf.__all__:
        assert hasattr(edf, name)
    moved = {
        edf: {_edftimes: ["MAX_RECORDING_DAYS", "_after", "_lights", "_local_start", "_record_onsets", "_seconds"],
              _edfstages: ["_classify", "_max_epochs", "_stage_grid"],
              _edfsignal: ["find_hypnogram_signal", "signal_stages"]},
        _edfplus: {_edfheader: ["ANNOTATION_LABEL", "EdfHeader", "SignalHeader", "patient_tokens", "read_header"],
                   _edftals: ["parse_tals", "_tal_number", "_plain_keepers", "_keeper_values", "_tals_after_keepers",
                              "_signal_annotations"]},
    }
    for module, sources in moved.items():
        for source, names in sources.items():
            for name in names:
                assert getattr(module, name) is getattr(source, name), (module.__name__, name)
    for name in ("read_hypnogram", "_read_header_bytes", "WHOLE_FILE_BYTES", "_hypnogram"):
        assert hasattr(edf, name)
    for name in ("Annotation", "AnnotationSet", "AnnotationLists", "data_records", "read_annotations",
                 "read_annotation_lists", "read_annotations_careful", "physical_samples"):
        assert getattr(_edfplus, name).__module__ == _edfplus.__name__


def test_patched_module_attributes_are_looked_up_at_call_time(tmp_path, monkeypatch):
    # tests/test_readers_edf_speed_equivalence.py swaps these for the careful paths.
    path = write_edf_plus(tmp_path / "P01.edf", start=START, record_duration_s=30.0,
                          annotations=[(0.0, 60.0, "Sleep stage W"), (60.0, 30.0, "Sleep stage N2")])
    calls = []
    careful_lists, local_start = _edfplus.read_annotation_lists, edf._local_start
    monkeypatch.setattr(_edfplus, "read_annotation_lists", lambda *a: calls.append("lists") or careful_lists(*a))
    monkeypatch.setattr(edf, "_local_start", lambda *a: calls.append("start") or local_start(*a))
    edf.read_hypnogram(path, "Europe/Berlin")
    assert calls == ["lists", "start"]
    assert edf._read_header_bytes(path)[2] is not None
    monkeypatch.setattr(edf, "WHOLE_FILE_BYTES", 0)
    assert edf._read_header_bytes(path)[2] is None  # the large-file branch


# --- counted time-keeping TALs ---------------------------------------------------------------------


def block_of(records: list[bytes], width: int) -> np.ndarray:
    return np.frombuffer(b"".join(r[:width].ljust(width, b"\x00") for r in records),
                         dtype=np.uint8).reshape(len(records), width)


def counted(n: int, d: int) -> list[bytes]:
    return [b"+%d\x14\x14\x00" % (i * d) for i in range(n)]


def general_keepers(block: np.ndarray, monkeypatch):
    with monkeypatch.context() as m:
        m.setattr(_edftals, "_counted_keepers", lambda masked: None)
        return _edftals._plain_keepers(block)


def assert_same_keepers(block: np.ndarray, monkeypatch) -> bool:
    """_plain_keepers with and without the shortcut: the same result, bit for bit; True if it was taken."""
    taken = []
    real = _edftals._counted_keepers
    with monkeypatch.context() as m:
        m.setattr(_edftals, "_counted_keepers", lambda masked: taken.append(real(masked)) or taken[-1])
        fast = _edftals._plain_keepers(block)
    slow = general_keepers(block, monkeypatch)
    if fast is None or slow is None:
        assert fast is None and slow is None
    else:
        for a, b in zip(fast, slow):
            assert a.dtype == b.dtype and a.shape == b.shape and a.tobytes() == b.tobytes()
    return any(t is not None for t in taken)


def careful_header(width: int, n: int) -> _edfplus.EdfHeader:
    signal = _edfplus.SignalHeader(_edfplus.ANNOTATION_LABEL, -1.0, 1.0, -32768, 32767, n_samples=width // 2, offset=0)
    return _edfplus.EdfHeader(START, "EDF+C", 512, n, 60.0, width, (signal,))


def assert_reads_like_careful(block: np.ndarray):
    n, width = block.shape
    h = careful_header(width, n)
    fast = _edfplus.read_annotations(Path("x.edf"), h, block)
    careful = _edfplus.read_annotations_careful(Path("x.edf"), h, block)
    assert fast.annotations == careful.annotations and fast.notes == careful.notes
    assert fast.record_onsets_s.tobytes() == careful.record_onsets_s.tobytes()


@pytest.mark.parametrize("n, d, width", [(2, 1, 8), (472, 60, 64), (1025, 30, 40), (20_000, 1, 16),
                                          (3, 999_999_999, 32), (70_000, 1, 16)])
def test_counted_keepers_take_the_shortcut_and_read_the_same(n, d, width, monkeypatch):
    records = counted(n, d)
    records[1] += tal(d + 0.5, 30, ["Sleep stage N2"])
    block = block_of(records, width)
    taken = assert_same_keepers(block, monkeypatch)
    assert taken == (n <= _edftals._COUNTED_MAX)  # more records than that: the general path alone
    onsets, rows, _ = _edftals._plain_keepers(block)
    assert onsets.tolist() == [float(i * d) for i in range(n)] and rows.tolist() == [1]
    if n <= 2000:
        assert_reads_like_careful(block)


@pytest.mark.parametrize("change", [
    (0, b"+00\x14\x14\x00"), (0, b"-0\x14\x14\x00"), (0, b"+0.0\x14\x14\x00"), (0, b"0\x14\x14\x00"),
    (1, b"+060\x14\x14\x00"), (1, b"+60.0\x14\x14\x00"), (1, b"+60\x14\x14\x14\x00"), (1, b"+60\x14\x00"),
    (2, b"+121\x14\x14\x00"), (2, b"+12\x14\x14\x00"), (2, b"+1200\x14\x14\x00"), (5, b"+300.5\x14\x14\x00"),
    (9, b"+540\x14\x14note\x14\x00"), (9, b"+540\x1530\x14\x14\x00"), (9, b"\x00+540\x14\x14\x00"),
    (9, b"+540\x14\x14\x01"), (9, b""), (9, b"+5\x0040\x14\x14\x00"), (4, b"+2.4e2\x14\x14\x00"),
])
def test_near_misses_read_like_the_general_path(change, monkeypatch):
    records = counted(10, 60)
    i, raw = change
    records[i] = raw
    block = block_of(records, 24)
    assert not assert_same_keepers(block, monkeypatch)
    assert_reads_like_careful(block)


def test_rows_that_do_not_fit_the_window_never_match():
    # A TAL "+%d\x14\x14" of 14 bytes needs its NUL at byte 15 of a 14-byte window: that row is 0xFF.
    d = 10 ** 8
    heads = np.frombuffer(_edftals._counted_heads(d, 14, 1024), dtype=np.uint8).reshape(1024, 14)
    fits = [len(b"+%d\x14\x14" % (i * d)) < 14 for i in range(1024)]
    assert fits[:10] == [True] * 10 and not all(fits)
    assert ((heads == 0xFF).all(axis=1) == np.logical_not(fits)).all()
    for i in np.flatnonzero(fits).tolist():
        assert heads[i].tobytes() == (b"+%d\x14\x14" % (i * d)).ljust(14, b"\x00")


_NUMBER_BYTES = st.sampled_from([b"0", b"1", b"5", b"9", b"+", b"-", b".", b"\x14", b"\x00", b"\x15", b"x"])


@st.composite
def keeper_blocks(draw):
    n = draw(st.integers(1, 160))
    d = draw(st.sampled_from([1, 2, 30, 60, 7, 10 ** 6, 999_999_999]))
    width = draw(st.integers(4, 48))
    records = counted(n, d)
    for _ in range(draw(st.integers(0, 3))):  # a few records changed
        i = draw(st.integers(0, n - 1))
        kind = draw(st.sampled_from(["bytes", "tail", "number"]))
        if kind == "bytes":
            records[i] = b"".join(draw(st.lists(_NUMBER_BYTES, max_size=12)))
        elif kind == "tail":
            records[i] += draw(st.sampled_from([tal(1.5, None, ["Lights off"]), b"\x00\x00junk\x00", b"x"]))
        else:
            value = draw(st.sampled_from([i * d + 1, i * d - 1, 0, i * d * 10, -(i * d)]))
            records[i] = b"%+d\x14\x14\x00" % value
    return block_of(records, width)


@settings(max_examples=400, deadline=None)
@given(block=keeper_blocks())
def test_random_keeper_blocks_read_like_the_general_path(block):
    with pytest.MonkeyPatch.context() as mp:
        assert_same_keepers(block, mp)
    assert_reads_like_careful(block)


# --- whole files: the shortcut on and off ------------------------------------------------------------


def outcome(path, **options):
    try:
        h = edf.read_hypnogram(path, "Europe/Berlin", **options)
    except ReadError as exc:
        return ("error", str(exc))
    stamp = lambda t: None if t is None else (repr(t), t.value, t.unit, t.fold)  # noqa: E731
    return (stamp(h.record_start), stamp(h.start), h.epoch_s, h.stages.dtype.str, h.stages.tobytes(),
            stamp(h.lights_off), stamp(h.lights_on), list(h.unknown_labels.items()),
            [(p.severity, p.message, stamp(p.time), p.night) for p in h.problems], h.sha256, h.path)


def night(n_epochs=40, start_s=0.0):
    stages = ["Sleep stage W", "Sleep stage N1", "Sleep stage N2", "Sleep stage N3", "Sleep stage R"]
    out, t = [], start_s
    for i in range(n_epochs):
        out.append((t, 30.0 * (1 + i % 3), stages[i % 5]))
        t += 30.0 * (1 + i % 3)
    return out


def test_files_read_the_same_with_and_without_the_shortcut(tmp_path, monkeypatch):
    files = {
        "P01.edf": dict(start=START, record_duration_s=60.0, annotation_bytes=96,
                        annotations=[*night(), (559.946, None, "Lights off"), (2300.5, None, "Lights on")]),
        "P02.edf": dict(start=START, record_duration_s=30.0, annotations=night(20)),
        "P03.edf": dict(start=START.replace(microsecond=394_531), record_duration_s=30.0,
                        annotations=night(20, 0.394531)),  # "+0.394531": not counted
        "P04.edf": dict(start=START, record_duration_s=2.5, annotations=night(4)),  # "+2.5": not counted
        "P05.edf": dict(start=START, edf_type="D", record_duration_s=30.0, record_onsets_s=[0.0, 30.0, 600.0],
                        annotations=[(0.0, 30.0, "Sleep stage W"), (30.0, 30.0, "Sleep stage N2"),
                                     (600.0, 30.0, "Sleep stage N3")]),  # a gap: not counted
    }
    paths = [write_edf_plus(tmp_path / name, **spec) for name, spec in files.items()]
    paths.append(write_signal_hypnogram(tmp_path / "P06.edf", start=START, codes=[0, 1, 2, 2, 3, 5],
                                        annotations=[(0.0, None, "Lights off")]))
    real, taken = _edftals._counted_keepers, {}
    for path in paths:
        hits = taken.setdefault(path.name, [])
        monkeypatch.setattr(_edftals, "_counted_keepers", lambda m: hits.append(real(m) is not None) or real(m))
        fast = outcome(path)
        monkeypatch.setattr(_edftals, "_counted_keepers", lambda m: None)
        assert outcome(path) == fast, path.name
        assert fast[0] != "error", fast
    assert {name: any(hits) for name, hits in taken.items()} == {
        "P01.edf": True, "P02.edf": True, "P03.edf": False, "P04.edf": False, "P05.edf": False, "P06.edf": True}
