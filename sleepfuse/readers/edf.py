"""EDF / EDF+ hypnogram reader: sleep stages per epoch, start time and lights markers.

The annotation signal is parsed byte by byte (``_edfplus``, EDF+ spec,
Kemp & Olivan 2003) rather than through pyedflib or MNE, which refuse
EDF+D files, lose sub-second starts or drop annotations. A hypnogram
stored as an ordinary integer signal is read with the same parser, from
the digital samples and the header's calibration.
"""

from __future__ import annotations

import datetime as dt
import functools
import hashlib
import math
import os
import re
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd

from ..errors import ConfigError, ReadError
from ..records import Hypnogram, Problem
from ..stages import STAGE_DTYPE, Stage
from ..timeutil import localize, pandas_tzinfo, zone
from . import _edfplus as edfplus
from .stage_labels import (
    DEFAULT_SIGNAL_CODES,
    DEFAULT_STAGE_LABELS,
    TARGET_CODES,
    is_event_text,
    is_stage_like,
    lights_marker,
    merged_labels,
    merged_signal_codes,
    normalise_label,
    stage_code,
)

__all__ = ["read_hypnogram", "DEFAULT_STAGE_LABELS", "DEFAULT_SIGNAL_CODES", "stage_code"]

MAX_RECORDING_DAYS = 14  # longer stage series are taken for a damaged file
_PATH = type(Path())


def read_hypnogram(
    path: str | Path,
    tz: str,
    *,
    epoch_s: float = 30.0,
    labels: dict[str, str] | None = None,
    signal_label: str = "",
    signal_codes: dict[str, str] | None = None,
) -> Hypnogram:
    """Read the hypnogram of an EDF, EDF+C or EDF+D file; times in the IANA zone ``tz``.

    Stages come from the "EDF Annotations" signal. An annotation is a *stage
    annotation* if its normalised text (case, whitespace, ``_`` and ``-``
    ignored) is in DEFAULT_STAGE_LABELS extended by ``labels``. It is an
    *unknown stage* if its text starts with "sleep stage", "stage" or
    "hypnogram", or if its duration is a positive whole number of epochs and
    its text names no known event (arousal, apnea, lights, recording start...);
    unknown stages become UNSCORED epochs, are counted in ``unknown_labels``
    and reported, and yield to known stages where they overlap. Other
    annotations are ignored, except "lights off/out" and "lights on" markers.

    Epoch 0 starts at the earliest stage onset; each annotation covers
    round(duration / epoch_s) epochs (one if it has no duration) from the
    epoch nearest its onset; epochs no annotation covers are UNSCORED; where
    annotations overlap, the later onset (then the later in the file) wins.
    Without stage annotations, a hypnogram signal is used: ``signal_label``
    or else a signal whose label contains "hypno"; its physical values,
    rounded, are codes (DEFAULT_SIGNAL_CODES extended by ``signal_codes``),
    and each epoch takes the majority of its samples.

    Raises ReadError (file and reason) for any unreadable file and
    ConfigError for bad options. Patient fields are never returned.
    """
    path = path if type(path) is _PATH else Path(path)  # a Path is immutable: no copy needed
    label_table, code_table = _checked_options(tz, epoch_s, labels, signal_codes)
    tokens: list[str] = []
    try:
        raw, size, content = _read_header_bytes(path)
        tokens = edfplus.patient_tokens(raw) if len(raw) >= 88 else []
        header = edfplus.read_header(path, raw, size)
        hypnogram = _hypnogram(path, header, tz, float(epoch_s), label_table, code_table, signal_label, content)
        if content is not None:
            hypnogram.sha256 = hashlib.sha256(content).hexdigest()  # provenance of exactly the bytes read
    except ReadError as exc:
        raise ReadError(path, _scrub(exc.reason, tokens)) from None
    except MemoryError:
        raise ReadError(path, "not enough memory to read this file") from None
    except Exception as exc:  # never a bare traceback for a bad file
        reason = f"unexpected error while reading ({type(exc).__name__}: {exc})"
        raise ReadError(path, _scrub(reason, tokens)) from None
    return _scrubbed(hypnogram, tokens)


