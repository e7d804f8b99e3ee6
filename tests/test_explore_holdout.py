"""Development/validation split (sleepfuse/explore/holdout.py)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from sleepfuse.model.errors import ConfigError
from sleepfuse.explore.holdout import split_participants
from sleepfuse.explore.selection import explore


def test_split_is_seeded_disjoint_and_complete():
    dev, val = split_participants(50, 0.3, seed=4)
    assert len(val) == 15 and len(dev) == 35
    assert set(dev).isdisjoint(val) and set(dev) | set(val) == set(range(50))
    again = split_participants(50, 0.3, seed=4)
    np.testing.assert_array_equal(dev, again[0])
    assert not np.array_equal(val, split_participants(50, 0.3, seed=5)[1])


@pytest.mark.parametrize("fraction", [0.0, 1.0, -0.2, 0.01])
def test_unusable_fractions_are_refused(fraction):
    with pytest.raises(ConfigError, match="--holdout"):
        split_participants(50, fraction, seed=0)


def test_holdout_reports_whether_the_preferred_model_holds():
    rng = np.random.default_rng(8)
    n = 120
    g = rng.random(n) < 0.5
    matrix = pd.DataFrame({
        "participant": [f"H{i:03d}" for i in range(n)],
        "diary_sol_min_mean": np.where(g, 45.0, 10.0) + 5 * rng.standard_normal(n),
        "diary_tst_min_mean": np.where(g, 330.0, 430.0) + 20 * rng.standard_normal(n),
    })
    result = explore(matrix, blocks="diary", kmax=3, starts=2, seed=1, holdout=0.4, families=("gaussian",))
    block = result.blocks[0]
    h = block.holdout
    assert (h.n_development, h.n_validation) == (72, 48)
    assert h.development == ("gaussian", 2) and h.validation == ("gaussian", 2) and h.holds
    assert np.isfinite(h.validation_loglik)
    # The development model scores the validation sample on the development z-scale.
    best = block.preferred
    assert h.validation_loglik == pytest.approx(best.log_likelihood(block.data.standardise(block.validation.raw)))
    m = block.membership
    assert sorted(m["set"].unique()) == ["development", "validation"]
    assert m["cluster"].notna().sum() == n
    assert set(block.models["set"]) == {"development", "validation"}
    assert h.summary("diary")["holds"] is True
