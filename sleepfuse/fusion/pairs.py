"""The agreement table: every parameter × instrument pair, on the nights both instruments have."""

from __future__ import annotations

import numpy as np
import pandas as pd

from sleepfuse.model.definitions import PAIRS, PARAMETERS, pair_name
from ..scoring.nights import SOURCE_PARAMETERS
from ..scoring.opportunity import RULE_DIARY
from .agreement import AGREEMENT_COLUMNS, BOOTSTRAP_REPLICATES, BOOTSTRAP_SEED, agreement

AGREEMENT_TABLE_COLUMNS = ["parameter", "pair", "unit", *AGREEMENT_COLUMNS]

SHARED_SOURCE: dict[tuple[str, str, str], tuple[str, str, str]] = {
    # (test, reference, parameter): (source whose window_rule decides, that rule, why the values are identical)
    ("diary", "actigraphy", "tib_min"): ("actigraphy", RULE_DIARY, "the actigraphy sleep opportunity is the diary's window"),
}
"""Pairs and parameters whose two values share their source on a night (then identical by construction)."""


def shared_source_nights(nights: pd.DataFrame, test: str, reference: str, parameter: str,
                         test_rows: np.ndarray, reference_rows: np.ndarray) -> tuple[np.ndarray, str]:
    """Per paired night (rows of ``nights``): True where both values come from one source; and the reason.

    Decided by the night table's ``window_rule`` (SHARED_SOURCE); a table
    without that column has no such nights.
    """
    found = SHARED_SOURCE.get((test, reference, parameter))
    if found is None or "window_rule" not in nights.columns:
        return np.zeros(len(test_rows), dtype=bool), ""
    source, rule, why = found
    rows = test_rows if source == test else reference_rows
    return nights["window_rule"].to_numpy(dtype=object)[rows] == rule, why


def shared_parameters(test: str, reference: str) -> list[str]:
    """Parameters both sources report, in the order of the test source's list."""
    ref = set(SOURCE_PARAMETERS[reference])
    return [p for p in SOURCE_PARAMETERS[test] if p in ref]


class _NightKeys:
    """The night table's columns that pairing reads, converted once for all pairs."""

    def __init__(self, nights: pd.DataFrame):
        self.included = nights["included"].to_numpy(dtype=bool)
        self.source = nights["source"].to_numpy(dtype=object)
        self.who = nights["participant"].to_numpy(dtype=object)
        self.night = nights["night"].to_numpy(dtype=object)
        who_code, _ = pd.factorize(self.who)
        night_code, _ = pd.factorize(self.night)
        # one integer per (participant, night); None if an ID is missing (then pandas' own join)
        ok = who_code.size == 0 or (who_code.min() >= 0 and night_code.min() >= 0)
        width = int(night_code.max()) + 1 if night_code.size else 1
        self.key = who_code.astype(np.int64) * width + night_code if ok else None

    def rows(self, test: str, reference: str) -> tuple[np.ndarray, np.ndarray] | None:
        """Row numbers (test rows, their reference rows) of the nights both include, in the test
        rows' order; None when a reference night repeats (the caller then merges with pandas)."""
        a_rows = np.flatnonzero(self.included & (self.source == test))
        b_rows = np.flatnonzero(self.included & (self.source == reference))
        if self.key is None:
            b_keys = pd.MultiIndex.from_arrays([self.who[b_rows], self.night[b_rows]])
            if not b_keys.is_unique:
                return None
            where = b_keys.get_indexer(pd.MultiIndex.from_arrays([self.who[a_rows], self.night[a_rows]]))
            hit = np.flatnonzero(where >= 0)
            return a_rows[hit], b_rows[where[hit]]
        b_keys = self.key[b_rows]
        order = np.argsort(b_keys, kind="stable")
        sorted_keys = b_keys[order]
        if sorted_keys.size > 1 and (sorted_keys[1:] == sorted_keys[:-1]).any():
            return None
        a_keys = self.key[a_rows]
        at = np.minimum(np.searchsorted(sorted_keys, a_keys), max(sorted_keys.size - 1, 0))
        hit = np.flatnonzero(sorted_keys[at] == a_keys) if sorted_keys.size else np.zeros(0, dtype=np.intp)
        return a_rows[hit], b_rows[order[at[hit]]]


