"""The actigraphy reader's careful path: any dialect, column names by role, time stamps in any common form.

Every cell is read as text with its file line, so each problem names the line
to fix. Time stamps come from one column, from a date and a time column, or,
for a file of counts only, from a start time and an epoch length on the lines
above the header. What was detected goes into the record's ``detected``.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd

from sleepfuse.model.errors import ReadError
from sleepfuse.model.records import Problem
from ._columns import match_columns, role_counter
from ._csvtext import is_blank_row, line_phrase, missing_column_message, ragged_problems, read_table
from ._csvtime import metadata_start, parse_stamps
from ._dialect import MISSING
from ._stamps import DateOrderConflict, DateOrderUnsettled

ROLES = ("timestamp", "date", "time", "counts", "off_wrist", "marker")
_US = 1_000_000


def unmapped_optional(header: list[str], found: dict[str, int | None], names: dict[str, str],
                      columns: dict[str, str] | None) -> list[Problem]:
    """A warning for an off_wrist/marker column named in study.toml but absent from the file."""
    return [
        Problem("warning", f"column {names[key]!r} (for {key}, set in study.toml) is not in the file; {key} ignored")
        for key in ("off_wrist", "marker")
        if columns and key in columns and found.get(key) is None
    ]


def read_careful(path: Path, names: dict[str, str], columns: dict[str, str] | None, tz: str, date_order: str):
    """(instants, lines, cells, col, problems, detected, header epoch) of any text file of counts."""
    explicit = {k: v for k, v in (columns or {}).items()}
    table = read_table(path, role_counter(ROLES, explicit, names))
    dialect = table.dialect
    problems: list[Problem] = ragged_problems(table)
    match = match_columns(table.header, ROLES, explicit, names)
    col = dict(match.index)
    if col["timestamp"] is None and col["date"] is None and col["time"] is not None:
        col["timestamp"], col["time"] = col["time"], None  # one column called "time" holding date and time
    if col["counts"] is None:
        raise ReadError(path, missing_column_message("counts", names["counts"], table.header, "actigraphy"))
    problems += unmapped_optional(table.header, col, names, columns)
    filled = ~is_blank_row(table.cells)
    cells = table.cells[filled]
    lines = table.lines[filled]
    if len(cells) == 0:
        raise ReadError(path, "the file has a header but no data rows")

    detected = {"dialect": dialect.describe(), "columns": match.describe(table.header)}
    if match.unknown:
        detected["unused columns"] = ", ".join(map(repr, match.unknown))
    header_epoch = epoch_from_metadata(dialect.metadata)
    if header_epoch is not None:
        detected["epoch from header"] = f"{header_epoch} s"
    try:
        if col["timestamp"] is not None:
            stamps = cells[col["timestamp"]].str.strip()
            what = repr(table.header[col["timestamp"]])
        elif col["date"] is not None and col["time"] is not None:
            stamps = cells[col["date"]].str.strip() + " " + cells[col["time"]].str.strip()
            what = f"{table.header[col['date']]!r} + {table.header[col['time']]!r}"
        else:
            stamps = None
        if stamps is not None:
            instants, ok, stamp_problems, fmt = parse_stamps(stamps, lines, tz, date_order)
        else:
            instants, fmt = _from_start(path, dialect.metadata, header_epoch, len(cells), tz, date_order, table.header)
            ok, stamp_problems, what = np.ones(len(cells), dtype=bool), [], "start and epoch on the header lines"
    except (DateOrderUnsettled, DateOrderConflict) as exc:
        raise ReadError(path, str(exc)) from None
    problems += stamp_problems
    detected["time stamps"] = f"{what}: {fmt}"
    if not ok.any():
        example = stamps.iloc[0]
        raise ReadError(
            path,
            f"no readable timestamps in {what} (line {lines[0]}: {example[:40]!r}); use ISO 8601 such as "
            "2026-03-08T23:15:00, or a day-first/month-first date with a 24- or 12-hour clock",
        )
    if not (dialect.plain and fmt == "ISO 8601" and set(match.how.values()) <= {"name", "study.toml"}
            and not match.unknown):
        problems.insert(0, Problem("info", "read as: " + "; ".join(f"{k}: {v}" for k, v in detected.items())))
    keep = np.flatnonzero(ok)
    return instants[keep], lines[keep], cells.iloc[keep], col, problems, detected, header_epoch, dialect.decimal


_EPOCH_KEY = re.compile(r"epoch")
def epoch_from_metadata(meta: dict[str, str]) -> int | None:
    """Epoch length (s) from a header line such as ``Epoch length: 30``, ``epoch (s);30``,
    ``Epoch: 00:00:30`` or ``epoch = 1 min``; None if there is none."""
    for key, value in meta.items():
        if not _EPOCH_KEY.search(key):
            continue
        v = value.strip().lower()
        m = re.fullmatch(r"(\d{1,2}):(\d{2}):(\d{2})", v) or re.fullmatch(r"()(\d{1,2}):(\d{2})", v)
        if m:
            return int(m.group(1) or 0) * 3600 + int(m.group(2)) * 60 + int(m.group(3))
        m = re.fullmatch(r"(\d+(?:[.,]\d+)?)\s*(s|sec|secs|second|seconds|min|mins|minute|minutes)?", v)
        if m:
            n = float(m.group(1).replace(",", "."))
            unit = m.group(2) or ("min" if "min" in key else "s")
            return int(round(n * (60 if unit.startswith("min") else 1)))
    return None


def _from_start(path, meta, epoch_s, n, tz, date_order, header):
    """Instants of a counts-only file: the start on the header lines plus one epoch per row."""
    start = metadata_start(meta, tz, date_order)
    if start is None or epoch_s is None:
        raise ReadError(path, missing_column_message("timestamp", "timestamp", header, "actigraphy")
                        + " (or give 'Start: <date time>' and 'Epoch length: <seconds>' on lines above the header)")
    return start[0] + np.arange(n, dtype=np.int64) * epoch_s * _US, start[1]


def parse_counts(values: pd.Series, lines: np.ndarray, instants: np.ndarray, tz: str, decimal: str = "."):
    """Counts as float64; missing, non-numeric or negative values become NaN and are reported."""
    text = values.str.strip()
    text = text.mask(text.str.casefold().isin(MISSING), "")  # NA, #N/A, ...: missing, as an empty cell
    if decimal == ",":
        text = text.str.replace(",", ".", regex=False)
    try:  # every cell a number: the fast path
        counts = text.astype(np.float64).to_numpy(dtype=np.float64, na_value=np.nan).copy()
    except (ValueError, TypeError):
        counts = pd.to_numeric(text, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan).copy()
    problems: list[Problem] = []
    blank = (text == "").to_numpy()
    bad = np.isnan(counts) & ~blank  # inf is a number: the plausibility ceiling reports it (_countcheck.py)
    negative = counts < 0  # -inf too
    for mask, what in ((blank, "counts missing"), (bad, "counts not a number"), (negative, "negative counts")):
        idx = np.flatnonzero(mask)
        if idx.size:
            example = f" (e.g. {text.iloc[idx[0]][:20]!r})" if what == "counts not a number" else ""
            problems.append(
                Problem(
                    "warning",
                    f"{what} on {idx.size} row(s){example}, read as missing: {line_phrase(lines[idx])}",
                    time=_local(instants[idx[0]], tz),
                )
            )
    counts[bad | negative] = np.nan
    return counts, problems


_TRUE = {"1", "1.0", "true", "yes", "y", "t"}
_FALSE = {"0", "0.0", "false", "no", "n", "f"}


def parse_flags(values: pd.Series, lines, instants, tz: str, key: str, *, blank_ok: bool):
    """A 0/1 column as bool; blank (unless ``blank_ok``) and other values read as False and reported."""
    text = values.str.strip().str.lower().str.replace(",", ".", regex=False)
    text = text.mask(text.isin(MISSING), "")
    flags = text.isin(_TRUE).to_numpy()
    known = flags | text.isin(_FALSE).to_numpy()
    blank = (text == "").to_numpy()
    problems = []
    for mask, what in ((~known & ~blank, "not 0 or 1"), (blank & (not blank_ok), "missing")):
        idx = np.flatnonzero(mask)
        if idx.size:
            problems.append(
                Problem(
                    "warning",
                    f"{key} {what} on {idx.size} row(s), read as 0: {line_phrase(lines[idx])}",
                    time=_local(instants[idx[0]], tz),
                )
            )
    return flags, problems


def _local(instant_us: int, tz: str) -> pd.Timestamp:
    return pd.Timestamp(int(instant_us), unit="us", tz="UTC").tz_convert(tz)


