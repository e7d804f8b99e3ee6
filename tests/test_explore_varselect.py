"""Variable selection (sleepfuse/explore/varselect.py) and the end-to-end case of issue 17:
a subgroup hidden in a few of many skewed columns, with a-priori labels."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.linear_model import LinearRegression
from sklearn.metrics import adjusted_rand_score

from sleepfuse.explore.cli import main
from sleepfuse.explore.simulate import HIDDEN_INFORMATIVE, hidden_subgroup_cohort
from sleepfuse.explore.varselect import regression_loglik, select_columns


def test_gaussian_regression_loglik_matches_least_squares_from_sklearn():
    # Source: sklearn.linear_model.LinearRegression for the fit; the maximised normal
    # log-likelihood -n/2 (ln(2π RSS/n) + 1) is the textbook closed form (from memory).
    rng = np.random.default_rng(1)
    s = rng.standard_normal((80, 3))
    y = s @ [0.5, -1.0, 0.2] + 0.7 * rng.standard_normal(80)
    ll, p = regression_loglik(y, s, "gaussian")
    rss = float(np.sum((y - LinearRegression().fit(s, y).predict(s)) ** 2))
    assert p == 5
    assert ll == pytest.approx(-40 * (np.log(2 * np.pi * rss / 80) + 1), rel=1e-10)


def test_skewnormal_regression_is_never_below_the_gaussian_and_finds_skewed_errors():
    # The skew-normal error model nests the normal one (α = 0; Azzalini 1985), so its
    # maximised log-likelihood is at least the Gaussian one; with skewed errors it is higher.
    from scipy import stats

    rng = np.random.default_rng(2)
    s = rng.standard_normal((150, 2))
    y = s @ [1.0, 0.5] + stats.skewnorm.rvs(6.0, scale=1.5, size=150, random_state=rng)
    ll_g, _ = regression_loglik(y, s, "gaussian")
    ll_s, p = regression_loglik(y, s, "skewnormal")
    assert p == 5
    assert ll_s > ll_g + 2.0


def test_t_regression_intercept_only_is_scipys_t_mle():
    # Source: scipy.stats.t.fit (maximum likelihood for df, loc, scale): a regression on no
    # columns is the intercept only, i.e. the same three-parameter model.
    from scipy import stats

    y = stats.t.rvs(df=3.0, loc=1.0, scale=0.8, size=300, random_state=4)
    ll, p = regression_loglik(y, np.empty((300, 0)), "t")
    df, loc, scale = stats.t.fit(y)
    assert p == 3
    assert ll == pytest.approx(float(np.sum(stats.t.logpdf(y, df, loc, scale))), abs=1e-3)


def test_t_regression_finds_heavy_tailed_errors():
    from scipy import stats

    rng = np.random.default_rng(6)
    s = rng.standard_normal((200, 2))
    y = s @ [1.0, -0.5] + stats.t.rvs(df=2.5, size=200, random_state=rng)
    ll_g, _ = regression_loglik(y, s, "gaussian")
    ll_t, p = regression_loglik(y, s, "t")
    assert p == 5
    assert ll_t > ll_g + 5.0


def _cohort(tmp_path, seed):
    matrix, participants = hidden_subgroup_cohort(n=200, n_noise=7, seed=seed)
    matrix.to_csv(tmp_path / "matrix.csv", index=False)
    participants.drop(columns=["truth"]).to_csv(tmp_path / "participants.csv", index=False)
    return matrix, participants


def test_hidden_subgroup_is_found_by_select_and_related_to_the_labels(tmp_path, capsys):
    # The done-when case of issue 17, on an invented cohort of our own (fixed seed): the
    # subgroup lives only in the three latency columns; two noise columns are correlated with
    # latency; every column is skewed. Expected: exactly the latency columns are selected,
    # K = 2 with ARI >= 0.8 against the truth, the a-priori label related (p < 0.05), the
    # unrelated site and age not (p > 0.05).
    matrix, participants = _cohort(tmp_path, seed=5)
    out = tmp_path / "out"
    code = main(["explore", str(tmp_path / "matrix.csv"), "--select", "--outcomes",
                 str(tmp_path / "participants.csv"), "--kmax", "3", "--starts", "4", "--out", str(out)])
    assert code == 0
    selected = pd.read_csv(out / "selected_columns.csv")
    assert set(selected.loc[selected["selected"], "column"]) == set(HIDDEN_INFORMATIVE)
    assert (selected.loc[~selected["selected"], "bic_difference"] <= 0).all()
    steps = pd.read_csv(out / "selection_steps.csv")
    assert {"step", "action", "column", "bic_difference"} <= set(steps.columns)
    assert steps["action"].iloc[0] == "add" and steps["action"].iloc[-1].startswith("not")
    models = pd.read_csv(out / "models.csv")
    assert set(models["set"]) == {"selected"}
    membership = pd.read_csv(out / "membership.csv", dtype={"participant": str})
    assert membership["K"].iloc[0] == 2
    truth = participants.set_index("participant").loc[membership["participant"], "truth"]
    assert adjusted_rand_score(truth, membership["cluster"]) >= 0.8
    outcomes = pd.read_csv(out / "outcomes.csv").set_index("outcome")
    assert outcomes.loc["reported_group", "p"] < 0.05
    assert outcomes.loc["site", "p"] > 0.05 and outcomes.loc["age", "p"] > 0.05
    printed = capsys.readouterr()
    assert "Raftery" not in printed.err and printed.err == ""
    assert "selected and clustered on the same participants" in printed.out


def test_keep_always_keeps_a_column():
    matrix, _ = hidden_subgroup_cohort(n=120, n_noise=2, seed=3)
    cols = tuple(matrix.columns[1:])
    x = matrix[list(cols)].to_numpy(float)
    z = (x - x.mean(0)) / x.std(0, ddof=1)
    noise = cols[-1]
    sel = select_columns(z, cols, family="gaussian", kmax=2, keep=(noise,))
    assert noise in sel.chosen
    table = sel.columns_table()
    assert table.loc[table["column"] == noise, "kept"].item()
    assert sel.steps_table()["action"].iloc[0] == "keep"
