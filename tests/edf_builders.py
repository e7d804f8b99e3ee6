"""Build EDF / EDF+ files byte by byte, for tests and invented demo data.

Follows the EDF specification (Kemp et al. 1992) and EDF+ (Kemp & Olivan
2003): 256-byte header, ns × 256 bytes of signal headers, data records of
16-bit little-endian samples; annotations as TALs
``+onset\\x15duration\\x14text\\x14\\x00`` in an "EDF Annotations" signal whose
first TAL in every data record is the time-keeping TAL ``+onset\\x14\\x14\\x00``.
Written independently of sleepfuse's reader, so the two check each other.
"""

from __future__ import annotations

import datetime as dt
import math
import os
from collections.abc import Sequence
from pathlib import Path

import numpy as np

MONTHS = ("JAN", "FEB", "MAR", "APR", "MAY", "JUN", "JUL", "AUG", "SEP", "OCT", "NOV", "DEC")


def _field(text: str | bytes, width: int) -> bytes:
    raw = text if isinstance(text, bytes) else text.encode("ascii")
    if len(raw) > width:
        raise ValueError(f"{raw!r} does not fit a {width}-byte header field")
    return raw.ljust(width, b" ")


def _number(x: float, width: int = 8) -> bytes:
    """A number in an EDF header field (ASCII, left-aligned, at most ``width`` characters)."""
    if float(x) == int(x):
        text = str(int(x))
    else:
        text = f"{x:.{width}f}"[:width].rstrip("0").rstrip(".")
    return _field(text, width)


def tal_seconds(x: float) -> str:
    """Signed seconds as the EDF+ TAL syntax wants them: '+12', '-0.5', '+0.3945312'."""
    sign = "-" if x < 0 else "+"
    x = abs(float(x))
    text = str(int(x)) if x == int(x) else f"{x:.7f}".rstrip("0").rstrip(".")
    return sign + text


def tal(onset_s: float, duration_s: float | None, texts: Sequence[str]) -> bytes:
    """One Time-stamped Annotation List (Kemp & Olivan 2003, section 2.2.2)."""
    head = tal_seconds(onset_s)
    if duration_s is not None:
        head += "\x15" + tal_seconds(duration_s)[1:]
    body = "".join(t + "\x14" for t in texts)
    return (head + "\x14" + body).encode("utf-8") + b"\x00"


def _digitise(samples: np.ndarray, physical: tuple[float, float] | None, digital: tuple[int, int] | None):
    samples = np.asarray(samples)
    if digital is None:
        digital = (-32768, 32767)
    if physical is None:
        if np.issubdtype(samples.dtype, np.integer) and digital == (-32768, 32767):
            physical = (-32768.0, 32767.0)  # physical == digital: integers round-trip exactly
        else:
            lo, hi = (float(samples.min()), float(samples.max())) if samples.size else (0.0, 1.0)
            physical = (lo, hi) if hi > lo else (lo - 1.0, lo + 1.0)
    (pmin, pmax), (dmin, dmax) = physical, digital
    d = np.rint((samples.astype(np.float64) - pmin) * (dmax - dmin) / (pmax - pmin) + dmin)
    return np.clip(d, dmin, dmax).astype("<i2"), physical, digital


