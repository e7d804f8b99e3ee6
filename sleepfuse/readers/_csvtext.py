"""Shared CSV plumbing for the actigraphy and diary readers: text, table, columns (timestamps: _csvtime).

Reads a delimited text file into a table of strings with the 1-based file
line of every row (header = line 1), so problems can name the line to fix.
Fast path: pandas' C parser; files with quotes or ragged rows go through the
standard-library csv module, which keeps exact line numbers.
"""

from __future__ import annotations

import csv
import io
import re
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

from sleepfuse.model.errors import ReadError
from sleepfuse.model.records import Problem
from ._dialect import Dialect, decode, decimal_comma, find_header, metadata_of, sniff_delimiter, split_fields, \
    split_lines, summary_tail

from ._dialect import DELIMITERS  # noqa: E402
MAX_DETAILED = 20  # problems of one kind listed one by one; the rest are summarised


class CsvTable:
    """A CSV file as strings: header names, one str column per header, file lines.

    ``cells`` (dtype str, "" for empty; columns numbered 0..n-1) is built on first
    use when the table was split in Python; ``values()`` gives the same cells as
    an object array without building it.
    """

    def __init__(self, header: list[str], cells: pd.DataFrame | None, lines: np.ndarray, delimiter: str,
                 *, rows: list[list[str]] | None = None):
        self.header = header
        self._cells = cells
        self._rows = rows
        self.lines = lines  # int64, 1-based file line of each row
        self.delimiter = delimiter

    @property
    def cells(self) -> pd.DataFrame:
        if self._cells is None:
            self._cells = pd.DataFrame(self._rows, columns=range(len(self.header)), dtype=str)
        return self._cells

    dialect: Dialect | None = None

    def row(self, i: int) -> list[str]:
        """Row ``i`` as a list of str."""
        if self._rows is not None:
            return list(self._rows[i])
        return [str(v) for v in self.cells.iloc[i].tolist()]

    def keep_first(self, n: int) -> None:
        """Drop every row after the first ``n`` (summary lines below the data)."""
        self.lines = self.lines[:n]
        if self._rows is not None:
            self._rows = self._rows[:n]
        if self._cells is not None:
            self._cells = self._cells.iloc[:n]

    def values(self) -> np.ndarray:
        """The cells as a 2-D object array of str (rows × columns)."""
        if self._rows is not None:
            out = np.empty((len(self._rows), len(self.header)), dtype=object)
            out[...] = self._rows
            return out
        return self.cells.to_numpy(dtype=object)


BOM = b"\xef\xbb\xbf"


def read_raw(path: Path) -> bytes:
    """The file's bytes, exactly as stored (a ReadError if it cannot be opened)."""
    return _file_bytes(path)


def fast_dialect(raw: bytes, bom: bool) -> Dialect:
    """The dialect of a file the fast path read: header on line 1, its delimiter, its line ends."""
    end = raw.find(b"\n")
    header_line = (raw if end < 0 else raw[:end]).decode("utf-8", errors="replace").rstrip("\r")
    return Dialect(encoding="utf-8 with BOM" if bom else ("ascii" if raw[:65536].isascii() else "utf-8"),
                   line_end="CRLF" if end > 0 and raw[end - 1:end] == b"\r" else "LF",
                   delimiter=_sniff_delimiter(header_line))


def plain_text(raw: bytes) -> bool:
    """True for UTF-8 (or ASCII) bytes without NULs: the fast readers' input."""
    if b"\x00" in raw:
        return False
    if raw.isascii():
        return True
    try:
        raw.decode("utf-8")
    except UnicodeDecodeError:
        return False
    return True


