"""Model choice for the clustering preview: BIC table, preferred model, membership, agreement.

For every column set, every (family, K) is fitted by EM (``mixtures``); the preferred
model is the one with the smallest BIC (Schwarz 1978; Fraley & Raftery 2002, *JASA*
97:611-631, for its use in choosing mixture models). Partitions from different
instrument blocks are compared with the adjusted Rand index (Hubert & Arabie 1985,
*J Classif* 2:193-218).

Clustering is exploratory: it generates hypotheses, and any subgroup needs a separate
validation sample (``holdout``).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from itertools import combinations
from typing import Callable

import numpy as np
import pandas as pd

from sleepfuse.explore.agreement import adjusted_rand_index
from sleepfuse.explore.bootstrap import BootstrapResult, run_bootstrap
from sleepfuse.explore.columns import ColumnSet, PreparedData, column_sets, columns_by_pattern, prepare
from sleepfuse.explore.holdout import HoldoutResult, run_holdout, split_participants
from sleepfuse.explore.varselect import Selection, select_columns
from sleepfuse.explore.mixtures import DEFAULT_FAMILIES, MixtureFit, fit_mixtures, preferred_fit

from sleepfuse.explore.names import DEFAULT_STARTS, EXPLORATORY_CAUTION  # noqa: E402,F401  (re-exported)

__all__ = ["HoldoutResult", "preferred_fit", "EXPLORATORY_CAUTION", "adjusted_rand_index"]
MODEL_COLUMNS = ["block", "set", "family", "K", "loglik", "n_params", "BIC", "converged", "n_iter", "t_df",
                 "message"]
MEMBERSHIP_COLUMNS = ["participant", "block", "set", "family", "K", "cluster", "probability", "reason"]


def models_table(fits: list[MixtureFit], block: str = "", set_name: str = "all") -> pd.DataFrame:
    """One row per (family, K): loglik, free parameters, BIC, convergence, the t family's ν per component
    (``t_df``, ';'-separated in cluster order) and any message."""
    rows = [{
        "block": block, "set": set_name, "family": f.family, "K": f.n_components,
        "loglik": f.loglik if f.ok else np.nan, "n_params": f.n_params, "BIC": f.bic,
        "converged": bool(f.converged), "n_iter": f.n_iter,
        "t_df": ";".join(f"{v:.2f}" for v in f.dofs) if f.dofs is not None else "", "message": f.message,
    } for f in fits]
    return pd.DataFrame(rows, columns=MODEL_COLUMNS)


@dataclass
class BlockResult:
    """Everything a report or a screen needs about one column set."""

    name: str
    data: PreparedData                          # the fitted (development) participants
    fits: list[MixtureFit]
    validation: PreparedData | None = None
    holdout: HoldoutResult | None = None
    notes: list[str] = field(default_factory=list)
    selection: Selection | None = None
    bootstrap: BootstrapResult | None = None

    @property
    def set_name(self) -> str:
        """How the models' participants and columns were chosen: all, development or selected."""
        return "development" if self.holdout else "selected" if self.selection else "all"

    @property
    def preferred(self) -> MixtureFit | None:
        return preferred_fit(self.fits)

    @property
    def models(self) -> pd.DataFrame:
        """The BIC table: one row per (set, family, K)."""
        tables = [models_table(self.fits, self.name, self.set_name)]
        if self.holdout:
            tables.append(models_table(self.holdout.validation_fits, self.name, "validation"))
        return pd.concat(tables, ignore_index=True)

    def labels(self) -> dict[str, int]:
        """Participant → cluster (1..K) under the preferred model, for every classified participant."""
        m = self.membership
        m = m[m["cluster"].notna()]
        return dict(zip(m["participant"], m["cluster"].astype(int)))

    @property
    def membership(self) -> pd.DataFrame:
        """participant, block, set, family, K, cluster (1..K), probability; left-out participants with a reason."""
        best = self.preferred
        frames = []
        sets = [(self.set_name, self.data.participants, self.data.z)]
        if self.validation is not None and len(self.validation.participants):
            sets.append(("validation", self.validation.participants, self.data.standardise(self.validation.raw)))
        if best is not None:
            for set_name, who, z in sets:
                post = best.posterior(z)
                frames.append(pd.DataFrame({
                    "participant": who, "block": self.name, "set": set_name, "family": best.family,
                    "K": best.n_components, "cluster": pd.array(post.argmax(axis=1) + 1, dtype="Int64"),
                    "probability": post.max(axis=1), "reason": "",
                }))
        else:
            for set_name, who, _ in sets:
                frames.append(pd.DataFrame({"participant": who, "block": self.name, "set": set_name,
                                            "reason": "no model could be fitted"}))
        excluded = self.data.excluded
        frames.append(pd.DataFrame({"participant": excluded["participant"], "block": self.name,
                                    "set": "", "reason": excluded["reason"]}))
        out = pd.concat([f for f in frames if len(f)], ignore_index=True) if any(len(f) for f in frames) \
            else pd.DataFrame(columns=MEMBERSHIP_COLUMNS)
        out = out.reindex(columns=MEMBERSHIP_COLUMNS)
        out["cluster"] = out["cluster"].astype("Int64")
        out["K"] = out["K"].astype("Int64")
        return out

    @property
    def cluster_sizes(self) -> pd.DataFrame:
        """cluster, n_assigned (highest posterior), expected (sum of posteriors), weight, for the preferred model."""
        best = self.preferred
        if best is None:
            return pd.DataFrame(columns=["block", "cluster", "n_assigned", "expected", "weight"])
        post = best.posterior(self.data.z)
        assigned = np.bincount(post.argmax(axis=1), minlength=best.n_components)
        return pd.DataFrame({"block": self.name, "cluster": np.arange(1, best.n_components + 1),
                             "n_assigned": assigned, "expected": post.sum(axis=0), "weight": best.weights})


