"""Sleep parameters on crafted hypnograms, answers worked by hand from the AASM definitions.

Source of every definition: AASM scoring manual (total recording time, sleep
latency, TST, sleep efficiency, REM latency) with the sleepfuse conventions of
SLEEP_PARAMETERS.md (WASO inside the sleep period, terminal wake apart,
latency to persistent sleep = common practice). 30-s epochs: 1 epoch = 0.5 min.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sleepfuse.scoring.parameters import COMMON_PARAMETERS, STAGE_PARAMETERS, sleep_parameters
from sleepfuse.model.stages import Stage

W, N1, N2, N3, R, S, U, OFF = 0, 1, 2, 3, 4, 5, -1, -2


def hyp(*parts):
    """Build a hypnogram from (code, n_epochs) pairs."""
    return np.concatenate([np.full(n, c, dtype=np.int8) for c, n in parts])


def test_keys_common_and_staged():
    p = sleep_parameters(hyp((W, 2), (N2, 4)), 30)
    assert set(p) == set(COMMON_PARAMETERS) | {"unscored_min", "offwrist_min"}
    p = sleep_parameters(hyp((W, 2), (N2, 4)), 30, staged=True)
    assert set(p) == set(COMMON_PARAMETERS) | set(STAGE_PARAMETERS) | {"unscored_min", "offwrist_min"}


def test_wake_before_sleep_wake_bout_and_terminal_wake():
    # W W N1 N2 N2 W N2 R W W   (10 epochs of 30 s)
    codes = np.array([W, W, N1, N2, N2, W, N2, R, W, W])
    p = sleep_parameters(codes, 30, staged=True, lps_run_min=1.0)
    # AASM: TRT = 10 epochs = 5.0 min; sleep latency = 2 epochs before first N1 = 1.0 min
    assert p["tib_min"] == 5.0
    assert p["sol_min"] == 1.0
    # TST = N1 + 3·N2 + R = 5 epochs = 2.5 min; SE = 100·2.5/5 = 50 %
    assert p["tst_min"] == 2.5
    assert p["se_pct"] == 50.0
    # sleep period: epoch 2 .. end of epoch 7 = 6 epochs = 3.0 min; one wake epoch inside
    assert p["spt_min"] == 3.0
    assert p["waso_min"] == 0.5
    assert p["nwak"] == 1
    # terminal wake: end of epoch 7 to end of window = 2 epochs = 1.0 min
    assert p["terminal_wake_min"] == 1.0
    # stage minutes and shares of TST (AASM stage % of TST)
    assert (p["n1_min"], p["n2_min"], p["n3_min"], p["rem_min"]) == (0.5, 1.5, 0.0, 0.5)
    assert p["n1_pct"] == pytest.approx(20.0)
    assert p["n2_pct"] == pytest.approx(60.0)
    assert p["n3_pct"] == 0.0
    assert p["rem_pct"] == pytest.approx(20.0)
    # AASM REM latency from sleep onset: epoch 7 − epoch 2 = 5 epochs = 2.5 min
    assert p["rem_latency_min"] == 2.5
    # LPS with a 1-min run (2 epochs): first run N1 N2 N2 (3 epochs) starts at epoch 2
    assert p["lps_min"] == 1.0


def test_unscored_inside_sleep_period_is_neither_sleep_nor_wake():
    # N2 N2 ? ? W N2 : SPT = 6 epochs = 3.0 = TST 1.5 + WASO 0.5 + unscored 1.0 (SLEEP_PARAMETERS.md)
    p = sleep_parameters(np.array([N2, N2, U, U, W, N2]), 30)
    assert p["spt_min"] == 3.0
    assert p["tst_min"] == 1.5
    assert p["waso_min"] == 0.5
    assert p["unscored_min"] == 1.0
    assert p["spt_min"] == p["tst_min"] + p["waso_min"] + p["unscored_min"]


def test_unscored_breaks_a_wake_bout():
    # N2 W ? W N2: two wake runs separated by an unscored epoch -> 2 bouts (task definition)
    p = sleep_parameters(np.array([N2, W, U, W, N2]), 30)
    assert p["nwak"] == 2
    assert p["waso_min"] == 1.0
    # N2 W W N2: one bout of two epochs
    assert sleep_parameters(np.array([N2, W, W, N2]), 30)["nwak"] == 1


def test_offwrist_counts_apart_actigraphy_minutes():
    # 1-min actigraphy epochs: W S S off off S W
    p = sleep_parameters(np.array([W, S, S, OFF, OFF, S, W]), 60)
    assert p["offwrist_min"] == 2.0
    assert p["tst_min"] == 3.0
    assert p["spt_min"] == 5.0  # epochs 1..5
    assert p["waso_min"] == 0.0
    assert p["nwak"] == 0
    assert p["sol_min"] == 1.0 and p["terminal_wake_min"] == 1.0


def test_no_sleep_at_all():
    p = sleep_parameters(np.full(40, W), 30, staged=True)
    assert p["tib_min"] == 20.0
    assert p["tst_min"] == 0.0 and p["se_pct"] == 0.0
    assert p["spt_min"] == 0.0 and p["waso_min"] == 0.0 and p["nwak"] == 0
    for k in ("sol_min", "lps_min", "terminal_wake_min", "rem_latency_min", "n2_pct", "rem_pct"):
        assert math.isnan(p[k]), k
    assert p["n2_min"] == 0.0


def test_sleep_right_up_to_lights_on():
    p = sleep_parameters(hyp((W, 10), (N2, 30)), 30)
    assert p["terminal_wake_min"] == 0.0
    assert p["sol_min"] == 5.0
    assert p["spt_min"] == 15.0
    assert p["tib_min"] == p["sol_min"] + p["spt_min"] + p["terminal_wake_min"]


def test_min_wake_bout_length():
    # sleep, then wake runs of 1, 2 and 4 epochs (0.5, 1.0, 2.0 min) separated by N2
    codes = hyp((N2, 5), (W, 1), (N2, 5), (W, 2), (N2, 5), (W, 4), (N2, 5))
    assert sleep_parameters(codes, 30)["nwak"] == 3  # any wake epoch is a bout (≥ 1 epoch)
    assert sleep_parameters(codes, 30, min_wake_bout_min=1.0)["nwak"] == 2  # runs ≥ 1 min
    assert sleep_parameters(codes, 30, min_wake_bout_min=1.5)["nwak"] == 1  # only the 2-min run
    assert sleep_parameters(codes, 30, min_wake_bout_min=2.5)["nwak"] == 0
    # WASO is not affected by the bout threshold
    assert sleep_parameters(codes, 30, min_wake_bout_min=2.5)["waso_min"] == 3.5


def test_latency_to_persistent_sleep():
    # 10-min run at 30-s epochs = 20 epochs (common practice, SLEEP_PARAMETERS.md)
    codes = hyp((W, 4), (N1, 6), (W, 2), (N2, 19), (U, 1), (N2, 20), (W, 3))
    p = sleep_parameters(codes, 30)
    assert p["sol_min"] == 2.0  # first sleep epoch 4
    # the 19-epoch run is too short, an unscored epoch interrupts; the first
    # 20-epoch run starts at epoch 4 + 6 + 2 + 19 + 1 = 32 -> 16.0 min
    assert p["lps_min"] == 16.0
    # a run of exactly 10 min qualifies; 9.5 min does not
    assert sleep_parameters(hyp((W, 2), (N2, 20)), 30)["lps_min"] == 1.0
    assert math.isnan(sleep_parameters(hyp((W, 2), (N2, 19)), 30)["lps_min"])
    # mixed stages count as uninterrupted sleep (N1..R)
    assert sleep_parameters(hyp((W, 2), (N1, 5), (N2, 10), (R, 5)), 30)["lps_min"] == 1.0


def test_empty_window():
    p = sleep_parameters(np.zeros(0, dtype=np.int8), 30, staged=True)
    assert p["tib_min"] == 0.0
    assert all(math.isnan(v) for k, v in p.items() if k != "tib_min")


def test_bad_input_is_a_clear_error():
    with pytest.raises(ValueError, match="unknown stage code"):
        sleep_parameters(np.array([0, 7, 2]), 30)
    with pytest.raises(ValueError, match="epoch_s"):
        sleep_parameters(np.array([0, 2]), 0)
    with pytest.raises(ValueError, match="lps_run_min"):
        sleep_parameters(np.array([0, 2]), 30, lps_run_min=0)


_codes = st.lists(st.sampled_from([int(s) for s in Stage]), min_size=0, max_size=200)


@settings(max_examples=300, deadline=None)
@given(codes=_codes, epoch_s=st.sampled_from([15.0, 30.0, 60.0]), bout=st.sampled_from([0.0, 1.0, 3.0]))
def test_identities_hold_for_random_hypnograms(codes, epoch_s, bout):
    # Identities of SLEEP_PARAMETERS.md: tib = sol + spt + terminal wake;
    # spt = tst + waso + unscored + off-wrist inside the SPT; 0 <= se <= 100.
    c = np.array(codes, dtype=np.int8)
    p = sleep_parameters(c, epoch_s, staged=True, min_wake_bout_min=bout)
    ep = epoch_s / 60
    assert p["tib_min"] == pytest.approx(c.size * ep)
    if c.size == 0:
        return
    assert 0 <= p["tst_min"] <= p["tib_min"]
    assert 0 <= p["se_pct"] <= 100
    sleep = (c >= 1) & (c <= 5)
    if not sleep.any():
        assert p["tst_min"] == 0 and p["spt_min"] == 0 and math.isnan(p["sol_min"])
        return
    assert p["sol_min"] + p["spt_min"] + p["terminal_wake_min"] == pytest.approx(p["tib_min"])
    first, last = np.flatnonzero(sleep)[[0, -1]]
    inside = c[first : last + 1]
    neither = np.count_nonzero((inside == U) | (inside == OFF)) * ep
    assert p["spt_min"] == pytest.approx(p["tst_min"] + p["waso_min"] + neither)
    assert p["lps_min"] >= p["sol_min"] or math.isnan(p["lps_min"])
    assert 0 <= p["nwak"] <= np.count_nonzero(inside == W)
    staged_sum = p["n1_min"] + p["n2_min"] + p["n3_min"] + p["rem_min"]
    assert staged_sum <= p["tst_min"] + 1e-9


def test_true_runs_equal_the_true_rows_of_the_run_length_encoding():
    # Common practice: run-length encoding, checked against the standard library's itertools.groupby;
    # true_runs keeps only the runs of True.
    import itertools

    from sleepfuse.scoring.runs import runs, true_runs

    rng = np.random.default_rng(5)
    for n in (0, 1, 2, 7, 300):
        for p in (0.0, 0.3, 0.9, 1.0):
            x = rng.random(n) < p
            starts, lengths, values = runs(x)
            groups = [(bool(v), len(list(g))) for v, g in itertools.groupby(x.tolist())]
            assert list(zip(values.tolist(), lengths.tolist())) == groups
            assert starts.tolist() == np.cumsum([0] + [g[1] for g in groups])[:-1].tolist()
            t_starts, t_lengths = true_runs(x)
            np.testing.assert_array_equal(t_starts, starts[values.astype(bool)])
            np.testing.assert_array_equal(t_lengths, lengths[values.astype(bool)])
