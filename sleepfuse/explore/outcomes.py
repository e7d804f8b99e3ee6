"""Clusters against a-priori labels and outcomes, and each cluster's profile.

The outcomes table has a ``participant`` column and any others. A column is categorical
when it is not numeric, or numeric with at most two distinct values (a 0/1 code); every
other numeric column is numeric.

* Categorical: the cluster × level contingency table; Fisher's exact test for a 2 × 2
  table (``scipy.stats.fisher_exact``, statistic = the sample odds ratio), else Pearson's
  chi-square without continuity correction (``scipy.stats.chi2_contingency``); effect =
  Cramér's V = √(χ² / (n·(min(r, c) − 1))) (Cramér 1946, *Mathematical Methods of
  Statistics*, §21.9), from the uncorrected χ² also for 2 × 2; ``ari`` = adjusted Rand
  index of clusters against levels (Hubert & Arabie 1985).
* Numeric: Kruskal–Wallis H across clusters (``scipy.stats.kruskal``, tie-corrected);
  effect = ε² = H / (n − 1) (Tomczak & Tomczak 2014, *Trends Sport Sci* 1:19-25, eq. 9);
  the median and IQR per cluster go in the profiles.

p-values are not corrected for the number of outcomes; the clusters were chosen on the
same participants, so the tests describe, they do not confirm.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats

from sleepfuse.explore.columns import PARTICIPANT, read_participant_csv
from sleepfuse.explore.agreement import adjusted_rand_index
from sleepfuse.model.errors import ConfigError

OUTCOME_COLUMNS = ["block", "outcome", "kind", "test", "statistic", "p", "effect", "effect_name", "ari", "n",
                   "note"]
PROFILE_COLUMNS = ["block", "cluster", "n", "variable", "kind", "median", "q1", "q3", "count", "share"]


def read_outcomes(path) -> pd.DataFrame:
    """The outcomes CSV with participant IDs as text; ConfigError when it cannot be used."""
    table = read_participant_csv(path, "--outcomes", f"a CSV with a '{PARTICIPANT}' column")
    if table[PARTICIPANT].duplicated().any():
        raise ConfigError("--outcomes", str(path), "one row per participant")
    if len(table.columns) < 2:
        raise ConfigError("--outcomes", str(path), "at least one column besides 'participant'")
    return table


def is_categorical(values: pd.Series) -> bool:
    """Not numeric, or numeric with at most two distinct values."""
    return not pd.api.types.is_numeric_dtype(values) or values.dropna().nunique() <= 2


def cramers_v(table: np.ndarray) -> tuple[float, float, float]:
    """(χ², p, V) of a contingency table, χ² without continuity correction."""
    chi2, p, _, _ = stats.chi2_contingency(table, correction=False)
    n = table.sum()
    v = np.sqrt(chi2 / (n * (min(table.shape) - 1))) if min(table.shape) > 1 and n else np.nan
    return float(chi2), float(p), float(v)


def outcome_row(clusters: np.ndarray, values: pd.Series, name: str) -> dict:
    """One row of outcomes.csv for one outcome column over the participants with a value."""
    ok = values.notna().to_numpy()
    cl, v = clusters[ok], values[ok]
    row = {"outcome": name, "n": int(ok.sum()), "note": ""}
    if is_categorical(values):
        crosstab = pd.crosstab(cl, v.astype(str))
        table = crosstab.to_numpy()
        row.update(kind="categorical", ari=adjusted_rand_index(cl, v.astype(str)), effect_name="Cramer's V")
        if min(table.shape) < 2:
            row.update(test="", statistic=np.nan, p=np.nan, effect=np.nan,
                       note="one cluster or one level among these participants: nothing to test")
            return row
        chi2, p, effect = cramers_v(table)
        if table.shape == (2, 2):
            odds, p = stats.fisher_exact(table)
            row.update(test="Fisher exact (odds ratio)", statistic=float(odds), p=float(p), effect=effect)
        else:
            row.update(test="chi-square", statistic=chi2, p=p, effect=effect)
        return row
    groups = [v[cl == k].to_numpy(float) for k in np.unique(cl)]
    row.update(kind="numeric", ari=np.nan, effect_name="epsilon squared")
    if len(groups) < 2 or v.nunique() < 2:
        row.update(test="", statistic=np.nan, p=np.nan, effect=np.nan,
                   note="one cluster or no spread among these participants: nothing to test")
        return row
    h, p = stats.kruskal(*groups)
    row.update(test="Kruskal-Wallis", statistic=float(h), p=float(p), effect=float(h) / (row["n"] - 1))
    return row


def relate(labels: dict[str, int], outcomes: pd.DataFrame, block: str = "") -> tuple[pd.DataFrame, list[str]]:
    """outcomes.csv rows for one block's clusters, and the clustered participants missing from the table."""
    table = outcomes.set_index(outcomes[PARTICIPANT].astype(str)).drop(columns=[PARTICIPANT])
    who = [p for p in labels if p in table.index]
    missing = sorted(p for p in labels if p not in table.index)
    clusters = np.array([labels[p] for p in who])
    rows = []
    for column in table.columns:
        row = outcome_row(clusters, table.loc[who, column], str(column))
        row["block"] = block
        rows.append(row)
    return pd.DataFrame(rows).reindex(columns=OUTCOME_COLUMNS), missing


