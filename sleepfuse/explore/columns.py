"""Which matrix columns a clustering run uses, and the standardised data it fits.

Column sets come from name patterns (fnmatch globs) or whole instrument blocks:
``diary``, ``actigraphy``, ``psg`` take the ``<source>_*_mean`` columns (and, for
actigraphy, the rest-activity rhythm measures IS, IV, M10, L5, RA); ``all`` takes the
three together. Night-to-night SDs and night counts are left out of blocks by default:
they describe how much a participant varies and how much data exists, not the
participant's typical sleep, and would let data quantity drive the clusters.

Participants with a missing chosen value are listed with the reason and left out; no
value is ever imputed. Columns the analyst names for it are first log-transformed,
ln(1 + x), for right-skewed non-negative values (minutes, counts) whose skewness is
beyond what a skew-normal can take (|γ₁| < 0.995). Chosen columns are then standardised
to z-scores (sample SD, ddof=1) over the included participants.
"""

from __future__ import annotations

import fnmatch
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from sleepfuse.model.errors import ConfigError

SOURCES = ("diary", "actigraphy", "psg")
BLOCKS = SOURCES + ("all",)
RHYTHM_COLUMNS = ("actigraphy_is", "actigraphy_iv", "actigraphy_m10", "actigraphy_l5", "actigraphy_ra")
PARTICIPANT = "participant"


@dataclass(frozen=True)
class ColumnSet:
    """A named set of matrix columns clustered together (a block, or the analyst's patterns)."""

    name: str
    columns: tuple[str, ...]


def block_columns(matrix_columns, block: str, statistics: tuple[str, ...] = ("mean",)) -> list[str]:
    """Columns of one instrument block, in matrix order; ``statistics`` picks the suffixes (mean, sd)."""
    if block not in BLOCKS:
        raise ConfigError("--blocks", block, ", ".join(BLOCKS))
    sources = SOURCES if block == "all" else (block,)
    chosen = []
    for name in matrix_columns:
        if name == PARTICIPANT:
            continue
        source = name.split("_", 1)[0]
        if source not in sources:
            continue
        if name in RHYTHM_COLUMNS or any(name.endswith(f"_{s}") for s in statistics):
            if not name.endswith("_nights"):
                chosen.append(name)
    return chosen


def columns_by_pattern(matrix_columns, patterns, option: str = "--columns") -> list[str]:
    """Columns matching comma-separated names or glob patterns, in matrix order.

    A pattern that matches no column is an error naming it and the ``option`` it came
    from, so a typo never silently shrinks the analysis.
    """
    if isinstance(patterns, str):
        patterns = [p.strip() for p in patterns.split(",")]
    patterns = [p for p in patterns if p]
    if not patterns:
        raise ConfigError(option, "", "comma-separated column names or glob patterns, e.g. 'psg_*_mean'")
    names = [c for c in matrix_columns if c != PARTICIPANT]
    chosen: set[str] = set()
    for pattern in patterns:
        hits = fnmatch.filter(names, pattern)
        if not hits:
            raise ConfigError(option, pattern, "a name or glob pattern matching at least one matrix column")
        chosen.update(hits)
    return [c for c in names if c in chosen]


def column_sets(matrix_columns, columns: str | None = None, blocks: str | None = None) -> list[ColumnSet]:
    """The column sets of a run: one ``columns`` set from patterns, or one per requested block.

    With neither given the run uses the ``all`` block. A block with no column is an error.
    """
    if columns and blocks:
        raise ConfigError("--columns/--blocks", f"{columns} / {blocks}", "either --columns or --blocks, not both")
    if columns:
        return [ColumnSet("columns", tuple(columns_by_pattern(matrix_columns, columns)))]
    names = [b.strip() for b in (blocks or "all").split(",") if b.strip()]
    sets = []
    for name in dict.fromkeys(names):
        cols = block_columns(matrix_columns, name)
        if not cols:
            raise ConfigError("--blocks", name, f"a block with columns in this matrix ({', '.join(BLOCKS)})")
        sets.append(ColumnSet(name, tuple(cols)))
    return sets


