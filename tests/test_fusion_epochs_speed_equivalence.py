"""The faster epoch_rows (one grid and one offset search per night, packed correlation counts) gives
exactly what the public functions give one after the other: every row value (floats bit for bit),
every flag, every QC warning in the same order. The reference below is the previous epoch_rows body,
run with the previous four-correlation counts (_shift_counts), itself checked against looking every
PSG midpoint up at every offset (_dense_counts). Invented data only; "common practice" equivalence
checks, no published values involved."""

from __future__ import annotations

import dataclasses
import math
import struct
from contextlib import contextmanager
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from sleepfuse.model.config import build_config, load_config
from sleepfuse.fusion import epochs
from sleepfuse.fusion.epoch_table import _counts, _epoch_rows_careful, epoch_rows
from sleepfuse.fusion.epochs import best_clock_offset, common_grid, epoch_agreement
from sleepfuse.run.participant import process_participant
from sleepfuse.model.qc import QCLog
from sleepfuse.model.records import Hypnogram
from sleepfuse.scoring.nights import ActigraphyScoring, ScoredParticipant
from sleepfuse.scoring.opportunity import Window
from sleepfuse.model.stages import Stage, is_sleep
from sleepfuse.study.folder import plan_jobs

SAMPLE = Path(__file__).resolve().parents[1] / "sample_records"


@contextmanager
def _previous_counts():
    """best_clock_offset with the four int64 correlations it used before the packed ones."""
    saved = epochs._shift_counts_packed
    epochs._shift_counts_packed = epochs._shift_counts
    try:
        yield
    finally:
        epochs._shift_counts_packed = saved


def reference_epoch_rows(config, scored, qc):
    """The previous epoch_rows, copied as it was: the public functions, each on its own."""
    with _previous_counts():
        rows = []
        for night, h in sorted(scored.hypnograms.items()):
            window = scored.windows.get((night, "psg"))
            if window is None:
                continue
            for act in scored.actigraphy:
                end = act.start + pd.Timedelta(minutes=act.codes.size)
                if act.start >= window.end or end <= window.start:
                    continue
                args = (h.start, h.epoch_s, h.stages, act.start, 60.0, act.sleep, act.valid)
                psg, a, ok = common_grid(*args, window=(window.start, window.end))
                if not ok.any():
                    continue
                stats = epoch_agreement(psg, a, ok)
                off = best_clock_offset(*args, window=(window.start, window.end),
                                        max_offset_min=config.agreement.clock_offset_max_min)
                offset_min = off["offset_s"] / 60.0
                gain = off["kappa_at_best"] - off["kappa_at_zero"]
                flag = bool(np.isfinite(offset_min) and abs(offset_min) >= config.agreement.clock_offset_flag_min
                            and np.isfinite(gain) and gain >= config.agreement.clock_offset_flag_kappa_gain)
                if flag:
                    qc.warning(
                        f"epoch agreement: actigraphy fits PSG best with its clock shifted by {offset_min:+.0f} min "
                        f"(kappa {off['kappa_at_zero']:.2f} -> {off['kappa_at_best']:.2f}); check the device clocks",
                        participant=scored.participant, night=night,
                    )
                rows.append({
                    "participant": scored.participant, "night": night, **stats, **_counts(psg, a, ok),
                    "clock_offset_min": offset_min, "kappa_at_offset": off["kappa_at_best"], "offset_flag": flag,
                })
                break
        return rows


def _bits(rows: list[dict]) -> list[list[tuple]]:
    """Rows with every float as its 8 bytes (NaN included), so equality means bit for bit."""
    def one(v):
        if isinstance(v, float):
            return ("float", type(v).__name__, struct.pack("<d", v))
        return (type(v).__name__, v)
    return [[(k, one(v)) for k, v in r.items()] for r in rows]


def _assert_same(config, scored) -> list[dict]:
    qc_ref, qc_new = QCLog(), QCLog()
    ref = reference_epoch_rows(config, scored, qc_ref)
    new = epoch_rows(config, scored, qc_new)
    assert _bits(new) == _bits(ref)
    assert qc_new.entries == qc_ref.entries
    return new


