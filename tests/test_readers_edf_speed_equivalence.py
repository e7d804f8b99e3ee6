"""The fast paths of the EDF+ hypnogram reader give the careful paths' results, exactly.

``_edfplus._plain_keepers`` reads the time-keeping TAL of every data record at once and
``_edfplus._tals_after_keepers`` the TALs after them in one pass; ``edf._local_start``
builds the header start time in one step; ``edf._stage_grid`` fills the epochs without
ranking the stage rows when no epoch is covered twice; ``edf._read_header_bytes`` reads with
``os.read``. Each is compared with the reference it stands in for: ``read_annotations_careful``
(``parse_tals`` record by record, after the TAL grammar of the EDF+ specification, Kemp &
Olivan 2003, Clin Neurophysiol 114:1755-1761, section 2.2), ``sleepfuse.model.clock.localize``,
a straightforward epoch-by-epoch painting of the stage rows (the rule in the
``read_hypnogram`` docstring), and ``open(path, "rb").read()``.
Invented bytes and recordings only.
"""

from __future__ import annotations

import datetime as dt
import itertools
import math
import re
from collections import defaultdict
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from edf_builders import tal, write_edf_plus, write_signal_hypnogram
from sleepfuse.model.errors import ReadError
from sleepfuse.readers import _edfplus as edfplus
from sleepfuse.readers import edf
from sleepfuse.readers.edf import read_hypnogram
from sleepfuse.model.stages import Stage
from sleepfuse.model.clock import localize

START = dt.datetime(2031, 3, 4, 22, 16, 52)


# --- helpers -------------------------------------------------------------------------------------