@dataclass
class PreparedData:
    """Complete cases of one column set, raw and standardised, with who was left out and why."""

    column_set: str
    columns: tuple[str, ...]
    participants: np.ndarray                 # included participant IDs (n,)
    raw: np.ndarray                          # (n, d) in the matrix's units
    means: np.ndarray                        # (d,) used for the z-scores
    sds: np.ndarray                          # (d,) sample SD (ddof=1)
    excluded: pd.DataFrame                   # participant, reason
    notes: list[str] = field(default_factory=list)
    logged: tuple[str, ...] = ()             # columns fitted as ln(1 + x)

    def label(self, column: str) -> str:
        """The column's name as fitted (``ln(1 + name)`` when log-transformed)."""
        return f"ln(1 + {column})" if column in self.logged else column

    @property
    def z(self) -> np.ndarray:
        """z-scores (n, d) of the included participants."""
        return (self.raw - self.means) / self.sds

    def standardise(self, raw: np.ndarray) -> np.ndarray:
        """Other participants' values on this set's z-scale (for a validation sample)."""
        return (np.asarray(raw, dtype=float) - self.means) / self.sds

    def subset(self, index: np.ndarray) -> PreparedData:
        """The same columns for some included participants, re-standardised over them."""
        raw = self.raw[index]
        return PreparedData(self.column_set, self.columns, self.participants[index], raw,
                            raw.mean(axis=0), raw.std(axis=0, ddof=1), self.excluded, list(self.notes),
                            self.logged)

    def with_columns(self, columns) -> PreparedData:
        """The same participants and z-scale for some of the columns (in this set's order)."""
        idx = [i for i, c in enumerate(self.columns) if c in set(columns)]
        return PreparedData(self.column_set, tuple(self.columns[i] for i in idx), self.participants,
                            self.raw[:, idx], self.means[idx], self.sds[idx], self.excluded, list(self.notes),
                            tuple(c for c in self.logged if c in set(columns)))

    def standardisation(self) -> pd.DataFrame:
        """column, transform, mean, sd (on the transformed scale), n: what lies behind the z-scores."""
        return pd.DataFrame({"block": self.column_set, "column": list(self.columns),
                             "transform": ["ln(1 + x)" if c in self.logged else "" for c in self.columns],
                             "mean": self.means, "sd": self.sds, "n": len(self.participants)})


def _numeric(matrix: pd.DataFrame, column: str) -> pd.Series:
    values = pd.to_numeric(matrix[column], errors="coerce")
    bad = values.isna() & matrix[column].notna()
    if bad.any():
        example = matrix.loc[bad, column].iloc[0]
        raise ConfigError(f"matrix column {column}", example, "numbers (or empty for missing)")
    return values.astype(float)


def prepare(matrix: pd.DataFrame, column_set: ColumnSet, log_columns=()) -> PreparedData:
    """Complete cases and z-scores of ``column_set``; columns with no value or no spread are dropped with a note.

    Columns in ``log_columns`` are fitted as ln(1 + x); a negative value there is an error.
    """
    if PARTICIPANT not in matrix.columns:
        raise ConfigError("matrix", "columns " + ", ".join(map(str, matrix.columns[:5])),
                          f"a first column named '{PARTICIPANT}'")
    participants = matrix[PARTICIPANT].astype(str).to_numpy()
    notes: list[str] = []
    values = {}
    for column in column_set.columns:
        series = _numeric(matrix, column)
        if series.notna().sum() == 0:
            notes.append(f"{column} left out: no participant has a value")
            continue
        if column in log_columns:
            if (series < 0).any():
                raise ConfigError(f"--log column {column}", float(series[series < 0].iloc[0]),
                                  "values of 0 or more (ln(1 + x) needs them)")
            series = np.log1p(series)
        values[column] = series
    frame = pd.DataFrame(values, index=matrix.index)
    missing = frame.isna()
    complete = ~missing.any(axis=1)
    kept = [c for c in frame.columns if frame.loc[complete, c].nunique() > 1]
    for column in frame.columns:
        if column not in kept:
            notes.append(f"{column} left out: the same value for every complete participant")
    frame = frame[kept]
    missing = frame.isna()
    complete = ~missing.any(axis=1)
    reasons = [
        "missing " + ", ".join(frame.columns[missing.loc[i].to_numpy()]) for i in frame.index[~complete]
    ]
    excluded = pd.DataFrame({"participant": participants[~complete.to_numpy()], "reason": reasons})
    raw = frame.loc[complete].to_numpy(dtype=float).reshape(int(complete.sum()), len(kept))
    n = raw.shape[0]
    means = raw.mean(axis=0) if n else np.full(len(kept), np.nan)
    sds = raw.std(axis=0, ddof=1) if n > 1 else np.full(len(kept), np.nan)
    return PreparedData(column_set.name, tuple(kept), participants[complete.to_numpy()], raw,
                        means, sds, excluded, notes, tuple(c for c in kept if c in log_columns))


def read_participant_csv(path, what: str, needs: str) -> pd.DataFrame:
    """A CSV keyed by participant, IDs kept as text; ConfigError naming ``what`` when it cannot be used.

    ``needs`` says what the file must look like when it has no participant column."""
    try:
        table = pd.read_csv(path, dtype={PARTICIPANT: str})
    except FileNotFoundError:
        raise ConfigError(what, str(path), "an existing CSV file") from None
    except (OSError, ValueError, pd.errors.ParserError) as exc:
        raise ConfigError(what, str(path), f"a readable CSV file ({exc})") from None
    if PARTICIPANT not in table.columns:
        raise ConfigError(what, str(path), needs)
    return table