def _checked_options(tz, epoch_s, labels, signal_codes) -> tuple[dict[str, str], dict[int, int]]:
    try:
        zone(tz)
    except ValueError:
        raise ConfigError("study.timezone", tz, "an IANA zone name such as 'Europe/Berlin'") from None
    if isinstance(epoch_s, bool) or not isinstance(epoch_s, (int, float)) or not (0 < epoch_s < math.inf):
        raise ConfigError("psg.epoch_s", epoch_s, "a positive number of seconds")
    for label, target in (labels or {}).items():
        if target not in TARGET_CODES:
            raise ConfigError(f"psg.labels.{label}", target, ", ".join(TARGET_CODES))
    for code, target in (signal_codes or {}).items():
        if not re.fullmatch(r"\s*[+-]?\d+\s*", str(code)):
            raise ConfigError("psg.signal_codes", code, 'integer codes as keys, e.g. "5" = "R"')
        if target not in TARGET_CODES:
            raise ConfigError(f"psg.signal_codes.{code}", target, ", ".join(TARGET_CODES))
    return merged_labels(labels), merged_signal_codes(signal_codes)


WHOLE_FILE_BYTES = 16 << 20  # files up to this size are read in one go; larger ones are memory-mapped


def _read_header_bytes(path: Path) -> tuple[bytes, int, bytes | None]:
    """The fixed header and, if the signal count is readable, all signal headers (read-only);
    and the whole file's bytes when it is small (a hypnogram file), else None."""
    try:
        fd = os.open(path, os.O_RDONLY)  # read-only; unbuffered reads, as open(path, "rb") would do them
        try:
            size = os.fstat(fd).st_size
            if size <= WHOLE_FILE_BYTES:
                content = _read_to_end(fd, size + 1)
                raw = content[:256]
                ns_text = raw[252:256].decode("ascii", errors="replace").strip()
                if len(raw) == 256 and ns_text.isdigit() and 0 < int(ns_text) <= 9999:
                    raw = content[: 256 * (int(ns_text) + 1)]
                return raw, len(content), content
            raw = _read_up_to(fd, 256)
            ns_text = raw[252:256].decode("ascii", errors="replace").strip()
            if len(raw) == 256 and ns_text.isdigit() and 0 < int(ns_text) <= 9999:
                raw += _read_up_to(fd, 256 * int(ns_text))
        finally:
            os.close(fd)
    except FileNotFoundError:
        raise ReadError(path, "file not found") from None
    except IsADirectoryError:
        raise ReadError(path, "is a directory, not an EDF file") from None
    except OSError as exc:
        raise ReadError(path, f"cannot open the file ({exc.strerror or exc})") from None
    return raw, size, None


def _read_to_end(fd: int, first: int) -> bytes:
    """All bytes from the file position to the end of the file (``first``: the size of the first read)."""
    chunks = [os.read(fd, first)]
    while chunks[-1]:
        chunks.append(os.read(fd, 1 << 20))
    return chunks[0] if len(chunks) == 2 else b"".join(chunks)


def _read_up_to(fd: int, n: int) -> bytes:
    """``n`` bytes, or fewer at the end of the file."""
    data = os.read(fd, n)
    while len(data) < n:
        more = os.read(fd, n - len(data))
        if not more:
            break
        data += more
    return data


def _scrub(text: str, tokens: list[str]) -> str:
    for token in tokens:
        text = re.sub(re.escape(token), "***", text, flags=re.IGNORECASE)
    return text


def _scrubbed(h: Hypnogram, tokens: list[str]) -> Hypnogram:
    """Defence in depth: no word of the patient field survives in any message or label."""
    if tokens:
        h.problems = [Problem(p.severity, _scrub(p.message, tokens), p.time, p.night) for p in h.problems]
        h.unknown_labels = {_scrub(k, tokens): v for k, v in h.unknown_labels.items()}
    return h


