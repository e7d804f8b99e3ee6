"""Invented participant × feature matrices for demos and tests of the clustering preview.

Deterministic given the seed; no real person's data. Column names follow matrix.csv
(``<source>_<parameter>_mean``, ``_sd``, ``<source>_nights``, actigraphy rhythm measures).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from sleepfuse.explore.skewnormal import sample

SKEWED_COLUMNS = ("diary_sol_min_mean", "diary_waso_min_mean", "actigraphy_waso_min_mean")


def skewed_one_cluster_matrix(n: int = 150, seed: int = 11) -> pd.DataFrame:
    """One homogeneous group with right-skewed latency and WASO (minutes): a single 3-D skew-normal,
    draws with a negative value rejected (so about 4 % of its lower tail is cut at 0 min)."""
    rng = np.random.default_rng(seed)
    scale = np.array([14.0, 20.0, 18.0])
    corr = np.array([[1.0, 0.4, 0.3], [0.4, 1.0, 0.5], [0.3, 0.5, 1.0]])
    values = sample(2 * n, [15.0, 22.0, 25.0], corr * np.outer(scale, scale), [5.0, 4.0, 3.0], rng)
    values = values[np.all(values >= 0.0, axis=1)][:n]
    frame = pd.DataFrame(np.round(values, 1), columns=list(SKEWED_COLUMNS))
    frame.insert(0, "participant", [f"S{i:03d}" for i in range(1, n + 1)])
    frame["diary_nights"] = rng.integers(10, 15, size=n)
    return frame


def demo_matrix(n: int = 90, seed: int = 3) -> pd.DataFrame:
    """A demo-study-like matrix: two invented subgroups (long latency/short sleep vs. the rest),
    clearer in diary and actigraphy than in PSG, with a few missing PSG and diary values."""
    rng = np.random.default_rng(seed)
    group = rng.random(n) < 0.35
    cols: dict[str, np.ndarray] = {"participant": np.array([f"P{i:02d}" for i in range(1, n + 1)])}

    def skewed(loc0, loc1, scale, shape):
        out = np.empty(n)
        for g, loc in ((False, loc0), (True, loc1)):
            m = group == g
            out[m] = sample(int(m.sum()), [loc], [[scale**2]], [shape], rng)[:, 0]
        return np.round(np.maximum(out, 0.0), 1)

    def normal(mean0, mean1, sd):
        return np.round(np.where(group, mean1, mean0) + sd * rng.standard_normal(n), 1)

    for source, nights in (("psg", (1, 3)), ("actigraphy", (7, 15)), ("diary", (7, 15))):
        sep = 0.4 if source == "psg" else 1.0
        cols[f"{source}_sol_min_mean"] = skewed(8.0, 8.0 + 35.0 * sep, 10.0, 4.0)
        cols[f"{source}_sol_min_sd"] = np.round(np.abs(6 + 3 * rng.standard_normal(n)), 1)
        cols[f"{source}_waso_min_mean"] = skewed(20.0, 20.0 + 30.0 * sep, 18.0, 3.0)
        cols[f"{source}_waso_min_sd"] = np.round(np.abs(10 + 4 * rng.standard_normal(n)), 1)
        cols[f"{source}_tst_min_mean"] = normal(425.0, 425.0 - 80.0 * sep, 28.0)
        cols[f"{source}_tst_min_sd"] = np.round(np.abs(35 + 10 * rng.standard_normal(n)), 1)
        cols[f"{source}_se_pct_mean"] = np.round(np.clip(normal(90.0, 90.0 - 10.0 * sep, 3.5), 40, 100), 1)
        cols[f"{source}_nights"] = rng.integers(nights[0], nights[1] + 1, size=n)
    cols["actigraphy_is"] = np.round(np.clip(normal(0.62, 0.48, 0.08), 0.05, 1.0), 3)
    cols["actigraphy_iv"] = np.round(np.clip(normal(0.70, 0.95, 0.15), 0.05, 2.0), 3)
    cols["actigraphy_m10"] = np.round(normal(310.0, 270.0, 40.0), 1)
    cols["actigraphy_l5"] = np.round(np.abs(normal(12.0, 20.0, 5.0)), 1)
    cols["actigraphy_ra"] = np.round((cols["actigraphy_m10"] - cols["actigraphy_l5"])
                                     / (cols["actigraphy_m10"] + cols["actigraphy_l5"]), 3)
    frame = pd.DataFrame(cols)
    frame.loc[rng.choice(n, size=3, replace=False), ["psg_sol_min_mean", "psg_waso_min_mean"]] = np.nan
    frame.loc[rng.choice(n, size=2, replace=False), "diary_tst_min_mean"] = np.nan
    return frame


HIDDEN_INFORMATIVE = ("diary_sol_min_mean", "actigraphy_sol_min_mean", "psg_sol_min_mean")


def hidden_subgroup_cohort(n: int = 200, n_noise: int = 9, seed: int = 17,
                           label_agreement: float = 0.9) -> tuple[pd.DataFrame, pd.DataFrame]:
    """An invented cohort whose subgroup (about 35 %) shows only in the three latency columns.

    Every column is right-skewed (skew-normal draws, minutes or percent); ``n_noise``
    further columns carry no subgroup, and two of them are correlated with a latency column
    within the groups, so only a method that regresses a candidate on the chosen columns
    leaves them out. Returns (matrix, participants): the participants table holds ``truth``
    (the hidden subgroup, for tests), an a-priori ``reported_group`` that agrees with it for
    ``label_agreement`` of participants, and two columns unrelated to it (``site``, ``age``).
    """
    rng = np.random.default_rng(seed)
    group = rng.random(n) < 0.35
    ids = np.array([f"C{i:03d}" for i in range(1, n + 1)])
    cols: dict[str, np.ndarray] = {"participant": ids}
    for j, name in enumerate(HIDDEN_INFORMATIVE):
        base = sample(n, [10.0], [[8.0**2]], [4.0], rng)[:, 0]
        cols[name] = np.round(np.maximum(base + np.where(group, 30.0 - 4 * j, 0.0), 0.0), 1)
    shapes = {"waso_min": (15.0, 20.0, 4.0), "tst_min": (450.0, 45.0, -3.0), "se_pct": (94.0, 6.0, -4.0),
              "awakenings": (1.0, 2.0, 4.0)}                      # location, scale, shape
    noise = [(f"{src}_{par}_mean", shapes[par]) for par in shapes for src in ("diary", "actigraphy", "psg")]
    for j, (name, (loc, scale, shape)) in enumerate(noise[:n_noise]):
        value = sample(n, [loc], [[scale**2]], [shape], rng)[:, 0]
        if j < 2:   # correlated with a latency column, but no subgroup of its own beyond it
            value = value + 0.5 * cols[HIDDEN_INFORMATIVE[j]]
        cols[name] = np.round(value, 1)
    matrix = pd.DataFrame(cols)
    flip = rng.random(n) > label_agreement
    reported = np.where(group ^ flip, "insomnia", "none")
    other = np.random.default_rng([seed, 1])          # independent of the subgroup by construction
    participants = pd.DataFrame({
        "participant": ids, "truth": np.where(group, 2, 1), "reported_group": reported,
        "site": other.choice(["north", "south", "east"], size=n),
        "age": np.round(other.uniform(20, 70, size=n), 0),
    })
    return matrix, participants
