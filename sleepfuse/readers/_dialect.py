"""How a lab saved its text file: encoding, line ends, delimiter, decimal mark, header row, summary lines.

Detection is deterministic and looks only at the file's own bytes: a
byte-order mark or the NUL pattern of UTF-16, else UTF-8 if it decodes, else
Latin-1; the delimiter (``,`` ``;`` tab ``|``) that splits the data lines
into the most, equally many fields; the header row (the first line naming
the reader's columns, else the first all-text line followed by data);
metadata lines above it (``key: value`` pairs kept for the epoch length or a
start time) and summary lines below the data. Every finding is described by
``Dialect.describe`` for the QC log and ``sleepfuse inspect``.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

DELIMITERS = (",", ";", "\t", "|")
# Cells that mean "no value" in the usual exports (R's NA, spreadsheets' #N/A...): read as empty (common practice).
MISSING = frozenset({"na", "n/a", "#n/a", "nan", "null", "none", "-", "--", ".", "missing"})
_NAMES = {",": "comma", ";": "semicolon", "\t": "tab", "|": "pipe"}
_NUMBER_DOT = re.compile(r"^[+-]?\d+\.\d+$")
_NUMBER_COMMA = re.compile(r"^[+-]?\d+,\d+$")
_HAS_DIGIT = re.compile(r"\d")
_PURE_NUMBER = re.compile(r"^[+-]?\d+(?:[.,]\d+)?$")
_KEY_VALUE = re.compile(r"^\s*([^:=;,\t|]{1,60}?)\s*[:=;,\t|]\s*(.*?)\s*$")


@dataclass
class Dialect:
    encoding: str = "utf-8"
    line_end: str = "LF"
    delimiter: str = ","
    decimal: str = "."
    header_line: int = 1  # 1-based line of the header in the file
    metadata: dict[str, str] = field(default_factory=dict)  # key: value lines above the header
    summary_lines: list[int] = field(default_factory=list)  # 1-based lines dropped below the data

    @property
    def plain(self) -> bool:
        """The folder contract's own dialect: nothing to report."""
        return (self.encoding in ("utf-8", "ascii") and self.delimiter == "," and self.decimal == "."
                and self.header_line == 1 and not self.summary_lines and self.line_end in ("LF", "CRLF"))

    def describe(self) -> str:
        parts = [f"{self.encoding}", f"{self.line_end} line ends", f"{_NAMES[self.delimiter]}-delimited",
                 "decimal comma" if self.decimal == "," else "decimal point", f"header on line {self.header_line}"]
        if self.header_line > 1:
            parts.append(f"{self.header_line - 1} line(s) above it"
                         + (f" (read: {', '.join(self.metadata)})" if self.metadata else ""))
        if self.summary_lines:
            parts.append(f"{len(self.summary_lines)} summary line(s) below the data ignored "
                         f"(line {self.summary_lines[0]}{'–' + str(self.summary_lines[-1]) if len(self.summary_lines) > 1 else ''})")
        return ", ".join(parts)


def decode(raw: bytes) -> tuple[str, str]:
    """The file's text and the encoding it was read in (BOM first, then UTF-16 by NULs, UTF-8, Latin-1)."""
    if raw.startswith(b"\xef\xbb\xbf"):
        return raw[3:].decode("utf-8"), "utf-8 with BOM"
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        return raw.decode("utf-16"), "utf-16"
    if raw.isascii() and b"\x00" not in raw:
        return raw.decode("ascii"), "ascii"
    head = raw[:4096]
    if len(head) >= 4 and head.count(b"\x00") * 3 >= len(head):  # UTF-16 without a BOM: every other byte NUL
        even, odd = head[0::2].count(0), head[1::2].count(0)
        try:
            return raw.decode("utf-16-le" if odd > even else "utf-16-be"), "utf-16"
        except UnicodeDecodeError:
            pass
    try:
        return raw.decode("utf-8"), "utf-8"
    except UnicodeDecodeError:
        return raw.decode("latin-1"), "latin-1"


def split_lines(text: str) -> tuple[list[str], str]:
    """Lines of ``text`` without their ends, and the line-end style (LF, CRLF or CR)."""
    crlf = text.count("\r\n")
    cr = text.count("\r") - crlf
    if cr > 0 and cr >= text.count("\n") - crlf:
        style = "CR"
    elif crlf:
        style = "CRLF"
    else:
        style = "LF"
    lines = text.replace("\r\n", "\n").replace("\r", "\n").split("\n")
    if lines and lines[-1] == "":
        lines.pop()
    return lines, style


