"""Bootstrap stability of the preferred clustering (sleepfuse/explore/bootstrap.py, explore --bootstrap)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import adjusted_rand_score

from sleepfuse.explore.bootstrap import run_bootstrap
from sleepfuse.explore.cli import main
from sleepfuse.explore.mixtures import fit_mixture


def _separated(n=120, seed=0):
    rng = np.random.default_rng(seed)
    return np.vstack([rng.standard_normal((n // 2, 2)), rng.standard_normal((n - n // 2, 2)) + [6.0, 0.0]])


def _noise(n=120, seed=0):
    return np.random.default_rng(seed).standard_normal((n, 2))


def test_seeded_and_repeatable():
    x = _separated()
    best = fit_mixture(x, "gaussian", 2, starts=2)
    a = run_bootstrap(x, best, 6, seed=3, starts=2)
    b = run_bootstrap(x, best, 6, seed=3, starts=2)
    c = run_bootstrap(_noise(), fit_mixture(_noise(), "gaussian", 2, starts=2), 6, seed=4, starts=2)
    assert a.table("x").equals(b.table("x"))
    assert [r["n_distinct"] for r in a.rows] != [r["n_distinct"] for r in c.rows]   # another seed, other resamples


def test_ari_is_sklearns_and_well_separated_clusters_are_stable():
    # Source: sklearn.metrics.adjusted_rand_score of the preferred partition against each refit's.
    x = _separated()
    best = fit_mixture(x, "gaussian", 2, starts=2)
    boot = run_bootstrap(x, best, 20, seed=0, starts=2)
    assert len(boot.rows) == 20 and len(boot.aris) == 20
    for row, labels in zip(boot.rows, boot.labels):
        assert row["ari"] == pytest.approx(adjusted_rand_score(boot.reference, labels), abs=1e-12)
    assert boot.mean > 0.95
    low, high = boot.interval
    assert low == pytest.approx(np.percentile(boot.aris, 2.5)) and high == pytest.approx(np.percentile(boot.aris, 97.5))
    assert low <= boot.mean <= high


def test_one_group_forced_into_two_clusters_is_unstable():
    # Pure noise has no subgroup: the K = 2 split moves with every resample, so the index
    # falls clearly below that of real, well-separated clusters.
    x = _noise(n=150, seed=2)
    boot = run_bootstrap(x, fit_mixture(x, "gaussian", 2, starts=2), 20, seed=0, starts=2)
    stable = run_bootstrap(_separated(150), fit_mixture(_separated(150), "gaussian", 2, starts=2), 20, seed=0,
                           starts=2)
    assert boot.mean < 0.7
    assert boot.mean < stable.mean - 0.25


def test_explore_bootstrap_writes_replicates_and_summary(tmp_path, capsys):
    rng = np.random.default_rng(1)
    x = np.vstack([rng.standard_normal((40, 2)), rng.standard_normal((40, 2)) + [5.0, 1.0]])
    frame = pd.DataFrame({"participant": [f"Q{i:03d}" for i in range(80)], "a_mean": x[:, 0], "b_mean": x[:, 1]})
    frame.to_csv(tmp_path / "m.csv", index=False)
    out = tmp_path / "out"
    code = main(["explore", str(tmp_path / "m.csv"), "--columns", "a_mean,b_mean", "--families", "gaussian",
                 "--kmax", "3", "--starts", "2", "--bootstrap", "8", "--seed", "2", "--out", str(out)])
    assert code == 0
    stdout = capsys.readouterr().out
    reps = pd.read_csv(out / "bootstrap.csv")
    summary = pd.read_csv(out / "bootstrap_summary.csv")
    assert list(reps["replicate"]) == list(range(1, 9)) and set(reps["K"]) == {2}
    assert summary.loc[0, "ari_mean"] == pytest.approx(reps["ari"].mean())
    assert summary.loc[0, "ari_p2.5"] == pytest.approx(np.percentile(reps["ari"], 2.5))
    assert "bootstrap stability (8 resamples, seed 2)" in stdout and "bootstrap 8/8" in stdout


def test_negative_bootstrap_is_a_command_line_error(tmp_path, capsys):
    pd.DataFrame({"participant": ["A", "B"], "a_mean": [1.0, 2.0]}).to_csv(tmp_path / "m.csv", index=False)
    assert main(["explore", str(tmp_path / "m.csv"), "--bootstrap", "-1", "--out", str(tmp_path / "o")]) == 2
    assert "--bootstrap" in capsys.readouterr().err