def read_fast_columns(raw: bytes, wanted: dict[str, object],
                      optional: dict[str, object] | None = None) -> tuple[list[str], dict[str, np.ndarray]] | None:
    """Typed columns of a plain CSV in one pass of pyarrow's C++ reader, or None if the file is not plain.

    ``raw`` is the file's bytes from ``read_raw``. Plain: header on line 1, no
    quotes, no blank lines, no lone carriage returns, every row as wide as the
    header and every wanted cell converting to its type (``wanted``: header
    name -> pyarrow type; ``optional`` likewise, read when the header has
    them). Anything else returns None and the caller takes the exact path,
    which reports each problem by line. Row i of the result is file line i + 2.
    """
    if not raw or b'"' in raw or raw[:1] in (b"\r", b"\n", b" ", b"\t", b",", b";"):
        return None
    # Blank lines or old-Mac line ends: the exact path keeps their line numbers. Two-byte searches
    # cost ~1 ms per MB (the first byte is on every line), so they run only where they can matter:
    # CR checks only if the file holds a CR at all; pyarrow reads a blank line as a row of empty
    # cells, which is null in any non-string column and rejected below, so the LF-LF search runs
    # only when every column read is a string.
    if b"\r" in raw and (b"\n\n" in raw or b"\n\r\n" in raw or raw.count(b"\r") != raw.count(b"\r\n")):
        return None
    end = raw.find(b"\n")
    header_line = (raw if end < 0 else raw[:end]).decode("utf-8").rstrip("\r")
    try:
        import pyarrow as pa
        import pyarrow.csv as pacsv
    except ImportError:  # pragma: no cover - pyarrow is a dependency
        return None
    delimiter = _sniff_delimiter(header_line)
    header = [h.strip() for h in header_line.split(delimiter)]
    index = {}
    for name in wanted:
        j = find_column(header, name)
        if j is None:
            return None
        index[name] = j
    wanted = dict(wanted)
    for name, typ in (optional or {}).items():
        j = find_column(header, name)
        if j is not None:
            index[name] = j
            wanted[name] = typ
    if len(set(index.values())) != len(index):
        return None  # one column named for two roles: the exact path handles it
    if all(pa.types.is_string(t) or pa.types.is_large_string(t) for t in wanted.values()) and b"\n\n" in raw:
        return None
    names = [f"c{j}" for j in range(len(header))]
    try:
        table = pacsv.read_csv(
            pa.py_buffer(raw),
            read_options=pacsv.ReadOptions(column_names=names, skip_rows=1, use_threads=False,
                                           block_size=max(1 << 20, len(raw) + 1)),
            parse_options=pacsv.ParseOptions(delimiter=delimiter, quote_char=False, ignore_empty_lines=False,
                                             newlines_in_values=False),
            convert_options=pacsv.ConvertOptions(
                include_columns=sorted({names[j] for j in index.values()}),
                column_types={names[index[n]]: t for n, t in wanted.items()},
                strings_can_be_null=False, quoted_strings_can_be_null=False,
            ),
        )
    except (pa.ArrowInvalid, pa.ArrowTypeError, pa.ArrowNotImplementedError, ValueError, OverflowError):
        return None
    if table.num_rows == 0:
        return None
    out = {}
    for name in wanted:
        col = table.column(names[index[name]])
        if col.null_count:
            return None
        out[name] = col.to_numpy()
    return header, out


def _sniff_delimiter(header_line: str) -> str:
    """The delimiter used in the header: the most frequent of , ; and tab (comma on ties)."""
    counts = [header_line.count(d) for d in DELIMITERS]
    return DELIMITERS[int(np.argmax(counts))] if max(counts) > 0 else ","