def sniff_delimiter(lines: list[str]) -> str:
    """The delimiter of the data lines (the last 50 non-blank lines): among those that split at least
    80% of them into equally many fields, the one giving the most fields; on a tie a comma loses (it is
    then a decimal comma); comma when none splits."""
    sample = [ln for ln in lines if ln.strip()][-50:]
    best, best_score = ",", None
    for rank, d in enumerate(("\t", ";", "|", ",")):
        counts = [ln.count(d) for ln in sample]
        if not counts or max(counts) == 0:
            continue
        mode = max(set(counts), key=lambda c: (counts.count(c), c))
        if mode == 0 or counts.count(mode) < 0.8 * len(counts):
            continue
        score = (mode, counts.count(mode), -rank)
        if best_score is None or score > best_score:
            best, best_score = d, score
    return best


def split_fields(line: str, delimiter: str) -> list[str]:
    """One line's fields (quotes removed as the csv module would for a simple quoted field)."""
    if '"' not in line:
        return line.split(delimiter)
    import csv

    return next(csv.reader([line], delimiter=delimiter), [])


def is_header_like(fields: list[str]) -> bool:
    """Text names, no bare number or date among them."""
    cells = [f.strip() for f in fields if f.strip()]
    return bool(cells) and not any(_PURE_NUMBER.match(c) for c in cells) and any(
        re.search(r"[^\W\d_]", c) for c in cells) and sum(bool(_HAS_DIGIT.search(c)) for c in cells) * 2 < len(cells) + 1


def find_header(rows: list[list[str]], knows) -> int:
    """Index of the header among ``rows`` (fields per line): the first row in which ``knows``
    recognises a column name (a callable: fields -> number of roles found), preferring the one
    naming most; else the first header-like row followed by a data row as wide; else 0."""
    limit = min(len(rows), 200)
    best, best_n = None, 0
    for i in range(limit):
        if best is not None and i > best + (3 if best_n >= 2 else 20):  # names a few rows below a header
            break
        n = knows(rows[i]) if rows[i] and any(c.strip() for c in rows[i]) else 0
        if n > best_n:
            best, best_n = i, n
    if best is not None and best_n >= 1:
        return best
    for i in range(limit):
        if len(rows[i]) >= 2 and is_header_like(rows[i]):
            following = [r for r in rows[i + 1:i + 4] if any(c.strip() for c in r)]
            if following and all(len(r) >= len(rows[i]) - 0 and _HAS_DIGIT.search("".join(r)) for r in following):
                return i
    return 0


def metadata_of(lines: list[str]) -> dict[str, str]:
    """``key: value`` pairs of the lines above the header (keys casefolded, first wins)."""
    out: dict[str, str] = {}
    for ln in lines:
        m = _KEY_VALUE.match(ln.strip().strip('"'))
        if m and m.group(2):
            key = " ".join(m.group(1).strip().strip('"').casefold().split())
            out.setdefault(key, m.group(2).strip().strip('"').strip(",;\t| ").strip('"'))
    return out


def summary_tail(head: list[list[str]], rows: list[list[str]], width: int) -> int:
    """How many of the last ``rows`` are a summary, not data: a first cell with no digit (``Total``,
    ``Mean``...) or a single text field, when the data rows (``head``) have digits in their first cell."""
    data_first = [r[0] for r in head if r and r[0].strip()]
    if not data_first or not all(_HAS_DIGIT.search(c) for c in data_first[:5]):
        return 0
    k = 0
    for r in reversed(rows):
        cells = [c.strip() for c in r]
        if not any(cells):
            k += 1
            continue
        first = next(c for c in cells if c)
        if not _HAS_DIGIT.search(cells[0]) or (len([c for c in cells if c]) == 1 and len(r) < width
                                               and re.search(r"[^\W\d_]{3}", first)):
            k += 1
            continue
        break
    while k and not any(c.strip() for c in rows[len(rows) - k]):  # blank lines just before a summary stay data
        k -= 1
    return k


def decimal_comma(columns: list[list[str]], delimiter: str) -> bool:
    """True when numbers are written with a decimal comma: some ``12,5`` and no ``12.5`` cells."""
    if delimiter == ",":
        return False
    comma = dot = False
    for col in columns:
        for c in col[:500]:
            c = c.strip()
            if _NUMBER_COMMA.match(c):
                comma = True
            elif _NUMBER_DOT.match(c):
                dot = True
    return comma and not dot
