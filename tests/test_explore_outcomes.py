"""Clusters against outcomes (sleepfuse/explore/outcomes.py), each statistic checked against
scipy.stats and sklearn.metrics."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from scipy.stats.contingency import association
from sklearn.metrics import adjusted_rand_score

from sleepfuse.explore.outcomes import PROFILE_COLUMNS, is_categorical, outcome_row, profiles, relate


def _data(seed=0, n=90):
    rng = np.random.default_rng(seed)
    clusters = rng.integers(1, 4, size=n)
    labels = {f"P{i:03d}": int(c) for i, c in enumerate(clusters)}
    table = pd.DataFrame({
        "participant": list(labels),
        "diagnosis": np.where(rng.random(n) < 0.3 + 0.2 * (clusters == 2), "yes", "no"),
        "sex": rng.choice(["f", "m", "x"], size=n),
        "score": rng.gamma(2.0, 3.0, size=n) + clusters,
    })
    return clusters, labels, table


def test_chi_square_cramers_v_and_ari_match_scipy_and_sklearn():
    clusters, _, table = _data()
    row = outcome_row(clusters, table["sex"], "sex")
    crosstab = pd.crosstab(clusters, table["sex"]).to_numpy()
    chi2, p, _, _ = stats.chi2_contingency(crosstab, correction=False)     # Source: scipy.stats
    assert row["test"] == "chi-square"
    assert row["statistic"] == pytest.approx(chi2, rel=1e-12) and row["p"] == pytest.approx(p, rel=1e-12)
    # Source: scipy.stats.contingency.association (Cramér's V).
    assert row["effect"] == pytest.approx(association(crosstab, method="cramer"), rel=1e-12)
    # Source: sklearn.metrics.adjusted_rand_score.
    assert row["ari"] == pytest.approx(adjusted_rand_score(clusters, table["sex"]), abs=1e-12)


def test_two_by_two_uses_fisher_exact_as_scipy():
    clusters, _, table = _data(seed=1)
    two = np.where(clusters == 2, 2, 1)
    row = outcome_row(two, table["diagnosis"], "diagnosis")
    odds, p = stats.fisher_exact(pd.crosstab(two, table["diagnosis"]).to_numpy())   # Source: scipy.stats
    assert row["test"].startswith("Fisher exact")
    assert row["statistic"] == pytest.approx(odds) and row["p"] == pytest.approx(p, rel=1e-12)
    crosstab = pd.crosstab(two, table["diagnosis"]).to_numpy()
    assert row["effect"] == pytest.approx(association(crosstab, method="cramer", correction=False), rel=1e-12)


def test_kruskal_wallis_and_epsilon_squared_match_scipy():
    clusters, _, table = _data(seed=2)
    row = outcome_row(clusters, table["score"], "score")
    h, p = stats.kruskal(*[table["score"][clusters == k] for k in (1, 2, 3)])      # Source: scipy.stats
    assert row["kind"] == "numeric" and row["test"] == "Kruskal-Wallis"
    assert row["statistic"] == pytest.approx(h, rel=1e-12) and row["p"] == pytest.approx(p, rel=1e-12)
    # ε² = H / (n − 1) (Tomczak & Tomczak 2014, eq. 9).
    assert row["effect"] == pytest.approx(h / (len(clusters) - 1), rel=1e-12)


def test_missing_participants_are_listed_and_tests_use_those_with_values():
    clusters, labels, table = _data(seed=3)
    short = table.iloc[5:].copy()
    short.loc[short.index[:4], "score"] = np.nan
    rows, missing = relate(labels, short, "all")
    assert missing == sorted(list(labels)[:5])
    assert rows.set_index("outcome").loc["score", "n"] == len(labels) - 9
    assert rows.set_index("outcome").loc["sex", "n"] == len(labels) - 5


def test_a_binary_number_is_categorical_and_one_cluster_is_not_tested():
    assert is_categorical(pd.Series([0, 1, 1, 0]))
    assert not is_categorical(pd.Series([0.5, 1.0, 2.0]))
    row = outcome_row(np.ones(10, dtype=int), pd.Series(np.arange(10.0)), "x")
    assert np.isnan(row["p"]) and "nothing to test" in row["note"]


def test_profiles_give_median_and_iqr_per_cluster_as_numpy():
    clusters, labels, table = _data(seed=4)
    values = table.set_index("participant")
    prof = profiles(labels, values, "all")
    assert list(prof.columns) == PROFILE_COLUMNS
    row = prof[(prof["cluster"] == 2) & (prof["variable"] == "score")].iloc[0]
    member = table["score"][clusters == 2]
    assert row["n"] == int((clusters == 2).sum())
    assert (row["q1"], row["median"], row["q3"]) == pytest.approx(tuple(np.percentile(member, [25, 50, 75])))
    level = prof[(prof["cluster"] == 1) & (prof["variable"] == "sex=f")].iloc[0]
    assert level["count"] == int(((clusters == 1) & (table["sex"] == "f")).sum())
