"""EDF / EDF+ hypnogram reader: sleep stages per epoch, start time and lights markers.

The annotation signal is parsed byte by byte (``_edfplus``, EDF+ spec,
Kemp & Olivan 2003) rather than through a general EDF library: pyedflib
refuses EDF+D files; MNE reads an EDF+D file as if it were continuous and
drops, with a warning, the annotations that then fall outside its data;
both lose or misread sub-second start times. Gaps between the records of an
EDF+D file are read as unscored epochs and reported in one QC note with
their length. A hypnogram
stored as an ordinary integer signal is read with the same parser, from
the digital samples and the header's calibration.

Layout: this module holds the public ``read_hypnogram``, option checks, the
read-only file access and the assembly of a ``Hypnogram``; the parts live in
``_edfplus`` (bytes: header, TALs, samples), ``_edftimes`` (start time, record
onsets, lights), ``_edfstages`` (stage annotations → epoch grid) and
``_edfsignal`` (hypnogram signals). Their names used here are importable from
this module as before.
"""

from __future__ import annotations

import hashlib
import math
import os
import re
from pathlib import Path

from sleepfuse.model.errors import ConfigError, ReadError
from sleepfuse.model.records import Hypnogram, Problem
from sleepfuse.model.clock import zone
from . import _edfplus as edfplus
from ._edfsignal import find_hypnogram_signal, signal_stages
from ._edfstages import _classify, _max_epochs, _stage_grid
from ._edftimes import MAX_RECORDING_DAYS, _after, _lights, _local_start, _record_onsets, _seconds  # noqa: F401
from ._edftimes import gap_problem, record_gaps
from .stage_labels import (
    DEFAULT_SIGNAL_CODES,
    DEFAULT_STAGE_LABELS,
    TARGET_CODES,
    merged_labels,
    merged_signal_codes,
    stage_code,
)

__all__ = ["read_hypnogram", "DEFAULT_STAGE_LABELS", "DEFAULT_SIGNAL_CODES", "stage_code"]

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
        tokens = edfplus.patient_tokens(raw) if len(raw) > 8 else []
        header = edfplus.read_header(path, raw, size)
        hypnogram = _hypnogram(path, header, tz, float(epoch_s), label_table, code_table, signal_label, content)
        if content is not None:
            hypnogram.sha256 = hashlib.sha256(content).hexdigest()  # provenance of exactly the bytes read
    except ReadError as exc:
        raise ReadError(path, _scrub(exc.reason, tokens)) from None
    except MemoryError:
        raise ReadError(path, "not enough memory to read this file") from None
    except Exception as exc:  # never a bare traceback for a bad file
        reason = f"unexpected error while reading ({type(exc).__name__}: {_excerpt(str(exc))})"
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
    """``text`` without any word of the header's patient and recording fields.

    Tokens of three or more characters go wherever they appear; shorter ones
    (initials, short names) only as whole words, so "Jo" leaves "Joint" alone."""
    for token in tokens:
        if len(token) >= 3:
            text = re.sub(re.escape(token), "***", text, flags=re.IGNORECASE)
        else:
            text = re.sub(rf"(?<![^\W_]){re.escape(token)}(?![^\W_])", "***", text, flags=re.IGNORECASE)
    return text


EXCERPT = 60  # characters of a file's content a message may quote


def _excerpt(text: str) -> str:
    """At most EXCERPT characters of ``text`` on one line."""
    text = " ".join(text.split())
    return text if len(text) <= EXCERPT else text[:EXCERPT] + "..."


def _scrubbed(h: Hypnogram, tokens: list[str]) -> Hypnogram:
    """Defence in depth: no word of the patient field survives in any message or label."""
    if tokens:
        h.problems = [Problem(p.severity, _scrub(p.message, tokens), p.time, p.night) for p in h.problems]
        h.unknown_labels = {_scrub(k, tokens): v for k, v in h.unknown_labels.items()}
    return h


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
    gaps = gap_problem(record_gaps(header, onsets), header_start)
    if gaps is not None:
        problems.append(gaps)
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