def read_table(path: Path, knows=None) -> CsvTable:
    """Parse ``path`` into a CsvTable, in whatever dialect the lab saved it (``table.dialect``).

    ``knows(fields) -> int`` counts the reader's column names in a row; it finds
    the header below any metadata lines. Summary lines below the data are
    dropped (listed in the dialect). Empty file or missing header: ReadError.
    """
    raw = _file_bytes(path)
    text, encoding = decode(raw)
    if "\x00" in text:
        raise ReadError(path, "the file holds NUL bytes; it is not a text CSV file")
    all_lines, line_end = split_lines(text)
    first = next((i for i, ln in enumerate(all_lines) if ln.strip()), None)
    if first is None:
        raise ReadError(path, "the file is empty")
    delimiter = sniff_delimiter(all_lines)
    if knows is not None:
        top = [split_fields(ln, delimiter) if ln.strip() else [] for ln in all_lines[:200]]
        first = find_header(top, knows) if any(top) else first
        if not all_lines[first].strip():
            first = next(i for i, ln in enumerate(all_lines) if ln.strip())
    body = "\n".join(all_lines[first:])
    table = None
    if '"' not in body:
        table = _read_fast(body, delimiter, first)
    if table is None:
        table = _read_exact(path, body, delimiter, first)
    if not any(h.strip() for h in table.header):
        raise ReadError(path, f"line {first + 1}: the header row has no column names")
    dialect = Dialect(encoding=encoding, line_end=line_end, delimiter=delimiter, header_line=first + 1,
                      metadata=metadata_of(all_lines[:first]))
    n = len(table.lines)
    if knows is not None and n:
        head = [table.row(i) for i in range(min(n, 50))]
        tail = [table.row(i) for i in range(max(0, n - 50), n)]
        k = summary_tail(head, tail, len(table.header))
        if k and k < n:
            dialect.summary_lines = [int(x) for x in table.lines[n - k:]]
            table.keep_first(n - k)
        head = [table.row(i) for i in range(min(len(table.lines), 200))]
        dialect.decimal = "," if decimal_comma([list(c) for c in zip(*head)] if head else [], delimiter) else "."
    table.dialect = dialect
    return table


def _file_bytes(path: Path) -> bytes:
    try:
        return path.read_bytes()
    except FileNotFoundError:
        raise ReadError(path, "file not found") from None
    except IsADirectoryError:
        raise ReadError(path, "is a directory, not a text file") from None
    except OSError as exc:
        raise ReadError(path, f"cannot open the file ({exc.strerror or exc})") from None


def _read_fast(body: str, delimiter: str, offset: int) -> CsvTable | None:
    """pandas C parser; None if the file needs the exact (csv-module) path."""
    header = body.split("\n", 1)[0].rstrip("\r").split(delimiter)
    if len(body) <= 65536:  # a diary-sized file: splitting in Python is faster than starting the C parser
        table = _split_small(body, delimiter, header, offset)
        if table is not None:
            return table
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", pd.errors.ParserWarning)  # pandas drops extra fields with only a warning
            df = pd.read_csv(
                io.StringIO(body),
                sep=delimiter,
                dtype=str,
                header=None,
                names=list(range(len(header))),
                skiprows=1,
                keep_default_na=False,
                na_filter=False,
                skip_blank_lines=False,
                engine="c",
                quoting=csv.QUOTE_NONE,
                index_col=False,
            )
    except pd.errors.EmptyDataError:
        df = pd.DataFrame()
    except (pd.errors.ParserError, pd.errors.ParserWarning, ValueError, OverflowError):
        return None
    if df.shape[1] != len(header):
        return None  # ragged rows: let the exact path report them by line
    df.columns = range(df.shape[1])
    lines = np.arange(len(df), dtype=np.int64) + 2 + offset
    return CsvTable([h.strip() for h in header], df.astype(str), lines, delimiter)


def _split_small(body: str, delimiter: str, header: list[str], offset: int) -> CsvTable | None:
    """The C parser's table for a small unquoted file whose rows all have the header's width, else None."""
    lines = body.split("\n")
    if lines and lines[-1] == "":
        lines.pop()
    width = len(header)
    rows = []
    for line in lines[1:]:
        if line.endswith("\r"):
            line = line[:-1]
        fields = line.split(delimiter)
        if len(fields) != width:
            return None  # blank or ragged rows: the C parser's (then the exact path's) rules apply
        rows.append(fields)
    if not rows:
        return None
    lines_no = np.arange(len(rows), dtype=np.int64) + 2 + offset
    return CsvTable([h.strip() for h in header], None, lines_no, delimiter, rows=rows)