def _seconds(s: float) -> pd.Timedelta:
    return pd.Timedelta(seconds=float(s))


_NO_TIME = _seconds(0.0)


def _after(start: pd.Timestamp, seconds: float) -> pd.Timestamp:
    """``start + _seconds(seconds)``; for 0 s in the unit of ``start``, ``start`` itself (the same
    instant, unit, zone and fold; checked in tests/test_readers_edf_speed_equivalence.py)."""
    if seconds == 0.0 and start.unit == _NO_TIME.unit:
        return start
    return start + _seconds(seconds)


def _hypnogram(path, header, tz, epoch_s, label_table, code_table, signal_label, content=None) -> Hypnogram:
    records = edfplus.data_records(path, header, content)
    ann = edfplus.read_annotation_lists(path, header, records)
    problems = [Problem("warning", note) for note in (*header.notes, *ann.notes)]
    onsets = _record_onsets(header, ann.record_onsets_s, problems)
    stage_rows, lights = _classify(ann.onsets_s, ann.durations_s, ann.texts, epoch_s, label_table)
    # The times, one after another (no step between them fails or reports anything).
    header_start = _local_start(header.start, tz)
    first_onset = float(onsets[0])
    record_start = _after(header_start, first_onset)
    lights_off, lights_on = _lights(lights, header_start, problems)
    strong = any(not row[4] for row in stage_rows)
    signal_index = None if strong else find_hypnogram_signal(path, header, signal_label)
    if strong and signal_label:
        problems.append(
            Problem("info", f"signal {signal_label!r} is not used: the file holds stage annotations, which take precedence")
        )
    if signal_index is not None:
        if stage_rows:
            problems.append(Problem("info", f"annotations with unknown labels ignored: {len(stage_rows)}; "
                                            f"stages come from signal {header.signals[signal_index].label!r}"))
        values = edfplus.physical_samples(path, header, records, signal_index)
        del records
        stages, unknown, notes = signal_stages(
            path, values, onsets, header, signal_index, epoch_s, code_table, _max_epochs(epoch_s)
        )
        problems.extend(Problem(sev, msg) for sev, msg in notes)
        return Hypnogram(path, record_start, record_start, epoch_s, stages, lights_off, lights_on, unknown, problems)
    del records
    if not stage_rows:
        seen = list(dict.fromkeys(" ".join(text.split())[:40] for text in ann.texts))
        found = f" (annotations found: {', '.join(map(repr, seen[:8]))}{', ...' if len(seen) > 8 else ''})" if seen else ""
        raise ReadError(
            path,
            f"no sleep stages found: no stage annotations and no hypnogram signal{found}. Map the file's stage "
            "labels in study.toml ([psg] labels) or name the signal that holds the hypnogram ([psg] signal_label)",
        )
    t0, stages, unknown = _stage_grid(path, stage_rows, epoch_s, header_start, problems)
    start = record_start if t0 == first_onset else header_start + _seconds(t0)  # the same sum, once
    return Hypnogram(path, record_start, start, epoch_s, stages, lights_off, lights_on, unknown, problems)


_UTC = dt.timezone.utc


def _local_start(naive: dt.datetime, tz: str) -> pd.Timestamp:
    """``localize(naive, tz)`` for a header start (naive, whole seconds), built in one step when
    the wall time exists once in ``tz`` (no spring-forward gap): the same instant, unit, zone and
    fold (checked in tests/test_readers_edf_speed_equivalence.py)."""
    tzinfo = pandas_tzinfo(tz)
    if not isinstance(tzinfo, ZoneInfo) or naive.tzinfo is not None or naive.microsecond or naive.fold:
        return localize(naive, tz)
    local = naive.replace(tzinfo=tzinfo).astimezone(_UTC).astimezone(tzinfo)
    if local.replace(tzinfo=None) != naive:
        return localize(naive, tz)  # a gap time comes back shifted: localize's own path, same result
    return pd.Timestamp(local)


