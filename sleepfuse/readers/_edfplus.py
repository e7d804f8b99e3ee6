"""Byte-level EDF / EDF+ parser: header, "EDF Annotations" TALs and digital samples.

Follows the EDF specification (Kemp et al. 1992, Electroenceph Clin
Neurophysiol 82:391-393) and EDF+ (Kemp & Olivan 2003, Clin Neurophysiol
114:1755-1761): a 256-byte header, ns × 256 bytes of signal headers, then
n_records data records of 2-byte little-endian samples. Annotation signals
hold Time-stamped Annotation Lists ``+onset[\\x15duration]\\x14text\\x14…\\x00``;
the first TAL of each data record is the time-keeping TAL (empty text).

Files are opened read-only (never repaired or rewritten). The patient
field (bytes 8-88) is never decoded into a stored value; only
``patient_tokens`` reads it, so that messages can be scrubbed of it.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from dataclasses import dataclass, field
from itertools import repeat
from operator import getitem
from pathlib import Path

import numpy as np

from ..errors import ReadError

ANNOTATION_LABEL = "EDF Annotations"
_INT = re.compile(r"^[+-]?\d+$")
_FLOAT = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")
_TAL_NUMBER = re.compile(rb"^[+-]?(\d+(\.\d*)?|\.\d+)$")
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
        return self.label.strip().lower() == ANNOTATION_LABEL.lower()


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

    @property
    def annotation_indices(self) -> list[int]:
        return [i for i, s in enumerate(self.signals) if s.is_annotation]


@dataclass
class Annotation:
    """One annotation: onset and duration in seconds from the header start time."""

    onset_s: float
    duration_s: float | None
    text: str


@dataclass
class AnnotationSet:
    annotations: list[Annotation]
    record_onsets_s: np.ndarray  # per data record, NaN where no time-keeping TAL
    notes: list[str] = field(default_factory=list)


@dataclass
class AnnotationLists:
    """What ``read_annotations`` reads, as parallel lists instead of one object per annotation."""

    onsets_s: list[float]
    durations_s: list[float | None]
    texts: list[str]
    record_onsets_s: np.ndarray  # per data record, NaN where no time-keeping TAL
    notes: list[str] = field(default_factory=list)


def patient_tokens(raw_header: bytes) -> list[str]:
    """Words of the patient field (for scrubbing messages only; never stored or shown)."""
    text = raw_header[8:88].decode("latin-1")
    words = set()
    for token in text.split():
        for part in [token, *token.replace("_", " ").replace(",", " ").split()]:
            if len(part) >= 3 and part.upper() not in {"X", "XX", "XXX"}:
                words.add(part)
    return sorted(words, key=len, reverse=True)


def _ascii(raw: bytes) -> str:
    return raw.decode("ascii", errors="replace").strip()


def _field_int(path: Path, raw: bytes, name: str) -> int:
    text = _ascii(raw)
    if not _INT.match(text):
        raise ReadError(path, f"header field '{name}' is not a whole number: {text[:20]!r}")
    return int(text)


def _field_float(path: Path, raw: bytes, name: str) -> float:
    text = _ascii(raw)
    if not _FLOAT.match(text):
        raise ReadError(path, f"header field '{name}' is not a number: {text[:20]!r}")
    return float(text)


def _start_datetime(path: Path, raw: bytes, notes: list[str]) -> dt.datetime:
    """Header start date/time; years 85-99 → 19yy, 00-84 → 20yy, unless the EDF+
    recording field's "Startdate dd-MMM-yyyy" gives the 4-digit year (Kemp & Olivan 2003)."""
    date_txt, time_txt = _ascii(raw[168:176]), _ascii(raw[176:184])
    dm, tm = _DATE.match(date_txt), _DATE.match(time_txt)
    if not dm:
        raise ReadError(path, f"header start date is not dd.mm.yy: {date_txt!r}")
    if not tm:
        raise ReadError(path, f"header start time is not hh.mm.ss: {time_txt!r}")
    day, month, yy = (int(g) for g in dm.groups())
    year = 1900 + yy if yy >= 85 else 2000 + yy
    rec = _RECORDING_START.match(raw[88:168].decode("ascii", errors="replace"))
    if rec and rec.group(2).upper() in _MONTHS:
        r_day, r_month, r_year = int(rec.group(1)), _MONTHS.index(rec.group(2).upper()) + 1, int(rec.group(3))
        if (r_day, r_month, r_year % 100) == (day, month, yy):
            year = r_year
        else:
            notes.append(
                f"recording field Startdate {r_day:02d}-{_MONTHS[r_month - 1]}-{r_year} disagrees with "
                f"the header start date {date_txt}; the header date is used"
            )
    try:
        return dt.datetime(year, month, day, *(int(g) for g in tm.groups()))
    except ValueError:
        raise ReadError(path, f"header start {date_txt} {time_txt} is not a valid date and time") from None


