"""EDF / EDF+ header: the 256-byte fixed header and the ns × 256 bytes of signal headers.

Follows the EDF specification (Kemp et al. 1992, Electroenceph Clin
Neurophysiol 82:391-393) and EDF+ (Kemp & Olivan 2003, Clin Neurophysiol
114:1755-1761). ``read_header`` parses and validates the header bytes into an
``EdfHeader`` (start time, variant, record layout, one ``SignalHeader`` per
signal; no personal fields). The patient and recording fields (bytes 8-168)
are never decoded into a stored value; only ``patient_tokens`` reads them, so
that messages can be scrubbed of them. Messages quote a header field's value
only when it is made of digits and punctuation (a misplaced name, in a header
shifted by an over-long field, is never quoted).

Part of the EDF+ parser; import these names from ``_edfplus``, which re-exports them.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from dataclasses import dataclass
from pathlib import Path

from sleepfuse.model.errors import ReadError

ANNOTATION_LABEL = "EDF Annotations"
ANNOTATION_LABELS = ("edf annotations", "bdf annotations")  # EDF+ and BDF+ (24-bit) annotation signals
BDF_VERSION = b"\xffBIOSEMI"
_INT = re.compile(r"^[+-]?\d+$")
_FLOAT = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")
_DATE = re.compile(r"^(\d\d)\D(\d\d)\D(\d\d)$")
_MONTHS = ("JAN", "FEB", "MAR", "APR", "MAY", "JUN", "JUL", "AUG", "SEP", "OCT", "NOV", "DEC")
_RECORDING_START = re.compile(r"^Startdate\s+(\d\d)-([A-Za-z]{3})-(\d{4})(\s|$)")


@dataclass(frozen=True)
class SignalHeader:
    """One signal's header: label, calibration and samples per data record."""

    label: str
    physical_min: float | None
    physical_max: float | None
    digital_min: int | None
    digital_max: int | None
    n_samples: int  # per data record
    offset: int  # byte offset inside a data record

    @property
    def is_annotation(self) -> bool:
        return self.label.strip().lower() in ANNOTATION_LABELS


@dataclass(frozen=True)
class EdfHeader:
    """The parts of an EDF(+) header sleepfuse uses; no personal fields."""

    start: dt.datetime  # naive wall-clock start from the header (whole seconds)
    variant: str  # "EDF", "EDF+C" or "EDF+D"
    header_bytes: int
    n_records: int
    record_duration_s: float
    record_bytes: int
    signals: tuple[SignalHeader, ...]
    notes: tuple[str, ...] = ()  # non-fatal header problems
    sample_bytes: int = 2  # 2 for EDF, 3 for BDF (24-bit)

    @property
    def annotation_indices(self) -> list[int]:
        return [i for i, s in enumerate(self.signals) if s.is_annotation]


_SPLIT = re.compile(r"[\s_,;:./()\[\]<>'\"=+-]+")
_NUMERIC = re.compile(r"^[0-9 .:+\-eE]*$")  # a header value safe to quote: no letters other than an exponent


def patient_tokens(raw_header: bytes) -> list[str]:
    """Words of the patient and recording fields, bytes 8-168 (for scrubbing messages only; never stored or shown).

    Every token with a letter counts, however short (initials, "Jo", "Li"), and
    every number of three or more digits (a birth year, a hospital code). Left
    out: the EDF+ structure of the recording field ("Startdate" and its date,
    which the header's start date at bytes 168-176 repeats), the placeholder
    "X", and one- or two-digit numbers (a day of the month would otherwise
    wipe every clock time from a message)."""
    text = raw_header[8:168].decode("latin-1")
    structural = {"startdate", "x"}
    rec = _RECORDING_START.match(raw_header[88:168].decode("latin-1"))
    if rec:
        structural |= {f"{rec.group(1)}-{rec.group(2)}-{rec.group(3)}".lower(), rec.group(2).lower(), rec.group(3)}
    words = set()
    for token in text.split():
        for part in [token, *_SPLIT.split(token)]:
            if not part or part.lower() in structural:
                continue
            if any(c.isalpha() for c in part) or len(part) >= 3:
                words.add(part)
    return sorted(words, key=len, reverse=True)


def _quoted(text: str) -> str:
    """A header value for a message: quoted when it is digits and punctuation, else withheld."""
    if _NUMERIC.match(text):
        return repr(text[:20])
    return "text that is not shown (a header field in the wrong place may hold personal data)"


def _ascii(raw: bytes) -> str:
    return raw.decode("ascii", errors="replace").strip()


def _field_int(path: Path, raw: bytes, name: str) -> int:
    text = _ascii(raw)
    if not _INT.match(text):
        raise ReadError(path, f"header field '{name}' is not a whole number: {_quoted(text)}")
    return int(text)


def _field_float(path: Path, raw: bytes, name: str) -> float:
    text = _ascii(raw)
    if not _FLOAT.match(text):
        raise ReadError(path, f"header field '{name}' is not a number: {_quoted(text)}")
    return float(text)


