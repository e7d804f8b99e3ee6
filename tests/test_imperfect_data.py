"""Imperfect data gets a flag, never a silent number (issue 12 items 1-4, issue 15 item 17).

Invented one-participant studies: 24 h of 1-min counts, awake (300 counts) outside a diary sleep
opportunity of 23:00-07:00 and still (20 counts) inside it, then one fault at a time.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from sleepfuse.model.errors import ReadError
from sleepfuse.model.stages import Stage
from sleepfuse.readers.actigraphy import read_actigraphy
from sleepfuse.run.engine import run_study
from sleepfuse.scoring.actigraphy import cole_kripke_index, epochs_to_minutes, sadeh_terms
from sleepfuse.scoring.parameters import sleep_parameters, sleep_parameters_many

TZ = "America/Chicago"
DIARY = "night,bedtime,tried_to_sleep,sol_min,nwak,waso_min,final_awakening,out_of_bed,quality\n"


def _minutes():
    t = pd.date_range("2026-05-01 12:00", periods=24 * 60, freq="min")
    rel = np.arange(t.size)
    counts = np.where((rel >= 11 * 60) & (rel < 19 * 60), 20, 300)  # still (not zero: no non-wear) 23:00-07:00
    return t, counts


def _study(root, lines, diary=DIARY + "2026-05-01,22:50,23:00,0,0,0,07:00,07:00,3\n", toml=""):
    (root / "actigraphy").mkdir(parents=True)
    (root / "diary").mkdir(exist_ok=True)
    (root / "actigraphy" / "W1_a.csv").write_text("\n".join(lines) + "\n")
    (root / "diary" / "W1_d.csv").write_text(diary)
    (root / "study.toml").write_text(f'[study]\ntimezone = "{TZ}"\n[actigraphy]\ncount_scale = 0.01\n{toml}')
    return run_study(root)


def _csv(t, counts, drop=None):
    keep = np.ones(t.size, bool) if drop is None else ~drop
    return ["timestamp,counts"] + [f"{a:%Y-%m-%dT%H:%M:%S},{c}" for a, c, k in zip(t, counts, keep) if k]


def _act(res):
    return res.nights[res.nights.source == "actigraphy"].iloc[0]


@pytest.fixture
def complete(tmp_path):
    """The night with every minute present: the reference for the faulty copies."""
    t, counts = _minutes()
    return _act(_study(tmp_path / "complete", _csv(t, counts)))


# ---------------------------------------------------------------- item 1: a gap inside a night


def test_long_gap_is_missing_named_and_excludes_the_night(tmp_path, complete):
    t, counts = _minutes()
    gap = (t >= "2026-05-02 02:00") & (t < "2026-05-02 05:00")  # 180 of 480 min (37.5%)
    row = _act(_study(tmp_path, _csv(t, counts, gap)))
    assert row.missing_min == 180
    assert not row.included
    assert "no data" in row.qc and "02:00 to 05:00" in row.qc and "max_missing_pct" in row.qc
    # missing minutes are neither sleep nor wake (SLEEP_PARAMETERS.md, as PSG's unscored epochs)
    assert row.tst_min == complete.tst_min - 180 and row.waso_min == 0 and row.nwak == 0 and row.offwrist_min == 0


def test_short_gap_is_named_and_neither_sleep_nor_wake(tmp_path, complete):
    t, counts = _minutes()
    gap = (t >= "2026-05-02 03:00") & (t < "2026-05-02 03:30")  # 30 of 480 min (6.25%), under the 10% default
    row = _act(_study(tmp_path, _csv(t, counts, gap)))
    assert row.missing_min == 30 and row.included
    assert "03:00 to 03:30" in row.qc
    assert complete.tst_min > 470 and complete.waso_min == 0  # the invented night: asleep throughout
    assert row.tst_min == complete.tst_min - 30 and row.waso_min == 0 and row.nwak == 0 and row.tib_min == 480
    assert row.se_pct == pytest.approx(100 * row.tst_min / 480)  # AASM SE = TST / TIB; TIB keeps the missing minutes


def test_max_missing_pct_is_configurable(tmp_path):
    t, counts = _minutes()
    gap = (t >= "2026-05-02 03:00") & (t < "2026-05-02 03:30")
    row = _act(_study(tmp_path, _csv(t, counts, gap), toml="[scoring]\nmax_missing_pct = 5\n"))
    assert not row.included and "over [scoring] max_missing_pct = 5%" in row.qc


def test_complete_night_has_zero_missing(tmp_path):
    t, counts = _minutes()
    row = _act(_study(tmp_path, _csv(t, counts)))
    assert row.missing_min == 0 and row.included and "no data" not in row.qc


def test_missing_epochs_are_neither_sleep_nor_wake_in_both_parameter_functions():
    s, w, u = int(Stage.SLEEP), int(Stage.WAKE), int(Stage.UNSCORED)
    codes = np.array([w] * 5 + [s] * 20 + [u] * 10 + [s] * 20 + [w] * 5, dtype=np.int8)
    one = sleep_parameters(codes, 60.0)
    many = sleep_parameters_many([codes, codes[:30]], 60.0)[0]
    for p in (one, many):
        assert p["tst_min"] == 40 and p["waso_min"] == 0 and p["nwak"] == 0 and p["unscored_min"] == 10
        assert p["spt_min"] == 50 and p["tib_min"] == 60
    assert one == many


# ---------------------------------------------------------------- item 1: epoch length changes part-way


def test_epoch_length_change_rejects_the_file_with_its_line(tmp_path):
    a = pd.date_range("2026-05-01 12:00", periods=120, freq="30s")  # lines 2-121
    b = pd.date_range(a[-1] + pd.Timedelta(seconds=60), periods=600, freq="60s")  # from line 122
    lines = ["timestamp,counts"] + [f"{x:%Y-%m-%dT%H:%M:%S},5" for x in a.append(b)]
    path = tmp_path / "a.csv"
    path.write_text("\n".join(lines) + "\n")
    with pytest.raises(ReadError, match=r"epoch length changes from 60 s to 30 s|from 30 s to 60 s") as err:
        read_actigraphy(path, TZ)
    assert "line 122" in str(err.value) or "line 3" in str(err.value)
    # the dominant length here is 60 s, so the change is reported where the 30-s rows begin or end
    assert "one epoch length per file" in str(err.value)


def test_epoch_length_change_30_to_15_names_the_first_line_of_the_new_length(tmp_path):
    a = pd.date_range("2026-05-01 12:00", periods=1000, freq="30s")  # lines 2-1001
    b = pd.date_range(a[-1] + pd.Timedelta(seconds=15), periods=100, freq="15s")  # lines 1002-1101
    lines = ["timestamp,counts"] + [f"{x:%Y-%m-%dT%H:%M:%S},5" for x in a.append(b)]
    path = tmp_path / "a.csv"
    path.write_text("\n".join(lines) + "\n")
    with pytest.raises(ReadError, match="epoch length changes from 30 s to 15 s at line 1002"):
        read_actigraphy(path, TZ)


def test_epoch_length_change_to_a_length_not_allowed_is_reported_too(tmp_path):
    a = pd.date_range("2026-05-01 12:00", periods=1000, freq="60s")  # lines 2-1001
    b = pd.date_range(a[-1] + pd.Timedelta(seconds=120), periods=300, freq="120s")  # lines 1002-1301
    lines = ["timestamp,counts"] + [f"{x:%Y-%m-%dT%H:%M:%S},5" for x in a.append(b)]
    path = tmp_path / "a.csv"
    path.write_text("\n".join(lines) + "\n")
    with pytest.raises(ReadError, match="epoch length changes from 60 s to 120 s at line 1002"):
        read_actigraphy(path, TZ)


def test_a_few_odd_steps_are_no_epoch_change(tmp_path):
    t = pd.date_range("2026-05-01 12:00", periods=600, freq="30s")
    t = t.delete([100, 300, 302])  # three single missing rows: 60-s steps, not a new epoch length
    path = tmp_path / "a.csv"
    path.write_text("\n".join(["timestamp,counts"] + [f"{x:%Y-%m-%dT%H:%M:%S},5" for x in t]) + "\n")
    rec = read_actigraphy(path, TZ)
    assert rec.epoch_s == 30 and np.isnan(rec.counts).sum() == 3


# ---------------------------------------------------------------- item 2: implausible counts


@pytest.mark.parametrize("bad", ["1e300", "9223372036854775808", "inf", "250000"])
def test_implausible_counts_are_missing_and_reported_by_line(tmp_path, bad):
    t = pd.date_range("2026-05-01 12:00", periods=100, freq="60s")
    lines = ["timestamp,counts"] + [f"{x:%Y-%m-%dT%H:%M:%S},{bad if i in (10, 20) else 7}" for i, x in enumerate(t)]
    path = tmp_path / "a.csv"
    path.write_text("\n".join(lines) + "\n")
    rec = read_actigraphy(path, TZ)
    assert np.isnan(rec.counts[[10, 20]]).all() and np.isfinite(np.delete(rec.counts, [10, 20])).all()
    text = " ".join(p.message for p in rec.problems)
    assert "plausibility ceiling" in text and "lines 12, 22" in text


def test_ceiling_scales_with_the_epoch_and_is_configurable(tmp_path):
    t = pd.date_range("2026-05-01 12:00", periods=100, freq="15s")
    lines = ["timestamp,counts"] + [f"{x:%Y-%m-%dT%H:%M:%S},{30000 if i == 5 else 7}" for i, x in enumerate(t)]
    path = tmp_path / "a.csv"
    path.write_text("\n".join(lines) + "\n")
    assert np.isnan(read_actigraphy(path, TZ).counts[5])  # 30000 per 15 s = 120000 per min > 100000
    assert read_actigraphy(path, TZ, max_count_per_min=200_000).counts[5] == 30000


def test_mostly_implausible_file_is_rejected(tmp_path):
    t = pd.date_range("2026-05-01 12:00", periods=100, freq="60s")
    lines = ["timestamp,counts"] + [f"{x:%Y-%m-%dT%H:%M:%S},{'1e300' if i % 4 else 3}" for i, x in enumerate(t)]
    path = tmp_path / "a.csv"
    path.write_text("\n".join(lines) + "\n")
    with pytest.raises(ReadError, match="75 of 100 counts are above the plausibility ceiling"):
        read_actigraphy(path, TZ)


def test_implausible_counts_no_longer_turn_the_night_to_wake(tmp_path, complete):
    t, counts = _minutes()
    counts = counts.astype(object)
    counts[12 * 60] = "1e300"  # 00:00, inside the night
    res = _study(tmp_path, _csv(t, counts), toml='[scoring]\nmax_missing_pct = 10\n')
    row = _act(res)
    assert row.tst_min == complete.tst_min - 1 and row.missing_min == 1 and row.included
    assert any("plausibility ceiling" in e.message and e.file.endswith("W1_a.csv") for e in res.qc)


def test_study_toml_ceiling_reaches_the_reader(tmp_path):
    t, counts = _minutes()
    res = _study(tmp_path, _csv(t, counts), toml="max_count_per_min = 200\n")  # the awake 300s are implausible now
    assert any("max_count_per_min = 200" in e.message for e in res.qc)


# ---------------------------------------------------------------- item 3: diary columns


def test_misspelled_diary_column_is_reported_once_with_a_hint_and_nights_flagged(tmp_path):
    t, counts = _minutes()
    diary = DIARY.replace("final_awakening", "final_awakenning") + (
        "2026-05-01,22:50,23:00,0,0,0,07:00,07:00,3\n2026-05-02,22:50,23:00,0,0,0,07:00,07:00,3\n"
    )
    res = _study(tmp_path, _csv(t, counts), diary=diary)
    cols = [e for e in res.qc if "diary columns" in e.message]
    assert len(cols) == 1
    msg = cols[0].message
    assert "'final_awakenning'" in msg and "did you mean 'final_awakening'?" in msg
    assert "expected column 'final_awakening' is missing" in msg and cols[0].file.endswith("W1_d.csv")
    d = res.nights[res.nights.source == "diary"]
    assert len(d) == 2 and not d.included.any()
    assert d.qc.str.contains("no final awakening").all() and d.tst_min.isna().all()


def test_absent_optional_column_is_reported_but_night_kept(tmp_path):
    t, counts = _minutes()
    diary = "night,bedtime,tried_to_sleep,sol_min,nwak,waso_min,final_awakening,out_of_bed\n2026-05-01,22:50,23:00,0,0,0,07:00,07:00\n"
    res = _study(tmp_path, _csv(t, counts), diary=diary)
    assert any("expected column 'quality' is missing" in e.message for e in res.qc)
    row = res.nights[res.nights.source == "diary"].iloc[0]
    assert row.included and row.tst_min == 480


def test_matching_diary_header_gives_no_column_warning(tmp_path):
    t, counts = _minutes()
    res = _study(tmp_path, _csv(t, counts))
    assert not any("diary columns" in e.message for e in res.qc)


# ---------------------------------------------------------------- item 4: every QC line names its file


def test_rejected_and_duplicate_diary_rows_name_their_file(tmp_path):
    t, counts = _minutes()
    diary = DIARY + "2026-05-01,22:50,23:00,600,0,0,07:00,07:00,3\n2026-05-01,22:50,23:00,0,0,0,07:00,07:30,3\n"
    res = _study(tmp_path, _csv(t, counts), diary=diary)
    diary_lines = [e for e in res.qc if "diary" in e.message]
    assert any("diary row rejected" in e.message for e in diary_lines)  # rejected while scoring
    assert all(e.file == "diary/W1_d.csv" for e in diary_lines), [(e.file, e.message) for e in diary_lines]


def test_second_diary_row_in_another_file_names_both_files(tmp_path):
    t, counts = _minutes()
    (tmp_path / "diary").mkdir()
    (tmp_path / "diary" / "W1_e.csv").write_text(DIARY + "2026-05-01,22:50,23:00,0,0,0,07:00,07:30,3\n")
    res = _study(tmp_path, _csv(t, counts))
    second = [e for e in res.qc if "second diary row" in e.message]
    assert len(second) == 1 and second[0].file.startswith("diary/W1_")
    assert {second[0].file, second[0].message.split(" of ")[-1].split(")")[0]} == {"diary/W1_d.csv", "diary/W1_e.csv"}


# ---------------------------------------------------------------- issue 15 item 17: inf counts in scoring


def test_infinite_counts_are_missing_minutes_without_warnings():
    x = np.array([1.0, np.inf, 2.0, 3.0, -np.inf, 4.0, 5.0, 6.0])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        m = epochs_to_minutes(x, 30)
        d = cole_kripke_index(np.array([0.0, np.inf, 5.0, 1e308, 1e308]), count_scale=3.0)
        terms = sadeh_terms(np.array([0.0, np.inf, 5.0]))
    assert np.isnan(m[[0, 2]]).all() and m[1] == 5 and m[3] == 11
    assert np.isnan(d[1]) and np.isnan(d[2:]).all() and np.isfinite(d[0])  # d[2] sums an overflowing neighbour
    assert np.isnan(terms["ps"][1])
