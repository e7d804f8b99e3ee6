"""Epoch-by-epoch agreement and clock-offset search, on invented nights."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from sleepfuse.fusion.epochs import best_clock_offset, common_grid, epoch_agreement
from sleepfuse.model.stages import Stage

T0 = pd.Timestamp("2024-03-04 23:00:00", tz="America/Chicago")


def test_sensitivity_specificity_by_hand():
    # Common practice (actigraphy validation): sensitivity = PSG sleep scored sleep,
    # specificity = PSG wake scored wake. Counted by hand on this series:
    psg = np.array([1, 1, 1, 1, 1, 0, 0, 0, 1, 0], bool)
    act = np.array([1, 1, 0, 1, 1, 1, 0, 1, 1, 0], bool)
    # PSG sleep: 6 epochs, 5 scored sleep -> 5/6; PSG wake: 4 epochs, 2 scored wake -> 2/4.
    res = epoch_agreement(psg, act)
    assert res["n_epochs"] == 10
    assert res["sensitivity"] == pytest.approx(5 / 6)
    assert res["specificity"] == pytest.approx(2 / 4)
    assert res["accuracy"] == pytest.approx(7 / 10)
    # Cohen 1960 by hand: p_o = 0.7, p_e = 0.6*0.7 + 0.4*0.3 = 0.54, kappa = 0.16/0.46.
    assert res["kappa"] == pytest.approx(0.16 / 0.46)


def test_valid_mask_excludes_epochs():
    psg = np.array([1, 1, 0, 0], bool)
    act = np.array([1, 0, 0, 1], bool)
    res = epoch_agreement(psg, act, valid=np.array([True, False, True, False]))
    assert res["n_epochs"] == 2
    assert res["sensitivity"] == 1.0 and res["specificity"] == 1.0 and res["accuracy"] == 1.0


def test_kappa_matches_scikit_learn():
    # Source: sklearn.metrics.cohen_kappa_score (Cohen 1960) on random series.
    from sklearn.metrics import cohen_kappa_score

    rng = np.random.default_rng(12)
    for p_sleep, p_agree in [(0.8, 0.85), (0.5, 0.6), (0.9, 0.97)]:
        psg = rng.random(900) < p_sleep
        act = np.where(rng.random(900) < p_agree, psg, ~psg)
        valid = rng.random(900) < 0.9
        res = epoch_agreement(psg, act, valid)
        assert res["kappa"] == pytest.approx(cohen_kappa_score(psg[valid], act[valid]), rel=1e-12)


def test_degenerate_series_give_nan_not_error():
    res = epoch_agreement(np.ones(5, bool), np.ones(5, bool))
    assert res["sensitivity"] == 1.0 and math.isnan(res["specificity"]) and math.isnan(res["kappa"])
    none = epoch_agreement(np.ones(3, bool), np.ones(3, bool), np.zeros(3, bool))
    assert none["n_epochs"] == 0 and math.isnan(none["accuracy"])
    with pytest.raises(ValueError, match="one value per epoch"):
        epoch_agreement(np.ones(3, bool), np.ones(4, bool))


def test_common_grid_takes_actigraphy_epoch_at_psg_midpoint():
    # 30-s PSG epochs from 23:00:00; 60-s actigraphy epochs from 22:59:00.
    codes = np.array([Stage.WAKE, Stage.N1, Stage.N2, Stage.UNSCORED, Stage.REM, Stage.N3],
                     dtype=np.int8)
    act = np.array([False, True, False, True, True], bool)  # 22:59, 23:00, 23:01, 23:02, 23:03
    act_ok = np.array([True, True, True, True, False])
    psg, a, valid = common_grid(T0, 30, codes, T0 - pd.Timedelta(minutes=1), 60, act, act_ok)
    # PSG midpoints 23:00:15, :45, 23:01:15, :45, 23:02:15, :45 -> actigraphy epochs 1,1,2,2,3,3.
    assert psg.tolist() == [False, True, True, False, True, True]
    assert a.tolist() == [True, True, False, False, True, True]
    assert valid.tolist() == [True, True, True, False, True, True]  # UNSCORED epoch invalid
    # Shift the actigraph clock by +60 s: epochs 0,0,1,1,2,2; epoch 4 (invalid) never used.
    _, a2, _ = common_grid(T0, 30, codes, T0 - pd.Timedelta(minutes=1), 60, act, act_ok,
                           offset_s=60.0)
    assert a2.tolist() == [False, False, True, True, False, False]
    # Actigraphy ending early, invalid epochs, and a window all clear validity.
    _, _, v3 = common_grid(T0, 30, codes, T0, 60, act[:2], act_ok[:2],
                           window=(T0 + pd.Timedelta(seconds=30), T0 + pd.Timedelta(hours=1)))
    assert v3.tolist() == [False, True, True, False, False, False]


def test_common_grid_rejects_mixed_time_zones():
    codes = np.zeros(4, np.int8)
    with pytest.raises(ValueError, match="time zone"):
        common_grid(T0, 30, codes, pd.Timestamp("2024-03-04 23:00"), 60, np.ones(2, bool),
                    np.ones(2, bool))


def _synthetic_night(shift_min: int, seed: int = 3):
    """Invented 7-h night: sleep/wake per minute, PSG at 30 s, actigraph clock shift_min fast."""
    rng = np.random.default_rng(seed)
    minutes = 7 * 60
    state = np.zeros(minutes, bool)
    t = 15  # sleep onset after 15 min, then bouts of sleep and wake of random lengths
    while t < minutes - 10:
        sleep_len, wake_len = rng.integers(20, 70), rng.integers(2, 12)
        state[t:t + sleep_len] = True
        t += sleep_len + wake_len
    codes = np.repeat(np.where(state, Stage.N2, Stage.WAKE), 2).astype(np.int8)
    # The actigraph clock reads shift_min ahead: its epoch j (clock act_start + j min)
    # happened at PSG time act_start + j - shift_min.
    act_start = T0 - pd.Timedelta(minutes=20)
    j = np.arange(minutes + 60)
    psg_minute = j - 20 - shift_min
    inside = (psg_minute >= 0) & (psg_minute < minutes)
    act = np.zeros(j.size, bool)
    act[inside] = state[psg_minute[inside]]
    flips = rng.random(j.size) < 0.05  # scoring noise
    act ^= flips
    return codes, act_start, act, inside


def test_best_clock_offset_recovers_seven_minutes():
    # Common practice: the offset that maximises kappa. Sign convention: offset_s is
    # ADDED to actigraphy clock times; an actigraph 7 min fast needs -7 min.
    codes, act_start, act, present = _synthetic_night(shift_min=7)
    res = best_clock_offset(T0, 30, codes, act_start, 60, act, present)
    assert res["offset_s"] == -420.0
    assert res["kappa_at_best"] > res["kappa_at_zero"] + 0.1
    psg, a, ok = common_grid(T0, 30, codes, act_start, 60, act, present, offset_s=res["offset_s"])
    assert epoch_agreement(psg, a, ok)["kappa"] == pytest.approx(res["kappa_at_best"])
    # The opposite drift gives the opposite sign.
    codes, act_start, act, present = _synthetic_night(shift_min=-7, seed=4)
    assert best_clock_offset(T0, 30, codes, act_start, 60, act, present)["offset_s"] == 420.0


def test_best_clock_offset_prefers_zero_on_ties_and_respects_range():
    codes, act_start, act, present = _synthetic_night(shift_min=0)
    res = best_clock_offset(T0, 30, codes, act_start, 60, act, present, max_offset_min=10)
    assert res["offset_s"] == 0.0 and res["kappa_at_best"] == res["kappa_at_zero"]
    assert res["n_offsets"] == 21
    # An offset outside the search range cannot be found.
    codes, act_start, act, present = _synthetic_night(shift_min=12)
    res = best_clock_offset(T0, 30, codes, act_start, 60, act, present, max_offset_min=5)
    assert abs(res["offset_s"]) <= 300
    # Constant series: kappa undefined everywhere -> NaN offset, no crash.
    flat = best_clock_offset(T0, 30, np.full(40, Stage.N2, np.int8), T0, 60,
                             np.ones(30, bool), np.ones(30, bool), max_offset_min=2)
    assert math.isnan(flat["offset_s"]) and math.isnan(flat["kappa_at_zero"])


@pytest.mark.parametrize("seed", range(6))
def test_offset_search_counts_what_the_grid_holds_at_every_offset(seed):
    # The search counts by cross-correlation (_shift_counts). At every offset its 2 × 2 table
    # must be the one the grid itself gives (common_grid at that offset, counted by hand),
    # including offsets that push the night past either end of the recording, odd lags,
    # unscored PSG epochs and invalid minutes.
    from sleepfuse.fusion.epochs import _shift_counts

    rng = np.random.default_rng(seed)
    n_psg, n_act, k_max = int(rng.integers(5, 300)), int(rng.integers(1, 250)), int(rng.integers(0, 12))
    lag_s = float(rng.choice([0.0, 30.0, -600.0, 1234.5, 17.25, rng.uniform(-3000, 3000)]))
    codes = rng.choice([Stage.WAKE, Stage.N2, Stage.REM, Stage.UNSCORED], n_psg).astype(np.int8)
    act = rng.random(n_act) < 0.6
    act_ok = rng.random(n_act) < 0.93
    act_start = T0 - pd.Timedelta(seconds=lag_s)
    mid = lag_s + (np.arange(n_psg) + 0.5) * 30.0
    scored = codes != Stage.UNSCORED
    psg_sleep = (codes != Stage.WAKE)[scored]
    tp, fn, tn, fp = _shift_counts(mid[scored], psg_sleep, 60.0, act, act_ok, k_max)
    for i, k in enumerate(range(-k_max, k_max + 1)):
        psg, a, ok = common_grid(T0, 30, codes, act_start, 60, act, act_ok, offset_s=60.0 * k)
        assert (tp[i], fn[i], tn[i], fp[i]) == (
            np.sum(psg & a & ok), np.sum(psg & ~a & ok), np.sum(~psg & ~a & ok), np.sum(~psg & a & ok))


@pytest.mark.parametrize("shift_min", [0, 7, -12])
def test_night_agreement_is_the_public_functions_in_one_pass(shift_min):
    # night_agreement serves epoch_rows: the agreement at the files' clocks must be
    # epoch_agreement(common_grid(...)) and the search best_clock_offset's, in a window.
    from sleepfuse.fusion.epochs import night_agreement

    codes, act_start, act, present = _synthetic_night(shift_min=shift_min)
    window = (T0 + pd.Timedelta(minutes=5), T0 + pd.Timedelta(hours=6))
    args = (T0, 30, codes, act_start, 60, act, present)
    stats, counts, off = night_agreement(*args, window=window, max_offset_min=20)
    psg, a, ok = common_grid(*args, window=window)
    assert stats == epoch_agreement(psg, a, ok)
    assert counts == (np.sum(psg & a & ok), np.sum(psg & ~a & ok), np.sum(~psg & ~a & ok), np.sum(~psg & a & ok))
    assert off == best_clock_offset(*args, window=window, max_offset_min=20)
    assert off["offset_s"] == -60.0 * shift_min


def test_offset_search_range_is_checked():
    codes, act_start, act, present = _synthetic_night(shift_min=0)
    for bad in (-1, float("nan")):
        with pytest.raises(ValueError, match="max_offset_min"):
            best_clock_offset(T0, 30, codes, act_start, 60, act, present, max_offset_min=bad)