def read_header(path: Path, raw: bytes, file_bytes: int) -> EdfHeader:
    """Parse and validate the header bytes ``raw`` (at least the first 256 bytes of the file)."""
    if file_bytes < 256 or len(raw) < 256:
        raise ReadError(path, f"not an EDF file: {file_bytes} bytes, shorter than the 256-byte EDF header")
    if raw[:1] == b"\xff":
        raise ReadError(path, "BDF (24-bit) files are not supported; only EDF and EDF+ (16-bit) are read")
    if raw[:8] != b"0       ":
        raise ReadError(path, "not an EDF file: the header does not start with version '0'")
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
    variant = "EDF+D" if reserved.startswith("EDF+D") else "EDF+C" if reserved.startswith("EDF+C") else "EDF"
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
        byte_offset += 2 * n_samples
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
    return EdfHeader(start, variant, header_bytes, n_records, duration, record_bytes, tuple(signals), tuple(notes))


def data_records(path: Path, header: EdfHeader, content: bytes | None = None) -> np.ndarray:
    """The data records, read-only, shape (n_records, record_bytes): a view of ``content`` (the
    file's bytes, when already read) or else a memory map of the file."""
    if content is not None:
        count = header.n_records * header.record_bytes
        return np.frombuffer(content, dtype=np.uint8, count=count, offset=header.header_bytes).reshape(
            header.n_records, header.record_bytes)
    return np.memmap(
        path, dtype=np.uint8, mode="r", offset=header.header_bytes, shape=(header.n_records, header.record_bytes)
    )


def _tal_number(raw: bytes) -> float | None:
    return float(raw) if _TAL_NUMBER.match(raw) else None


def parse_tals(block: bytes) -> tuple[list[tuple[float, float | None, list[str]]], int]:
    """TALs in one annotation-signal block: [(onset_s, duration_s, texts)] and the count of malformed TALs."""
    tals: list[tuple[float, float | None, list[str]]] = []
    bad = 0
    for chunk in block.split(b"\x00"):
        if not chunk:
            continue
        parts = chunk.split(b"\x14")
        if len(parts) < 2 or parts[-1] != b"":
            bad += 1
            continue
        onset_raw, sep, duration_raw = parts[0].partition(b"\x15")
        onset = _tal_number(onset_raw)
        duration = _tal_number(duration_raw) if sep and duration_raw else None
        if onset is None or (sep and duration_raw and duration is None):
            bad += 1
            continue
        texts = [p.decode("utf-8", errors="replace") for p in parts[1:-1]]
        tals.append((onset, duration, texts))
    return tals, bad


def read_annotations(path: Path, header: EdfHeader, records: np.ndarray) -> AnnotationSet:
    """All annotations of every annotation signal plus each record's time-keeping onset.

    Bulk path (``read_annotation_lists``), same result as ``read_annotations_careful``
    (checked in tests/test_readers_edf_fastpath.py and tests/test_readers_edf_speed_equivalence.py).
    """
    found = read_annotation_lists(path, header, records)
    annotations = list(map(Annotation, found.onsets_s, found.durations_s, found.texts))
    return AnnotationSet(annotations, found.record_onsets_s, found.notes)


