"""Stepwise variable selection for clustering by BIC (Raftery & Dean 2006, *JASA* 101:168-178).

Which columns reveal subgroups is rarely known in advance, and columns without subgroups
can hide them (one cluster on all columns, two on the right few). Each step compares, for
a candidate column x and the chosen set S, two models of the same data:

* x informative: the mixture on S ∪ {x} (best BIC over K = 1..kmax);
* x not informative: the mixture on S, plus a linear regression of x on S.

``bic_difference`` = BIC(not informative) − BIC(informative), with BIC = −2·loglik +
p·ln(n), smaller better; a positive difference is evidence that x carries cluster
structure beyond what S already explains. Following Raftery & Dean (section 3.2), the
first column is the one whose univariate mixture with K ≥ 2 beats K = 1 by most, the
second the best of the rest, whatever the sign; then an inclusion step adds the best
candidate when its difference is positive and an exclusion step removes the weakest
chosen column when its difference is negative, until neither changes the set. With the
skew-normal family, the regression's errors are skew-normal too (so a column that is
merely skewed is not mistaken for one with subgroups); with the Gaussian family they are
normal, as in the paper.

Choosing columns and clustering on the same participants is exploratory: the selection
adapts to this sample, and its subgroups need confirming on other participants.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import optimize, stats

from sleepfuse.explore.mixtures import fit_mixtures
from sleepfuse.explore.studentt import NU_RANGE, NU_START

METHOD = "stepwise BIC variable selection (Raftery & Dean 2006, JASA 101:168-178)"
SELECTION_CAUTION = ("Columns were selected and clustered on the same participants: "
                     "the result is exploratory and needs confirming on other participants.")
SEARCH_STARTS = 3          # EM starts per model inside the search (final models use --starts)
SEARCH_MAX_ITER = 300      # EM iterations per start inside the search


def regression_loglik(y: np.ndarray, s: np.ndarray, family: str) -> tuple[float, int]:
    """Maximised log-likelihood and free parameters of the regression of y on the columns of s.

    Gaussian: ordinary least squares, σ² = RSS/n, |S| + 2 parameters. Skew-normal: errors
    ~ SN(ξ, ω, α) (``scipy.stats.skewnorm``), coefficients, ξ, ω and α by maximum
    likelihood from the least-squares start (α = 0 is the Gaussian model, so the result is
    never below it), |S| + 3 parameters. t: errors ~ t(ν, 0, ω) (``scipy.stats.t``), coefficients,
    ω and ν (within ``studentt.NU_RANGE``) by maximum likelihood from the least-squares start and
    ν at its upper bound (nearly the Gaussian model), |S| + 3 parameters.
    """
    n = y.size
    design = np.column_stack([np.ones(n), s]) if s.size else np.ones((n, 1))
    coef, *_ = np.linalg.lstsq(design, y, rcond=None)
    resid = y - design @ coef
    var = max(float(resid @ resid) / n, 1e-12)
    gauss = -0.5 * n * (np.log(2.0 * np.pi * var) + 1.0)
    if family not in ("skewnormal", "t"):
        return float(gauss), design.shape[1] + 1
    bounds = None
    if family == "t":
        low, high = NU_RANGE

        def negll(theta):
            beta, log_scale, nu = theta[:-2], theta[-2], theta[-1]
            return -float(np.sum(stats.t.logpdf(y - design @ beta, nu, scale=np.exp(log_scale))))

        starts = [np.r_[coef, 0.5 * np.log(var), high], np.r_[coef, 0.5 * np.log(var), NU_START]]
        bounds = [(None, None)] * (design.shape[1] + 1) + [(low, high)]
    else:
        def negll(theta):
            beta, log_scale, shape = theta[:-2], theta[-2], theta[-1]
            return -float(np.sum(stats.skewnorm.logpdf(y - design @ beta, shape, scale=np.exp(log_scale))))

        a0, loc0, scale0 = stats.skewnorm.fit(resid)
        starts = [np.r_[coef, 0.5 * np.log(var), 0.0], np.r_[coef + np.r_[loc0, np.zeros(design.shape[1] - 1)],
                                                              np.log(max(scale0, 1e-6)), a0]]
    best = gauss if family == "skewnormal" else -negll(starts[0])
    for theta in starts:
        res = optimize.minimize(negll, theta, method="L-BFGS-B", bounds=bounds)
        if np.isfinite(res.fun):
            best = max(best, -float(res.fun))
    return best, design.shape[1] + 2


@dataclass
class Selection:
    """The outcome of the search: the chosen columns, every step, and each column's last difference."""

    columns: tuple[str, ...]
    block: str
    chosen: list[str]
    steps: list[dict] = field(default_factory=list)
    last_difference: dict[str, float] = field(default_factory=dict)
    kept: tuple[str, ...] = ()

    def columns_table(self) -> pd.DataFrame:
        """column, block, selected, bic_difference (at its last decision), kept, method."""
        return pd.DataFrame({
            "column": list(self.columns), "block": self.block,
            "selected": [c in self.chosen for c in self.columns],
            "bic_difference": [self.last_difference.get(c, np.nan) for c in self.columns],
            "kept": [c in self.kept for c in self.columns], "method": METHOD,
        })

    def steps_table(self) -> pd.DataFrame:
        """step, block, action, column, bic_difference, selected_after."""
        return pd.DataFrame(self.steps, columns=["step", "block", "action", "column", "bic_difference",
                                                 "selected_after"])


