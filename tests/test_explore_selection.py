"""BIC table, preferred model, membership and agreement between blocks (sleepfuse/explore/selection.py)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import adjusted_rand_score

from sleepfuse.explore.mixtures import MixtureFit, bic
from sleepfuse.explore.selection import (
    EXPLORATORY_CAUTION, MODEL_COLUMNS, adjusted_rand_index, explore, models_table, preferred_fit,
)


@pytest.mark.parametrize("seed", range(6))
def test_adjusted_rand_index_matches_sklearn(seed):
    # Source: sklearn.metrics.adjusted_rand_score (Hubert & Arabie 1985, J Classif 2:193-218).
    rng = np.random.default_rng(seed)
    a = rng.integers(0, 3, size=40)
    b = np.where(rng.random(40) < 0.6, a, rng.integers(0, 4, size=40))
    assert adjusted_rand_index(a, b) == pytest.approx(adjusted_rand_score(a, b), abs=1e-12)


@pytest.mark.parametrize("a, b", [
    ([0, 0, 1, 1], [1, 1, 0, 0]),      # relabelled: identical partitions
    ([0, 0, 0, 0], [0, 0, 0, 0]),      # both one cluster
    ([0, 0, 0, 0], [0, 1, 0, 1]),      # one trivial partition
    ([0, 1, 2, 3], [0, 1, 2, 3]),      # all singletons
    (["x", "y", "x"], [2, 2, 1]),
])
def test_adjusted_rand_index_edge_cases_match_sklearn(a, b):
    # Source: sklearn.metrics.adjusted_rand_score, including its special cases.
    assert adjusted_rand_index(a, b) == pytest.approx(adjusted_rand_score(a, b), abs=1e-12)


def _fit(family, k, loglik, n=50, d=2):
    f = MixtureFit(family, k, n, d, weights=np.full(k, 1 / k), locations=np.zeros((k, d)),
                   scales=np.tile(np.eye(d), (k, 1, 1)), deltas=np.zeros((k, d)), loglik=loglik, converged=True)
    return f


def test_preferred_model_is_the_smallest_bic_and_failures_are_rows_with_nan():
    fits = [_fit("gaussian", 1, -200.0), _fit("gaussian", 2, -180.0), _fit("skewnormal", 1, -185.0),
            MixtureFit("skewnormal", 2, 50, 2, message="no usable fit: all 3 start(s) failed")]
    best = preferred_fit(fits)
    expected = min(fits[:3], key=lambda f: bic(f.loglik, f.n_params, 50))
    assert best is expected
    table = models_table(fits, "b")
    assert list(table.columns) == MODEL_COLUMNS
    assert table["BIC"].isna().tolist() == [False, False, False, True]
    assert table.loc[3, "message"].startswith("no usable fit")
    assert preferred_fit([fits[3]]) is None


def _two_group_matrix(n=80, seed=0):
    rng = np.random.default_rng(seed)
    g = rng.random(n) < 0.5
    frame = pd.DataFrame({
        "participant": [f"Q{i:03d}" for i in range(n)],
        "diary_sol_min_mean": np.where(g, 45.0, 10.0) + 5 * rng.standard_normal(n),
        "diary_tst_min_mean": np.where(g, 330.0, 430.0) + 20 * rng.standard_normal(n),
        "psg_sol_min_mean": np.where(g, 40.0, 12.0) + 5 * rng.standard_normal(n),
        "psg_tst_min_mean": np.where(g, 340.0, 420.0) + 20 * rng.standard_normal(n),
    })
    frame.loc[[i for i in (3, 7) if i < n], "psg_tst_min_mean"] = np.nan
    return frame, g


def test_explore_finds_two_groups_membership_and_agreement():
    matrix, truth = _two_group_matrix()
    result = explore(matrix, blocks="diary,psg", kmax=2, starts=2, seed=0)
    diary, psg = result.blocks
    assert (diary.preferred.n_components, psg.preferred.n_components) == (2, 2)
    m = diary.membership
    assert set(m.columns) >= {"participant", "block", "family", "K", "cluster", "probability", "reason"}
    assert m["cluster"].notna().all() and m["probability"].between(0.5, 1.0).all()
    # The two groups are recovered (up to labels): Source: sklearn adjusted_rand_score.
    assert adjusted_rand_score(truth, m.set_index("participant").loc[matrix["participant"], "cluster"]) > 0.9
    left_out = psg.membership[psg.membership["cluster"].isna()]
    assert sorted(left_out["participant"]) == ["Q003", "Q007"]
    assert (left_out["reason"] == "missing psg_tst_min_mean").all()
    sizes = diary.cluster_sizes
    assert sizes["n_assigned"].sum() == len(matrix)
    assert sizes["expected"].sum() == pytest.approx(len(matrix))
    agreement = result.agreement
    assert agreement.loc[0, "n_participants"] == len(matrix) - 2
    assert agreement.loc[0, "ari"] > 0.8


def test_agreement_is_undefined_when_neither_block_has_subgroups():
    rng = np.random.default_rng(3)
    matrix = pd.DataFrame({"participant": [f"R{i}" for i in range(60)],
                           "diary_a_mean": rng.standard_normal(60), "psg_a_mean": rng.standard_normal(60)})
    result = explore(matrix, blocks="diary,psg", kmax=2, starts=2, families=("gaussian",))
    assert [b.preferred.n_components for b in result.blocks] == [1, 1]
    assert np.isnan(result.agreement.loc[0, "ari"])
    assert "neither block" in result.agreement.loc[0, "note"]


def test_a_block_too_small_to_fit_reports_failure():
    matrix, _ = _two_group_matrix(n=4)
    result = explore(matrix, blocks="diary", kmax=2, starts=2)
    assert not result.any_fitted
    assert result.models["BIC"].isna().all()
    assert (result.membership["reason"] == "no model could be fitted").all()


def test_caution_text_is_plain():
    assert "exploratory" in EXPLORATORY_CAUTION and "validation sample" in EXPLORATORY_CAUTION


@pytest.mark.parametrize("options", [{"select": True}, {"select": True, "holdout": 0.3}, {}])
def test_every_bic_panel_draws_the_fitted_set(options):
    # The BIC figure once looked for set 'all' after --select (whose models are set 'selected'),
    # and drew only the preferred point: every panel must find its models.
    from sleepfuse.explore.figures import bic_panels

    matrix, _ = _two_group_matrix()
    result = explore(matrix, blocks="diary", kmax=2, starts=2, seed=0, families=("gaussian",), **options)
    panels = bic_panels(result)
    assert len(panels) == (2 if "holdout" in options else 1)
    for block, set_name in panels:
        rows = block.models[block.models["set"] == set_name]
        assert len(rows) == 2 and rows["BIC"].notna().any(), set_name


def test_t_family_drives_the_selection_when_asked():
    matrix, _ = _two_group_matrix(n=100, seed=2)
    result = explore(matrix, blocks="diary", kmax=2, starts=2, seed=0, families=("gaussian", "t"), select=True,
                     select_family="t")
    block = result.blocks[0]
    assert block.selection is not None and any("by t stepwise BIC" in n for n in block.notes)
    assert set(block.selection.chosen) <= set(block.selection.columns) and block.selection.chosen
    assert block.preferred.n_components == 2
