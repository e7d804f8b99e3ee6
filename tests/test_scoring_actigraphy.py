"""Actigraphy sleep/wake: Cole–Kripke, Webster rescoring, Sadeh, minute summing.

Each check worked by hand from the published formula names its source:
Cole et al. 1992 (Sleep 15:461–469), Webster et al. 1982 as applied by Cole
et al. 1992 (rules from memory), Sadeh et al. 1994 (Sleep 17:201–207).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from sleepfuse.model.config import ActigraphySection
from sleepfuse.scoring.actigraphy import (
    COLE_KRIPKE_COEFFICIENTS,
    cole_kripke,
    cole_kripke_index,
    epochs_to_minutes,
    sadeh,
    sadeh_terms,
    score_sleep_wake,
    webster_rescore,
)


def series(*parts):
    """Bool sleep series from (is_sleep, minutes) pairs."""
    return np.concatenate([np.full(n, bool(v)) for v, n in parts])


# ---------------------------------------------------------------- epochs_to_minutes


@pytest.mark.parametrize("epoch_s,k", [(15, 4), (30, 2), (60, 1)])
def test_epochs_to_minutes_sums_whole_minutes(epoch_s, k):
    # common practice (SLEEP_PARAMETERS.md): shorter epochs are summed into minutes
    rng = np.random.default_rng(7)
    counts = rng.integers(0, 500, size=10 * k + (k - 1)).astype(float)  # a partial minute at the end
    m = epochs_to_minutes(counts, epoch_s)
    assert m.shape == (10,)
    for i in range(10):
        assert m[i] == counts[i * k : (i + 1) * k].sum()


def test_epochs_to_minutes_nan_minute_and_bad_epoch():
    m = epochs_to_minutes(np.array([1.0, 2.0, np.nan, 4.0, 5.0, 6.0]), 30)
    assert m[0] == 3.0 and math.isnan(m[1]) and m[2] == 11.0
    for bad in (45, 120, 0, -30):
        with pytest.raises(ValueError):
            epochs_to_minutes(np.ones(8), bad)


# ---------------------------------------------------------------- Cole–Kripke


def test_cole_kripke_index_worked_from_the_published_weights():
    # Source: Cole et al. 1992, 1-min set: D = 0.001 (106 A-4 + 54 A-3 + 58 A-2 + 76 A-1 + 230 A0 + 74 A+1
    # + 67 A+2), the weights typed here from the paper's equation (confirmed against a secondary
    # description), not read from the module. Counts 0, 3, 0, 12, 5, 0, 8, 2, 0, 1.
    a = np.array([0, 3, 0, 12, 5, 0, 8, 2, 0, 1], dtype=float)
    # minute 4: A-4..A+2 = 0, 3, 0, 12, 5, 0, 8 -> 0 + 162 + 0 + 912 + 1150 + 0 + 536 = 2760 -> 2.76 (wake)
    # minute 6: A-4..A+2 = 0, 12, 5, 0, 8, 2, 0 -> 0 + 648 + 290 + 0 + 1840 + 148 + 0 = 2926 -> 2.926
    # minute 9: A-4..A+2 = 0, 8, 2, 0, 1, (0), (0) -> 0 + 432 + 116 + 0 + 230 = 778 -> 0.778 (sleep)
    # minute 0: (0)x4, 0, 3, 0 -> 74 x 3 = 222 -> 0.222
    d = cole_kripke_index(a)
    assert d[4] == pytest.approx(2.760)
    assert d[6] == pytest.approx(2.926)
    assert d[9] == pytest.approx(0.778)
    assert d[0] == pytest.approx(0.222)
    # the other circulating 1-min set (P = 0.00001; 404, 598, 326, 441, 1408, 508, 350; from memory), minute 4:
    # 0 + 1794 + 0 + 5292 + 7040 + 0 + 2800 = 16926 -> 0.16926
    assert cole_kripke_index(a, coefficients="1min-p0.00001")[4] == pytest.approx(0.16926)
    np.testing.assert_array_equal(cole_kripke(a, webster=False)[[0, 4, 6, 9]], [True, False, False, True])
    assert set(COLE_KRIPKE_COEFFICIENTS) == {"1min-p0.001", "1min-p0.00001"}


def test_cole_kripke_index_hand_worked():
    # Cole et al. 1992: D = P·(106·A−4 + 54·A−3 + 58·A−2 + 76·A−1 + 230·A0 + 74·A+1 + 67·A+2)
    # window A−4..A+2 = 1, 2, 0, 1, 2, 1, 0 around minute 4:
    # 0.001·(106·1 + 54·2 + 58·0 + 76·1 + 230·2 + 74·1 + 67·0) = 0.001·824 = 0.824 -> sleep
    a = np.array([1, 2, 0, 1, 2, 1, 0], dtype=float)
    d = cole_kripke_index(a)
    assert d[4] == pytest.approx(0.824)
    # set "1min-p0.00001" (from memory): 0.00001·(404 + 1196 + 0 + 441 + 2816 + 508 + 0) = 0.05365
    d2 = cole_kripke_index(a, coefficients="1min-p0.00001")
    assert d2[4] == pytest.approx(0.05365)
    # window 10, 20, 0, 5, 30, 15, 8: 0.001·(1060 + 1080 + 0 + 380 + 6900 + 1110 + 536) = 11.066 -> wake
    b = np.array([10, 20, 0, 5, 30, 15, 8], dtype=float)
    assert cole_kripke_index(b)[4] == pytest.approx(11.066)
    assert not cole_kripke(b, webster=False)[4]
    assert cole_kripke(a, webster=False)[4]


def test_cole_kripke_edges_zero_padded_and_scale():
    # one count of 10 at minute 0; neighbours outside the series count 0 (documented edge rule):
    # D0 = 0.001·230·10 = 2.3, D1 = 0.001·76·10 = 0.76, D2 = 0.58, D3 = 0.54, D4 = 1.06
    a = np.array([10, 0, 0, 0, 0, 0], dtype=float)
    np.testing.assert_allclose(cole_kripke_index(a), [2.3, 0.76, 0.58, 0.54, 1.06, 0.0])
    # count_scale multiplies the counts before D (so D scales linearly)
    np.testing.assert_allclose(cole_kripke_index(a, count_scale=0.5), [1.15, 0.38, 0.29, 0.27, 0.53, 0.0])
    # D >= 1 -> wake, D < 1 -> sleep (Cole et al. 1992)
    np.testing.assert_array_equal(cole_kripke(a, webster=False), [False, True, True, True, False, True])


def test_cole_kripke_nan_minute_is_not_sleep_and_neighbours_see_zero():
    a = np.array([0, 0, np.nan, 0, 0], dtype=float)
    d = cole_kripke_index(a)
    assert math.isnan(d[2]) and np.all(d[[0, 1, 3, 4]] == 0)
    np.testing.assert_array_equal(cole_kripke(a, webster=False), [True, True, False, True, True])
    np.testing.assert_array_equal(cole_kripke(a), [True, True, False, True, True])


def test_cole_kripke_rejects_unknown_set():
    with pytest.raises(ValueError, match="coefficient set"):
        cole_kripke_index(np.zeros(5), coefficients="30s")


# ---------------------------------------------------------------- Webster rules
# Webster et al. 1982 as applied by Cole et al. 1992 (from memory); reading of
# webster_rescore: rules 1-3 on the original runs, then rules 4-5.


def test_webster_rule1_after_4_min_wake_next_1_min():
    s = series((1, 30), (0, 4), (1, 20))
    out = webster_rescore(s)
    assert not out[34] and out[35:].all()  # first sleep minute after 4 min wake -> wake
    assert out[:30].all()
    # control: 3 min of wake is not enough
    s3 = series((1, 30), (0, 3), (1, 20))
    np.testing.assert_array_equal(webster_rescore(s3), s3)


def test_webster_rule2_after_10_min_wake_next_3_min():
    s = series((1, 30), (0, 10), (1, 20))
    out = webster_rescore(s)
    assert not out[40:43].any() and out[43:].all()
    # control: 9 min of wake -> only rule 1 (1 min)
    out9 = webster_rescore(series((1, 30), (0, 9), (1, 20)))
    assert not out9[39] and out9[40:].all()


def test_webster_rule3_after_15_min_wake_next_4_min():
    s = series((1, 30), (0, 15), (1, 20))
    out = webster_rescore(s)
    assert not out[45:49].any() and out[49:].all()
    out14 = webster_rescore(series((1, 30), (0, 14), (1, 20)))  # rule 2 only: 3 min
    assert not out14[44:47].any() and out14[47:].all()


def test_webster_rule4_short_sleep_flanked_by_10_min_wake():
    # S30 W10 S6 W10 S30: rule 2 takes 3 min off the S6; the remaining 3 min
    # lie between 13 and 10 min of wake -> rule 4 makes them wake.
    s = series((1, 30), (0, 10), (1, 6), (0, 10), (1, 30))
    out = webster_rescore(s)
    assert not out[30:56].any()
    assert not out[56:59].any() and out[59:].all()  # rule 2 after the second W10
    # control: W8 S6 W10 -> rule 1 leaves 5 min of sleep after 9 min of wake: not flanked
    c = series((1, 30), (0, 8), (1, 6), (0, 10), (1, 30))
    outc = webster_rescore(c)
    assert not outc[38] and outc[39:44].all()


def test_webster_rule5_sleep_up_to_10_min_flanked_by_20_min_wake():
    # S30 W20 S14 W20 S30: rule 3 takes 4 min, 10 min remain between 24 and 20
    # min of wake -> rule 5 (not rule 4: 10 > 6).
    s = series((1, 30), (0, 20), (1, 14), (0, 20), (1, 30))
    out = webster_rescore(s)
    assert not out[30:84].any()
    # control: S15 -> 11 min remain after rule 3, longer than 10 -> kept
    c = series((1, 30), (0, 20), (1, 15), (0, 20), (1, 30))
    outc = webster_rescore(c)
    assert not outc[50:54].any() and outc[54:65].all()


def test_webster_series_edges_are_not_wake_flanks():
    s = series((1, 5), (0, 12))  # 5 min of sleep at the start: no wake before it
    np.testing.assert_array_equal(webster_rescore(s), s)
    assert webster_rescore(np.zeros(0, bool)).size == 0


# Missing minutes are neither sleep nor wake in any rule (SLEEP_PARAMETERS.md; issue 13).


def test_webster_gap_inside_sleep_rescores_nothing():
    # 40 min sleep, a 20-min gap of missing counts, 40 min sleep: before the fix the gap counted as
    # >= 15 min of wake and the 4 minutes after it were rescored wake (TST 96 / WASO 4 / NWAK 1).
    counts = np.r_[np.zeros(40), np.full(20, np.nan), np.zeros(40)]
    out = cole_kripke(counts)
    assert out[:40].all() and out[60:].all() and not out[40:60].any()
    from sleepfuse.scoring.parameters import sleep_parameters
    from sleepfuse.model.stages import Stage

    codes = np.where(out, Stage.SLEEP, Stage.WAKE).astype(np.int8)
    codes[40:60] = Stage.UNSCORED
    p = sleep_parameters(codes, 60.0)
    assert (p["tst_min"], p["waso_min"], p["nwak"]) == (80.0, 0.0, 0.0)


def test_webster_gap_edges():
    # sleep right after a gap (first minute after its edge) stays sleep
    unknown = np.zeros(20, bool)
    unknown[:5] = True
    s = np.r_[np.zeros(5, bool), np.ones(15, bool)]
    out = webster_rescore(s, unknown)
    assert out[5:].all() and not out[:5].any()
    # wake before a gap does not reach across it: W10, gap 3, S20 -> the sleep keeps its head
    s = series((1, 10), (0, 10), (0, 3), (1, 20))
    unknown = np.zeros(s.size, bool)
    unknown[20:23] = True
    out = webster_rescore(s, unknown)
    assert out[23:].all()
    # ... but wake ending exactly at the sleep run's start still counts (control: no gap)
    out2 = webster_rescore(series((1, 10), (0, 13), (1, 20)))
    assert not out2[23:26].any() and out2[26:].all()
    # a 5-min sleep bout between two gaps is kept (it was wiped out as "flanked by wake")
    s = series((1, 30), (0, 15), (1, 5), (0, 15), (1, 30))
    unknown = np.zeros(s.size, bool)
    unknown[30:45] = unknown[50:65] = True
    out = webster_rescore(s, unknown)
    assert out[45:50].all() and out[:30].all() and out[65:].all() and not out[unknown].any()
    # control: the same bout between two real wake runs of 15 min is rescored (rules 3 then 4)
    assert not webster_rescore(s)[45:50].any()
    # a wake run that is cut by a gap is measured up to the gap: W3 | gap | W3 then sleep -> only 3 min
    s = series((1, 10), (0, 3), (0, 2), (0, 3), (1, 10))
    unknown = np.zeros(s.size, bool)
    unknown[13:15] = True
    out = webster_rescore(s, unknown)
    assert out[18:].all()


def test_webster_order_option():
    # S30 W10 S9 W10 S30. Sequential (default): rule 2 cuts 3 min, the 6 left lie between 13 and 10 min
    # of wake -> rule 4 -> all wake. Parallel: on the original runs the 9-min run is not <= 6 -> only the
    # 3-min cut of rule 2 (and the 3 after the second W10).
    s = series((1, 30), (0, 10), (1, 9), (0, 10), (1, 30))
    seq = webster_rescore(s)
    par = webster_rescore(s, order="parallel")
    assert not seq[40:49].any()
    assert not par[40:43].any() and par[43:49].all()
    assert par.sum() > seq.sum()
    with pytest.raises(ValueError, match="webster order"):
        webster_rescore(s, order="other")
    ck = score_sleep_wake(np.zeros(60), 60, ActigraphySection(webster_order="parallel"))
    assert ck.all()


def test_cole_kripke_with_webster_end_to_end():
    counts = np.r_[np.full(30, 0.0), np.full(20, 50.0), np.full(40, 0.0)]
    raw = cole_kripke(counts, webster=False)
    res = cole_kripke(counts)
    assert raw[:26].all() and not raw[30:50].any()
    # the wake block of >= 15 min: 4 more minutes of wake after it
    last_wake = np.flatnonzero(~raw)[-1]
    assert not res[last_wake + 1 : last_wake + 5].any() and res[last_wake + 5 :].all()


# ---------------------------------------------------------------- Sadeh


def test_sadeh_terms_hand_worked():
    # Sadeh et al. 1994 terms at minute 5 of an 11-min series (window = the whole series)
    c = np.array([0, 10, 60, 70, 0, 120, 400, 55, 0, 0, 99], dtype=float)
    t = sadeh_terms(c)
    # MW5: mean of the 11 counts with 400 capped at 300: 714 / 11 = 64.909...
    assert t["mw5"][5] == pytest.approx(714 / 11)
    # NAT: 50 <= count < 100 -> 60, 70, 55, 99 = 4 (120 and 300 are not)
    assert t["nat"][5] == 4
    # SD6 over minutes 0..5 (0, 10, 60, 70, 0, 120): mean 43.333, Σd² = 11733.33,
    # sample SD = sqrt(11733.33 / 5) = 48.443
    assert t["sd6"][5] == pytest.approx(math.sqrt(11733.3333333 / 5), rel=1e-6)
    # LG = ln(120 + 1) = 4.7958
    assert t["lg"][5] == pytest.approx(math.log(121))
    # PS = 7.601 − 0.065·64.909 − 1.08·4 − 0.056·48.443 − 0.703·4.7958 = −7.0225
    ps = 7.601 - 0.065 * (714 / 11) - 1.08 * 4 - 0.056 * math.sqrt(11733.3333333 / 5) - 0.703 * math.log(121)
    assert t["ps"][5] == pytest.approx(ps, rel=1e-6)
    assert t["ps"][5] == pytest.approx(-7.0225, abs=1e-3)
    assert not sadeh(c)[5]


def test_sadeh_edges_and_cap():
    c = np.array([0, 10, 60, 70, 0, 120, 400, 55, 0, 0, 99], dtype=float)
    t = sadeh_terms(c)
    # minute 0: window truncated to minutes 0..5 -> mean 260/6; SD over minute 0 alone -> 0
    assert t["mw5"][0] == pytest.approx(260 / 6)
    assert t["sd6"][0] == 0.0
    # minute 1: SD of (0, 10) with ddof=1 = 7.0711
    assert t["sd6"][1] == pytest.approx(math.sqrt(50))
    # cap: minute 6 has 400 counts -> LG = ln(300 + 1)
    assert t["lg"][6] == pytest.approx(math.log(301))
    # a different cap changes it
    assert sadeh_terms(c, cap=1000)["lg"][6] == pytest.approx(math.log(401))


def test_sadeh_still_is_sleep_active_is_wake():
    # all zeros: PS = 7.601 >= 0 -> sleep (Sadeh et al. 1994)
    assert sadeh(np.zeros(20)).all()
    assert sadeh_terms(np.zeros(20))["ps"][10] == pytest.approx(7.601)
    assert not sadeh(np.full(20, 250.0)).any()


def test_sadeh_nat_edges_50_and_100():
    # Sadeh et al. 1994: NAT counts epochs with 50 <= count < 100, so 50 counts and 100 does not.
    window = np.zeros(11)
    for value, expected in ((49.0, 0), (50.0, 1), (99.0, 1), (99.999, 1), (100.0, 0), (150.0, 0)):
        c = window.copy()
        c[5] = value
        assert sadeh_terms(c)["nat"][5] == expected, value


def test_sadeh_nan_minute():
    c = np.zeros(12)
    c[6] = np.nan
    t = sadeh_terms(c)
    assert math.isnan(t["ps"][6]) and not sadeh(c)[6]
    assert t["mw5"][5] == 0.0 and sadeh(c)[5]


# ---------------------------------------------------------------- dispatch


def test_score_sleep_wake_dispatch():
    rng = np.random.default_rng(11)
    counts = np.where(rng.random(2 * 600) < 0.7, 0.0, rng.integers(1, 400, 2 * 600)).astype(float)
    minutes = epochs_to_minutes(counts, 30)
    ck = score_sleep_wake(counts, 30, ActigraphySection())
    np.testing.assert_array_equal(ck, cole_kripke(minutes))
    ck2 = score_sleep_wake(
        counts, 30, ActigraphySection(coefficients="1min-p0.00001", count_scale=2.0, webster=False)
    )
    np.testing.assert_array_equal(ck2, cole_kripke(minutes, coefficients="1min-p0.00001", count_scale=2.0, webster=False))
    sd = score_sleep_wake(counts, 30, ActigraphySection(algorithm="sadeh", sadeh_cap=200.0))
    np.testing.assert_array_equal(sd, sadeh(minutes, cap=200.0))
    # per-algorithm count scales; the shared count_scale is the default of both
    both = ActigraphySection(count_scale=0.5, cole_kripke_scale=2.0)
    np.testing.assert_array_equal(score_sleep_wake(counts, 30, both), cole_kripke(minutes, count_scale=2.0))
    both.algorithm = "sadeh"
    np.testing.assert_array_equal(score_sleep_wake(counts, 30, both), sadeh(minutes * 0.5))
    both.sadeh_scale = 3.0
    np.testing.assert_array_equal(score_sleep_wake(counts, 30, both), sadeh(minutes * 3.0))
    assert ActigraphySection(count_scale=0.25).scale_for("cole-kripke") == 0.25
    assert ck.shape == (600,)
    with pytest.raises(ValueError, match="algorithm"):
        score_sleep_wake(counts, 30, ActigraphySection(algorithm="other"))


def test_algorithm_provenance_states_scale_and_webster_order():
    from sleepfuse.scoring.actigraphy import algorithm_provenance

    prov = algorithm_provenance(ActigraphySection(count_scale=0.5, cole_kripke_scale=2.0))
    assert prov["count_scale"] == 2.0 and prov["count_scale_key"] == "actigraphy.cole_kripke_scale"
    assert prov["webster_order"] == "sequential" and "from memory" in prov["webster_order_reading"]
    assert "neither sleep nor wake" in prov["missing_minutes"]
    sadeh_prov = algorithm_provenance(ActigraphySection(algorithm="sadeh", count_scale=0.5))
    assert sadeh_prov["count_scale"] == 0.5 and sadeh_prov["count_scale_key"] == "actigraphy.count_scale"
    assert "webster_order" not in sadeh_prov
