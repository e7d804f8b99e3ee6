"""Stability of the preferred solution: the bootstrap adjusted Rand index.

Participants are resampled with replacement B times (a nonparametric bootstrap, Efron &
Tibshirani 1993, *An Introduction to the Bootstrap*). On each resample the preferred
model's family and K are refitted with the same starts as the original fit (for the
skew-normal and t families after a Gaussian fit of the same K, as in ``fit_mixtures``);
the refit then assigns the original participants (highest posterior), and the adjusted
Rand index (Hubert & Arabie 1985) compares that partition with the preferred one. The mean
and the 2.5-97.5% percentile range of the B indices summarise how stable the clusters are
(resampling to assess cluster stability: Hennig 2007, *Comput Stat Data Anal* 52:258-271).

A resample on which the model cannot be fitted is counted and left out of the summary,
never silently scored; a refit that stopped at the iteration limit is kept and counted.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import pandas as pd

from sleepfuse.explore.agreement import adjusted_rand_index
from sleepfuse.explore.mixtures import MixtureFit, fit_mixture

BOOTSTRAP_COLUMNS = ["block", "replicate", "family", "K", "ari", "loglik", "converged", "n_distinct", "message"]
SUMMARY_COLUMNS = ["block", "family", "K", "replicates", "fitted", "unconverged", "seed", "ari_mean",
                   "ari_p2.5", "ari_p97.5"]
RESAMPLE_STREAM = 15485863   # a fixed second seed word: resampling draws independent of the EM starts


@dataclass
class BootstrapResult:
    """The B replicates of one block: each one's ARI against the preferred partition, and their summary."""

    family: str
    n_components: int
    seed: int
    reference: np.ndarray = field(default_factory=lambda: np.empty(0, dtype=int))   # preferred partition (0..K-1)
    rows: list[dict] = field(default_factory=list)
    labels: list[np.ndarray | None] = field(default_factory=list)   # each refit's partition of the originals

    @property
    def aris(self) -> np.ndarray:
        """ARI of every fitted replicate (failed ones left out)."""
        values = np.array([r["ari"] for r in self.rows], dtype=float)
        return values[np.isfinite(values)]

    @property
    def mean(self) -> float:
        return float(np.mean(self.aris)) if self.aris.size else float("nan")

    @property
    def interval(self) -> tuple[float, float]:
        """2.5th and 97.5th percentiles of the replicates' ARI (``numpy.percentile``, linear)."""
        if not self.aris.size:
            return float("nan"), float("nan")
        low, high = np.percentile(self.aris, [2.5, 97.5])
        return float(low), float(high)

    def table(self, block: str) -> pd.DataFrame:
        """bootstrap.csv rows: one per replicate."""
        return pd.DataFrame([{"block": block} | r for r in self.rows], columns=BOOTSTRAP_COLUMNS)

    def summary(self, block: str) -> dict:
        low, high = self.interval
        return {"block": block, "family": self.family, "K": self.n_components, "replicates": len(self.rows),
                "fitted": int(self.aris.size),
                "unconverged": sum(1 for r in self.rows if np.isfinite(r["ari"]) and not r["converged"]),
                "seed": self.seed, "ari_mean": self.mean, "ari_p2.5": low, "ari_p97.5": high}


def run_bootstrap(
    z: np.ndarray,
    best: MixtureFit,
    replicates: int,
    *,
    seed: int = 0,
    block: str = "",
    progress: Callable[[str], None] | None = None,
    **fit_options,
) -> BootstrapResult:
    """Refit ``best``'s (family, K) on ``replicates`` resamples of the rows of z and score each against it."""
    z = np.asarray(z, dtype=float)
    n = z.shape[0]
    k, family = best.n_components, best.family
    reference = best.posterior(z).argmax(axis=1)
    rng = np.random.default_rng([int(seed), RESAMPLE_STREAM])
    result = BootstrapResult(family, k, int(seed), reference)
    every = max(1, replicates // 10)
    for b in range(1, int(replicates) + 1):
        idx = rng.integers(n, size=n)
        sample = z[idx]
        gaussian = fit_mixture(sample, "gaussian", k, seed=seed, **fit_options)
        fit = gaussian if family == "gaussian" else fit_mixture(sample, family, k, seed=seed, gaussian_fit=gaussian,
                                                                **fit_options)
        row = {"replicate": b, "family": family, "K": k, "ari": np.nan, "loglik": np.nan,
               "converged": bool(fit.converged), "n_distinct": int(np.unique(idx).size), "message": fit.message}
        labels = fit.posterior(z).argmax(axis=1) if fit.ok else None
        if labels is not None:
            row.update(ari=adjusted_rand_index(reference, labels), loglik=fit.loglik)
        result.rows.append(row)
        result.labels.append(labels)
        if progress and (b % every == 0 or b == replicates):
            progress(f"{block}: bootstrap {b}/{replicates}, mean ARI so far {result.mean:.2f}")
    return result
