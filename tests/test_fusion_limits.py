"""Regression-based limits only where they hold; pairs identical by construction; infinite pairs."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from sleepfuse.fusion.agreement import agreement, proportional_bias
from sleepfuse.fusion.limits import positive_spread_range


def test_positive_spread_range_by_hand():
    # Bland & Altman 1999 §3.2 limits (b0 + b1 m) +- k (c0 + c1 m): they cross where c0 + c1 m < 0.
    assert positive_spread_range(10.0, 0.0, 300, 500) == (300, 500)
    assert positive_spread_range(-1.0, 0.0, 300, 500) is None
    assert positive_spread_range(40.0, -0.1, 300, 500) == (300, 400)  # spread 0 at m = 400
    assert positive_spread_range(-30.0, 0.1, 200, 500) == (300, 500)
    assert positive_spread_range(40.0, -0.1, 450, 500) is None
    assert positive_spread_range(5.0, 0.01, 100, 200) == (100, 200)


def _crossing_study():
    # a trend in the differences whose scatter shrinks to nothing at m = 400: the fitted |residual| line
    # goes negative inside the observed means (as issue 13 found for actigraphy - PSG TIB)
    m = np.linspace(300, 480, 40)
    sign = np.where(np.arange(40) % 2, 1.0, -1.0)
    d = 0.3 * m - 120 + sign * np.maximum(400 - m, 0) * 0.5
    return m + d / 2, m - d / 2


def test_regression_limits_never_cross_inside_the_reported_range():
    test, ref = _crossing_study()
    res = proportional_bias(test, ref)
    row = agreement(test, ref)
    assert row["prop_p"] < 0.05
    lo, hi = row["reg_loa_m_min"], row["reg_loa_m_max"]
    m = (test + ref) / 2
    assert m.min() <= lo < hi <= m.max()
    for x in np.linspace(lo, hi, 50):
        low = row["reg_loa_intercept_low"] + row["reg_loa_slope_low"] * x
        high = row["reg_loa_intercept_high"] + row["reg_loa_slope_high"] * x
        assert low <= high + 1e-9
    assert hi < m.max()  # the lines cross beyond: the note says where they hold
    assert "regression-based limits valid only for means" in row["note"]
    x = m.max()
    assert (row["reg_loa_intercept_low"] + row["reg_loa_slope_low"] * x
            > row["reg_loa_intercept_high"] + row["reg_loa_slope_high"] * x)
    assert res["reg_loa_m_max"] == hi


def test_regression_limits_not_reported_when_spread_never_positive(monkeypatch):
    import sleepfuse.fusion.agreement as ag

    rng = np.random.default_rng(1)
    ref = rng.uniform(300, 480, 30)
    test = 0.7 * ref + 100 + rng.normal(0, 8, 30)
    monkeypatch.setattr(ag, "positive_spread_range", lambda *a: None)
    row = ag.agreement(test, ref)
    assert row["prop_p"] < 0.05
    assert all(math.isnan(row[k]) for k in ("reg_loa_intercept_low", "reg_loa_slope_high", "reg_loa_m_min"))
    assert "regression-based limits not reported" in row["note"]


def test_infinite_pairs_are_counted_and_noted():
    ref = np.array([400.0, 410, 395, 402, 390, 380])
    test = np.array([405.0, np.inf, 390, -np.inf, 392, 385])
    row = agreement(test, ref)
    assert row["n_nights"] == 4 and row["n_inf_dropped"] == 2
    assert "2 pair(s) with an infinite value dropped" in row["note"]
    assert row["bias"] == pytest.approx(np.mean([5.0, -5, -10, 5][:2] + [2.0, 5]))
    assert agreement(ref, ref + 1)["n_inf_dropped"] == 0


def _nights_with_windows(rule_of_actigraphy):
    rows = []
    rng = np.random.default_rng(2)
    for i in range(6):
        for night in ("2026-03-01", "2026-03-02"):
            tib = float(rng.normal(480, 30))
            for source in ("psg", "actigraphy", "diary"):
                value = tib if source != "psg" else tib + float(rng.normal(0, 10))
                rows.append({"participant": f"P{i}", "night": night, "source": source, "included": True,
                             "window_rule": rule_of_actigraphy(i) if source == "actigraphy" else "x",
                             "tib_min": value, "tst_min": value - float(rng.normal(60, 10))})
    nights = pd.DataFrame(rows)
    from sleepfuse.scoring.nights import PARAMETER_COLUMNS

    for col in PARAMETER_COLUMNS:
        if col not in nights:
            nights[col] = rng.normal(50, 10, len(nights))
    return nights


def test_diary_actigraphy_tib_identical_by_construction():
    # The actigraphy sleep opportunity is the diary's window (SLEEP_PARAMETERS.md), so TIB agrees by construction.
    from sleepfuse.fusion.disagreement import rank_disagreements
    from sleepfuse.fusion.pairs import agreement_table
    from sleepfuse.scoring.opportunity import RULE_DIARY

    nights = _nights_with_windows(lambda i: RULE_DIARY)
    table = agreement_table(nights)
    row = table[(table["pair"] == "diary-actigraphy") & (table["parameter"] == "tib_min")].iloc[0]
    assert bool(row["by_construction"]) and row["n_nights"] == 12
    assert math.isnan(row["bias"]) and math.isnan(row["ccc"]) and math.isnan(row["icc"])
    assert "identical by construction" in row["note"]
    other = table[(table["pair"] == "actigraphy-psg") & (table["parameter"] == "tib_min")].iloc[0]
    assert not bool(other["by_construction"]) and np.isfinite(other["bias"])
    assert rank_disagreements(nights, "diary", "actigraphy", "tib_min", agreement=table).empty
    assert len(rank_disagreements(nights, "diary", "actigraphy", "tst_min", agreement=table)) == 12


def test_some_nights_by_construction_are_left_out():
    from sleepfuse.fusion.pairs import agreement_table
    from sleepfuse.scoring.opportunity import RULE_DIARY, RULE_MARKERS

    nights = _nights_with_windows(lambda i: RULE_DIARY if i < 2 else RULE_MARKERS)
    row = agreement_table(nights).query("pair == 'diary-actigraphy' and parameter == 'tib_min'").iloc[0]
    assert not bool(row["by_construction"]) and row["n_nights"] == 8
    assert "4 night(s) identical by construction left out" in row["note"]
