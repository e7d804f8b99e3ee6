"""The participant × feature matrix and its codebook (matrix.csv, codebook.csv)."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd

from sleepfuse.model.definitions import PARAMETERS, SOURCE_NAMES, WINDOW_NOTE
from sleepfuse.model.records import SOURCES
from ..scoring.nights import SOURCE_PARAMETERS
from ..scoring.opportunity import MARKER_RULE
from ..scoring.rest_interval import REST_INTERVAL_RULE
from ..scoring.rhythm import RHYTHM_PARAMETERS

_WINDOW_RULES = {
    "psg": "Sleep opportunity: lights off to lights on (AASM); without markers, first to last scored epoch (QC note).",
    "actigraphy": ("Sleep opportunity: the diary's tried to sleep to out of bed for the night; else event markers; "
                   "else the automatic rest interval. " + MARKER_RULE + " " + REST_INTERVAL_RULE
                   + " Sleep/wake and non-wear rules are named in provenance.json. Missing and non-wear minutes are "
                   "neither sleep nor wake in every sleep/wake rule. Webster rescoring (with Cole-Kripke): by default "
                   "rules 4-5 judge the sleep runs left after rules 1-3 ([actigraphy] webster_order; the order is from "
                   "memory, not checked against Webster et al. 1982; the run's choice is in provenance.json). Each "
                   "algorithm's count scale is in provenance.json."),
    "diary": "Sleep opportunity: tried to sleep to out of bed; rows with impossible times are rejected (QC error).",
}
CODEBOOK_COLUMNS = ["name", "source", "parameter", "statistic", "unit", "definition", "n_nonmissing", "skewness"]


def feature_columns() -> list[tuple[str, str, str, str]]:
    """(column, source, parameter, statistic) in the matrix's stable order."""
    cols = []
    for source in SOURCES:
        cols.append((f"{source}_nights", source, "", "nights"))
        for p in SOURCE_PARAMETERS[source]:
            cols.append((f"{source}_{p}_mean", source, p, "mean"))
            cols.append((f"{source}_{p}_sd", source, p, "sd"))
    for r in RHYTHM_PARAMETERS:
        cols.append((f"actigraphy_{r}", "actigraphy", r, "value"))
    return cols


def participant_matrix(nights: pd.DataFrame, rhythm: pd.DataFrame, *, min_nights: int = 1,
                       zscore: bool = False, participants: list[str] | None = None) -> pd.DataFrame:
    """One row per participant: mean and SD over included nights per source and parameter, night counts, rhythm.

    With fewer than ``min_nights`` included nights a source's means and SDs are
    missing (its night count stays). ``zscore`` standardises every feature
    column over participants (the night counts are left as counts).
    """
    cols = feature_columns()
    ids = sorted(set(participants or []) | set(nights["participant"].unique()) | set(rhythm["participant"].unique()))
    index = pd.Index(ids, name="participant")
    data: dict[str, np.ndarray] = {}
    inc = nights[nights["included"]] if not nights.empty else nights
    for source in SOURCES:
        sub = inc[inc["source"] == source] if not inc.empty else inc
        params = SOURCE_PARAMETERS[source]
        n_nights = np.zeros(len(ids), dtype=np.int64)
        mean = sd = None
        if not sub.empty:
            values = sub[params]
            if not all(values[p].dtype.kind == "f" for p in params):  # numbers as text or objects
                values = values.apply(pd.to_numeric, errors="coerce")
            values = values.astype(float)
            g = values.groupby(sub["participant"])
            n_nights = g.size().reindex(index, fill_value=0).to_numpy(np.int64)
            mean = g.mean().reindex(index).to_numpy(float)
            sd = g.std(ddof=1).reindex(index).to_numpy(float)
        data[f"{source}_nights"] = n_nights
        enough = n_nights >= max(min_nights, 1)
        for j, p in enumerate(params):
            for stat, table in (("mean", mean), ("sd", sd)):
                col = np.full(len(ids), math.nan) if table is None else table[:, j].copy()
                col[~enough] = math.nan
                data[f"{source}_{p}_{stat}"] = col
    rh = rhythm.set_index("participant") if not rhythm.empty else pd.DataFrame(columns=list(RHYTHM_PARAMETERS))
    for r in RHYTHM_PARAMETERS:
        data[f"actigraphy_{r}"] = (rh[r].reindex(index).to_numpy(float) if r in rh
                                   else np.full(len(ids), math.nan))
    out = pd.DataFrame({c[0]: data[c[0]] for c in cols}, index=index)
    if zscore:
        for name, _, _, stat in cols:
            if stat == "nights":
                continue
            col = out[name].astype(float)
            sd = col.std(ddof=1)
            out[name] = (col - col.mean()) / sd if sd and np.isfinite(sd) and sd > 0 else math.nan
    return out.reset_index()


def codebook(matrix: pd.DataFrame, *, min_nights: int = 1, zscore: bool = False,
             quality_scale: str = "as entered") -> pd.DataFrame:
    """codebook.csv: every matrix column with source, parameter, statistic, unit, definition, n, skewness."""
    rows = [{"name": "participant", "source": "", "parameter": "", "statistic": "id", "unit": "",
             "definition": "Participant ID: the file-name part before the first '_' (or [study] participant_pattern).",
             "n_nonmissing": int(matrix["participant"].notna().sum()), "skewness": math.nan}]
    for name, source, param, stat in feature_columns():
        col = matrix[name]
        if col.dtype.kind not in "fiu":  # numbers as text or objects
            col = pd.to_numeric(col, errors="coerce")
        src = SOURCE_NAMES[source]
        if stat == "nights":
            unit, definition = "nights", f"Number of included {src} nights of the participant. {_WINDOW_RULES[source]}"
        else:
            info = PARAMETERS[param]
            unit = "z-score" if zscore else info.unit
            if stat == "value":
                definition = info.definition
            else:
                what = "Mean" if stat == "mean" else "Standard deviation (ddof=1)"
                definition = (f"{what} over the participant's included {src} nights (at least {min_nights}) of: "
                              f"{info.definition} {WINDOW_NOTE}")
            if param == "quality":
                definition += f" Scale: {quality_scale}."
            if zscore:
                definition += f" Standardised over participants (original unit: {info.unit})."
        n = int(col.notna().sum())
        skew = float(col.skew()) if n >= 3 else math.nan
        rows.append({"name": name, "source": source, "parameter": param, "statistic": stat, "unit": unit,
                     "definition": definition, "n_nonmissing": n, "skewness": skew})
    return pd.DataFrame(rows, columns=CODEBOOK_COLUMNS)