class _Scorer:
    """Mixture and regression BICs of column subsets, each fitted once."""

    def __init__(self, z, family, kmax, seed, starts, max_iter):
        self.z, self.family, self.kmax, self.seed = z, family, kmax, seed
        self.options = dict(starts=starts, max_iter=max_iter)
        self.n = z.shape[0]
        self._cache: dict[tuple[int, ...], list[float]] = {}

    def mixture_bics(self, subset) -> list[float]:
        key = tuple(sorted(subset))
        if key not in self._cache:
            fits = fit_mixtures(self.z[:, list(key)], (self.family,), self.kmax, seed=self.seed, **self.options)
            self._cache[key] = [f.bic if f.ok else np.inf for f in fits]
        return self._cache[key]

    def clustering(self, subset) -> float:
        return float(min(self.mixture_bics(subset)))

    def regression(self, j, subset) -> float:
        ll, p = regression_loglik(self.z[:, j], self.z[:, sorted(subset)], self.family)
        return -2.0 * ll + p * np.log(self.n)

    def difference(self, j, subset) -> float:
        """BIC(x not informative) − BIC(x informative) for column j given the columns ``subset``."""
        subset = [i for i in subset if i != j]
        if not subset:
            bics = self.mixture_bics([j])
            return float(bics[0] - min(bics[1:])) if len(bics) > 1 else -np.inf
        return float(self.clustering(subset) + self.regression(j, subset) - self.clustering(subset + [j]))


def select_columns(
    z: np.ndarray,
    columns: tuple[str, ...],
    *,
    family: str = "skewnormal",
    kmax: int = 5,
    keep: tuple[str, ...] = (),
    block: str = "",
    seed: int = 0,
    starts: int = SEARCH_STARTS,
    max_iter: int = SEARCH_MAX_ITER,
    progress=None,
) -> Selection:
    """Raftery & Dean (2006) stepwise selection on standardised data z (n, d) with named columns."""
    d = z.shape[1]
    kept_idx = [columns.index(c) for c in keep if c in columns]
    sel = Selection(tuple(columns), block, [], kept=tuple(columns[i] for i in kept_idx))
    scorer = _Scorer(z, family, max(int(kmax), 2), seed, starts, max_iter)
    chosen: list[int] = list(kept_idx)

    def log(action, j, diff):
        sel.last_difference[columns[j]] = diff
        sel.steps.append({"step": len(sel.steps) + 1, "block": block, "action": action, "column": columns[j],
                          "bic_difference": diff, "selected_after": ",".join(columns[i] for i in chosen)})
        if progress:
            progress(f"{block}: selection step {len(sel.steps)}: {action} {columns[j]} "
                     f"(BIC difference {diff:.1f})")

    for j in kept_idx:
        log("keep", j, np.nan)
    while len(chosen) < min(2, d):          # the first two columns are chosen whatever the sign
        rest = [j for j in range(d) if j not in chosen]
        diffs = {j: scorer.difference(j, chosen) for j in rest}
        for j, v in diffs.items():
            sel.last_difference[columns[j]] = v
        best = max(rest, key=lambda j: diffs[j])
        chosen.append(best)
        log("add", best, diffs[best])
    seen = {tuple(sorted(chosen))}
    for _ in range(4 * d):
        changed = False
        rest = [j for j in range(d) if j not in chosen]
        if rest:
            diffs = {j: scorer.difference(j, chosen) for j in rest}
            for j, v in diffs.items():
                sel.last_difference[columns[j]] = v
            best = max(rest, key=lambda j: diffs[j])
            if diffs[best] > 0 and tuple(sorted(chosen + [best])) not in seen:
                chosen.append(best)
                log("add", best, diffs[best])
                changed = True
            else:
                log("not added", best, diffs[best])
        removable = [j for j in chosen if j not in kept_idx]
        if len(chosen) > 1 and removable:
            diffs = {j: scorer.difference(j, chosen) for j in removable}
            for j, v in diffs.items():
                sel.last_difference[columns[j]] = v
            worst = min(removable, key=lambda j: diffs[j])
            if diffs[worst] < 0 and tuple(sorted(set(chosen) - {worst})) not in seen:
                chosen.remove(worst)
                log("remove", worst, diffs[worst])
                changed = True
            else:
                log("not removed", worst, diffs[worst])
        seen.add(tuple(sorted(chosen)))
        if not changed:
            break
    sel.chosen = [columns[j] for j in sorted(chosen)]
    return sel