def profiles(labels: dict[str, int], values: pd.DataFrame, block: str = "") -> pd.DataFrame:
    """Per cluster: n, and the median and IQR of each numeric column (count and share per level otherwise).

    ``values`` is indexed by participant (clustered columns in their own units, and outcomes).
    """
    frame = values.reindex([p for p in labels])
    clusters = pd.Series(labels)
    rows = []
    for k in sorted(set(labels.values())):
        members = frame[clusters.to_numpy() == k]
        for column in frame.columns:
            col = members[column].dropna()
            base = {"block": block, "cluster": k, "n": len(members), "variable": column}
            if is_categorical(frame[column]):
                for level, count in col.astype(str).value_counts().sort_index().items():
                    rows.append(base | {"variable": f"{column}={level}", "kind": "categorical",
                                        "count": int(count), "share": count / len(col) if len(col) else np.nan})
            else:
                q1, med, q3 = (np.percentile(col.astype(float), [25, 50, 75]) if len(col) else (np.nan,) * 3)
                rows.append(base | {"kind": "numeric", "median": med, "q1": q1, "q3": q3, "count": len(col)})
    return pd.DataFrame(rows).reindex(columns=PROFILE_COLUMNS)


def block_values(block, outcomes: pd.DataFrame | None = None) -> pd.DataFrame:
    """One block's clustered columns in their own units (before any ln(1 + x)), development and
    validation participants alike, indexed by participant and joined with the outcomes table when given."""
    logged = [i for i, c in enumerate(block.data.columns) if c in block.data.logged]
    frames = []
    for part in (block.data, block.validation):
        if part is None:
            continue
        raw = part.raw.copy()
        raw[:, logged] = np.expm1(raw[:, logged])
        frames.append(pd.DataFrame(raw, index=part.participants, columns=list(block.data.columns)))
    values = pd.concat(frames)
    if outcomes is None:
        return values
    return values.join(outcomes.set_index(outcomes[PARTICIPANT].astype(str)).drop(columns=[PARTICIPANT]), how="left")


def relate_blocks(result, outcomes: pd.DataFrame | None) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame]:
    """outcomes.csv, profiles.csv and the clustered participants missing from the outcomes table, every block.

    The clusters are those of each block's preferred model (all its classified participants,
    development and validation alike); profiles give the clustered columns in their own
    units (before any ln(1 + x)) and every outcome. Without an outcomes table only the
    clustered columns are profiled.
    """
    tests, profs, missing = [], [], []
    for block in result.blocks:
        labels = block.labels()
        if not labels:
            continue
        if outcomes is not None:
            rows, absent = relate(labels, outcomes, block.name)
            tests.append(rows)
            missing += [{"block": block.name, "participant": p} for p in absent]
        profs.append(profiles(labels, block_values(block, outcomes), block.name))
    return (pd.concat(tests, ignore_index=True) if tests else pd.DataFrame(columns=OUTCOME_COLUMNS),
            pd.concat(profs, ignore_index=True) if profs else pd.DataFrame(columns=PROFILE_COLUMNS),
            pd.DataFrame(missing, columns=["block", "participant"]))
