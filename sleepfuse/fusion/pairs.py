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
    """One row per (participant, night) that both sources have and include, with both values of every shared parameter."""
    params = shared_parameters(test, reference)
    inc = nights[nights["included"]]
    keys = ["participant", "night"]
    a = inc.loc[inc["source"] == test, keys + params]
    b = inc.loc[inc["source"] == reference, keys + params]
    b_keys = pd.MultiIndex.from_arrays([b["participant"], b["night"]])
    if not b_keys.is_unique:  # never in a night table; pandas' merge handles it all the same
        return a.merge(b, on=keys, how="inner", suffixes=("_test", "_ref"))
    # An inner merge on unique reference keys, in the test rows' order (as DataFrame.merge gives it).
    where = b_keys.get_indexer(pd.MultiIndex.from_arrays([a["participant"], a["night"]]))
    hit = np.flatnonzero(where >= 0)
    left, right = a.iloc[hit], b.iloc[where[hit]]
    data = {k: left[k].to_numpy() for k in keys}
    data.update({f"{p}_test": left[p].to_numpy() for p in params})
    data.update({f"{p}_ref": right[p].to_numpy() for p in params})
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
