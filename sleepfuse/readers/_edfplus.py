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

This module holds the annotation records and the readers built on the parts:
``read_annotation_lists`` (``read_annotations`` gives the same as objects),
``data_records`` and ``physical_samples``. The header lives in ``_edfheader``
and the TAL grammar in ``_edftals``; their names are re-exported here, so
``from sleepfuse.readers import _edfplus`` reaches all of them.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from sleepfuse.model.errors import ReadError

# The header and the TAL parsers, re-exported: every name is importable from _edfplus as before.
from ._edfheader import ANNOTATION_LABEL, EdfHeader, SignalHeader, patient_tokens, read_header  # noqa: F401
from ._edftals import _signal_annotations, parse_tals  # noqa: F401


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


def read_annotations(path: Path, header: EdfHeader, records: np.ndarray) -> AnnotationSet:
    """All annotations of every annotation signal plus each record's time-keeping onset, as objects."""
    found = read_annotation_lists(path, header, records)
    annotations = list(map(Annotation, found.onsets_s, found.durations_s, found.texts))
    return AnnotationSet(annotations, found.record_onsets_s, found.notes)


def read_annotation_lists(path: Path, header: EdfHeader, records: np.ndarray) -> AnnotationLists:
    """Every annotation as parallel lists (onset, duration, text), record by record, then
    signal by signal within a record; each record's time-keeping onset (first annotation
    signal); notes on malformed TALs and records without a time-keeping TAL.

    The TALs (runs of non-NUL bytes inside one data record) of a signal are located with
    numpy and read with one regular-expression pass (``_edftals``).
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
        block = np.ascontiguousarray(records[:, s.offset : s.offset + header.sample_bytes * s.n_samples])
        *columns, n_bad, n_missing = _signal_annotations(block, onsets if j == 0 else None)
        per_signal.append(columns)
        bad += n_bad
        missing_keeper += n_missing
    notes = _annotation_notes(bad, missing_keeper)
    if len(per_signal) == 1:
        on, du, tx, _ = per_signal[0]
        return AnnotationLists(on, du, tx, onsets, notes)
    # record by record, then signal by signal
    owner = np.array([r for *_, rs in per_signal for r in rs], dtype=np.int64)
    order = np.argsort(owner, kind="stable").tolist()
    pooled = [[v for cols in per_signal for v in cols[c]] for c in range(3)]
    on, du, tx = ([column[i] for i in order] for column in pooled)
    return AnnotationLists(on, du, tx, onsets, notes)


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
    raw = np.ascontiguousarray(records[:, s.offset : s.offset + header.sample_bytes * s.n_samples])
    if header.sample_bytes == 3:  # BDF: 24-bit little-endian two's complement
        b = raw.reshape(raw.shape[0], -1, 3).astype(np.int32)
        digital = (b[..., 0] | (b[..., 1] << 8) | (b[..., 2] << 16)).astype(np.float64)
        digital[digital >= 1 << 23] -= 1 << 24
    else:
        digital = raw.view("<i2").astype(np.float64)
    return pmin + (digital - dmin) * ((pmax - pmin) / (dmax - dmin))