def _start_datetime(path: Path, raw: bytes, notes: list[str]) -> dt.datetime:
    """Header start date/time; years 85-99 → 19yy, 00-84 → 20yy, unless the EDF+
    recording field's "Startdate dd-MMM-yyyy" gives the 4-digit year (Kemp & Olivan 2003)."""
    date_txt, time_txt = _ascii(raw[168:176]), _ascii(raw[176:184])
    dm, tm = _DATE.match(date_txt), _DATE.match(time_txt)
    if not dm:
        raise ReadError(path, f"header start date is not dd.mm.yy: {_quoted(date_txt)}")
    if not tm:
        raise ReadError(path, f"header start time is not hh.mm.ss: {_quoted(time_txt)}")
    day, month, yy = (int(g) for g in dm.groups())
    year = 1900 + yy if yy >= 85 else 2000 + yy
    rec = _RECORDING_START.match(raw[88:168].decode("ascii", errors="replace"))
    if rec and rec.group(2).upper() in _MONTHS:
        r_day, r_month, r_year = int(rec.group(1)), _MONTHS.index(rec.group(2).upper()) + 1, int(rec.group(3))
        if (r_day, r_month, r_year % 100) == (day, month, yy):
            year = r_year
        else:
            notes.append(  # the recording field itself is never quoted
                f"the EDF+ recording field's start date disagrees with the header start date {date_txt}; "
                f"the header date is used"
            )
    try:
        return dt.datetime(year, month, day, *(int(g) for g in tm.groups()))
    except ValueError:
        raise ReadError(path, f"header start {date_txt} {time_txt} is not a valid date and time") from None


def read_header(path: Path, raw: bytes, file_bytes: int) -> EdfHeader:
    """Parse and validate the header bytes ``raw`` (at least the first 256 bytes of the file)."""
    if file_bytes < 256 or len(raw) < 256:
        raise ReadError(path, f"not an EDF file: {file_bytes} bytes, shorter than the 256-byte EDF header")
    bdf = raw[:8] == BDF_VERSION
    if raw[:1] == b"\xff" and not bdf:
        raise ReadError(path, "not a BDF file: the header starts with byte 0xff but not 0xff 'BIOSEMI'")
    if raw[:8] != b"0       " and not bdf:
        raise ReadError(path, "not an EDF file: the header does not start with version '0'")
    width = 3 if bdf else 2  # bytes per sample: BDF stores 24-bit samples
    notes: list[str] = []
    start = _start_datetime(path, raw, notes)
    ns = _field_int(path, raw[252:256], "number of signals")
    if ns < 1:
        raise ReadError(path, f"header says the file holds {ns} signals")
    header_bytes = 256 * (ns + 1)
    if file_bytes < header_bytes or len(raw) < header_bytes:
        raise ReadError(path, f"truncated: expected {header_bytes} header bytes for {ns} signals, found {file_bytes}")
    stated = _field_int(path, raw[184:192], "number of bytes in header")
    if stated != header_bytes:
        notes.append(f"header states {stated} header bytes; {header_bytes} (256 × (1 + {ns} signals)) are used")
    reserved = _ascii(raw[192:236])
    # BDF+ writes "BDF+C"/"BDF+D" where EDF+ writes "EDF+C"/"EDF+D"; both read the same way.
    variant = "EDF+D" if reserved[1:].startswith("DF+D") else "EDF+C" if reserved[1:].startswith("DF+C") else "EDF"
    n_records = _field_int(path, raw[236:244], "number of data records")
    duration = _field_float(path, raw[244:252], "duration of a data record")
    if not math.isfinite(duration) or duration < 0:
        raise ReadError(path, f"header record duration {duration} s is not a non-negative number")

    sig = raw[256:header_bytes]

    def column(offset: int, width: int, i: int) -> bytes:
        base = offset * ns + i * width
        return sig[base : base + width]

    signals: list[SignalHeader] = []
    byte_offset = 0
    for i in range(ns):
        label = _ascii(column(0, 16, i))
        n_samples = _field_int(path, column(216, 8, i), f"samples per record of signal {i + 1}")
        if n_samples < 0:
            raise ReadError(path, f"signal {i + 1} ({label!r}) has {n_samples} samples per record")
        values = []
        for off, name, conv in (
            (104, "physical minimum", float),
            (112, "physical maximum", float),
            (120, "digital minimum", int),
            (128, "digital maximum", int),
        ):
            text = _ascii(column(off, 8, i))
            ok = _INT.match(text) if conv is int else _FLOAT.match(text)
            values.append(conv(text) if ok else None)
        signals.append(SignalHeader(label, *values, n_samples=n_samples, offset=byte_offset))
        byte_offset += width * n_samples
    record_bytes = byte_offset
    if record_bytes <= 0:
        raise ReadError(path, "header says every data record is 0 bytes long")

    available = file_bytes - header_bytes
    if n_records == -1:
        n_records = available // record_bytes
        notes.append(f"header gives the number of data records as -1 (unknown); {n_records} found from the file size")
    elif n_records < 0:
        raise ReadError(path, f"header says the file holds {n_records} data records")
    expected = header_bytes + n_records * record_bytes
    if file_bytes < expected:
        raise ReadError(
            path,
            f"truncated: expected {expected} bytes ({n_records} data records of {record_bytes} bytes), found {file_bytes}",
        )
    if file_bytes > expected:
        notes.append(f"{file_bytes - expected} bytes after the last data record are ignored")
    if n_records == 0:
        raise ReadError(path, "the file holds no data records")
    return EdfHeader(start, variant, header_bytes, n_records, duration, record_bytes, tuple(signals), tuple(notes),
                     sample_bytes=width)