def read_annotation_lists(path: Path, header: EdfHeader, records: np.ndarray) -> AnnotationLists:
    """``read_annotations`` as parallel lists (onset, duration, text), in the same order.

    The TALs (runs of non-NUL bytes inside one data record) of a signal are located with
    numpy and, when all have the usual shape, read with one regular expression pass;
    otherwise each TAL goes through ``parse_tals``. When every record of the first
    annotation signal opens with a plain time-keeping TAL, those TALs are read at once
    (``_plain_keepers``) and only the rest of the records goes through that path.
    """
    indices = header.annotation_indices
    n = header.n_records
    if not indices:
        return AnnotationLists([], [], [], np.arange(n) * header.record_duration_s)
    onsets = np.full(n, np.nan)
    per_signal: list[tuple[list[float], list[float | None], list[str], list[int]]] = []
    bad = missing_keeper = 0
    for j, k in enumerate(indices):
        s = header.signals[k]
        block = np.ascontiguousarray(records[:, s.offset : s.offset + 2 * s.n_samples])
        *columns, n_bad, n_missing = _signal_annotations(block, onsets if j == 0 else None)
        per_signal.append(columns)
        bad += n_bad
        missing_keeper += n_missing
    notes = _annotation_notes(bad, missing_keeper)
    if len(per_signal) == 1:
        on, du, tx, _ = per_signal[0]
        return AnnotationLists(on, du, tx, onsets, notes)
    # record by record, then signal by signal, as the careful path reads them
    owner = np.array([r for *_, rs in per_signal for r in rs], dtype=np.int64)
    order = np.argsort(owner, kind="stable").tolist()
    pooled = [[v for cols in per_signal for v in cols[c]] for c in range(3)]
    on, du, tx = ([column[i] for i in order] for column in pooled)
    return AnnotationLists(on, du, tx, onsets, notes)


_NUMBER = rb"[+-]?+(?:\d++(?:\.\d*+)?+|\.\d++)"  # possessive: a TAL never needs backtracking
# One whole TAL (between NULs) of the usual shape. Every TAL this matches is read by
# parse_tals to the same onset, duration and texts; any other TAL is left to parse_tals.
_PLAIN_TAL = re.compile(
    rb"\x00(" + _NUMBER + rb")(?:\x15(" + _NUMBER + rb")?+)?+\x14((?:[^\x14\x00]*+\x14)*+)(?=\x00)"
)