@dataclass
class ExploreResult:
    """All column sets of one run, and how much their partitions agree."""

    blocks: list[BlockResult]
    agreement: pd.DataFrame

    @property
    def models(self) -> pd.DataFrame:
        return pd.concat([b.models for b in self.blocks], ignore_index=True)

    @property
    def membership(self) -> pd.DataFrame:
        return pd.concat([b.membership for b in self.blocks], ignore_index=True)

    @property
    def cluster_sizes(self) -> pd.DataFrame:
        return pd.concat([b.cluster_sizes for b in self.blocks], ignore_index=True)

    @property
    def any_fitted(self) -> bool:
        return any(b.preferred is not None for b in self.blocks)


def agreement_between_blocks(blocks: list[BlockResult]) -> pd.DataFrame:
    """Adjusted Rand index between the preferred partitions of every pair of blocks, over shared participants."""
    rows = []
    for a, b in combinations(blocks, 2):
        la, lb = a.labels(), b.labels()
        shared = sorted(set(la) & set(lb))
        pa, pb = a.preferred, b.preferred
        rows.append({
            "block_a": a.name, "block_b": b.name, "n_participants": len(shared),
            "model_a": f"{pa.family} K={pa.n_components}" if pa else "",
            "model_b": f"{pb.family} K={pb.n_components}" if pb else "",
            "ari": adjusted_rand_index([la[p] for p in shared], [lb[p] for p in shared]) if len(shared) > 1 else np.nan,
            "note": "",
        })
        single = [blk.name for blk, fit in ((a, pa), (b, pb)) if fit is not None and fit.n_components == 1]
        if pa is None or pb is None:
            rows[-1]["note"] = "no model could be fitted in one of the blocks"
        elif len(single) == 2:
            rows[-1]["ari"] = np.nan
            rows[-1]["note"] = "neither block shows subgroups (K = 1): nothing to compare"
        elif single:
            rows[-1]["note"] = f"{single[0]} shows no subgroups (K = 1), so the index is 0 by construction"
    return pd.DataFrame(rows, columns=["block_a", "block_b", "n_participants", "model_a", "model_b", "ari", "note"])


