"""``sleep_parameters_many``: the nights of a record side by side, each scored on its own.

There is one implementation of the parameters; its definitions are checked by
hand in tests/test_scoring_parameters.py (AASM manual + SLEEP_PARAMETERS.md)
through ``sleep_parameters``, which is this function with one window. Here:
a window's values never depend on the windows beside it (the separator epoch
between windows must stop every run of sleep or wake), whatever they hold.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sleepfuse.model.stages import Stage
from sleepfuse.scoring.parameters import sleep_parameters, sleep_parameters_many

CODES = [int(s) for s in Stage]


def same(a: dict, b: dict) -> bool:
    if a.keys() != b.keys():
        return False
    for k in a:
        x, y = a[k], b[k]
        if type(x) is not float or type(y) is not float:
            return False
        if not (x == y or (math.isnan(x) and math.isnan(y))):
            return False
    return True


def check(windows, epoch_s, **kw):
    """Side by side equals each window alone (and each alone equals ``sleep_parameters``)."""
    many = sleep_parameters_many(windows, epoch_s, **kw)
    assert len(many) == len(windows)
    for w, got in zip(windows, many):
        alone = sleep_parameters_many([w], epoch_s, **kw)[0]
        assert same(got, alone), (w, got, alone)
        assert same(alone, sleep_parameters(w, epoch_s, **kw))


windows_strategy = st.lists(
    st.lists(st.sampled_from(CODES), max_size=80).map(lambda c: np.array(c, dtype=np.int8)), min_size=1, max_size=8
)


@settings(max_examples=300, deadline=None)
@given(windows=windows_strategy, staged=st.booleans(), epoch_s=st.sampled_from([30.0, 60.0, 15.0, 20.0]),
       lps=st.sampled_from([10.0, 1.0, 0.5, 3.3]), bout=st.sampled_from([0.0, 1.0, 2.5]))
def test_a_window_does_not_depend_on_its_neighbours(windows, staged, epoch_s, lps, bout):
    check(windows, epoch_s, staged=staged, lps_run_min=lps, min_wake_bout_min=bout)


@pytest.mark.parametrize("staged", [False, True])
def test_edge_windows_side_by_side(staged):
    w, s, u = int(Stage.WAKE), int(Stage.SLEEP), int(Stage.UNSCORED)
    windows = [
        np.array([], dtype=np.int8),  # empty: tib 0, all else NaN
        np.full(5, w, dtype=np.int8),  # no sleep
        np.full(30, s, dtype=np.int8),  # all sleep: one persistent run
        np.array([s, w, w, s], dtype=np.int8),  # wake bout between two sleep epochs
        np.array([w, s, u, w, s, w], dtype=np.int8),  # unscored splits nothing it should not
        np.array([], dtype=np.int8),
        np.array([int(Stage.REM), int(Stage.N1)] * 12, dtype=np.int8),
        np.array([u, int(Stage.OFFWRIST)], dtype=np.int8),
    ]
    check(windows, 60.0, staged=staged, lps_run_min=10.0, min_wake_bout_min=0.0)
    check(windows, 30.0, staged=staged, lps_run_min=2.0, min_wake_bout_min=1.0)
    # hand-counted (SLEEP_PARAMETERS.md): runs that would join across the separator stay apart
    got = sleep_parameters_many([np.full(6, s, dtype=np.int8), np.full(6, s, dtype=np.int8)], 60.0,
                                lps_run_min=10.0)
    assert [g["tst_min"] for g in got] == [6.0, 6.0]
    assert all(math.isnan(g["lps_min"]) for g in got)  # 6 min each, never one 12-min run
    got = sleep_parameters_many([np.array([s, w], dtype=np.int8), np.array([w, s], dtype=np.int8)], 60.0)
    assert [g["nwak"] for g in got] == [0.0, 0.0] and [g["waso_min"] for g in got] == [0.0, 0.0]


def test_real_sized_nights():
    rng = np.random.default_rng(7)
    windows = []
    for _ in range(14):  # two weeks of minute codes with runs, as actigraphy gives them
        n = int(rng.integers(300, 700))
        runs = np.repeat(rng.choice([0, 5, 5, 5, -1, -2], size=n // 5 + 1), rng.integers(1, 30, size=n // 5 + 1))
        windows.append(runs[:n].astype(np.int8))
    check(windows, 60.0, staged=False, lps_run_min=10.0, min_wake_bout_min=0.0)
    check(windows, 60.0, staged=True, lps_run_min=10.0, min_wake_bout_min=2.0)


def test_empty_list_and_bad_input():
    assert sleep_parameters_many([], 60.0) == []
    with pytest.raises(ValueError, match="unknown stage code"):
        sleep_parameters_many([np.array([0, 5]), np.array([9])], 60.0)
    with pytest.raises(ValueError, match="1-D"):
        sleep_parameters_many([np.zeros((2, 2), dtype=np.int8)], 60.0)
    with pytest.raises(ValueError, match="1-D"):
        sleep_parameters(np.zeros((2, 2), dtype=np.int8), 60.0)
    with pytest.raises(ValueError, match="epoch_s"):
        sleep_parameters_many([np.array([0])], 0.0)