# ---------------------------------------------------------------- invented participants

ZONES = [None, "Europe/Berlin", "America/Chicago"]
# Evenings just before a DST change (Berlin 2024-03-31 and 2024-10-27, Chicago 2024-03-10 and 2024-11-03)
# and an ordinary one.
EVENINGS = ["2024-03-30 22:10", "2024-10-26 23:40", "2024-03-09 23:05", "2024-11-02 22:50", "2024-06-12 23:00"]


def _stages(rng, n: int) -> np.ndarray:
    """Runs of stages (W, N1-N3, R) with some unscored epochs, as int8 codes."""
    out = np.empty(n, np.int8)
    i = 0
    while i < n:
        run = int(rng.integers(1, 40))
        out[i:i + run] = rng.choice([Stage.WAKE, Stage.N1, Stage.N2, Stage.N3, Stage.REM, Stage.UNSCORED],
                                    p=[0.25, 0.1, 0.35, 0.1, 0.15, 0.05])
        i += run
    return out


def _participant(seed: int, max_offset_min: float):
    rng = np.random.default_rng(seed)
    tz = ZONES[seed % len(ZONES)]
    p = ScoredParticipant(f"R{seed:03d}")
    nights = []
    for k in range(int(rng.integers(1, 4))):
        start = pd.Timestamp(EVENINGS[int(rng.integers(len(EVENINGS)))], tz=tz) + pd.Timedelta(days=7 * k)
        start += pd.Timedelta(seconds=float(rng.choice([0.0, 15.0, 7.5, rng.uniform(0, 60)])))
        epoch_s = float(rng.choice([30.0, 30.0, 30.0, 20.0, 60.0, 45.5]))
        n = int(rng.choice([0, 1, 5, *rng.integers(100, 1300, 5)]))
        codes = _stages(rng, n)
        night = start.date().isoformat()
        p.hypnograms[night] = Hypnogram(None, start, start, epoch_s, codes)
        length = pd.Timedelta(seconds=epoch_s * n)
        if rng.random() < 0.9:  # a window partly before, partly after, inside or empty
            lo = start + pd.Timedelta(minutes=float(rng.uniform(-40, 30)))
            hi = start + length + pd.Timedelta(minutes=float(rng.uniform(-60, 40)))
            if rng.random() < 0.05:
                hi = lo - pd.Timedelta(minutes=1)
            p.windows[(night, "psg")] = Window(lo, hi, "lights")
        nights.append((start, epoch_s, codes))
    for _ in range(int(rng.integers(0, 5))):
        start, epoch_s, codes = nights[int(rng.integers(len(nights)))]
        # The actigraph clock runs `shift` min off, often right at or just past the search edge.
        edge = int(math.floor(max_offset_min + 1e-9))
        shift = int(rng.choice([0, edge, -edge, edge + 1, -edge - 1, rng.integers(-edge - 2, edge + 3)]))
        lead = int(rng.integers(-120, 240))  # minutes the record starts before the PSG (negative: after)
        act_start = start.floor("min") - pd.Timedelta(minutes=lead)
        if rng.random() < 0.3:
            act_start += pd.Timedelta(seconds=float(rng.uniform(0, 60)))
        minutes = int(rng.choice([0, 1, 30, *rng.integers(200, 3000, 5)]))
        t = act_start + pd.to_timedelta(np.arange(minutes) + 0.5, unit="min") - pd.Timedelta(minutes=shift)
        idx = np.floor(((t - start) / pd.Timedelta(seconds=epoch_s))).astype(int)
        inside = (idx >= 0) & (idx < codes.size)
        sleep = np.zeros(minutes, bool)
        sleep[inside] = is_sleep(codes[idx[inside]])
        sleep ^= rng.random(minutes) < rng.choice([0.0, 0.03, 0.2])
        state = rng.choice([Stage.WAKE, Stage.OFFWRIST, Stage.UNSCORED], size=minutes, p=[0.9, 0.07, 0.03])
        if rng.random() < 0.1:
            state[:] = Stage.OFFWRIST  # nothing valid: the night moves on to the next record
        act_codes = np.where(sleep & (state == Stage.WAKE), Stage.SLEEP, state).astype(np.int8)
        p.actigraphy.append(ActigraphyScoring(None, act_start, np.zeros(minutes), sleep,
                                              act_codes == Stage.OFFWRIST, act_codes, None, "none"))
    return p