def _record_onsets(header, keep, problems) -> np.ndarray:
    """Onset (s from the header start) of every data record: the time-keeping TALs of EDF+
    (``keep``, NaN where a record has none), else contiguous records from the first one
    (Kemp & Olivan 2003)."""
    first = float(keep[0])
    if not math.isfinite(first) or abs(first) > 86400 * MAX_RECORDING_DAYS:
        first = 0.0
    if first != 0.0 and not 0.0 <= first < 1.0:
        problems.append(Problem("info", f"the first data record starts {first:g} s after the header start time"))
    n, duration = header.n_records, header.record_duration_s
    contiguous = first + (_record_steps(n, duration) if n <= 100_000 else np.arange(n) * duration)
    if header.variant != "EDF+D":
        drift = np.abs(keep - contiguous)
        if header.annotation_indices and (drift > 1e-3).any():  # NaN (no time-keeping TAL) is no drift
            problems.append(Problem("warning", "EDF+C data records are not contiguous by their time-keeping "
                                               "annotations; records are taken as contiguous"))
        return contiguous
    return np.where(np.isfinite(keep), keep, contiguous)


@functools.lru_cache(maxsize=16)
def _record_steps(n_records: int, record_duration_s: float) -> np.ndarray:
    """np.arange(n_records) * record_duration_s, read-only: files of one study share it."""
    steps = np.arange(n_records) * record_duration_s
    steps.flags.writeable = False
    return steps


def _classify(onsets, durations, texts, epoch_s, label_table):
    """Split annotations (parallel lists of onset, duration, text) into stage rows (onset,
    duration or NaN, code, unknown label, weak) and lights markers (kind, onset)."""
    rows, lights = [], []
    kinds: dict[str, tuple[int, object]] = {}  # a hypnogram repeats a few texts many times
    unscored = int(Stage.UNSCORED)
    for onset, duration, text in zip(onsets, durations, texts):
        kind = kinds.get(text)
        if kind is None:
            kind = kinds[text] = _text_kind(text, label_table)
        tag, value = kind
        if tag == _STAGE:
            rows.append((onset, math.nan if duration is None else duration, value, None, False))
        elif tag == _LIGHTS:
            lights.append((value, onset))
        elif tag == _UNKNOWN_STAGE:
            rows.append((onset, math.nan if duration is None else duration, unscored, value, False))
        elif tag == _OTHER and duration and _whole_epochs(duration, epoch_s):
            rows.append((onset, duration, unscored, value, True))
    return rows, lights


_STAGE, _LIGHTS, _UNKNOWN_STAGE, _OTHER, _EVENT = range(5)


def _text_kind(text: str, label_table) -> tuple[int, object]:
    """What an annotation text is: a stage (code), a lights marker ("off"/"on"), an unknown
    stage (its label), other text (its label: an unknown stage if it lasts whole epochs) or an event."""
    norm = normalise_label(text)
    target = label_table.get(norm)
    if target is not None:
        return _STAGE, TARGET_CODES[target]
    marker = lights_marker(text)
    if marker is not None:
        return _LIGHTS, marker
    label = " ".join(text.split())
    if is_stage_like(norm):
        return _UNKNOWN_STAGE, label
    return (_EVENT, None) if is_event_text(norm) else (_OTHER, label)


def _whole_epochs(duration_s: float, epoch_s: float) -> bool:
    k = duration_s / epoch_s
    return k >= 1 - 1e-9 and abs(k - round(k)) <= 1e-6 * max(1.0, k)


