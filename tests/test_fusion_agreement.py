"""Agreement statistics against published worked examples and reference libraries."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from sleepfuse.fusion.agreement import (
    AGREEMENT_COLUMNS,
    MIN_PAIRS,
    agreement,
    bland_altman,
    icc_a1,
    lins_ccc,
    multi_night_limits,
    proportional_bias,
    ratio_limits,
)

_HERE = Path(__file__).resolve().parent
_REFERENCE_DIRS = [
    _HERE / "data" / "reference_values",  # copies kept with the tests (headers kept)
    _HERE.parent.parent / "shared" / "reference_values",  # shared/ beside the repo
]


def reference_table(name: str) -> pd.DataFrame:
    for folder in _REFERENCE_DIRS:
        if (folder / name).is_file():
            return pd.read_csv(folder / name, comment="#")
    pytest.fail(f"reference file {name} not found in {[str(d) for d in _REFERENCE_DIRS]}")


@pytest.fixture(scope="module")
def peak_flow() -> pd.DataFrame:
    return reference_table("bland_altman_1986_peak_flow.csv")


@pytest.fixture(scope="module")
def shrout_fleiss() -> np.ndarray:
    table = reference_table("shrout_fleiss_1979_table2.csv")
    return table[["judge1", "judge2", "judge3", "judge4"]].to_numpy(float)


# --- Bland–Altman -----------------------------------------------------------------------


def test_peak_flow_matches_bland_altman_1986(peak_flow):
    # Source: Bland & Altman 1986, Lancet i:307-310, peak-flow example (from memory):
    # mean difference -2.1 l/min, SD 38.8, limits -79.7 to 75.5 with +-2 SD as printed.
    assert len(peak_flow) == 17
    res = bland_altman(peak_flow["wright"], peak_flow["mini_wright"])
    assert round(res["bias"], 1) == -2.1
    assert round(res["sd"], 1) == 38.8
    # The paper's limits are built from the rounded bias and SD: -2.1 -+ 2 x 38.8.
    printed_low, printed_high = -79.7, 75.5
    assert round(round(res["bias"], 1) - 2 * round(res["sd"], 1), 1) == printed_low
    assert round(round(res["bias"], 1) + 2 * round(res["sd"], 1), 1) == printed_high
    # Unrounded +-2 SD limits (-79.6, 75.4) agree with the print to its last digit.
    assert abs((res["bias"] - 2 * res["sd"]) - printed_low) <= 0.1
    assert abs((res["bias"] + 2 * res["sd"]) - printed_high) <= 0.1


def test_default_limits_use_1_96(peak_flow):
    # Source: Bland & Altman 1986: 95% limits are bias +- 1.96 SD (z = norm.ppf(0.975)).
    res = bland_altman(peak_flow["wright"], peak_flow["mini_wright"])
    d = (peak_flow["wright"] - peak_flow["mini_wright"]).to_numpy(float)
    assert stats.norm.ppf(0.975) == pytest.approx(1.96, abs=5e-4)
    assert res["loa_low"] == pytest.approx(d.mean() - 1.959964 * d.std(ddof=1), rel=1e-6)
    assert res["loa_high"] == pytest.approx(d.mean() + 1.959964 * d.std(ddof=1), rel=1e-6)
    # A different confidence level changes the multiplier (90%: 1.645).
    res90 = bland_altman(peak_flow["wright"], peak_flow["mini_wright"], confidence=0.90)
    assert res90["loa_high"] - res90["bias"] == pytest.approx(1.644854 * d.std(ddof=1), rel=1e-6)


def test_confidence_intervals_of_bias_and_limits(peak_flow):
    # Source: Bland & Altman 1999 (Stat Methods Med Res 8:135-160) and 1986:
    # SE(bias) = SD/sqrt(n), SE(limit) ~ sqrt(3 SD^2 / n), t with n-1 df (the approximate limits' CI).
    d = (peak_flow["wright"] - peak_flow["mini_wright"]).to_numpy(float)
    n, sd = d.size, d.std(ddof=1)
    t = stats.t.ppf(0.975, n - 1)
    res = bland_altman(peak_flow["wright"], peak_flow["mini_wright"], loa_ci="approximate")
    assert res["loa_ci_method"].startswith("approximate")
    # Bias CI is the one-sample t interval: scipy's own interval is the reference.
    ci = stats.ttest_1samp(d, 0.0).confidence_interval(0.95)
    assert (res["bias_ci_low"], res["bias_ci_high"]) == pytest.approx((ci.low, ci.high), rel=1e-9)
    half = t * math.sqrt(3 * sd**2 / n)
    assert res["loa_low_ci_low"] == pytest.approx(res["loa_low"] - half)
    assert res["loa_high_ci_high"] == pytest.approx(res["loa_high"] + half)
    assert res["loa_low_ci_low"] < res["loa_low"] < res["loa_low_ci_high"]


def test_exact_limits_ci_peak_flow_carkeet_2015(peak_flow):
    # Source: Carkeet 2015 (Optom Vis Sci 92:e71-e80), exact CI of the limits by the noncentral t; on the
    # Bland & Altman 1986 peak-flow data the upper limit's exact 95% CI is [48.86, 119.93] (issue 13's
    # figure, also reproduced here with scipy.stats.nct as an independent library).
    res = bland_altman(peak_flow["wright"], peak_flow["mini_wright"])
    assert res["loa_ci_method"] == "exact, noncentral t (Carkeet 2015)"
    assert (round(res["loa_high_ci_low"], 2), round(res["loa_high_ci_high"], 2)) == (48.86, 119.93)
    d = (peak_flow["wright"] - peak_flow["mini_wright"]).to_numpy(float)
    n, mean, sd = d.size, d.mean(), d.std(ddof=1)
    q = stats.nct.ppf([0.025, 0.975], n - 1, stats.norm.ppf(0.975) * math.sqrt(n)) / math.sqrt(n)
    assert res["loa_high_ci_low"] == pytest.approx(mean + q[0] * sd, rel=1e-9)
    assert res["loa_high_ci_high"] == pytest.approx(mean + q[1] * sd, rel=1e-9)
    # the lower limit's interval is the mirror image
    assert res["loa_low_ci_low"] == pytest.approx(mean - q[1] * sd, rel=1e-9)
    assert res["loa_low_ci_high"] == pytest.approx(mean - q[0] * sd, rel=1e-9)
    # the exact interval is wider than the approximate one (which undercovers, Carkeet 2015)
    approx = bland_altman(peak_flow["wright"], peak_flow["mini_wright"], loa_ci="approximate")
    assert res["loa_high_ci_high"] - res["loa_high_ci_low"] > approx["loa_high_ci_high"] - approx["loa_high_ci_low"]
    with pytest.raises(ValueError, match="loa_ci"):
        bland_altman(peak_flow["wright"], peak_flow["mini_wright"], loa_ci="other")


def test_proportional_bias_matches_scipy_linregress():
    # Source: scipy.stats.linregress of the difference on the pair mean (Bland & Altman 1999 §3.2).
    rng = np.random.default_rng(11)
    ref = rng.uniform(300, 480, 40)
    test = 0.8 * ref + 60 + rng.normal(0, 10, 40)
    res = proportional_bias(test, ref)
    fit = stats.linregress((test + ref) / 2, test - ref)
    assert res["prop_slope"] == pytest.approx(fit.slope, rel=1e-12)
    assert res["prop_intercept"] == pytest.approx(fit.intercept, rel=1e-12)
    assert res["prop_p"] == pytest.approx(fit.pvalue, rel=1e-9)
    t = stats.t.ppf(0.975, 38)
    assert res["prop_slope_ci_low"] == pytest.approx(fit.slope - t * fit.stderr)
    assert res["prop_slope_ci_high"] == pytest.approx(fit.slope + t * fit.stderr)
    assert res["prop_p"] < 0.05 and res["prop_slope_ci_high"] < 0
    # Regression-based limits (Bland & Altman 1999 §3.2): |residuals| regressed on the mean, by scipy.
    m = (test + ref) / 2
    spread = stats.linregress(m, np.abs(test - ref - (fit.intercept + fit.slope * m)))
    k = stats.norm.ppf(0.975) * np.sqrt(np.pi / 2)
    assert res["reg_loa_intercept_high"] == pytest.approx(fit.intercept + k * spread.intercept, rel=1e-10)
    assert res["reg_loa_slope_low"] == pytest.approx(fit.slope - k * spread.slope, rel=1e-10)


def test_proportional_bias_of_an_exact_line_matches_scipy():
    # Source: scipy.stats.linregress on the edge cases of a perfect fit and a constant difference.
    ref = np.arange(10.0, 20.0)
    for test in (1.1 * ref + 2.0, ref + 3.0):
        res = proportional_bias(test, ref)
        fit = stats.linregress((test + ref) / 2, test - ref)
        assert res["prop_slope"] == pytest.approx(fit.slope, abs=1e-12)
        assert res["prop_p"] == pytest.approx(fit.pvalue, abs=1e-12, nan_ok=True)


def test_proportional_bias_slope_ci_matches_statsmodels():
    # Source: statsmodels OLS conf_int as an independent reference library.
    sm = pytest.importorskip("statsmodels.api")
    rng = np.random.default_rng(5)
    ref = rng.uniform(5, 60, 30)
    test = ref * 1.3 + rng.normal(0, 4, 30)
    m, d = (test + ref) / 2, test - ref
    fit = sm.OLS(d, sm.add_constant(m)).fit()
    res = proportional_bias(test, ref)
    assert (res["prop_slope_ci_low"], res["prop_slope_ci_high"]) == pytest.approx(
        tuple(fit.conf_int(0.05)[1]), rel=1e-9
    )


def test_regression_based_limits():
    # Source: Bland & Altman 1999 §3.2: |residuals| regressed on the mean; limits
    # (b0 + b1 m) +- 1.96 sqrt(pi/2) (c0 + c1 m) = +- 2.46 (c0 + c1 m) as printed there.
    rng = np.random.default_rng(2)
    ref = rng.uniform(10, 120, 60)
    test = ref * 1.4 + rng.normal(0, 1, 60) * ref * 0.1
    res = agreement(test, ref)
    m, d = (test + ref) / 2, test - ref
    b1, b0 = np.polyfit(m, d, 1)
    c1, c0 = np.polyfit(m, np.abs(d - (b0 + b1 * m)), 1)
    k = 1.959964 * math.sqrt(math.pi / 2)
    assert k == pytest.approx(2.46, abs=0.005)
    assert res["reg_loa_intercept_low"] == pytest.approx(b0 - k * c0, rel=1e-5)
    assert res["reg_loa_slope_high"] == pytest.approx(b1 + k * c1, rel=1e-5)
    assert "proportional bias (p=" in res["note"]
    # Without proportional bias the regression-based limits are left empty.
    flat = agreement(ref + rng.normal(0, 5, 60), ref)
    assert flat["prop_p"] > 0.05
    assert math.isnan(flat["reg_loa_intercept_low"]) and math.isnan(flat["reg_loa_slope_high"])


def test_ratio_limits_back_transform():
    # Source: Bland & Altman 1999: log-scale limits back-transformed; geometric-mean
    # ratio checked with scipy.stats.gmean.
    rng = np.random.default_rng(4)
    ref = rng.lognormal(3, 0.6, 50)
    test = ref * rng.lognormal(0.2, 0.3, 50)
    res = ratio_limits(test, ref)
    ratio = test / ref
    assert res["ratio_gm"] == pytest.approx(stats.gmean(ratio), rel=1e-12)
    sd = np.log(ratio).std(ddof=1)
    assert res["ratio_loa_high"] / res["ratio_gm"] == pytest.approx(math.exp(1.959964 * sd), rel=1e-6)
    assert res["note"] == ""
    row = agreement(test, ref, log_scale=True)
    assert row["ratio_gm"] == pytest.approx(res["ratio_gm"])
    assert math.isnan(agreement(test, ref)["ratio_gm"])  # off unless log_scale


def test_ratio_limits_refuse_zero_values():
    # Common practice: logs of zero minutes (e.g. WASO = 0) are undefined.
    res = ratio_limits([0.0, 10, 20, 30], [5.0, 12, 18, 25])
    assert math.isnan(res["ratio_gm"]) and "values <= 0" in res["note"]
    row = agreement([0.0, 10, 20, 30], [5.0, 12, 18, 25], log_scale=True)
    assert "ratio limits not computed: values <= 0" in row["note"]
    assert not math.isnan(row["bias"])


# --- several nights per participant ----------------------------------------------------


def _multi_night_data():
    rng = np.random.default_rng(8)
    nights = np.array([1, 2, 3, 4, 2, 5, 3, 1, 2, 4])  # unequal nights per participant
    ids = np.repeat([f"P{i:02d}" for i in range(nights.size)], nights)
    offset = rng.normal(0, 15, nights.size)
    d = np.repeat(offset, nights) + rng.normal(0, 8, ids.size)
    return d, ids


def test_multi_night_limits_against_direct_anova():
    # Source: Bland & Altman 2007 (J Biopharm Stat 17:571-582; formula from memory);
    # mean squares derived independently with statsmodels anova_lm, F with scipy f_oneway.
    smf = pytest.importorskip("statsmodels.formula.api")
    from statsmodels.stats.anova import anova_lm

    d, ids = _multi_night_data()
    frame = pd.DataFrame({"d": d, "p": ids})
    table = anova_lm(smf.ols("d ~ C(p)", data=frame).fit())
    ms_between = table.loc["C(p)", "sum_sq"] / table.loc["C(p)", "df"]
    ms_within = table.loc["Residual", "sum_sq"] / table.loc["Residual", "df"]
    groups = [d[ids == p] for p in np.unique(ids)]
    assert stats.f_oneway(*groups).statistic == pytest.approx(ms_between / ms_within, rel=1e-9)
    m = np.array([g.size for g in groups], float)
    N, n = m.sum(), m.size
    var_b = max((ms_between - ms_within) / ((N**2 - (m**2).sum()) / ((n - 1) * N)), 0.0)
    sd = math.sqrt(var_b + ms_within)

    res = multi_night_limits(d, ids)
    assert res["mn_sd"] == pytest.approx(sd, rel=1e-9)
    assert res["mn_sd_within"] == pytest.approx(math.sqrt(ms_within), rel=1e-9)
    assert res["mn_sd_between"] == pytest.approx(math.sqrt(var_b), rel=1e-9)
    assert res["mn_loa_low"] == pytest.approx(d.mean() - 1.959964 * sd, rel=1e-6)
    assert res["mn_loa_high"] == pytest.approx(d.mean() + 1.959964 * sd, rel=1e-6)
    # Between-participant variation: the naive pooled SD understates the limits.
    assert res["mn_sd"] > d.std(ddof=1)
    row = agreement(d + 400, np.full(d.size, 400.0), ids)
    assert row["n_participants"] == 10 and row["n_nights"] == d.size
    assert row["mn_sd"] == pytest.approx(sd, rel=1e-9)


def test_multi_night_negative_between_variance_truncated():
    # Source: Bland & Altman 2007: a negative variance estimate is set to zero.
    ids = np.array(["A", "A", "B", "B", "C", "C"])
    d = np.array([-10.0, 10.0, -9.0, 11.0, -11.0, 9.0])  # participant means nearly equal
    res = multi_night_limits(d, ids)
    assert res["mn_sd_between"] == 0.0
    assert "set to 0" in res["note"]


def test_one_night_each_gives_naive_limits(peak_flow):
    # Source: Bland & Altman 2007: without repeated nights there is nothing to correct.
    row = agreement(peak_flow["wright"], peak_flow["mini_wright"], peak_flow["subject"])
    assert row["mn_sd"] == pytest.approx(row["sd"])
    assert row["mn_loa_low"] == pytest.approx(row["loa_low"])
    assert "one night per participant: corrected limits equal naive" in row["note"]


# --- concordance and ICC ---------------------------------------------------------------


def test_lins_ccc_matches_definition():
    # Source: Lin 1989 (Biometrics 45:255-268) definition with 1/n moments, written out here.
    rng = np.random.default_rng(21)
    x = rng.normal(420, 40, 35)
    y = x * 0.9 + 30 + rng.normal(0, 15, 35)
    mx, my = x.mean(), y.mean()
    cov = np.mean((x - mx) * (y - my))
    vx, vy = np.mean((x - mx) ** 2), np.mean((y - my) ** 2)
    expected = 2 * cov / (vx + vy + (mx - my) ** 2)
    res = lins_ccc(x, y)
    assert res["ccc"] == pytest.approx(expected, rel=1e-12)
    assert res["ccc_ci_low"] < res["ccc"] < res["ccc_ci_high"] <= 1
    # CCC is below Pearson's r when the means differ (Lin 1989: rho_c = r x C_b).
    assert res["ccc"] < stats.pearsonr(x, y).statistic


def test_lins_ccc_interval_worked_by_hand():
    # Source: Lin 1989 (Biometrics 45:255-268) z-transform variance as corrected in Lin 2000 (Biometrics
    # 56:324-325), worked by hand for 6 pairs with a clear location shift (u != 0, so the u^4 term counts):
    # x = 1..6, y = 2.5, 2.5, 4, 5.5, 5.5, 7.5; 1/n moments.
    #   mean x 3.5, mean y 4.583333; sum dx^2 = 17.5, sum dy^2 = 19.208333, sum dx dy = 17.75
    #   s_x^2 = 2.916667, s_y^2 = 3.201389, s_xy = 2.958333, (mean x - mean y)^2 = 1.173611
    #   rho_c = 2 * 2.958333 / (2.916667 + 3.201389 + 1.173611) = 0.811429
    #   r = 2.958333 / sqrt(2.916667 * 3.201389) = 0.968132;  u = -1.083333 / (2.916667 * 3.201389)^(1/4) = -0.619735
    #   var(z) = [0.128987 + 0.685077 - 0.292369] / (6 - 2) = 0.130424   (the three terms of Lin's variance)
    #   z = atanh(0.811429) = 1.131197; half-width 1.959964 * sqrt(0.130424) = 0.707826
    #   CI = tanh(1.131197 -+ 0.707826) = 0.3998 to 0.9507
    x = np.array([1.0, 2, 3, 4, 5, 6])
    y = np.array([2.5, 2.5, 4, 5.5, 5.5, 7.5])
    res = lins_ccc(x, y)
    assert res["ccc"] == pytest.approx(0.811429, abs=1e-6)
    assert res["ccc_ci_low"] == pytest.approx(0.3998, abs=1e-4)
    assert res["ccc_ci_high"] == pytest.approx(0.9507, abs=1e-4)
    # with the u^4 term's sign flipped, var(z) = (0.128987 + 0.685077 + 0.292369) / 4 and the lower end is 0.1000
    assert abs(res["ccc_ci_low"] - 0.1000) > 0.2


def test_lins_ccc_interval_coverage():
    # Common practice: the Fisher-z interval of Lin 1989/2000 should cover the
    # population CCC about 95% of the time (simulation with a known value).
    rng = np.random.default_rng(99)
    rho, shift, n = 0.8, 0.3, 60
    true_ccc = 2 * rho / (1 + 1 + shift**2)
    cov = [[1, rho], [rho, 1]]
    hits = 0
    trials = 400
    for _ in range(trials):
        xy = rng.multivariate_normal([0, shift], cov, n)
        res = lins_ccc(xy[:, 0], xy[:, 1])
        hits += res["ccc_ci_low"] <= true_ccc <= res["ccc_ci_high"]
    assert 0.91 <= hits / trials <= 0.98


def test_icc_shrout_fleiss_table2(shrout_fleiss):
    # Source: Shrout & Fleiss 1979 (Psychol Bull 86:420-428) Table 2: ICC(2,1) = 0.29 (from memory).
    assert shrout_fleiss.shape == (6, 4)
    assert round(icc_a1(shrout_fleiss), 2) == 0.29


# pingouin 0.7 calls a pandas keyword deprecated in pandas 3.1; not our code.
_PINGOUIN_WARNING = pytest.mark.filterwarnings("ignore:The inplace keyword")


def _pingouin_icc2(ratings: np.ndarray) -> float:
    pg = pytest.importorskip("pingouin")
    n, k = ratings.shape
    long = pd.DataFrame({
        "target": np.repeat(np.arange(n), k),
        "rater": np.tile(np.arange(k), n),
        "rating": ratings.ravel(),
    })
    table = pg.intraclass_corr(data=long, targets="target", raters="rater", ratings="rating")
    by_type = table.set_index("Type")["ICC"]
    # pingouin < 0.7 labels it "ICC2", pingouin >= 0.7 "ICC(A,1)": the same estimator.
    return float(by_type["ICC(A,1)"] if "ICC(A,1)" in by_type.index else by_type["ICC2"])


@_PINGOUIN_WARNING
def test_icc_matches_pingouin(shrout_fleiss):
    # Source: pingouin.intraclass_corr ICC2 / ICC(A,1) (two-way, absolute agreement, single rater).
    assert icc_a1(shrout_fleiss) == pytest.approx(_pingouin_icc2(shrout_fleiss), rel=1e-10)
    rng = np.random.default_rng(17)
    ratings = rng.normal(0, 1, (25, 1)) + rng.normal(0, 0.7, (25, 3)) + [0.0, 0.4, -0.2]
    assert icc_a1(ratings) == pytest.approx(_pingouin_icc2(ratings), rel=1e-10)


@_PINGOUIN_WARNING
def test_agreement_icc_uses_reference_and_test(peak_flow):
    # Source: pingouin ICC2 on the n x 2 matrix [reference, test].
    row = agreement(peak_flow["wright"], peak_flow["mini_wright"])
    matrix = peak_flow[["mini_wright", "wright"]].to_numpy(float)
    assert row["icc"] == pytest.approx(_pingouin_icc2(matrix), rel=1e-10)


# --- the agreement.csv row -------------------------------------------------------------


def test_agreement_row_columns_and_nan_pairs():
    # Common practice: pairs with a missing value are dropped before any statistic.
    rng = np.random.default_rng(1)
    ref = rng.normal(400, 30, 12)
    test = ref + rng.normal(-10, 12, 12)
    test[[2, 5]] = np.nan
    ref[7] = np.nan
    ids = np.repeat(["A", "B", "C", "D"], 3)
    row = agreement(test, ref, ids)
    assert list(row) == AGREEMENT_COLUMNS
    assert row["n_nights"] == 9 and row["n_participants"] == 4
    keep = np.isfinite(test) & np.isfinite(ref)
    assert row["bias"] == pytest.approx(np.mean(test[keep] - ref[keep]))
    assert row["mean_reference"] == pytest.approx(ref[keep].mean())
    assert isinstance(row["note"], str)


def test_fewer_than_three_pairs_gives_counts_and_note():
    # Common practice: no statistics from fewer than MIN_PAIRS paired nights.
    row = agreement([400.0, np.nan, 380.0, 390.0], [410.0, 400.0, np.nan, 385.0], ["A", "A", "B", "C"])
    assert MIN_PAIRS == 3
    assert row["n_nights"] == 2 and row["n_participants"] == 2
    assert row["note"] == "fewer than 3 paired nights: no agreement statistics"
    counts = ("n_nights", "n_participants", "by_construction", "n_inf_dropped")
    numeric = [c for c in AGREEMENT_COLUMNS if c not in counts and not c.endswith("method") and c != "note"]
    assert all(math.isnan(row[c]) for c in numeric)
    assert row["by_construction"] is False and row["n_inf_dropped"] == 0
    assert all(row[c] == "" for c in AGREEMENT_COLUMNS if c.endswith("method"))
    empty = agreement([], [])
    assert empty["n_nights"] == 0 and empty["n_participants"] == 0


def test_mismatched_lengths_raise_clear_error():
    with pytest.raises(ValueError, match="same number of nights"):
        agreement([1.0, 2.0, 3.0], [1.0, 2.0])
    with pytest.raises(ValueError, match="one ID per night"):
        agreement([1.0, 2.0, 3.0], [1.0, 2.0, 3.0], ["A"])


def _random_nights(seed: int, variant: str) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    rows = []
    for pid in ("P3", "P1", "P2", "P10"):
        for night in ("2026-03-02", "2026-03-01", "2026-03-03", "2026-03-10"):
            for source in ("psg", "actigraphy", "diary"):
                if rng.random() < 0.8:
                    rows.append({"participant": pid, "night": night, "source": source,
                                 "included": bool(rng.random() < 0.85),
                                 **{p: float(rng.normal(400, 30)) for p in ("tib_min", "tst_min", "sol_min", "waso_min",
                                                                             "se_pct", "nwak", "lps_min", "spt_min",
                                                                             "terminal_wake_min")}})
    nights = pd.DataFrame(rows)
    if variant == "missing id":  # an ID pandas reads as missing: the MultiIndex path
        nights.loc[nights.index[::7], "participant"] = None
    elif variant == "repeated night":  # one reference night twice: pandas' merge itself
        nights = pd.concat([nights, nights[nights["source"] != "actigraphy"].head(3)], ignore_index=True)
    return nights


@pytest.mark.parametrize("variant", ["plain", "missing id", "repeated night"])
@pytest.mark.parametrize("seed", [8, 9, 10])
def test_paired_nights_equal_a_pandas_inner_merge(variant, seed):
    # Reference: pandas DataFrame.merge(how="inner") on participant and night, in the test rows' order.
    from sleepfuse.fusion.pairs import paired_nights, shared_parameters

    nights = _random_nights(seed, variant)
    for test, ref in (("actigraphy", "psg"), ("diary", "actigraphy"), ("diary", "psg")):
        params = [p for p in shared_parameters(test, ref) if p in nights]
        inc = nights[nights["included"]]
        a = inc.loc[inc["source"] == test, ["participant", "night", *params]]
        b = inc.loc[inc["source"] == ref, ["participant", "night", *params]]
        expected = a.merge(b, on=["participant", "night"], how="inner", suffixes=("_test", "_ref"))
        got = paired_nights(nights[["participant", "night", "source", "included", *params]], test, ref)
        pd.testing.assert_frame_equal(got.reset_index(drop=True), expected.reset_index(drop=True))


@pytest.mark.parametrize("seed", [8, 9])
def test_agreement_table_equals_agreement_of_each_merged_pair(seed):
    # Reference: the pandas inner merge of each pair, then ``agreement`` row by row with the public
    # ``multi_night_limits`` (the table's shortcuts must not change a value).
    from sleepfuse.model.definitions import PAIRS, PARAMETERS
    from sleepfuse.fusion.pairs import agreement_table, shared_parameters
    from sleepfuse.scoring.nights import PARAMETER_COLUMNS

    nights = _random_nights(seed, "plain")
    for col in PARAMETER_COLUMNS:
        if col not in nights:
            nights[col] = np.random.default_rng(seed).normal(50, 10, len(nights))
    table = agreement_table(nights)
    k = 0
    for test, ref in PAIRS:
        inc = nights[nights["included"]]
        params = shared_parameters(test, ref)
        a = inc.loc[inc["source"] == test, ["participant", "night", *params]]
        b = inc.loc[inc["source"] == ref, ["participant", "night", *params]]
        merged = a.merge(b, on=["participant", "night"], how="inner", suffixes=("_test", "_ref"))
        for param in params:
            t, r = merged[f"{param}_test"].to_numpy(float), merged[f"{param}_ref"].to_numpy(float)
            ids = merged["participant"].to_numpy(object)
            expected = agreement(t, r, ids, log_scale=PARAMETERS[param].skewed)
            row = table.iloc[k]
            k += 1
            assert (row["parameter"], row["pair"]) == (param, f"{test}-{ref}")
            for key, value in expected.items():
                if isinstance(value, str):
                    assert row[key] == value
                else:
                    assert row[key] == value or (np.isnan(row[key]) and np.isnan(value)), key
            keep = np.isfinite(t) & np.isfinite(r)
            if keep.sum() >= 3:
                mn = multi_night_limits(t[keep] - r[keep], ids[keep])
                assert row["mn_sd"] == mn["mn_sd"] or (np.isnan(mn["mn_sd"]) and np.isnan(row["mn_sd"]))
    assert k == len(table)


def test_ols_p_value_is_scipy_t_survival():
    # Source: scipy.stats.t.sf (two-sided p of the slope, as scipy.stats.linregress reports it).
    from sleepfuse.fusion.agreement import _ols

    rng = np.random.default_rng(3)
    for n in (3, 4, 10, 200):
        x = rng.normal(size=n)
        y = 0.3 * x + rng.normal(size=n)
        fit = stats.linregress(x, y)
        assert _ols(x, y)[3] == pytest.approx(fit.pvalue, rel=1e-12, abs=1e-300)


@pytest.mark.parametrize("confidence", [0.5, 0.8, 0.9, 0.95, 0.99, 0.999, 0.6827])
def test_quantiles_are_scipy_stats_quantiles(confidence):
    # Source: scipy.stats.norm.ppf and scipy.stats.t.ppf (the module computes them with the
    # scipy.special functions those call, to spare the import of scipy.stats).
    from sleepfuse.fusion.agreement import _t, _z

    q = 0.5 + confidence / 2
    assert _z(confidence) == float(stats.norm.ppf(q))
    for df in [*range(1, 400), 1000, 5000, 10**6]:
        assert _t(confidence, df) == float(stats.t.ppf(q, df)), df
