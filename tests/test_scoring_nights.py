"""The night table: sleep-opportunity rules per source and parameters from real files (SLEEP_PARAMETERS.md)."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd

from sleepfuse.run.engine import run_study
from sleepfuse.model.records import Hypnogram
from sleepfuse.scoring.opportunity import (
    RULE_DETECTOR,
    RULE_LIGHTS,
    RULE_MARKERS,
    RULE_SCORED_SPAN,
    Window,
    cut_window,
    marker_window,
    psg_window,
)
from sleepfuse.model.stages import Stage
from sleepfuse.synthetic.edf_writer import write_edf_plus

TZ = "America/Chicago"


def _hyp(stages, start="2026-05-01 23:00", lights=None):
    s = pd.Timestamp(start, tz=TZ)
    off, on = (lights if lights else (None, None))
    return Hypnogram(path=None, record_start=s, start=s, epoch_s=30.0, stages=np.asarray(stages, np.int8),
                     lights_off=off, lights_on=on)


def test_psg_window_lights_markers_aasm():
    # AASM: total recording time runs lights off to lights on
    off, on = pd.Timestamp("2026-05-01 23:05", tz=TZ), pd.Timestamp("2026-05-02 06:00", tz=TZ)
    w, why = psg_window(_hyp([0] * 100, lights=(off, on)))
    assert (w.start, w.end, w.rule, why) == (off, on, RULE_LIGHTS, "")


def test_psg_window_falls_back_to_scored_span_with_note():
    stages = [Stage.UNSCORED] * 4 + [0] * 6 + [2] * 10 + [Stage.UNSCORED] * 3
    w, why = psg_window(_hyp(stages))
    assert w.rule == RULE_SCORED_SPAN and "marker missing" in why
    assert w.start == pd.Timestamp("2026-05-01 23:02", tz=TZ)
    assert w.minutes == 8.0  # 16 scored epochs of 30 s


def test_cut_window_pads_outside_with_unscored():
    codes = np.array([0, 0, 2, 2], np.int8)
    start = pd.Timestamp("2026-05-01 23:00", tz=TZ)
    w = Window(start - pd.Timedelta(minutes=1), start + pd.Timedelta(minutes=2), "x")
    cut, outside = cut_window(start, 30.0, codes, w)
    assert list(cut) == [Stage.UNSCORED, Stage.UNSCORED, 0, 0, 2, 2] and outside == 1.0


def test_marker_window_first_evening_press_to_last_morning_press():
    start = pd.Timestamp("2026-05-01 12:00", tz=TZ)
    times = start + pd.to_timedelta(np.arange(24 * 60), unit="min")
    marker = np.zeros(times.size, bool)
    marker[[60, 11 * 60 + 5, 18 * 60 + 30]] = True  # 13:00 (ignored: before 18:00), 23:05, 06:30
    w = marker_window(pd.DatetimeIndex(times), marker, dt.date(2026, 5, 1), TZ)
    assert w.rule == RULE_MARKERS
    assert w.start == pd.Timestamp("2026-05-01 23:05", tz=TZ) and w.end == pd.Timestamp("2026-05-02 06:30", tz=TZ)


def _write_actigraphy(path, *, sleep_from, sleep_to, marker_minutes=(), days=1):
    start = pd.Timestamp("2026-05-01 12:00")
    minutes = pd.date_range(start, periods=days * 24 * 60, freq="min")
    rel = np.arange(minutes.size)
    awake = ~((rel >= sleep_from) & (rel < sleep_to))
    counts = np.where(awake, 400, 0)
    marker = np.isin(rel, marker_minutes).astype(int)
    lines = ["timestamp,counts,marker"] + [f"{t:%Y-%m-%dT%H:%M:%S},{c},{m}" for t, c, m in zip(minutes, counts, marker)]
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text("\n".join(lines) + "\n")


def _study(tmp_path, extra=""):
    (tmp_path / "study.toml").write_text(
        f'[study]\ntimezone = "{TZ}"\n[actigraphy]\nwebster = false\nnonwear = "none"\n{extra}'
    )
    return tmp_path


def test_actigraphy_window_diary_then_markers_then_detector(tmp_path):
    root = _study(tmp_path)
    # Q1: diary for the night -> diary window; Q2: markers; Q3: neither -> automatic rest interval
    for pid in ("Q1", "Q2", "Q3"):
        _write_actigraphy(root / "actigraphy" / f"{pid}_w.csv", sleep_from=11 * 60, sleep_to=18 * 60,
                          marker_minutes=(10 * 60 + 50, 18 * 60 + 20) if pid == "Q2" else ())
    (root / "diary").mkdir()
    (root / "diary" / "Q1_d.csv").write_text("night,tried_to_sleep,out_of_bed\n2026-05-01,22:45,06:30\n")
    res = run_study(root)
    act = res.nights[res.nights.source == "actigraphy"].set_index("participant")
    assert act.loc["Q1", "window_rule"] == "diary tried to sleep to out of bed" and act.loc["Q1", "tib_min"] == 465
    assert act.loc["Q2", "window_rule"] == RULE_MARKERS and act.loc["Q2", "tib_min"] == 450  # 22:50-06:20
    assert act.loc["Q3", "window_rule"] == RULE_DETECTOR
    # Cole–Kripke (P=0.001, A-4..A+2): the sleep block [23:00, 06:00) is scored sleep on [23:04, 05:58)
    assert act.loc["Q3", "tst_min"] == 7 * 60 - 6
    assert all(act["qc"].str.contains("sleep opportunity from"))


def test_psg_night_across_fall_back_has_real_elapsed_time(tmp_path):
    root = _study(tmp_path)
    # 2026-11-01 02:00 CDT -> 01:00 CST (IANA tz database): 23:00 -> 07:00 wall clock is 9 h elapsed
    n = 9 * 60 * 2
    anns = [(0.0, None, "Lights off"), (n * 30.0, None, "Lights on")]
    anns += [(30.0 * i, 30.0, "Sleep stage W" if i < 40 else "Sleep stage N2") for i in range(n)]
    write_edf_plus(root / "psg" / "R1_n.edf", start=dt.datetime(2026, 10, 31, 23, 0), annotations=anns, duration_s=n * 30.0)
    res = run_study(root)
    row = res.nights[res.nights.source == "psg"].iloc[0]
    assert row.night == "2026-10-31" and row.tib_min == 540 and row.sol_min == 20 and row.tst_min == 520
    assert row.window_end.startswith("2026-11-01T07:00:00") and row.window_end.endswith("-06:00")


def test_rk_stages_3_and_4_fold_to_n3_through_the_reader(tmp_path):
    root = _study(tmp_path)
    # Rechtschaffen & Kales 1968 stages 3 and 4 are AASM N3; movement time is unscored (SLEEP_PARAMETERS.md)
    labels = ["Sleep stage W"] * 10 + ["Sleep stage 1"] * 10 + ["Sleep stage 2"] * 20 + ["Sleep stage 3"] * 12
    labels += ["Sleep stage 4"] * 8 + ["Movement time"] * 2 + ["Sleep stage REM"] * 18
    anns = [(0.0, None, "Lights off"), (30.0 * len(labels), None, "Lights on")]
    anns += [(30.0 * i, 30.0, t) for i, t in enumerate(labels)]
    write_edf_plus(root / "psg" / "R2_n.edf", start=dt.datetime(2026, 5, 1, 23, 0), annotations=anns,
                   duration_s=30.0 * len(labels))
    row = run_study(root).nights.iloc[0]
    assert row.n3_min == 10 and row.n1_min == 5 and row.n2_min == 10 and row.rem_min == 9
    assert row.unscored_min == 1 and row.tst_min == 34 and row.sol_min == 5


def test_too_much_offwrist_excludes_night(tmp_path):
    root = tmp_path
    start = pd.Timestamp("2026-05-01 12:00")
    minutes = pd.date_range(start, periods=24 * 60, freq="min")
    rel = np.arange(minutes.size)
    off = (rel >= 11 * 60) & (rel < 16 * 60)  # 23:00-04:00 off the wrist
    counts = np.where((rel < 11 * 60) | (rel >= 19 * 60), 300, 0)  # awake before 23:00 and after 07:00
    lines = ["timestamp,counts,off_wrist"] + [f"{t:%Y-%m-%dT%H:%M:%S},{c},{int(o)}" for t, c, o in zip(minutes, counts, off)]
    (root / "actigraphy").mkdir()
    (root / "actigraphy" / "W1_a.csv").write_text("\n".join(lines) + "\n")
    (root / "study.toml").write_text(f'[study]\ntimezone = "{TZ}"\n[actigraphy]\nnonwear = "auto"\n')
    (root / "diary").mkdir()
    (root / "diary" / "W1_d.csv").write_text("night,tried_to_sleep,out_of_bed\n2026-05-01,23:00,07:00\n")
    res = run_study(root)
    row = res.nights[res.nights.source == "actigraphy"].iloc[0]
    assert row.offwrist_min == 300 and not row.included and "off-wrist" in row.qc


def test_no_sleep_night_is_not_an_error(tmp_path):
    root = _study(tmp_path)
    anns = [(0.0, None, "Lights off"), (600.0, None, "Lights on")] + [(30.0 * i, 30.0, "Sleep stage W") for i in range(20)]
    write_edf_plus(root / "psg" / "Z1_n.edf", start=dt.datetime(2026, 5, 1, 23, 0), annotations=anns, duration_s=600.0)
    row = run_study(root).nights.iloc[0]
    assert row.tst_min == 0 and np.isnan(row.sol_min) and row.tib_min == 10


def test_window_times_written_as_pandas_isoformat():
    # Reference: pandas Timestamp.isoformat of the time rounded to the second in UTC (the night table's
    # window_start / window_end text: whole seconds, issue 15.14).
    from sleepfuse.scoring.night_rows import _iso

    rng = np.random.default_rng(11)
    for zone in ("Europe/Berlin", "America/Chicago", "Asia/Kolkata", "Australia/Lord_Howe", "UTC", None):
        for unit in ("s", "ms", "us", "ns"):
            for value in rng.integers(0, 4_000_000_000 * 10**9, size=40):
                t = pd.Timestamp(int(value), unit="ns", tz="UTC")
                t = (t.tz_convert(zone) if zone else t.tz_localize(None)).as_unit(unit)
                whole = t.tz_convert("UTC").round("s").tz_convert(zone) if zone else t.round("s")
                assert _iso(t) == whole.isoformat()
            t = pd.Timestamp("1900-01-01 00:00:00.000000001").as_unit("ns")  # nanoseconds: rounded away
            assert _iso(t) == "1900-01-01T00:00:00"


def test_tib_is_exact_when_lights_fall_off_the_epoch_grid(tmp_path):
    # AASM total recording time = lights off to lights on, in elapsed time. Lights off 10 s and lights on
    # 30 s after an epoch boundary: 94 min 40 s = 94.667 min (whole epochs would give 95.0).
    root = _study(tmp_path)
    stages = ["Sleep stage W"] * 10 + ["Sleep stage 2"] * 170 + ["Sleep stage W"] * 20
    anns = [(10.0, None, "Lights off"), (5690.0, None, "Lights on")]
    anns += [(30.0 * i, 30.0, text) for i, text in enumerate(stages)]
    write_edf_plus(root / "psg" / "Z1_n.edf", start=dt.datetime(2026, 5, 1, 23, 0), annotations=anns,
                   duration_s=6000.0)
    row = run_study(root).nights.iloc[0]
    assert row.tib_min == (5690.0 - 10.0) / 60.0
    # SOL from lights off to the first sleep epoch (starts at 300 s): 290 s; terminal wake from the end of the
    # last sleep epoch (5400 s) to lights on: 290 s; so TIB = SOL + SPT + terminal wake exactly.
    assert abs(row.sol_min - 290.0 / 60.0) < 1e-12 and abs(row.terminal_wake_min - 290.0 / 60.0) < 1e-12
    assert row.tst_min == 85.0 and row.spt_min == 85.0
    assert abs(row.sol_min + row.spt_min + row.terminal_wake_min - row.tib_min) < 1e-12
    assert row.se_pct == 100.0 * 85.0 / row.tib_min
