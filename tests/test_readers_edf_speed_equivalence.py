"""The fast paths of the EDF+ hypnogram reader give the careful paths' results, exactly.

``edf._local_start`` builds the header start time in one step; ``edf._stage_grid`` fills the
epochs without ranking the stage rows when no epoch is covered twice; ``edf._read_header_bytes``
reads with ``os.read``. Each is compared with the reference it stands in for:
``sleepfuse.model.clock.localize``, a straightforward epoch-by-epoch painting of the stage rows
(the rule in the ``read_hypnogram`` docstring), and ``open(path, "rb").read()``. (The annotation
signal has one reader, checked in tests/test_readers_edf_annotations.py.)
Invented bytes and recordings only.
"""

from __future__ import annotations

import datetime as dt
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

from edf_builders import write_edf_plus
from sleepfuse.model.errors import ReadError
from sleepfuse.readers import edf
from sleepfuse.model.stages import Stage
from sleepfuse.model.clock import localize

START = dt.datetime(2031, 3, 4, 22, 16, 52)


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


def night(n_epochs=40, start_s=0.0):
    stages = ["Sleep stage W", "Sleep stage N1", "Sleep stage N2", "Sleep stage N3", "Sleep stage R"]
    out, t = [], start_s
    for i in range(n_epochs):
        length = 30.0 * (1 + i % 3)
        out.append((t, length, stages[i % 5]))
        t += length
    return out


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