def explore_block(
    data: PreparedData,
    *,
    families: tuple[str, ...] = DEFAULT_FAMILIES,
    kmax: int = 5,
    holdout: float | None = None,
    seed: int = 0,
    select: bool = False,
    keep: tuple[str, ...] = (),
    select_family: str | None = None,
    bootstrap: int = 0,
    progress: Callable[[str], None] | None = None,
    **fit_options,
) -> BlockResult:
    """Fit every (family, K ≤ kmax) to one prepared column set; with ``holdout`` split it first.

    With ``select`` the columns are first chosen by stepwise BIC (``varselect``, Raftery &
    Dean 2006) on the development participants, with ``select_family`` (default: the
    skew-normal family when it is among ``families``, else the first of them), always keeping ``keep``.
    With ``bootstrap`` B > 0 the preferred (family, K) is refitted on B resamples of the
    (development) participants (``bootstrap.run_bootstrap``).
    """
    notes = list(data.notes)
    n, d = data.raw.shape
    if d and n < 10 * d:
        notes.append(f"{n} participants for {d} column(s): full-covariance mixtures need many participants per "
                     f"column (common practice: at least 10 per column); consider fewer columns with --columns")
    if not data.columns:
        return BlockResult(data.column_set, data, [], notes=notes + ["no usable column"])
    selection = None
    development, validation = data, None
    if holdout:
        dev_idx, val_idx = split_participants(len(data.participants), holdout, seed)
        development, validation = data.subset(dev_idx), data.subset(val_idx)
    if select and len(data.columns) > 1:
        usable = [f for f in families if f != "skewt"]      # skewt has no regression model for the search
        family = select_family or ("skewnormal" if "skewnormal" in usable or not usable else usable[0])
        selection = select_columns(development.z, development.columns, family=family, kmax=kmax, keep=keep,
                                   block=data.column_set, seed=seed, progress=progress)
        notes.append(f"{len(selection.chosen)} of {len(data.columns)} column(s) selected by "
                     f"{family} stepwise BIC: {', '.join(selection.chosen)}")
        development = development.with_columns(selection.chosen)
        validation = validation.with_columns(selection.chosen) if validation is not None else None
        data = data.with_columns(selection.chosen)
    said = (lambda m: progress(f"{data.column_set}: {m}")) if progress else None
    fits = fit_mixtures(development.z, families, kmax, seed=seed, progress=said, **fit_options)
    result = BlockResult(data.column_set, development, fits, validation=validation, notes=notes,
                         selection=selection)
    if holdout:
        result.holdout = run_holdout(development, validation, preferred_fit(fits), holdout,
                                     families=families, kmax=kmax, seed=seed, **fit_options)
    best = result.preferred
    if bootstrap and best is not None and best.n_components > 1:
        result.bootstrap = run_bootstrap(development.z, best, bootstrap, seed=seed, block=data.column_set,
                                         progress=progress, **fit_options)
    elif bootstrap:
        notes.append("bootstrap skipped: " + ("no model could be fitted" if best is None else
                                              "the preferred model has one cluster (K = 1), nothing to check"))
    return result


def explore(
    matrix: pd.DataFrame,
    columns: str | None = None,
    blocks: str | None = None,
    *,
    families: tuple[str, ...] = DEFAULT_FAMILIES,
    kmax: int = 5,
    starts: int = DEFAULT_STARTS,
    seed: int = 0,
    holdout: float | None = None,
    log: str | None = None,
    select: bool = False,
    keep: str | None = None,
    select_family: str | None = None,
    bootstrap: int = 0,
    progress: Callable[[str], None] | None = None,
    **fit_options,
) -> ExploreResult:
    """The clustering preview of a participant × feature matrix (the entry point for CLI and TUI).

    ``columns`` are comma-separated names or glob patterns; ``blocks`` a comma-separated
    list of diary, actigraphy, psg, all (default ``all``); ``log`` names or patterns of the
    columns fitted as ln(1 + x). Raises ConfigError for a bad
    column specification; a (family, K) that cannot be fitted is reported, not raised.
    """
    sets: list[ColumnSet] = column_sets(list(matrix.columns), columns, blocks)
    logged = set(columns_by_pattern(list(matrix.columns), log, "--log")) if log else set()
    kept = tuple(columns_by_pattern(list(matrix.columns), keep, "--keep")) if keep else ()
    results = []
    for cs in sets:
        data = prepare(matrix, cs, logged)
        if progress:
            progress(f"{cs.name}: {len(data.participants)} participant(s), {len(data.columns)} column(s), "
                     f"{len(data.excluded)} left out for missing values")
        results.append(explore_block(data, families=families, kmax=kmax, holdout=holdout, seed=seed,
                                     select=select, keep=kept, select_family=select_family, bootstrap=bootstrap, progress=progress, starts=starts, **fit_options))
    return ExploreResult(results, agreement_between_blocks(results) if len(results) > 1 else
                         agreement_between_blocks([]))