def _config(seed: int):
    rng = np.random.default_rng(10_000 + seed)
    max_off = float(rng.choice([30.0, 5.0, 0.5, 2.5, 12.75, 180.0]))
    return build_config(".", {"agreement": {
        "clock_offset_max_min": max_off,
        "clock_offset_flag_min": float(rng.choice([0.0, 1.0, 5.0])),
        "clock_offset_flag_kappa_gain": float(rng.choice([0.0, 0.01, 0.05])),
    }})


def test_random_participants_give_the_very_rows_and_warnings():
    seen = {"rows": 0, "flags": 0, "edge": 0, "nan_kappa": 0, "second_record": 0, "skipped": 0}
    for seed in range(250):
        cfg = _config(seed)
        p = _participant(seed, cfg.agreement.clock_offset_max_min)
        rows = _assert_same(cfg, p)
        k_max = math.floor(cfg.agreement.clock_offset_max_min + 1e-9)
        seen["rows"] += len(rows)
        seen["flags"] += sum(r["offset_flag"] for r in rows)
        seen["edge"] += sum(k_max > 0 and abs(r["clock_offset_min"]) == k_max for r in rows)
        seen["nan_kappa"] += sum(math.isnan(r["kappa"]) for r in rows)
        seen["skipped"] += sum(1 for n in p.hypnograms if (n, "psg") in p.windows) - len(rows)
        seen["second_record"] += len(p.actigraphy) > 1 and len(rows) > 0
    # The random cases reached every branch the shortcut has to get right.
    assert all(v > 0 for v in seen.values()), seen



def _outcome(fn, cfg, p):
    qc = QCLog()
    try:
        return "rows", _bits(fn(cfg, p, qc)), qc.entries
    except Exception as exc:  # noqa: BLE001 - the very error is what is compared
        return "error", type(exc), str(exc)


@pytest.mark.parametrize("naive", ["actigraphy", "hypnogram"])
def test_mixed_time_zone_error_is_the_same(naive):
    p = _participant(1, 30.0)  # Berlin
    assert p.actigraphy and p.windows, "seed 1 has actigraphy and a window"
    if naive == "actigraphy":  # fails comparing the record with the window
        for act in p.actigraphy:
            act.start = act.start.tz_localize(None)
    else:  # fails in the grid: PSG start naive, window and actigraphy aware
        for h in p.hypnograms.values():
            h.start = h.start.tz_localize(None)
    cfg = build_config(".", {})
    ref, new = _outcome(reference_epoch_rows, cfg, p), _outcome(epoch_rows, cfg, p)
    assert ref[0] == "error" and new == ref
    if naive == "hypnogram":
        assert ref[1] is ValueError and "time zone" in ref[2]


@pytest.mark.parametrize("max_off", [-1.0, math.nan, math.inf, 1e7])
def test_unvalidated_search_ranges_take_the_careful_path(max_off):
    # Configurations built past validation: whatever the public functions do (raise or not), so does epoch_rows.
    cfg = build_config(".", {})
    cfg = dataclasses.replace(cfg, agreement=dataclasses.replace(cfg.agreement, clock_offset_max_min=max_off))
    p = _participant(4, 30.0)
    assert _outcome(epoch_rows, cfg, p) == _outcome(reference_epoch_rows, cfg, p)


def test_careful_path_equals_the_reference():
    for seed in range(0, 250, 7):
        cfg = _config(seed)
        p = _participant(seed, cfg.agreement.clock_offset_max_min)
        qc_ref, qc = QCLog(), QCLog()
        assert _bits(_epoch_rows_careful(cfg, p, qc)) == _bits(reference_epoch_rows(cfg, p, qc_ref))
        assert qc.entries == qc_ref.entries


def test_sample_study_rows_are_unchanged():
    config = load_config(SAMPLE)
    jobs, _ = plan_jobs(config, QCLog())
    n = 0
    for job in jobs:
        scored, _ = process_participant(config, job)
        n += len(_assert_same(config, scored))
    assert n >= 5  # the demo study has PSG nights with actigraphy