def write_edf_plus(
    path: str | Path,
    *,
    start: dt.datetime,
    annotations: Sequence[tuple[float, float | None, str]] = (),
    signals: Sequence[tuple] = (),
    patient: str = "X X X X",
    recording: str | None = None,
    edf_type: str = "C",
    record_duration_s: float = 1.0,
    n_records: int | None = None,
    record_onsets_s: Sequence[float] | None = None,
    annotation_bytes: int | None = None,
) -> Path:
    """Write an EDF+ (``edf_type`` "C" or "D") or plain EDF (``""``) file and return its path.

    ``start`` is naive local time; its microseconds become the sub-second
    start offset in the first time-keeping TAL. ``annotations`` are
    (onset_s, duration_s or None, text), onsets in seconds after the header's
    whole-second start. ``signals`` are (label, samples, sample_rate_hz[,
    (phys_min, phys_max)[, (dig_min, dig_max)]]) with physical sample values.
    EDF+D files take one onset per record in ``record_onsets_s``.
    """
    path = Path(path)
    if edf_type not in ("C", "D", ""):
        raise ValueError("edf_type must be 'C', 'D' or '' (plain EDF)")
    plus = edf_type != ""
    if annotations and not plus:
        raise ValueError("plain EDF has no annotation signal")
    subsecond = start.microsecond / 1e6
    start = start.replace(microsecond=0)

    digitised, per_record = [], []
    for sig in signals:
        label, samples, rate = sig[:3]
        data, phys, dig = _digitise(samples, *(list(sig[3:5]) + [None, None])[:2])
        n_per = rate * record_duration_s
        if abs(n_per - round(n_per)) > 1e-9 or round(n_per) < 1:
            raise ValueError(f"{label}: {rate} Hz × {record_duration_s} s is not a whole number of samples")
        digitised.append((label, data, phys, dig))
        per_record.append(int(round(n_per)))
    if n_records is None:
        if record_onsets_s is not None:
            n_records = len(record_onsets_s)
        elif signals:
            n_records = max(math.ceil(len(d[1]) / n) for d, n in zip(digitised, per_record))
        else:
            last = max((a[0] + (a[1] or 0.0) for a in annotations), default=0.0)
            n_records = max(1, math.ceil(last / record_duration_s)) if record_duration_s > 0 else 1
    if record_onsets_s is None:
        record_onsets_s = [subsecond + r * record_duration_s for r in range(n_records)]
    elif len(record_onsets_s) != n_records:
        raise ValueError("one onset per data record is needed")

    blocks: list[bytes] = []
    if plus:
        per_block: list[list[bytes]] = [[] for _ in range(n_records)]
        for onset, duration, text in annotations:
            r = 0
            for i, rec_onset in enumerate(record_onsets_s):
                if rec_onset <= onset:
                    r = i
            per_block[r].append(tal(onset, duration, [text]))
        blocks = [tal(record_onsets_s[r], None, [""]) + b"".join(per_block[r]) for r in range(n_records)]
        need = max(len(b) for b in blocks)
        n_bytes = annotation_bytes or need + (need % 2)
        if n_bytes < need or n_bytes % 2:
            raise ValueError(f"annotation_bytes must be even and at least {need}")
        blocks = [b.ljust(n_bytes, b"\x00") for b in blocks]

    headers = [(label, phys, dig, n) for (label, _, phys, dig), n in zip(digitised, per_record)]
    if plus:
        headers.append(("EDF Annotations", (-1.0, 1.0), (-32768, 32767), len(blocks[0]) // 2))
    ns = len(headers)
    if recording is None:
        recording = f"Startdate {start.day:02d}-{MONTHS[start.month - 1]}-{start.year} X X X" if plus else "X"
    head = b"".join(
        [
            _field("0", 8),
            _field(patient.encode("latin-1"), 80),
            _field(recording, 80),
            _field(start.strftime("%d.%m.") + f"{start.year % 100:02d}", 8),
            _field(start.strftime("%H.%M.%S"), 8),
            _number(256 * (ns + 1)),
            _field(f"EDF+{edf_type}" if plus else "", 44),
            _number(n_records),
            _number(record_duration_s),
            _field(str(ns), 4),
        ]
    )
    columns = [
        [_field(h[0], 16) for h in headers],
        [_field("", 80) for h in headers],  # transducer
        [_field("" if h[0] == "EDF Annotations" else "uV", 8) for h in headers],
        [_number(h[1][0]) for h in headers],
        [_number(h[1][1]) for h in headers],
        [_number(h[2][0]) for h in headers],
        [_number(h[2][1]) for h in headers],
        [_field("", 80) for h in headers],  # prefiltering
        [_number(h[3]) for h in headers],
        [_field("", 32) for h in headers],
    ]
    head += b"".join(b"".join(col) for col in columns)

    body = bytearray()
    for r in range(n_records):
        for (label, data, _, _), n in zip(digitised, per_record):
            chunk = data[r * n : (r + 1) * n]
            if chunk.size < n:
                chunk = np.concatenate([chunk, np.zeros(n - chunk.size, dtype="<i2")])
            body += chunk.tobytes()
        if plus:
            body += blocks[r]
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_bytes(head + bytes(body))
    os.replace(tmp, path)
    return path


def write_signal_hypnogram(
    path: str | Path,
    *,
    start: dt.datetime,
    codes: Sequence[int],
    epoch_s: float = 30.0,
    samples_per_epoch: int = 1,
    label: str = "Hypnogram",
    physical: tuple[float, float] | None = None,
    digital: tuple[int, int] | None = None,
    annotations: Sequence[tuple[float, float | None, str]] = (),
    extra_signals: Sequence[tuple] = (),
    patient: str = "X X X X",
    edf_type: str = "C",
) -> Path:
    """Write a hypnogram stored as an ordinary integer signal: one code per epoch, repeated
    ``samples_per_epoch`` times (one data record per epoch)."""
    samples = np.repeat(np.asarray(codes, dtype=np.int64), samples_per_epoch)
    hyp = (label, samples, samples_per_epoch / epoch_s, physical, digital)
    return write_edf_plus(
        path,
        start=start,
        annotations=annotations,
        signals=[hyp, *extra_signals],
        patient=patient,
        edf_type=edf_type,
        record_duration_s=epoch_s,
    )
