"""The text of an output table as CSV: ``DataFrame.to_csv(index=False, lineterminator="\\n")``, faster.

pandas formats each float column with numpy's ``astype(str)`` and passes
every cell through its block machinery; for the plain column types of
sleepfuse's tables (float64, integers, bool, text) the same cells come out of
Python's own ``repr``/``str`` in about half the time. The cells are then
written by the standard ``csv`` module with the very settings pandas gives it
(minimal quoting, ``"`` doubled), so the text is identical;
tests/test_csvtext.py compares the two on every output table and on
generated frames. Any other column type (dates, categories, nullable
integers, float32...) goes to pandas itself.
"""

from __future__ import annotations

import csv
import io
from typing import Iterator

import numpy as np
import pandas as pd


def _quoting_characters() -> frozenset[str]:
    """The characters that make the csv module quote a field (asked once; ASCII is all a dialect uses)."""
    found = {"\r", "\n"}
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    for code in range(128):
        c = chr(code)
        buffer.seek(0)
        buffer.truncate()
        writer.writerow([f"a{c}b", "x"])
        if not buffer.getvalue().startswith(f"a{c}b,"):
            found.add(c)
    return frozenset(found)


_QUOTING = _quoting_characters()


def _quoted(texts: list[str]) -> list[str]:
    """Text fields as the csv module writes them in a row of two or more fields (quoted when needed)."""
    joined = "".join(texts)
    if not any(c in joined for c in _QUOTING):
        return texts
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    out = []
    for text in texts:
        if any(c in text for c in _QUOTING):
            buffer.seek(0)
            buffer.truncate()
            writer.writerow([text, ""])  # two fields: the lone-empty-field rule never applies
            out.append(buffer.getvalue()[:-2])  # drop the "," of the empty field and the line end
        else:
            out.append(text)
    return out


def _blank(cells: list, missing: np.ndarray) -> list:
    if missing.any():
        for i in np.flatnonzero(missing).tolist():
            cells[i] = ""
    return cells


def _column(column: pd.Series) -> tuple[np.ndarray, str] | None:
    """The column's values and how to write them: "f" float64, "i" integer, "b" bool, "o" objects
    and text; None for a type left to pandas (dates, categories, nullable types, float32...)."""
    dtype = column.dtype
    if isinstance(dtype, np.dtype):
        if dtype == np.float64:
            return column.to_numpy(), "f"
        if dtype.kind in "iu":
            return column.to_numpy(), "i"
        if dtype.kind == "b":
            return column.to_numpy(), "b"
        if dtype.kind == "O":
            return column.to_numpy(), "o"
        return None
    if isinstance(dtype, pd.StringDtype):
        return column.to_numpy(dtype=object), "o"
    return None


def _fields(values: np.ndarray, how: str) -> list[str]:
    """The fields as pandas hands them to ``csv.writer`` and it writes them (missing: "")."""
    if how == "f":  # numpy's astype(str) of a float64 is its repr, the shortest round trip
        return _blank(list(map(repr, values.tolist())), np.isnan(values))
    if how == "i":
        return list(map(str, values.tolist()))
    if how == "b":
        return ["True" if v else "False" for v in values.tolist()]
    cells = _blank(values.tolist(), pd.isna(values))
    return _quoted([c if type(c) is str else str(c) for c in cells])


BLOCK_ROWS = 4096  # rows formatted at a time: the text of a big table is never all in memory at once


def csv_chunks(df: pd.DataFrame, rows: int = BLOCK_ROWS) -> Iterator[str]:
    """The text of ``df.to_csv(index=False, lineterminator="\n")`` in pieces (header, then blocks of rows)."""
    names = list(df.columns)
    columns = None
    if len(names) >= 2 and all(isinstance(n, str) for n in names) and len(set(names)) == len(names):
        columns = [_column(df[name]) for name in names]
    if columns is None or any(c is None for c in columns):
        # one column (a lone empty field is quoted), odd names or another type: pandas itself
        yield df.to_csv(index=False, lineterminator="\n")
        return
    # every field as csv.writer writes it; rows joined as it joins them (delimiter ",", line end "\n")
    yield ",".join(_quoted(names)) + "\n"
    for a in range(0, len(df), rows):
        fields = [_fields(values[a:a + rows], how) for values, how in columns]
        yield "\n".join([",".join(row) for row in zip(*fields)]) + "\n"


def frame_csv(df: pd.DataFrame) -> str:
    """``df.to_csv(index=False, lineterminator="\n")``, the same text."""
    return "".join(csv_chunks(df))
