"""Stage annotations of an EDF+ hypnogram: classified by their text, then laid on the epoch grid.

``_classify`` sorts annotations into stage rows (known stages, unknown-stage
labels, whole-epoch "other" texts) and lights markers, using the label table of
``stage_labels``. ``_stage_grid`` turns the stage rows into one stage per epoch
(later onset wins, unknown rows yield to known ones) and reports off-grid,
fractional, overlapping and unknown annotations. When no epoch is covered twice
it fills the epochs directly instead of ranking the rows: with nothing
overlapping, each covered epoch has one row, whatever the ranking (checked in
tests/test_readers_edf_speed_equivalence.py).
"""

from __future__ import annotations

import math

import numpy as np

from sleepfuse.model.errors import ReadError
from sleepfuse.model.records import Problem
from sleepfuse.model.stages import STAGE_DTYPE, Stage
from ._edftimes import MAX_RECORDING_DAYS, _seconds
from .stage_labels import TARGET_CODES, is_event_text, is_stage_like, lights_marker, normalise_label


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
