"""Automatic rest interval: sleepfuse's own rule (REST_INTERVAL_RULE; no published source)."""

from __future__ import annotations

import numpy as np
import pytest

from sleepfuse.scoring.rest_interval import REST_INTERVAL_RULE, rest_interval


def day(*parts, n=1440):
    """One noon-to-noon day of 1-min sleep (True) from (start, end) sleep spans."""
    s = np.zeros(n, dtype=bool)
    for a, b in parts:
        s[a:b] = True
    return s


ALL_VALID = np.ones(1440, dtype=bool)


def test_gaps_up_to_30_min_are_bridged():
    # 22:00-06:00 (minutes 600-1080) of sleep with 20-min and 30-min wake gaps (common practice)
    s = day((600, 700), (720, 900), (930, 1080))
    assert rest_interval(s, ALL_VALID) == (600, 1080)


def test_longer_gap_splits_and_longest_block_wins():
    s = day((600, 700), (731, 1080))  # a 31-min gap
    assert rest_interval(s, ALL_VALID) == (731, 1080)
    # a larger max gap joins them
    assert rest_interval(s, ALL_VALID, max_gap_min=31) == (600, 1080)


def test_invalid_minutes_are_never_bridged():
    s = day((600, 1080))
    v = ALL_VALID.copy()
    v[800:805] = False  # off-wrist for 5 min in the middle
    assert rest_interval(s, v) == (805, 1080)  # 275 min beats 200 min
    # a wake gap next to invalid minutes is not between two sleep minutes
    s2 = day((600, 790), (810, 1080))
    v2 = ALL_VALID.copy()
    v2[795:800] = False
    assert rest_interval(s2, v2) == (810, 1080)


def test_too_short_gives_none_and_ties_take_the_earliest():
    assert rest_interval(day((600, 779)), ALL_VALID) is None  # 179 < 180 min
    assert rest_interval(day((600, 780)), ALL_VALID) == (600, 780)
    assert rest_interval(day((100, 300), (700, 900)), ALL_VALID) == (100, 300)
    assert rest_interval(np.zeros(1440, bool), ALL_VALID) is None
    assert rest_interval(np.zeros(0, bool), np.zeros(0, bool)) is None


def test_block_starts_and_ends_on_sleep():
    s = day((10, 12), (40, 300), (320, 322))
    # 10-12 and 40-300 are 28 min apart -> bridged; 300-320 bridged; block 10..322
    assert rest_interval(s, ALL_VALID) == (10, 322)


def test_rule_text_and_errors():
    assert "30 minutes" in REST_INTERVAL_RULE and "180 minutes" in REST_INTERVAL_RULE
    with pytest.raises(ValueError):
        rest_interval(np.zeros(10, bool), np.zeros(9, bool))
    with pytest.raises(ValueError):
        rest_interval(np.zeros(10, bool), np.ones(10, bool), min_length_min=0)