# ---------------------------------------------------------------- the pieces

def test_plain_int_stage_tests_equal_is_sleep():
    for dtype in (np.int8, np.int16, np.int64, np.float64):
        codes = np.arange(-128, 128).astype(dtype)
        assert np.array_equal((codes >= epochs._N1) & (codes <= epochs._SLEEP), is_sleep(codes))
        assert np.array_equal(codes == epochs._WAKE, codes == Stage.WAKE)


def _count_case(rng):
    n_psg, n_act, k_max = int(rng.integers(0, 900)), int(rng.integers(0, 700)), int(rng.integers(0, 40))
    lag = float(rng.choice([0.0, 30.0, -600.0, 1234.5, 17.25, rng.uniform(-3000, 3000), -1e5]))
    mid = lag + (np.arange(n_psg) + 0.5) * float(rng.choice([30.0, 20.0, 61.0]))
    mid = mid[rng.random(n_psg) < 0.9]
    psg_sleep = rng.random(mid.size) < rng.uniform(0, 1)
    act = rng.random(n_act) < rng.uniform(0, 1)
    act_ok = rng.random(n_act) < rng.choice([1.0, 0.93, 0.0])
    return mid, psg_sleep, act, act_ok, k_max


@pytest.mark.parametrize("bits", [24, 10, 4])
def test_packed_counts_equal_the_four_correlations_and_the_dense_lookup(bits, monkeypatch):
    # With a small packing base the counts reach the top of the low digit (and past it: the fallback).
    monkeypatch.setattr(epochs, "_PACK_BITS", bits)
    rng = np.random.default_rng(bits)
    for _ in range(150):
        mid, psg_sleep, act, act_ok, k_max = _count_case(rng)
        if bits == 4:  # nights of 0-20 scored epochs: counts up to 15 packed, past 15 the fallback
            n = int(rng.integers(0, 21))
            mid, psg_sleep = mid[:n], psg_sleep[:n]
        packed = epochs._shift_counts_packed(mid, psg_sleep, 60.0, act, act_ok, k_max)
        four = epochs._shift_counts(mid, psg_sleep, 60.0, act, act_ok, k_max)
        offsets = np.arange(-k_max, k_max + 1) * 60.0
        dense = epochs._dense_counts(mid, psg_sleep, offsets, 60.0, act, act_ok)
        for p, f, d in zip(packed, four, dense):
            assert p.dtype == f.dtype == np.int64
            np.testing.assert_array_equal(p, f)
            np.testing.assert_array_equal(p, d)


def test_night_agreement_equals_the_public_functions():
    rng = np.random.default_rng(77)
    tz = "Europe/Berlin"
    t0 = pd.Timestamp("2024-10-26 23:40", tz=tz)
    for _ in range(200):
        codes = _stages(rng, int(rng.integers(0, 1100)))
        act_start = t0 - pd.Timedelta(seconds=float(rng.uniform(-3600, 7200)))
        m = int(rng.integers(0, 1500))
        sleep, ok = rng.random(m) < 0.6, rng.random(m) < 0.95
        window = (t0 + pd.Timedelta(minutes=float(rng.uniform(-30, 60))),
                  t0 + pd.Timedelta(minutes=float(rng.uniform(100, 700))))
        max_off = float(rng.choice([0.0, 0.5, 3.0, 30.0, 7.25]))
        args = (t0, 30.0, codes, act_start, 60.0, sleep, ok)
        found = epochs.night_agreement(*args, window=window, max_offset_min=max_off)
        psg, a, valid = common_grid(*args, window=window)
        if not valid.any():
            assert found is None
            continue
        stats, counts, off = found
        with _previous_counts():
            ref_off = best_clock_offset(*args, window=window, max_offset_min=max_off)
        ref_stats = epoch_agreement(psg, a, valid)
        assert _bits([stats]) == _bits([ref_stats])
        assert _bits([off]) == _bits([ref_off])
        assert counts == tuple(_counts(psg, a, valid).values())
