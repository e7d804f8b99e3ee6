"""The diary reader's table: a CSV in any dialect or a workbook sheet, columns by role, lab dates made ISO.

Workbooks (``.xlsx`` through openpyxl, ``.ods`` through odfpy, both via
``pandas.read_excel``) give time, date and text cells; each becomes the text
the CSV reader would have seen (``HH:MM:SS``, ``YYYY-MM-DD``,
``YYYY-MM-DDTHH:MM:SS``), so one parser serves both. Nights and date-times
written day-first or month-first are rewritten as ISO here, with the order
settled as ``_stamps`` settles it.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from pathlib import Path

import numpy as np
import pandas as pd

from sleepfuse.model.config import DIARY_COLUMN_KEYS
from sleepfuse.model.errors import ReadError
from sleepfuse.model.records import Problem
from ._columns import match_columns, role_counter
from ._csvtext import blank_rows, ragged_problems, read_table
from ._dialect import find_header, summary_tail
from ._stamps import ISO_START, DateOrderConflict, DateOrderUnsettled, parse_wall

WORKBOOK_SUFFIXES = (".xlsx", ".xlsm", ".ods")
TIME_KEYS = ("bedtime", "tried_to_sleep", "final_awakening", "out_of_bed")
_LAB_STAMP = re.compile(r"^\s*\d{1,4}[/.\-]\d{1,2}[/.\-]\d{1,4}")


def diary_table(path: Path, names: dict[str, str], explicit: dict[str, str] | None, *, sheet: str = "",
                date_order: str = ""):
    """(header, rows of str, lines, column index per key, problems, detected) of a diary file."""
    knows = role_counter(DIARY_COLUMN_KEYS, explicit, names)
    problems: list[Problem] = []
    if path.suffix.lower() in WORKBOOK_SUFFIXES:
        header, rows, lines, detected = _workbook(path, knows, sheet)
        plain = False
    else:
        table = read_table(path, knows)
        problems += ragged_problems(table)
        header, rows, lines = table.header, table.values().tolist(), table.lines.tolist()
        detected = {"dialect": table.dialect.describe()}
        plain = table.dialect.plain
    match = match_columns(header, DIARY_COLUMN_KEYS, explicit, names)
    detected["columns"] = match.describe(header)
    if match.unknown:
        detected["unused columns"] = ", ".join(map(repr, match.unknown))
    filled = blank_rows(rows)
    rows = [row for row, blank in zip(rows, filled) if not blank]
    lines = [line for line, blank in zip(lines, filled) if not blank]
    col = match.index
    try:
        fmt = _iso_dates(rows, col, date_order)
    except (DateOrderUnsettled, DateOrderConflict) as exc:
        raise ReadError(path, str(exc)) from None
    if fmt:
        detected["dates"] = fmt
    unusual = (path.suffix.lower() in WORKBOOK_SUFFIXES or not plain or fmt
               or set(match.how.values()) - {"name", "study.toml"} or match.unknown)
    if unusual:
        problems.insert(0, Problem("info", "read as: " + "; ".join(f"{k}: {v}" for k, v in detected.items())))
    return header, rows, lines, col, problems, detected


def _iso_dates(rows: list[list[str]], col: dict[str, int | None], date_order: str) -> str:
    """Rewrite lab-format nights and date-times in place as ISO text; the format found ('' if all ISO)."""
    found = ""
    j = col.get("night")
    if j is not None:
        texts = [r[j].strip() for r in rows]
        odd = [i for i, t in enumerate(texts) if t and not ISO_START.match(t)]
        if odd and not any(ISO_START.match(t) for t in texts):  # one odd cell among ISO nights: reported per row
            wall, fmt = parse_wall(pd.Series([texts[i] for i in odd]), date_order)
            if fmt is not None:
                found = f"night: {fmt.describe()}"
                if fmt.order != "year-first":
                    date_order = fmt.order
                for i, w in zip(odd, wall):
                    if not np.isnat(w):
                        rows[i][j] = str(w)[:10]
    for key in TIME_KEYS:
        j = col.get(key)
        if j is None:
            continue
        odd = [i for i, r in enumerate(rows) if _LAB_STAMP.match(r[j]) and not ISO_START.match(r[j])]
        if not odd or any(ISO_START.match(r[j]) for r in rows):
            continue
        wall, fmt = parse_wall(pd.Series([rows[i][j].strip() for i in odd]), date_order)
        if fmt is not None:
            found = (found + "; " if found else "") + f"{key}: {fmt.describe()}"
            for i, w in zip(odd, wall):
                if not np.isnat(w):
                    rows[i][j] = str(w.astype("datetime64[s]")).replace(" ", "T")
    return found


def _workbook(path: Path, knows, sheet: str):
    """(header, rows of str, sheet row numbers, detected) of the diary sheet of a workbook."""
    engine = "odf" if path.suffix.lower() == ".ods" else "openpyxl"
    try:
        sheets = pd.read_excel(path, sheet_name=None, header=None, dtype=object, engine=engine)
    except FileNotFoundError:
        raise ReadError(path, "file not found") from None
    except ImportError as exc:
        raise ReadError(path, f"cannot read workbooks: {exc}; pip install openpyxl odfpy") from None
    except Exception as exc:  # a damaged or foreign file: never a bare traceback
        raise ReadError(path, f"not a readable workbook ({type(exc).__name__}: {exc})") from None
    if not sheets:
        raise ReadError(path, "the workbook has no sheets")
    names = list(sheets)
    if sheet:
        if sheet not in sheets:
            raise ReadError(path, f"no sheet {sheet!r} (sheets: {', '.join(map(repr, names))}); "
                                  "fix [diary] sheet in study.toml")
        chosen = sheet
    else:
        scored = {n: max((knows(_texts(r)) for r in sheets[n].head(50).itertuples(index=False, name=None)), default=0)
                  for n in names}
        chosen = max(names, key=lambda n: (scored[n] >= 2, -names.index(n)))
    frame = sheets[chosen]
    rows = [_texts(r) for r in frame.itertuples(index=False, name=None)]
    if not rows:
        raise ReadError(path, f"sheet {chosen!r} is empty")
    h = find_header(rows, knows)
    header = [c.strip() for c in rows[h]]
    data = [(r + [""] * len(header))[:len(header)] for r in rows[h + 1:]]
    numbers = [int(i) + 1 for i in frame.index[h + 1:]]
    k = summary_tail(data[:50], data[-50:], len(header)) if data else 0
    if k and k < len(data):
        data, numbers = data[:-k], numbers[:-k]
    detected = {"dialect": f"workbook, sheet {chosen!r}" + (f" of {len(names)}" if len(names) > 1 else "")
                + f", header on row {h + 1}"}
    return header, data, numbers, detected


def _texts(row) -> list[str]:
    return [_cell_text(v) for v in row]


def _cell_text(value) -> str:
    """A workbook cell as the text a CSV would hold."""
    if value is None:
        return ""
    if isinstance(value, float):
        if math.isnan(value):
            return ""
        return str(int(value)) if value.is_integer() else repr(value)
    if isinstance(value, bool):
        return "1" if value else "0"
    if isinstance(value, (pd.Timestamp, dt.datetime)):
        value = pd.Timestamp(value)
        if pd.isna(value):
            return ""
        if value.year < 1901:  # a time cell stored on the spreadsheet's day zero (1899-12-30/31, 1900-01-00)
            return value.strftime("%H:%M:%S")
        return value.strftime("%Y-%m-%dT%H:%M:%S")
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, dt.time):
        return value.strftime("%H:%M:%S")
    if isinstance(value, (dt.timedelta, pd.Timedelta)):
        seconds = int(pd.Timedelta(value).total_seconds())
        return f"{seconds // 3600:02d}:{seconds % 3600 // 60:02d}:{seconds % 60:02d}" if 0 <= seconds < 86400 else ""
    return str(value).strip()


