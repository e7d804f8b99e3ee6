"""The agreement table: every parameter × instrument pair, on the nights both instruments have."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..definitions import PAIRS, PARAMETERS, pair_name
from ..scoring.nights import SOURCE_PARAMETERS
from .agreement import AGREEMENT_COLUMNS, agreement

AGREEMENT_TABLE_COLUMNS = ["parameter", "pair", "unit", *AGREEMENT_COLUMNS]


def shared_parameters(test: str, reference: str) -> list[str]:
    """Parameters both sources report, in the order of the test source's list."""
    ref = set(SOURCE_PARAMETERS[reference])
    return [p for p in SOURCE_PARAMETERS[test] if p in ref]


def paired_nights(nights: pd.DataFrame, test: str, reference: str) -> pd.DataFrame:
    """One row per (participant, night) that both sources have and include, with both values of every shared parameter.

    The rows of an inner merge on participant and night, in the test rows'
    order (as ``DataFrame.merge`` gives them; tests/test_fusion_agreement.py
    compares the two), found with an index lookup on plain arrays.
    """
    params = shared_parameters(test, reference)
    keys = ["participant", "night"]
    included = nights["included"].to_numpy(dtype=bool)
    source = nights["source"].to_numpy(dtype=object)
    a_rows = np.flatnonzero(included & (source == test))
    b_rows = np.flatnonzero(included & (source == reference))
    who = nights["participant"].to_numpy(dtype=object)
    night = nights["night"].to_numpy(dtype=object)
    b_keys = pd.MultiIndex.from_arrays([who[b_rows], night[b_rows]])
    if not b_keys.is_unique:  # never in a night table; pandas' merge handles it all the same
        a = nights.iloc[a_rows][keys + params]
        b = nights.iloc[b_rows][keys + params]
        return a.merge(b, on=keys, how="inner", suffixes=("_test", "_ref"))
    where = b_keys.get_indexer(pd.MultiIndex.from_arrays([who[a_rows], night[a_rows]]))
    hit = np.flatnonzero(where >= 0)
    left, right = a_rows[hit], b_rows[where[hit]]
    data: dict[str, object] = {"participant": nights["participant"].iloc[left].to_numpy(),
                               "night": nights["night"].iloc[left].to_numpy()}
    for p in params:
        data[f"{p}_test"] = nights[p].to_numpy()[left]
    for p in params:
        data[f"{p}_ref"] = nights[p].to_numpy()[right]
    return pd.DataFrame(data)


def agreement_table(nights: pd.DataFrame, *, confidence: float = 0.95) -> pd.DataFrame:
    """agreement.csv: Bland–Altman and friends per parameter and pair (differences test − reference)."""
    rows = []
    for test, reference in PAIRS:
        paired = paired_nights(nights, test, reference) if not nights.empty else pd.DataFrame()
        for param in shared_parameters(test, reference):
            info = PARAMETERS[param]
            if paired.empty:
                t = r = ids = pd.Series(dtype=float)
            else:
                t, r, ids = paired[f"{param}_test"], paired[f"{param}_ref"], paired["participant"]
            stats = agreement(t.to_numpy(float), r.to_numpy(float), ids.to_numpy(object),
                              log_scale=info.skewed, confidence=confidence)
            rows.append({"parameter": param, "pair": pair_name(test, reference), "unit": info.unit, **stats})
    return pd.DataFrame(rows, columns=AGREEMENT_TABLE_COLUMNS)