def _signal_annotations(
    block: np.ndarray, keeper_onsets: np.ndarray | None
) -> tuple[list[float], list[float | None], list[str], list[int], int, int]:
    """Annotations of one annotation signal (bytes, shape n_records × n_bytes) as lists of
    onsets, durations and texts, the data record of each, the count of malformed TALs and of
    records without a time-keeping TAL. For the first annotation signal (``keeper_onsets``
    given) each record's time-keeping onset is stored."""
    if keeper_onsets is not None:
        plain = _plain_keepers(block)
        if plain is not None:  # every record opens with a plain time-keeping TAL: read the rest only
            keepers, rows, cut = plain
            keeper_onsets[:] = keepers
            if rows.size == 0:
                return [], [], [], [], 0, 0
            found = _tals_after_keepers(block, rows, cut)
            if found is not None:
                return found
            tail = block[rows]  # the rest of those records, their time-keeping TAL blanked to NUL
            size = min(block.shape[1], _KEEPER_WINDOW)
            tail[:, :size] &= ~_BEFORE[cut[rows], :size]
            on, du, tx, owners, bad, _ = _signal_annotations(tail, None)
            return on, du, tx, rows[owners].tolist(), bad, 0
    n, width = block.shape
    padded = np.zeros((n, width + 1), dtype=np.uint8)  # a NUL after every record
    padded[:, :width] = block
    flat = padded.ravel()
    filled = flat != 0
    after_tal = np.zeros_like(filled)
    after_tal[1:] = filled[:-1]
    starts = np.flatnonzero(filled & ~after_tal)
    owner = starts // (width + 1)
    joined = b"\x00" + flat[filled | after_tal].tobytes()  # NUL, TAL, NUL, TAL, ..., NUL
    groups = _PLAIN_TAL.findall(joined)
    if len(groups) == len(starts):
        tals = None
    else:
        tals, keep = [], []
        for i, chunk in enumerate(joined[1:-1].split(b"\x00") if len(starts) else []):
            found, _ = parse_tals(chunk)  # one TAL at most: the chunk holds no NUL
            if found:
                tals.append(found[0])
                keep.append(i)
        bad = len(starts) - len(tals)
        owner = owner[keep]
        groups = [(None, None, None)] * len(tals)
    count = len(groups)
    if count == 0:
        return [], [], [], [], len(starts), 0
    if tals is None and keeper_onsets is None:
        return (*_plain_tal_lists(groups, owner.tolist()), 0, 0)
    kept: list[int] = []
    n_firsts = 0
    if keeper_onsets is not None:
        first = np.zeros(count, dtype=bool)
        first[0] = True
        first[1:] = owner[1:] != owner[:-1]
        firsts = np.flatnonzero(first).tolist()
        n_firsts = len(firsts)
    if tals is None:
        onset_raw, _, rest = zip(*groups)
        # A first TAL whose first text is empty is the time-keeping TAL; b"" and b"\x14" hold no text.
        keeper = first & np.fromiter(map(bytes.startswith, rest, repeat(b"\x14")), dtype=bool, count=count)
        kept = np.flatnonzero(keeper).tolist()
        if kept:
            keeper_onsets[owner[kept]] = list(map(float, map(onset_raw.__getitem__, kept)))
        bad = 0
        carriers = [i for i, r in enumerate(rest) if len(r) > 1]
    else:
        if keeper_onsets is not None:
            kept = [i for i in firsts if tals[i][2] and tals[i][2][0] == ""]
            if kept:
                keeper_onsets[owner[kept]] = [tals[i][0] for i in kept]
        carriers = range(count)
    kept_set = set(kept)
    onsets: list[float] = []
    durations: list[float | None] = []
    texts_out: list[str] = []
    owners: list[int] = []
    owner_list = owner.tolist()
    for i in carriers:
        if tals is None:
            onset_i, duration_raw, rest_i = groups[i]
            onset = float(onset_i)
            duration = float(duration_raw) if duration_raw else None
            texts = [p.decode("utf-8", errors="replace") for p in rest_i[:-1].split(b"\x14")]
        else:
            onset, duration, texts = tals[i]
        if i in kept_set:
            texts = texts[1:]
        for text in texts:
            if text != "":
                onsets.append(onset)
                durations.append(duration)
                texts_out.append(text)
                owners.append(owner_list[i])
    return onsets, durations, texts_out, owners, bad, n_firsts - len(kept)


def _plain_tal_lists(
    groups: list[tuple[bytes, bytes, bytes]], owners: list[int]
) -> tuple[list[float], list[float | None], list[str], list[int]]:
    """Onsets, durations, texts and records of TALs that ``_PLAIN_TAL`` matched (``owners``: the
    record of each), none of them a time-keeping TAL: what ``parse_tals`` reads from them."""
    onset_raw, duration_raw, rest = zip(*groups)
    if min(map(len, rest)) > 1 and b"".join(rest).count(b"\x14") == len(rest):
        # The usual shape: each TAL holds one text, and it is not empty.
        text_of = {r: r[:-1].decode("utf-8", errors="replace") for r in set(rest)}
        duration_of = {d: float(d) if d else None for d in set(duration_raw)}
        return (list(map(float, onset_raw)), list(map(duration_of.__getitem__, duration_raw)),
                list(map(text_of.__getitem__, rest)), owners)
    onsets: list[float] = []
    durations = []
    texts_out: list[str] = []
    owners_out: list[int] = []
    for onset_i, d, rest_i, owner in zip(onset_raw, duration_raw, rest, owners):
        if len(rest_i) > 1:  # b"" and b"\x14" hold no text
            onset = float(onset_i)
            duration = float(d) if d else None
            for p in rest_i[:-1].split(b"\x14"):
                if p:
                    onsets.append(onset)
                    durations.append(duration)
                    texts_out.append(p.decode("utf-8", errors="replace"))
                    owners_out.append(owner)
    return onsets, durations, texts_out, owners_out


