"""Choi et al. 2011 (Med Sci Sports Exerc 43:357–364) non-wear rule on crafted zero runs.

Rule (90-min period, ≤ 2-min interruption with 30 zero minutes up- and
downstream; lengths checked against secondary descriptions of the paper).
"""

from __future__ import annotations

import numpy as np
import pytest

from sleepfuse.scoring.nonwear import choi_nonwear


def counts(*parts):
    """1-min counts from (value, minutes) pairs."""
    return np.concatenate([np.full(n, float(v)) for v, n in parts])


def test_two_hours_of_zeros_is_nonwear():
    # Choi 2011: >= 90 consecutive zero minutes -> non-wear
    c = counts((200, 60), (0, 120), (150, 60))
    nw = choi_nonwear(c)
    assert nw[60:180].all() and not nw[:60].any() and not nw[180:].any()


def test_90_minute_threshold():
    assert choi_nonwear(counts((50, 10), (0, 90), (50, 10)))[10:100].all()
    assert not choi_nonwear(counts((50, 10), (0, 89), (50, 10))).any()


def test_two_minute_interruption_with_30_zeros_each_side_is_allowed():
    # Choi 2011: 40 zeros, 2 non-zero minutes, 60 zeros -> one 102-min period, spike included
    c = counts((300, 20), (0, 40), (12, 2), (0, 60), (300, 20))
    nw = choi_nonwear(c)
    assert nw[20:122].all() and nw.sum() == 102


def test_three_minute_interruption_breaks_the_period():
    # Choi 2011: more than 2 min of counts ends the period; 40 and 60 zeros alone are < 90
    c = counts((300, 20), (0, 40), (12, 3), (0, 60), (300, 20))
    assert not choi_nonwear(c).any()


def test_interruption_needs_30_zero_minutes_on_both_sides():
    # only 20 zeros upstream: the spike is not allowed; the 100 zeros after it alone are non-wear
    c = counts((300, 20), (0, 20), (5, 2), (0, 100), (300, 20))
    nw = choi_nonwear(c)
    assert not nw[:42].any() and nw[42:142].all() and not nw[142:].any()
    # 70 zeros, a 1-min spike, 29 zeros: 29 < 30 downstream -> not allowed, and 70 < 90 alone
    c2 = counts((300, 5), (0, 70), (5, 1), (0, 29), (300, 5))
    assert not choi_nonwear(c2).any()
    # with 30 zeros downstream the spike is allowed: 70 + 1 + 30 = 101 min of non-wear
    c3 = counts((300, 5), (0, 70), (5, 1), (0, 30), (300, 5))
    assert choi_nonwear(c3)[5:106].all()


def test_still_sleep_with_rare_small_counts_is_worn():
    # common practice check of the rule's intent: 6 h of sleep where a count of
    # 1-5 occurs every 10-25 min never gives a zero run of 90 min, nor an
    # allowed interruption (fewer than 30 zeros on a side).
    rng = np.random.default_rng(2024)
    c = np.zeros(360)
    t = 0
    while True:
        t += int(rng.integers(10, 26))
        if t >= 360:
            break
        c[t] = float(rng.integers(1, 6))
    assert (c > 0).sum() >= 14
    assert not choi_nonwear(c).any()


def test_missing_minutes_are_not_zeros():
    c = np.r_[np.zeros(60), np.nan, np.zeros(60)]
    assert not choi_nonwear(c).any()  # 60 + 60 zeros split by a missing minute
    c2 = np.r_[np.zeros(95), np.nan, np.zeros(10)]
    nw = choi_nonwear(c2)
    assert nw[:95].all() and not nw[95:].any()


def test_parameters_and_errors():
    c = counts((100, 5), (0, 60), (100, 5))
    assert choi_nonwear(c, min_length_min=60)[5:65].all()
    assert choi_nonwear(np.zeros(0)).size == 0
    with pytest.raises(ValueError):
        choi_nonwear(np.zeros((3, 3)))
    with pytest.raises(ValueError):
        choi_nonwear(c, min_length_min=0)