def _read_exact(path: Path, body: str, delimiter: str, offset: int) -> CsvTable:
    """csv-module path: exact line numbers for quoted or ragged files (few in practice)."""
    reader = csv.reader(io.StringIO(body, newline=""), delimiter=delimiter)
    try:
        header = next(reader)
        rows: list[list[str]] = []
        starts: list[int] = []
        prev_end = reader.line_num
        width = len(header)
        ragged: list[int] = []
        for row in reader:
            start = prev_end + 1
            prev_end = reader.line_num
            if len(row) > width and any(c.strip() for c in row[width:]):
                ragged.append(start + offset)
            row = (row + [""] * width)[:width]
            rows.append(row)
            starts.append(start + offset)
    except csv.Error as exc:
        raise ReadError(path, f"line {reader.line_num + offset}: not valid CSV ({exc})") from None
    df = pd.DataFrame(rows, columns=range(width), dtype=str) if rows else pd.DataFrame(columns=range(width), dtype=str)
    table = CsvTable([h.strip() for h in header], df, np.asarray(starts, dtype=np.int64), delimiter)
    table.ragged_lines = ragged  # type: ignore[attr-defined]
    return table


def ragged_problems(table: CsvTable) -> list[Problem]:
    """Rows with more fields than the header (extra fields ignored), summarised."""
    lines = getattr(table, "ragged_lines", [])
    if not lines:
        return []
    return [Problem("warning", f"{line_phrase(lines)}: more fields than the header has; extra fields ignored")]


def _norm(name: str) -> str:
    return re.sub(r"\s+", " ", name.strip().strip('"').strip()).casefold()


def find_column(header: list[str], name: str) -> int | None:
    """Index of column ``name``: exact match first, then case-insensitive and stripped."""
    if name in header:
        return header.index(name)
    wanted = _norm(name)
    for i, h in enumerate(header):
        if _norm(h) == wanted:
            return i
    return None


def missing_column_message(key: str, name: str, header: list[str], section: str) -> str:
    """What to fix when a required column is not in the file."""
    found = ", ".join(repr(h) for h in header if h) or "(none)"
    return (
        f"no column {name!r} (for {key}); columns found: {found}. "
        f"If the file names it differently, map it in study.toml: "
        f'[{section}] columns = {{{key} = "<column name in the file>"}}'
    )


def blank_rows(values: np.ndarray) -> np.ndarray:
    """``is_blank_row`` for the object array of ``CsvTable.values()``."""
    return np.fromiter((not "".join(row).strip() for row in values), dtype=bool, count=len(values))


def is_blank_row(cells: pd.DataFrame) -> np.ndarray:
    """True for rows whose every cell is empty or whitespace (blank lines)."""
    if cells.shape[1] == 0:
        return np.ones(len(cells), dtype=bool)
    if len(cells) <= 2000:  # a diary-sized table: plain Python beats a pandas call per column
        return np.fromiter((not "".join(row).strip() for row in cells.itertuples(index=False, name=None)),
                           dtype=bool, count=len(cells))
    blank = np.ones(len(cells), dtype=bool)
    for j in cells.columns:
        blank &= (cells[j].str.strip() == "").to_numpy()
    return blank


def line_list(lines, limit: int = MAX_DETAILED) -> str:
    """'12, 14, 20 and 3 more': a short list of file lines for a message."""
    lines = [int(n) for n in lines]
    shown = ", ".join(str(n) for n in lines[:limit])
    if len(lines) > limit:
        shown += f" and {len(lines) - limit} more"
    return shown


def line_phrase(lines, limit: int = MAX_DETAILED) -> str:
    """'line 12' or 'lines 12, 14 and 3 more' for a message."""
    lines = list(lines)
    return ("line " if len(lines) == 1 else "lines ") + line_list(lines, limit)


# --- ISO 8601 timestamps in a column, vectorised, DST resolved by file order