def paired_nights(nights: pd.DataFrame, test: str, reference: str, keys: _NightKeys | None = None) -> pd.DataFrame:
    """One row per (participant, night) that both sources have and include, with both values of every shared parameter.

    The rows of an inner merge on participant and night, in the test rows'
    order (as ``DataFrame.merge`` gives them; tests/test_fusion_agreement.py
    compares the two), found by matching one integer key per night.
    """
    params = shared_parameters(test, reference)
    keys = keys if keys is not None else _NightKeys(nights)
    found = keys.rows(test, reference)
    if found is None:  # never in a night table; pandas' merge handles it all the same
        on = ["participant", "night"]
        a = nights[keys.included & (keys.source == test)][on + params]
        b = nights[keys.included & (keys.source == reference)][on + params]
        return a.merge(b, on=on, how="inner", suffixes=("_test", "_ref"))
    left, right = found
    data: dict[str, object] = {"participant": keys.who[left], "night": keys.night[left]}
    for p in params:
        data[f"{p}_test"] = nights[p].to_numpy()[left]
    for p in params:
        data[f"{p}_ref"] = nights[p].to_numpy()[right]
    return pd.DataFrame(data)


def agreement_table(nights: pd.DataFrame, *, confidence: float = 0.95, loa_ci: str = "exact",
                    replicates: int = BOOTSTRAP_REPLICATES, seed: int = BOOTSTRAP_SEED) -> pd.DataFrame:
    """agreement.csv: Bland–Altman and friends per parameter and pair (differences test − reference).

    Where a pair and parameter share their source on every paired night
    (SHARED_SOURCE) the row is marked ``by_construction`` with blank
    statistics; where they share it on some nights, those nights are left out
    and the note says how many.
    """
    rows = []
    keys = _NightKeys(nights) if not nights.empty else None
    for test, reference in PAIRS:
        found = keys.rows(test, reference) if keys is not None else None
        paired = None
        if keys is not None and found is None:
            paired = paired_nights(nights, test, reference, keys)
        for param in shared_parameters(test, reference):
            info = PARAMETERS[param]
            if keys is None:
                t = r = np.zeros(0)
                ids = np.zeros(0, dtype=object)
            elif paired is not None:
                t, r = paired[f"{param}_test"].to_numpy(float), paired[f"{param}_ref"].to_numpy(float)
                ids = paired["participant"].to_numpy(object)
            else:
                left, right = found
                column = nights[param].to_numpy(float)
                t, r, ids = column[left], column[right], keys.who[left]
            why, dropped = "", 0
            if found is not None and paired is None:
                shared, reason = shared_source_nights(nights, test, reference, param, *found)
                usable = np.isfinite(t) & np.isfinite(r)
                if shared.any() and (shared | ~usable).all():
                    why = reason
                elif shared.any():
                    dropped = int(np.count_nonzero(shared & usable))
                    t, r, ids = t[~shared], r[~shared], ids[~shared]
            stats = agreement(t, r, ids, log_scale=info.skewed, confidence=confidence, loa_ci=loa_ci,
                              replicates=replicates, seed=seed, by_construction=why)
            if dropped:
                note = f"{dropped} night(s) identical by construction left out ({reason})"
                stats["note"] = f"{stats['note']}; {note}" if stats["note"] else note
            rows.append({"parameter": param, "pair": pair_name(test, reference), "unit": info.unit, **stats})
    return pd.DataFrame(rows, columns=AGREEMENT_TABLE_COLUMNS)
