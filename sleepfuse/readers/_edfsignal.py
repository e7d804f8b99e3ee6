"""A hypnogram stored as an ordinary EDF signal: finding the signal, and its stage per epoch.

Used when a file holds no stage annotations. The signal's physical values
(``_edfplus.physical_samples``: digital samples and the header's calibration,
EDF spec, Kemp et al. 1992), rounded, are integer stage codes; each epoch takes
the majority of the samples that start in it.
"""

from __future__ import annotations

import numpy as np

from sleepfuse.model.errors import ReadError
from sleepfuse.model.stages import STAGE_DTYPE, Stage


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