def _lights(markers, header_start, problems):
    """Lights off (first marker) and lights on (last marker) as tz-aware times."""
    limit = 86400.0 * MAX_RECORDING_DAYS
    if any(abs(t) > limit for _, t in markers):
        problems.append(Problem("warning", f"lights markers more than {MAX_RECORDING_DAYS} days from the start are ignored"))
        markers = [(kind, t) for kind, t in markers if abs(t) <= limit]
    offs = sorted(t for kind, t in markers if kind == "off")
    ons = sorted(t for kind, t in markers if kind == "on")
    if len(offs) > 1:
        problems.append(Problem("info", f"lights-off markers: {len(offs)}; the first is used"))
    if len(ons) > 1:
        problems.append(Problem("info", f"lights-on markers: {len(ons)}; the last is used"))
    off = header_start + _seconds(offs[0]) if offs else None
    on = header_start + _seconds(ons[-1]) if ons else None
    if off is not None and on is not None and on <= off:
        problems.append(Problem("warning", f"lights on ({on}) is not after lights off ({off}); lights on is ignored", on))
        on = None
    return off, on


def _max_epochs(epoch_s: float) -> int:
    return int(MAX_RECORDING_DAYS * 86400 / epoch_s) + 1


def _stage_grid(path, rows, epoch_s, header_start, problems):
    """Stage per epoch from stage rows, vectorised: later onset wins, unknown (weak) rows yield."""
    onset_t, duration_t, code_t, _, weak_t = zip(*rows)
    onset = np.array(onset_t, dtype=np.float64)
    duration = np.array(duration_t, dtype=np.float64)
    code = np.array(code_t, dtype=np.int64)
    t0 = float(onset.min())
    position = (onset - t0) / epoch_s
    n_dur = np.where(duration > 0, duration / epoch_s, 1.0)
    if position.max() + n_dur.max() > _max_epochs(epoch_s):
        raise ReadError(path, f"stage annotations span more than {MAX_RECORDING_DAYS} days; "
                              "the annotation times are damaged")
    first = np.rint(position).astype(np.int64)
    whole = np.rint(n_dur)
    length = np.maximum(whole, 1).astype(np.int64)
    ends = np.cumsum(length)
    if ends[-1] > 20 * _max_epochs(epoch_s):  # the sum of the lengths
        raise ReadError(path, "stage annotations overlap far beyond one recording; the annotation list is damaged")
    epoch_time = lambda i: header_start + _seconds(t0 + int(i) * epoch_s)  # noqa: E731
    off_grid = np.abs(position - first) > 1e-3
    if off_grid.any():
        problems.append(Problem("info", f"stage annotations off the {epoch_s:g}-s epoch grid: {int(off_grid.sum())}; "
                                        "each is placed on the nearest epoch",
                                epoch_time(first[off_grid][0])))
    odd = np.abs(n_dur - whole) > 1e-3  # never where duration <= 0 or NaN: there n_dur is 1.0
    if odd.any():
        problems.append(Problem("warning", f"stage annotations lasting a fraction of an epoch ({epoch_s:g} s): "
                                           f"{int(odd.sum())}; their length is rounded to whole epochs",
                                epoch_time(first[odd][0])))

    epoch = np.arange(int(ends[-1])) + np.repeat(first - (ends - length), length)  # of each row, in turn
    n_epochs = int(epoch.max()) + 1
    stages = np.full(n_epochs, int(Stage.UNSCORED), dtype=STAGE_DTYPE)
    won_by = None  # the row that fills each epoch (-1: none), for unknown labels
    if np.bincount(epoch, minlength=n_epochs).max() <= 1:
        # No epoch is covered twice: each covered epoch goes to its one row, and nothing overlaps.
        stages[epoch] = np.repeat(code, length)
        if any(r[3] is not None for r in rows):
            won_by = np.full(n_epochs, -1, dtype=np.int64)
            won_by[epoch] = np.repeat(np.arange(len(rows)), length)
    else:
        won_by = np.full(n_epochs, -1, dtype=np.int64)
        weak = np.array(weak_t, dtype=bool)
        owner = np.repeat(np.arange(len(rows)), length)
        order = np.lexsort((np.arange(len(rows)), onset, ~weak))  # weak first, then by onset, then file order
        rank = np.empty(len(rows), dtype=np.int64)
        rank[order] = np.arange(len(rows))
        winner = np.full(n_epochs, -1, dtype=np.int64)
        np.maximum.at(winner, epoch, rank[owner])
        covered = winner >= 0
        won_by[covered] = order[winner[covered]]
        stages[covered] = code[won_by[covered]]
        _report_overlaps(epoch, owner, code, weak, n_epochs, epoch_time, problems)
    unknown = _unknown_counts(rows, won_by, epoch_s, epoch_time, problems)
    return t0, stages, unknown