def _tals_after_keepers(block: np.ndarray, rows: np.ndarray, cut: np.ndarray):
    """The annotations of ``rows`` of ``block`` past their time-keeping TAL (the first ``cut``
    bytes of each record) when all TALs there have the usual shape (``_PLAIN_TAL``); else None."""
    width = block.shape[1]
    records = block[rows].view(f"S{width}").ravel().tolist()  # trailing NULs dropped
    # The bytes after each time-keeping TAL, leading NULs dropped: TALs (not empty) and NULs.
    after = map(getitem, records, map(slice, cut[rows].tolist(), repeat(None)))
    rests = list(map(bytes.lstrip, after, repeat(b"\x00")))
    joined = b"\x00" + b"\x00".join(rests) + b"\x00"  # NUL, TAL, NUL, TAL, ..., NUL if no record holds a NUL run
    n_tals = joined.count(b"\x00") - 1
    if n_tals == len(rests):  # one TAL in each record
        owners = rows.tolist()
    elif b"\x00\x00" not in joined:  # TALs one NUL apart: each NUL of a record starts one more TAL
        more = np.fromiter(map(bytes.count, rests, repeat(b"\x00")), np.intp, len(rests))
        owners = np.repeat(rows, more + 1).tolist()
    else:
        tals, owners = [], []
        for rest, owner in zip(rests, rows.tolist()):
            found = [tal for tal in rest.split(b"\x00") if tal]
            tals += found
            owners += [owner] * len(found)
        joined = b"\x00" + b"\x00".join(tals) + b"\x00"
        n_tals = len(tals)
    groups = _PLAIN_TAL.findall(joined)
    if len(groups) != n_tals:
        return None
    return (*_plain_tal_lists(groups, owners), 0, 0)


_KEEPER_WINDOW = 32  # bytes at the start of a record searched for a plain time-keeping TAL
_BEFORE = np.where(np.arange(_KEEPER_WINDOW) < np.arange(_KEEPER_WINDOW + 1)[:, None], 0xFF, 0).astype(np.uint8)
_BEFORE.flags.writeable = False  # row k: 0xFF in the columns before k, 0 from k on
# Over these bytes, float() reads exactly the strings _TAL_NUMBER accepts, to the same value (no
# exponent, blank, "_", inf or nan can occur), and raises ValueError for the others.
_NUMBER_BYTES = b"0123456789+-."
_str_len = getattr(np, "strings", np.char).str_len  # bytes up to the last non-NUL one (numpy 1.26: np.char)


def _keeper_values(texts: bytes, n: int) -> np.ndarray | None:
    """float() of each of the ``n`` onsets in ``texts`` ("onset\x14\x14" n times), or None if one is not a number."""
    try:
        return np.fromiter(map(float, texts.split(b"\x14\x14")[:-1]), np.float64, n)
    except ValueError:
        return None


