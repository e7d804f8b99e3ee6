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


def _texts(column: pd.Series) -> tuple[list[str], bool] | None:
    """The column's fields as pandas hands them to ``csv.writer`` and it writes them with str()
    (missing: ""), and whether they may need quoting; None for a type left to pandas."""
    dtype = column.dtype
    if isinstance(dtype, np.dtype):
        values = column.to_numpy()
        kind = dtype.kind
        if dtype == np.float64:  # numpy's astype(str) of a float64 is its repr, the shortest round trip
            return _blank(list(map(repr, values.tolist())), np.isnan(values)), False
        if kind in "iu":
            return list(map(str, values.tolist())), False
        if kind == "b":
            return ["True" if v else "False" for v in values.tolist()], False
        if kind == "O":
            cells = _blank(values.tolist(), pd.isna(values))
            return [c if type(c) is str else str(c) for c in cells], True
        return None
    if isinstance(dtype, pd.StringDtype):
        values = column.to_numpy(dtype=object)
        return _blank(values.tolist(), pd.isna(values)), True
    return None


def frame_csv(df: pd.DataFrame) -> str:
    """``df.to_csv(index=False, lineterminator="\n")``, the same text."""
    names = list(df.columns)
    if len(names) < 2 or not all(isinstance(n, str) for n in names) or len(set(names)) != len(names):
        return df.to_csv(index=False, lineterminator="\n")  # one column (a lone empty field is quoted), odd names
    fields = []
    for name in names:
        got = _texts(df[name])
        if got is None:
            return df.to_csv(index=False, lineterminator="\n")
        texts, maybe_quoted = got
        fields.append(_quoted(texts) if maybe_quoted else texts)
    # every field as csv.writer writes it; rows joined as it joins them (delimiter ",", line end "\n")
    lines = [",".join(_quoted(names))]
    lines += [",".join(row) for row in zip(*fields)]
    return "\n".join(lines) + "\n"