def _report_overlaps(epoch, owner, code, weak, n_epochs, epoch_time, problems):
    strong = ~weak[owner]
    e, c = epoch[strong], code[owner[strong]]
    count = np.bincount(e, minlength=n_epochs)
    lo = np.full(n_epochs, np.iinfo(np.int64).max)
    hi = np.full(n_epochs, np.iinfo(np.int64).min)
    np.minimum.at(lo, e, c)
    np.maximum.at(hi, e, c)
    conflict = (count > 1) & (lo != hi)
    same = (count > 1) & (lo == hi)
    if conflict.any():
        problems.append(Problem("warning", f"epochs covered by stage annotations that disagree: {int(conflict.sum())}; "
                                           "the later annotation is used",
                                epoch_time(np.flatnonzero(conflict)[0])))
    if same.any():
        problems.append(Problem("info", f"epochs covered more than once by the same stage: {int(same.sum())}",
                                epoch_time(np.flatnonzero(same)[0])))


def _unknown_counts(rows, won_by, epoch_s, epoch_time, problems) -> dict[str, int]:
    """Epochs of each unknown label in the final hypnogram (label -> epoch count), reported."""
    unknown_rows = [i for i, r in enumerate(rows) if r[3] is not None]
    if not unknown_rows:
        return {}
    won = np.bincount(won_by[won_by >= 0], minlength=len(rows))
    counts: dict[str, int] = {}
    yielded: dict[str, int] = {}
    for i in unknown_rows:
        label = rows[i][3]
        if won[i]:
            counts[label] = counts.get(label, 0) + int(won[i])
        else:
            yielded[label] = yielded.get(label, 0) + 1
    if counts:
        listed = ", ".join(f"{k!r} ({v} × {epoch_s:g} s)" for k, v in sorted(counts.items()))
        is_unknown = np.zeros(len(rows) + 1, dtype=bool)
        is_unknown[unknown_rows] = True
        hits = np.flatnonzero(is_unknown[won_by])  # won_by == -1 indexes the False sentinel
        first = epoch_time(hits[0]) if hits.size else None
        problems.append(Problem("warning", f"unknown stage labels counted as unscored: {listed}; map them in "
                                           "study.toml [psg] labels to W, N1, N2, N3, R or unscored", first))
    if yielded:
        listed = ", ".join(f"{k!r} (×{v})" for k, v in sorted(yielded.items()))
        problems.append(Problem("info", f"annotations with unknown labels lie wholly on scored epochs and are not "
                                        f"used: {listed}"))
    return counts


def find_hypnogram_signal(path, header, signal_label: str) -> int | None:
    """Index of the ordinary signal holding a hypnogram: ``signal_label`` if given, else a label with "hypno"."""
    ordinary = [i for i, s in enumerate(header.signals) if not s.is_annotation]
    if signal_label:
        wanted = signal_label.strip().lower()
        hits = [i for i in ordinary if header.signals[i].label.strip().lower() == wanted]
        if not hits:
            names = ", ".join(repr(header.signals[i].label) for i in ordinary[:20]) or "none"
            raise ReadError(path, f"no signal labelled {signal_label!r} ([psg] signal_label); ordinary signals: {names}")
        return hits[0]
    hits = [i for i in ordinary if "hypno" in header.signals[i].label.lower()]
    return hits[0] if hits else None