def _plain_keepers(block: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """If every record (row of ``block``) opens with a time-keeping TAL of the plain form
    ``onset\x14\x14\x00``, the onset of each, the records that hold more than that TAL, and the
    length of each record's TAL with its NUL; else None (the general path then reads the block).

    Such a TAL is the first TAL of its record and well-formed, so ``parse_tals`` reads it as the
    time-keeping TAL (onset ``float(onset bytes)``, empty first text, no other text), and the
    rest of its record as if the TAL were not there. The onset bytes of such a TAL are digits,
    signs and dots that ``_TAL_NUMBER`` accepts: of those, exactly the ones ``float`` reads.
    """
    n, width = block.shape
    size = min(width, _KEEPER_WINDOW)
    if n == 0 or size < 4 or not block.flags.c_contiguous:
        return None
    head = block[:, :size]
    p = (head == 0x14).argmax(axis=1)  # the first \x14 of each record (0 if none)
    cut = p + 3
    if cut.max() > size:
        return None
    # Each record's bytes up to its first \x14 and the two bytes after it, trailing NULs dropped.
    prefix = (head & _BEFORE[cut, :size]).view(f"S{size}").ravel()
    if not (_str_len(prefix) == cut - 1).all():  # a NUL at p + 2, and none at p + 1
        return None
    joined = b"".join(prefix.tolist())
    # Each text holds at most two \x14 (at p and p + 1; none comes before p), so 2 n of them
    # means each is its onset bytes (no \x14) and \x14\x14.
    if joined.count(b"\x14") != 2 * n or joined.translate(None, _NUMBER_BYTES + b"\x14"):
        return None
    onsets = _keeper_values(joined, n)
    if onsets is None:  # not a number as _TAL_NUMBER has it
        return None
    lengths = _str_len(block.view(f"S{width}").ravel())  # up to the last non-NUL byte
    rows = np.flatnonzero(lengths > cut - 1)  # records holding more than their time-keeping TAL
    return onsets, rows, cut


def read_annotations_careful(path: Path, header: EdfHeader, records: np.ndarray) -> AnnotationSet:
    """Reference path of ``read_annotations``: ``parse_tals`` record by record, signal by signal."""
    indices = header.annotation_indices
    n = header.n_records
    onsets = np.full(n, np.nan)
    if not indices:
        onsets = np.arange(n) * header.record_duration_s
        return AnnotationSet([], onsets)
    blocks = []
    for k in indices:
        s = header.signals[k]
        blocks.append(np.ascontiguousarray(records[:, s.offset : s.offset + 2 * s.n_samples]))
    annotations: list[Annotation] = []
    bad = missing_keeper = 0
    for r in range(n):
        for j, block in enumerate(blocks):
            tals, n_bad = parse_tals(block[r].tobytes())
            bad += n_bad
            for t, (onset, duration, texts) in enumerate(tals):
                if j == 0 and t == 0:
                    if texts and texts[0] == "":
                        onsets[r] = onset
                        texts = texts[1:]
                    else:
                        missing_keeper += 1
                annotations.extend(Annotation(onset, duration, text) for text in texts if text != "")
    return AnnotationSet(annotations, onsets, _annotation_notes(bad, missing_keeper))


def _annotation_notes(bad: int, missing_keeper: int) -> list[str]:
    notes = []
    if bad:
        notes.append(f"malformed annotation lists (TALs) skipped: {bad}")
    if missing_keeper:
        notes.append(f"data records without the EDF+ time-keeping annotation: {missing_keeper}")
    return notes


def physical_samples(path: Path, header: EdfHeader, records: np.ndarray, index: int) -> np.ndarray:
    """Physical values of signal ``index``, shape (n_records, n_samples): gain and offset from
    the header's physical and digital extremes (EDF spec, Kemp et al. 1992)."""
    s = header.signals[index]
    cal = (s.physical_min, s.physical_max, s.digital_min, s.digital_max)
    if any(v is None for v in cal):
        raise ReadError(path, f"signal {s.label!r} has a non-numeric physical or digital minimum/maximum")
    pmin, pmax, dmin, dmax = cal
    if dmax == dmin or pmax == pmin:
        raise ReadError(path, f"signal {s.label!r} has equal minimum and maximum; its values cannot be calibrated")
    raw = np.ascontiguousarray(records[:, s.offset : s.offset + 2 * s.n_samples])
    digital = raw.view("<i2").astype(np.float64)
    return pmin + (digital - dmin) * ((pmax - pmin) / (dmax - dmin))