def header(widths: list[int], n_records: int) -> edfplus.EdfHeader:
    """A header for records holding one annotation signal per entry of ``widths`` (bytes per record)."""
    signals, offset = [], 0
    for width in widths:
        signals.append(edfplus.SignalHeader(edfplus.ANNOTATION_LABEL, -1.0, 1.0, -32768, 32767,
                                            n_samples=width // 2, offset=offset))
        offset += width
    return edfplus.EdfHeader(START, "EDF+C", 256 * (1 + len(widths)), n_records, 60.0, offset, tuple(signals))


def records_of(blocks: list[list[bytes]], widths: list[int]) -> np.ndarray:
    """Data records from per-record byte strings of each signal, cut or NUL-padded to its width."""
    rows = [b"".join(raw[:w].ljust(w, b"\x00") for raw, w in zip(per_signal, widths)) for per_signal in zip(*blocks)]
    return np.frombuffer(b"".join(rows), dtype=np.uint8).reshape(len(rows), sum(widths))


def assert_same_annotations(h: edfplus.EdfHeader, records: np.ndarray) -> edfplus.AnnotationSet:
    fast = edfplus.read_annotations(Path("x.edf"), h, records)
    careful = edfplus.read_annotations_careful(Path("x.edf"), h, records)
    assert fast.annotations == careful.annotations
    assert fast.notes == careful.notes
    np.testing.assert_array_equal(fast.record_onsets_s, careful.record_onsets_s)
    assert np.signbit(fast.record_onsets_s).tolist() == np.signbit(careful.record_onsets_s).tolist()  # -0.0
    lists = edfplus.read_annotation_lists(Path("x.edf"), h, records)
    assert list(map(edfplus.Annotation, lists.onsets_s, lists.durations_s, lists.texts)) == careful.annotations
    return fast


def keeper_block(block: list[bytes], width: int) -> np.ndarray:
    return np.frombuffer(b"".join(b[:width].ljust(width, b"\x00") for b in block), dtype=np.uint8).reshape(-1, width)


# --- the time-keeping TALs, read at once -----------------------------------------------------------


def test_float_reads_exactly_the_tal_numbers_made_of_digits_signs_and_dots():
    # The keeper fast path checks only that onset bytes are digits, "+", "-" and "." and lets
    # float() reject the rest; parse_tals uses _TAL_NUMBER (EDF+ spec 2.2.4: sign, digits, an
    # optional "." and fraction). Every string of up to 6 such bytes: same verdict, same value.
    agree = 0
    for size in range(7):
        for chars in itertools.product(b"09+-.", repeat=size):
            raw = bytes(chars)
            careful = edfplus._tal_number(raw)
            try:
                value = float(raw)
            except ValueError:
                assert careful is None, raw
                continue
            assert careful is not None and math.copysign(1, value) == math.copysign(1, careful), raw
            assert value == careful
            agree += 1
    assert agree > 500


PLAIN_KEEPERS = [b"+0\x14\x14\x00", b"+60\x14\x14\x00", b"+120\x14\x14\x00", b"+180.5\x14\x14\x00"]


def test_plain_time_keeping_tals_take_the_fast_path_and_read_like_the_careful_path():
    block = [PLAIN_KEEPERS[0] + tal(0, 1980, ["Sleep stage W"]), PLAIN_KEEPERS[1],
             PLAIN_KEEPERS[2] + tal(125.5, None, ["Lights off"]) + tal(150, 30, ["Sleep stage N2"]),
             PLAIN_KEEPERS[3] + b"\x00\x00\x00" + tal(181, 30, ["Sleep stage N3"])]  # NULs between TALs
    width = 64
    assert edfplus._plain_keepers(keeper_block(block, width)) is not None
    out = assert_same_annotations(header([width], 4), records_of([block], [width]))
    np.testing.assert_array_equal(out.record_onsets_s, [0.0, 60.0, 120.0, 180.5])
    assert [a.text for a in out.annotations] == ["Sleep stage W", "Lights off", "Sleep stage N2", "Sleep stage N3"]


@pytest.mark.parametrize("odd", [
    b"+240\x14\x14Recording starts\x14\x00",  # time-keeping TAL with a text of its own
    b"+240\x15\x14\x14\x00",  # an empty duration field
    b"+240\x1530\x14\x14\x00",  # a duration
    b"\x00+240\x14\x14\x00",  # a leading NUL
    b"+240\x14\x00",  # no empty text
    b"+24x0\x14\x14\x00",  # not a number
    b"+2.4.0\x14\x14\x00",  # not a number, made of number bytes
    b"+240\n\x14\x14\x00",  # _TAL_NUMBER accepts a final newline; float would too: not taken at once
    b"+1e5\x14\x14\x00",  # float reads an exponent; _TAL_NUMBER does not
    b"+2\x004\x14\x14\x00",  # a NUL inside the onset
    b"+24\x00\x14\x14\x00",  # a NUL just before the \x14
    b"\x14\x14\x00",  # no onset
    b"+" + b"1" * 40 + b"\x14\x14\x00",  # longer than the window searched
])
def test_other_first_tals_leave_the_block_to_the_general_path(odd):
    block = PLAIN_KEEPERS[:3] + [odd]
    width = max(24, len(odd) + len(odd) % 2)
    assert edfplus._plain_keepers(keeper_block(block, width)) is None
    assert_same_annotations(header([width], 4), records_of([block], [width]))


def test_a_time_keeping_tal_filling_its_record_leaves_the_block_to_the_general_path():
    block = [b"+0\x14\x14\x00", b"+60\x14\x14\x00", b"+240\x14\x14"]  # the last has no closing NUL
    assert edfplus._plain_keepers(keeper_block(block, 6)) is None
    out = assert_same_annotations(header([6], 3), records_of([block], [6]))
    np.testing.assert_array_equal(out.record_onsets_s, [0.0, 60.0, 240.0])


def test_after_the_keepers_odd_tals_go_to_the_general_path_with_the_same_result():
    block = [PLAIN_KEEPERS[0] + b"garbage\x00" + tal(1, 30, ["Sleep stage W"]),  # a malformed TAL
             PLAIN_KEEPERS[1] + tal(60, None, ["two", "texts"]) + tal(61, None, [""]),
             PLAIN_KEEPERS[2] + b"+121\x14\x14\x00",  # a second time-keeping-like TAL: no annotation
             PLAIN_KEEPERS[3] + b"+181\x14no end"]  # runs to the end of the record
    width = 48
    assert edfplus._plain_keepers(keeper_block(block, width)) is not None
    out = assert_same_annotations(header([width], 4), records_of([block], [width]))
    assert out.notes == ["malformed annotation lists (TALs) skipped: 2"]


def test_two_annotation_signals_keep_record_then_signal_order():
    first = [PLAIN_KEEPERS[0] + tal(0, 30, ["Sleep stage 1"]), PLAIN_KEEPERS[1] + tal(60, None, ["A"])]
    second = [tal(5, None, ["B"]), tal(65, None, ["C"]) + tal(66, None, ["D"])]
    out = assert_same_annotations(header([40, 24], 2), records_of([first, second], [40, 24]))
    assert [a.text for a in out.annotations] == ["Sleep stage 1", "B", "A", "C", "D"]


_ONSETS = st.one_of(
    st.integers(-10**6, 10**7).map(lambda k: f"{k:+d}".encode()),
    st.tuples(st.integers(0, 10**6), st.integers(0, 10**7)).map(lambda t: f"+{t[0]}.{t[1]}".encode()),
    st.sampled_from([b"+0", b"-0", b"0", b"+.5", b"5.", b"+", b"", b"+1e5", b"++1", b"+1.2.3", b"+0000000000000001",
                     b"+99999999999999999999.5", b"-12.25", b"+1_0", b" 1", b"+1\n", b"+inf", b"+nan"]),
)
_CLOSINGS = st.sampled_from([b"\x14\x14\x00"] * 6 + [b"\x14\x14", b"\x14\x14note\x14\x00", b"\x15\x14\x14\x00",
                                                     b"\x1530\x14\x14\x00", b"\x14\x00", b"\x14\x14\x14\x00"])
_FOLLOWERS = st.sampled_from([
    tal(30, 30, ["Sleep stage N2"]), tal(31.5, None, ["Lights off"]), tal(32, 0, ["x"]), b"\x00\x00",
    tal(33, None, ["a", "b"]), tal(34, None, [""]), b"garbage\x00", b"+35\x14", b"+36\x15\x14y\x14\x00",
    "+37\x14é\x14\x00".encode(), b"+38\x14\xff\xfe\x14\x00", b"\x14\x14\x00",
])


@settings(max_examples=300, deadline=None)
@given(
    records=st.lists(st.tuples(_ONSETS, _CLOSINGS, st.lists(_FOLLOWERS, max_size=4)), min_size=1, max_size=8),
    width=st.sampled_from([8, 16, 24, 32, 48, 64, 96]),
)
def test_arbitrary_time_keeping_tals_and_followers_read_like_the_careful_path(records, width):
    block = [onset + closing + b"".join(rest) for onset, closing, rest in records]
    assert_same_annotations(header([width], len(block)), records_of([block], [width]))


@settings(max_examples=200, deadline=None)
@given(onsets=st.lists(st.sampled_from([b"+1", b"+10", b"+1.5", b"1", b"-1", b"+0", b"-0", b"+01", b"+60",
                                        b"+1.2.3", b"++5", b"."]), min_size=1, max_size=8))
def test_keeper_values_are_float_of_each_onset(onsets):
    # Reference: float() of each onset, the conversion parse_tals applies (EDF+ TAL onsets).
    texts = b"".join(o + b"\x14\x14" for o in onsets)
    try:
        expected = [float(o) for o in onsets]
    except ValueError:
        expected = None
    got = edfplus._keeper_values(texts, len(onsets))
    if expected is None:
        assert got is None
    else:
        assert got.tolist() == expected and np.signbit(got).tolist() == [math.copysign(1, v) < 0 for v in expected]


# --- the header start time -------------------------------------------------------------------------


def _transitions(zone_name: str, year: int) -> list[dt.datetime]:
    z = ZoneInfo(zone_name)
    hours = [dt.datetime(year, 1, 1) + dt.timedelta(hours=h) for h in range(24 * 366)]
    offsets = [h.replace(tzinfo=z).utcoffset() for h in hours]
    return [hours[i] for i in range(1, len(hours)) if offsets[i] != offsets[i - 1]]


@pytest.mark.parametrize("zone_name", ["Europe/Berlin", "America/New_York", "Australia/Lord_Howe", "Europe/Dublin",
                                       "America/Sao_Paulo", "Pacific/Apia", "Asia/Kolkata", "UTC", "Etc/UTC",
                                       "Etc/GMT+5"])
def test_header_start_is_localize_to_the_unit_zone_and_fold(zone_name):
    # Source of the rule: sleepfuse.model.clock.localize (a gap time is shifted forward, PEP 495 fold=0).
    times = [dt.datetime(1985, 1, 1), dt.datetime(2084, 12, 31, 23, 59, 59), START]
    for year in (2011, 2026):
        for change in _transitions(zone_name, year):
            times += [change + dt.timedelta(minutes=m) for m in range(-150, 151, 10)]
    checked = 0
    for naive in times:
        expected, fast = localize(naive, zone_name), edf._local_start(naive, zone_name)
        assert (fast.value, fast.unit, fast.fold, repr(fast)) == (expected.value, expected.unit, expected.fold,
                                                                  repr(expected)), naive
        assert fast.tzinfo is expected.tzinfo
        for seconds in (0.0, -0.0, 0.3945312, 559.946, 1800.0):
            step = pd.Timedelta(seconds=seconds)
            assert repr(fast + step) == repr(expected + step) and (fast + step).unit == (expected + step).unit
            after = edf._after(fast, seconds)  # the record start: the header start itself for 0 s
            assert (after.value, after.unit, after.fold, repr(after)) == ((expected + step).value, (expected + step).unit,
                                                                        (expected + step).fold, repr(expected + step))
            assert after.tzinfo is (expected + step).tzinfo
        checked += 1
    assert checked >= 3


# --- the epoch grid --------------------------------------------------------------------------------


def painted(rows, epoch_s):
    """Stages epoch by epoch, as the read_hypnogram docstring has it: round(duration / epoch_s)
    epochs (one without a duration) from the epoch nearest the onset; later onset, then later in
    the file, wins; unknown (weak) rows yield. Also the rows off the epoch grid and those lasting
    a fraction of an epoch (by more than 1e-3 epoch), and the epochs two strong rows or more
    cover, split into those whose codes disagree and those with one code."""
    t0 = min(r[0] for r in rows)
    cover = defaultdict(list)
    off_grid = odd = 0
    for i, (onset, duration, _code, _label, _weak) in enumerate(rows):
        n = duration / epoch_s if duration > 0 else 1.0
        position = (onset - t0) / epoch_s
        first = round(position)
        off_grid += abs(position - first) > 1e-3
        odd += abs(n - round(n)) > 1e-3
        for e in range(first, first + max(round(n), 1)):
            cover[e].append(i)
    stages = [int(Stage.UNSCORED)] * (max(cover) + 1)
    won = defaultdict(int)
    conflict = same = 0
    for e, owners in cover.items():
        winner = max(owners, key=lambda i: (not rows[i][4], rows[i][0], i))
        stages[e] = rows[winner][2]
        won[winner] += 1
        strong_codes = [rows[i][2] for i in owners if not rows[i][4]]
        if len(strong_codes) > 1:
            conflict += len(set(strong_codes)) > 1
            same += len(set(strong_codes)) == 1
    unknown = defaultdict(int)
    for i, n in won.items():
        if rows[i][3] is not None:
            unknown[rows[i][3]] += n
    return t0, stages, dict(unknown), off_grid, odd, conflict, same


_ROWS = st.lists(
    st.tuples(
        st.integers(0, 60), st.sampled_from([0.0, 0.0, 0.0, 0.02, 0.06, 3.0, 15.0]),  # epoch, off-grid shift
        st.sampled_from([math.nan, 0.0, 30.0, 30.0, 60.0, 90.0, 45.0, 300.0, 30.01, 30.06]),
        st.sampled_from([0, 1, 2, 3, 4, -1]), st.sampled_from([None, None, None, "Stage X", "Odd"]), st.booleans(),
    ),
    min_size=1, max_size=25,
)


@settings(max_examples=300, deadline=None)
@given(spec=_ROWS, overlap_free=st.booleans())
def test_stage_grid_is_the_straightforward_painting(spec, overlap_free):
    epoch_s = 30.0
    rows = []
    for k, shift, duration, code, label, weak in spec:
        if label is None:
            weak = False
        if overlap_free:  # rows one after another: the path that skips ranking
            k = (rows[-1][5] if rows else 0)
            shift = 0.0
        onset = 5000.0 + k * epoch_s + shift
        n = max(round(duration / epoch_s) if duration > 0 else 1, 1)
        rows.append((onset, duration, code, label, weak, k + n))
    rows = [r[:5] for r in rows]
    problems = []
    t0, stages, unknown = edf._stage_grid(Path("x.edf"), rows, epoch_s, pd.Timestamp("2031-03-04 22:00", tz="UTC"),
                                          problems)
    ref_t0, ref_stages, ref_unknown, off_grid, odd, conflict, same = painted(rows, epoch_s)
    assert t0 == ref_t0
    assert stages.tolist() == ref_stages and stages.dtype == np.int8
    assert unknown == ref_unknown
    messages = [p.message for p in problems]

    def counted(prefix):
        found = [m for m in messages if m.startswith(prefix)]
        return int(re.match(r"\D*(\d+)", found[0][len(prefix):]).group(1)) if found else 0

    assert counted("stage annotations off the 30-s epoch grid: ") == off_grid
    assert counted("stage annotations lasting a fraction of an epoch (30 s): ") == odd
    assert counted("epochs covered by stage annotations that disagree: ") == conflict
    assert counted("epochs covered more than once by the same stage: ") == same
    if overlap_free:
        assert conflict == same == 0


# --- whole files: the fast reader against the careful one ------------------------------------------


def careful_lists(path, header_, records):
    found = edfplus.read_annotations_careful(path, header_, records)
    annotations = found.annotations
    return edfplus.AnnotationLists([a.onset_s for a in annotations], [a.duration_s for a in annotations],
                                   [a.text for a in annotations], found.record_onsets_s, found.notes)


def outcome(path, tz="Europe/Berlin", **options):
    try:
        h = read_hypnogram(path, tz, **options)
    except ReadError as exc:
        return ("error", str(exc))
    stamp = lambda t: None if t is None else (repr(t), t.value, t.unit, t.fold)  # noqa: E731
    return (stamp(h.record_start), stamp(h.start), h.epoch_s, h.stages.dtype.str, h.stages.tolist(),
            stamp(h.lights_off), stamp(h.lights_on), list(h.unknown_labels.items()),
            [(p.severity, p.message, stamp(p.time), p.night) for p in h.problems], h.sha256, h.path)


def assert_reads_like_the_careful_path(path, monkeypatch, **options) -> tuple:
    fast = outcome(path, **options)
    with monkeypatch.context() as m:
        m.setattr(edfplus, "read_annotation_lists", careful_lists)
        m.setattr(edf, "_local_start", localize)
        careful = outcome(path, **options)
    assert fast == careful
    return fast


def rewrite_records(path: Path, blocks: list[bytes]) -> Path:
    """Replace the annotation bytes of every data record (files with the annotation signal only)."""
    raw = bytearray(path.read_bytes())
    hb = 256 * (int(raw[252:256]) + 1)
    width = (len(raw) - hb) // len(blocks)
    for r, block in enumerate(blocks):
        assert len(block) <= width
        raw[hb + r * width : hb + (r + 1) * width] = block.ljust(width, b"\x00")
    path.write_bytes(bytes(raw))
    return path


def night(n_epochs=40, start_s=0.0):
    stages = ["Sleep stage W", "Sleep stage N1", "Sleep stage N2", "Sleep stage N3", "Sleep stage R"]
    out, t = [], start_s
    for i in range(n_epochs):
        length = 30.0 * (1 + i % 3)
        out.append((t, length, stages[i % 5]))
        t += length
    return out


def test_typical_files_read_like_the_careful_path(tmp_path, monkeypatch):
    path = write_edf_plus(tmp_path / "P01.edf", start=START, record_duration_s=60.0, annotation_bytes=96,
                          annotations=[*night(), (559.946, None, "Lights off"), (2300.5, None, "Lights on")])
    out = assert_reads_like_the_careful_path(path, monkeypatch)
    assert out[0] == out[1] and out[4][:3] == [int(Stage.WAKE), int(Stage.N1), int(Stage.N1)]
    assert_reads_like_the_careful_path(str(path), monkeypatch, epoch_s=20.0, labels={"Sleep stage N3": "unscored"})


def test_subsecond_start_gaps_and_dst_read_like_the_careful_path(tmp_path, monkeypatch):
    sub = write_edf_plus(tmp_path / "P02.edf", start=START.replace(microsecond=394_531), record_duration_s=30.0,
                         annotations=night(20, 0.394531))
    assert_reads_like_the_careful_path(sub, monkeypatch)
    onsets = [0.0, 30.0, 60.0, 600.0, 630.0, 1200.0]
    gaps = write_edf_plus(tmp_path / "P03.edf", start=START, edf_type="D", record_duration_s=30.0,
                          record_onsets_s=onsets, annotations=[(t, 30.0, "Sleep stage N2") for t in onsets])
    assert_reads_like_the_careful_path(gaps, monkeypatch)
    for wall in (dt.datetime(2031, 3, 30, 2, 30, 0), dt.datetime(2031, 10, 26, 2, 30, 0)):  # gap, repeated hour
        dst = write_edf_plus(tmp_path / f"P04_{wall:%m}.edf", start=wall, record_duration_s=30.0,
                             annotations=night(10))
        assert_reads_like_the_careful_path(dst, monkeypatch)


def test_overlaps_unknown_labels_and_odd_tals_read_like_the_careful_path(tmp_path, monkeypatch):
    annotations = [*night(12), (60.0, 90.0, "Sleep stage N3"), (90.0, 30.0, "Sleep stage N1"), (400.0, 60.0, "Mystery"),
                   (2000.0, 30.0, "Stage 9"), (15.0, 45.0, "Sleep stage R"), (3000.0, None, "Lights on"),
                   (2999.0, None, "Lights on"), (10.0, None, "lights out")]
    path = write_edf_plus(tmp_path / "P05.edf", start=START, record_duration_s=60.0, annotation_bytes=160,
                          annotations=annotations)
    out = assert_reads_like_the_careful_path(path, monkeypatch)
    assert any("disagree" in p[1] for p in out[8]) and out[7]
    raw = path.read_bytes()
    hb = 256 * (int(raw[252:256]) + 1)
    n = (len(raw) - hb) // 160
    blocks = [raw[hb + r * 160 : hb + (r + 1) * 160].rstrip(b"\x00") for r in range(n)]
    blocks[1] += b"\x00\x00garbage\x00" + tal(61, 30, ["Sleep stage W", "second"])  # malformed, two texts
    after_keeper = lambda block: block.partition(b"\x00")[2]  # noqa: E731
    blocks[2] = b"+120\x14\x14Recording note\x14\x00" + after_keeper(blocks[2])  # keeper with a text
    assert_reads_like_the_careful_path(rewrite_records(path, blocks), monkeypatch)
    blocks[3] = b"+5x\x14\x14\x00" + after_keeper(blocks[3])  # a damaged time-keeping TAL
    assert_reads_like_the_careful_path(rewrite_records(path, blocks), monkeypatch)


def test_signal_hypnograms_and_stageless_files_read_like_the_careful_path(tmp_path, monkeypatch):
    signal = write_signal_hypnogram(tmp_path / "P06.edf", start=START, codes=[0, 1, 2, 2, 3, 5, 7, 9, 2],
                                    annotations=[(0.0, None, "Lights off"), (200.0, 60.0, "Foo bar")])
    assert_reads_like_the_careful_path(signal, monkeypatch)
    assert_reads_like_the_careful_path(signal, monkeypatch, signal_label="Hypnogram", signal_codes={"7": "R"})
    stageless = write_edf_plus(tmp_path / "P07.edf", start=START, annotations=[(0.0, None, "Lights off")])
    assert assert_reads_like_the_careful_path(stageless, monkeypatch)[0] == "error"


# --- reading the bytes ------------------------------------------------------------------------------


def straightforward_read(path: Path):
    with open(path, "rb") as fh:
        content = fh.read()
    if len(content) > edf.WHOLE_FILE_BYTES:
        ns = content[252:256].decode("ascii", errors="replace").strip()
        head = content[:256]
        if len(head) == 256 and ns.isdigit() and 0 < int(ns) <= 9999:
            head = content[: 256 * (int(ns) + 1)]
        return head, len(content), None
    ns = content[252:256].decode("ascii", errors="replace").strip()
    head = content[:256]
    if len(head) == 256 and ns.isdigit() and 0 < int(ns) <= 9999:
        head = content[: 256 * (int(ns) + 1)]
    return head, len(content), content


def test_file_bytes_are_read_as_open_read_would(tmp_path, monkeypatch):
    good = write_edf_plus(tmp_path / "P08.edf", start=START, annotations=night(5))
    empty = tmp_path / "empty.edf"
    empty.write_bytes(b"")
    short = tmp_path / "short.edf"
    short.write_bytes(good.read_bytes()[:300])
    for path in (good, empty, short):
        assert edf._read_header_bytes(path) == straightforward_read(path)
        monkeypatch.setattr(edf, "WHOLE_FILE_BYTES", 0)  # the large-file branch: header bytes only
        assert edf._read_header_bytes(path) == straightforward_read(path)
        monkeypatch.undo()
    system = Path("/proc/version")  # a file whose size the system gives as 0
    if system.exists() and system.stat().st_size == 0:
        assert edf._read_header_bytes(system) == straightforward_read(system) and system.read_bytes()
    with pytest.raises(ReadError, match="file not found"):
        edf._read_header_bytes(tmp_path / "missing.edf")
    with pytest.raises(ReadError, match="is a directory, not an EDF file"):
        edf._read_header_bytes(tmp_path)