def signal_stages(path, values, onsets, header, index, epoch_s, code_table, max_epochs):
    """Stages from a hypnogram signal (physical values, shape n_records × n_samples): each epoch
    takes the majority of the samples that start in it (ties: its first sample; common practice)."""
    s = header.signals[index]
    notes: list[tuple[str, str]] = []
    if header.record_duration_s <= 0 or s.n_samples == 0:
        raise ReadError(path, f"signal {s.label!r} has no sample rate (record duration "
                                             f"{header.record_duration_s:g} s, {s.n_samples} samples per record)")
    fs = s.n_samples / header.record_duration_s
    per_epoch = epoch_s * fs
    finite = np.isfinite(values)
    codes = np.rint(np.where(finite, values, -9999)).astype(np.int64)
    if per_epoch < 1 - 1e-9:  # one sample spans several epochs: repeat it
        k = round(1 / per_epoch)
        if abs(k * per_epoch - 1) > 1e-6:
            raise ReadError(path, f"signal {s.label!r}: one sample every {1 / fs:g} s does not fit "
                                                 f"{epoch_s:g}-s epochs")
        codes, fs, per_epoch = np.repeat(codes, k, axis=1), fs * k, 1.0
    elif abs(per_epoch - round(per_epoch)) > 1e-6:
        notes.append(("info", f"signal {s.label!r} has {per_epoch:g} samples per epoch; each epoch takes the "
                              "majority of the samples that start in it"))
    t = (onsets - onsets[0])[:, None] + np.arange(codes.shape[1])[None, :] / fs
    epoch = np.floor(t.ravel() / epoch_s + 1e-9).astype(np.int64)
    codes = codes.ravel()
    if epoch.size == 0 or epoch.min() < 0 or epoch.max() >= max_epochs:
        raise ReadError(path, f"signal {s.label!r}: record times give no usable epoch grid")
    uniq, inv = np.unique(codes, return_inverse=True)
    if uniq.size > 64:
        raise ReadError(path, f"signal {s.label!r} holds {uniq.size} distinct values; "
                                             "a hypnogram signal holds a few integer stage codes")
    n_epochs = int(epoch.max()) + 1
    counts = np.bincount(epoch * uniq.size + inv, minlength=n_epochs * uniq.size).reshape(n_epochs, uniq.size)
    n_in = counts.sum(axis=1)
    if n_in[-1] < round(per_epoch) and n_epochs > 1:
        notes.append(("info", f"the last epoch of signal {s.label!r} is incomplete and is not used"))
        counts, n_in, n_epochs = counts[:-1], n_in[:-1], n_epochs - 1
    seen, first_sample = np.unique(epoch, return_index=True)
    first_value = np.full(n_epochs, -1, dtype=np.int64)
    keep = seen < n_epochs
    first_value[seen[keep]] = inv[first_sample[keep]]
    rows = np.arange(n_epochs)
    best = counts.argmax(axis=1)
    tie_start = (first_value >= 0) & (counts[rows, np.maximum(first_value, 0)] == counts[rows, best])
    chosen = np.where(tie_start, first_value, best)
    lut = np.array([code_table.get(int(u), int(Stage.UNSCORED)) for u in uniq], dtype=np.int64)
    stages = np.where(n_in > 0, lut[chosen], int(Stage.UNSCORED)).astype(STAGE_DTYPE)
    mixed = int(((counts > 0).sum(axis=1) > 1).sum())
    if mixed:
        notes.append(("info", f"epochs of signal {s.label!r} holding more than one code: {mixed}; the majority is used"))
    if (n_in == 0).any():
        notes.append(("warning", f"epochs without samples (gaps between data records): {int((n_in == 0).sum())}; "
                                 "they are unscored"))
    unknown: dict[str, int] = {}
    for j, u in enumerate(uniq):
        if int(u) not in code_table:
            n = int(((chosen == j) & (n_in > 0)).sum())
            if n:
                unknown[f"code {int(u)}" if u != -9999 else "no value"] = n
    if unknown:
        listed = ", ".join(f"{k} ({v} × {epoch_s:g} s)" for k, v in sorted(unknown.items()))
        notes.append(("warning", f"unknown codes in signal {s.label!r} counted as unscored: {listed}; map them in "
                                 "study.toml [psg] signal_codes"))
    return stages, unknown, notes
