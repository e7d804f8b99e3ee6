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


def _cells(column: pd.Series) -> list | None:
    """The column's cells as pandas would hand them to ``csv.writer`` (missing: ""), or None."""
    dtype = column.dtype
    if isinstance(dtype, np.dtype):
        values = column.to_numpy()
        kind = dtype.kind
        if dtype == np.float64:
            return [repr(v) if v == v else "" for v in values.tolist()]  # NaN != NaN
        if kind in "iu" or kind == "b":
            return values.tolist()  # csv writes str(): 12, True
        if kind == "O":
            missing = pd.isna(values)
            cells = values.tolist()
            if missing.any():
                for i in np.flatnonzero(missing).tolist():
                    cells[i] = ""
            return cells
        return None
    if isinstance(dtype, pd.StringDtype):
        values = column.to_numpy(dtype=object)
        missing = pd.isna(values)
        cells = values.tolist()
        if missing.any():
            for i in np.flatnonzero(missing).tolist():
                cells[i] = ""
        return cells
    return None


def frame_csv(df: pd.DataFrame) -> str:
    """``df.to_csv(index=False, lineterminator="\\n")``, the same text."""
    names = list(df.columns)
    if not all(isinstance(n, str) for n in names) or len(set(names)) != len(names):
        return df.to_csv(index=False, lineterminator="\n")
    columns = []
    for j in range(len(names)):
        cells = _cells(df[names[j]])
        if cells is None:
            return df.to_csv(index=False, lineterminator="\n")
        columns.append(cells)
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n", delimiter=",", quotechar='"', doublequote=True,
                        escapechar=None, quoting=csv.QUOTE_MINIMAL)
    writer.writerow(names)
    if len(df):
        writer.writerows(zip(*columns))
    return buffer.getvalue()
