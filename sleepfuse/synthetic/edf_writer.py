"""A small EDF+ writer for invented demo and benchmark recordings.

Follows the EDF+ specification (Kemp & Olivan 2003, *Clin Neurophysiol*
114:1755–1761): 256-byte header, 256 bytes per signal, int16 little-endian
samples, and an "EDF Annotations" signal holding time-stamped annotation
lists (TALs) ``+onset\\x15duration\\x14text\\x14\\x00``; each data record
starts with a time-keeping TAL. Used only to make synthetic files; readers
never write.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from sleepfuse.output.files import write_bytes

MONTHS = ("JAN", "FEB", "MAR", "APR", "MAY", "JUN", "JUL", "AUG", "SEP", "OCT", "NOV", "DEC")


@dataclass(frozen=True)
class Signal:
    """An ordinary signal: label, physical samples, samples per data record, physical range."""

    label: str
    samples: np.ndarray
    samples_per_record: int
    physical_min: float
    physical_max: float
    dimension: str = ""


def _field(value: object, width: int) -> bytes:
    text = str(value)
    raw = text.encode("ascii", "replace")
    if len(raw) > width:
        raw = raw[:width]
    return raw.ljust(width, b" ")


def _number(value: float, width: int = 8) -> bytes:
    if float(value).is_integer():
        text = str(int(value))
    else:
        text = f"{value:.6g}"
    if len(text) > width:
        text = f"{value:.{max(1, width - 6)}e}"[:width]
    return _field(text, width)


def _tal(onset: float, duration: float | None, text: str) -> bytes:
    out = f"{onset:+.3f}".rstrip("0").rstrip(".")
    if not out.startswith(("+", "-")):
        out = "+" + out
    raw = out.encode("ascii")
    if duration is not None:
        d = f"{duration:.3f}".rstrip("0").rstrip(".")
        raw += b"\x15" + d.encode("ascii")
    return raw + b"\x14" + text.encode("utf-8") + b"\x14\x00"


def write_edf_plus(
    path: str | Path,
    *,
    start: dt.datetime,
    annotations: list[tuple[float, float | None, str]],
    duration_s: float | None = None,
    record_duration_s: float = 60.0,
    signals: list[Signal] = (),
    patient: str = "X X X X",
    recording: str | None = None,
) -> Path:
    """Write an EDF+C file atomically; ``start`` is the naive local start (sub-second allowed)."""
    path = Path(path)
    last = max((o + (d or 0.0) for o, d, _ in annotations), default=0.0)
    total = duration_s if duration_s is not None else last
    n_records = max(1, math.ceil(total / record_duration_s - 1e-9))
    subsecond = start.microsecond / 1e6
    whole = start.replace(microsecond=0)

    # annotation TALs grouped into the record that covers their onset
    per_record: list[list[bytes]] = [[] for _ in range(n_records)]
    for onset, dur, text in sorted(annotations, key=lambda a: a[0]):
        idx = min(n_records - 1, max(0, int((onset + subsecond) // record_duration_s)))
        per_record[idx].append(_tal(onset, dur, text))
    # time-keeping TAL: "+onset\x14\x14\x00"
    keep = [f"+{i * record_duration_s + subsecond:.6g}".encode("ascii") + b"\x14\x14\x00" for i in range(n_records)]
    need = max(len(keep[i]) + sum(len(t) for t in per_record[i]) for i in range(n_records))
    ann_bytes = need + (need % 2) + 2
    ann_samples = ann_bytes // 2

    ns = len(signals) + 1
    header_bytes = 256 * (ns + 1)
    if recording is None:
        recording = f"Startdate {whole.day:02d}-{MONTHS[whole.month - 1]}-{whole.year} X X X"
    head = b"".join(
        [
            _field("0", 8),
            _field(patient, 80),
            _field(recording, 80),
            _field(whole.strftime("%d.%m.%y"), 8),
            _field(whole.strftime("%H.%M.%S"), 8),
            _number(header_bytes),
            _field("EDF+C", 44),
            _number(n_records),
            _number(record_duration_s),
            _field(ns, 4),
        ]
    )
    labels = [s.label for s in signals] + ["EDF Annotations"]
    spr = [s.samples_per_record for s in signals] + [ann_samples]
    pmin = [s.physical_min for s in signals] + [-1]
    pmax = [s.physical_max for s in signals] + [1]
    dims = [s.dimension for s in signals] + [""]
    head += b"".join(_field(x, 16) for x in labels)
    head += b"".join(_field("", 80) for _ in labels)
    head += b"".join(_field(x, 8) for x in dims)
    head += b"".join(_number(x) for x in pmin)
    head += b"".join(_number(x) for x in pmax)
    head += b"".join(_number(-32768) for _ in labels)
    head += b"".join(_number(32767) for _ in labels)
    head += b"".join(_field("", 80) for _ in labels)
    head += b"".join(_number(x) for x in spr)
    head += b"".join(_field("", 32) for _ in labels)
    assert len(head) == header_bytes

    digital = []
    for s in signals:
        scale = (s.physical_max - s.physical_min) / 65535.0
        d = np.round((np.asarray(s.samples, float) - s.physical_min) / scale - 32768).clip(-32768, 32767)
        need_n = n_records * s.samples_per_record
        d = np.concatenate([d, np.full(max(0, need_n - d.size), d[-1] if d.size else 0)])[:need_n]
        digital.append(d.astype("<i2").reshape(n_records, s.samples_per_record))

    body = bytearray()
    for i in range(n_records):
        for d in digital:
            body += d[i].tobytes()
        ann = keep[i] + b"".join(per_record[i])
        body += ann.ljust(ann_bytes, b"\x00")

    return write_bytes(path, bytes(head) + bytes(body))
