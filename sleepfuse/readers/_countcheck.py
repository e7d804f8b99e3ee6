"""Plausibility checks of an activity-count file, vectorised: counts a device cannot report, and a
change of epoch length part-way through the file."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from sleepfuse.model.errors import ReadError
from sleepfuse.model.records import Problem
from ._csvtext import line_phrase

MAX_COUNT_PER_MIN = 100_000.0  # default plausibility ceiling ([actigraphy] max_count_per_min)
MOSTLY_IMPLAUSIBLE = 0.5  # a file with more than this share of implausible counts is rejected
EPOCH_CHANGE_RUN = 10  # this many consecutive steps of another allowed epoch length: the epoch length changed


def implausible_counts(path: Path, counts: np.ndarray, lines: np.ndarray, epoch_s: int, max_per_min: float):
    """Counts above the plausibility ceiling (or infinite) read as missing, reported by line: (counts, problems).

    The ceiling is ``max_per_min`` counts per minute scaled to the epoch length
    (default 100 000/min: 16-bit epoch counters stop at 65 535, from memory, so no
    device reports more per epoch; 1e300, 2^63 or inf are recording faults).
    More than half the counts implausible: the file is rejected.
    """
    ceiling = float(max_per_min) * epoch_s / 60.0
    bad = counts > ceiling  # NaN compares False; inf is caught
    if not bad.any():
        return counts, []
    n_bad = int(bad.sum())
    n_known = int(np.count_nonzero(~np.isnan(counts)))
    where = line_phrase(lines[np.flatnonzero(bad)])
    limit = f"{ceiling:g} per {epoch_s}-s epoch ([actigraphy] max_count_per_min = {max_per_min:g})"
    if n_bad > MOSTLY_IMPLAUSIBLE * n_known:
        raise ReadError(
            path,
            f"{n_bad} of {n_known} counts are above the plausibility ceiling of {limit} ({where}); "
            "check the device export (wrong column or unit?) or raise the ceiling in study.toml",
        )
    msg = f"{n_bad} count(s) above the plausibility ceiling of {limit}, read as missing: {where}"
    return np.where(bad, np.nan, counts), [Problem("warning", msg)]


def epoch_change(path: Path, steps_s: np.ndarray, lines: np.ndarray, epoch: int) -> None:
    """Reject a file whose epoch length changes part-way: a run of EPOCH_CHANGE_RUN or more equal steps
    between timestamps of another length (a single odd step is a gap or a jitter, not a change).

    ``steps_s``: seconds from each row to the next; ``lines``: the rows' file lines; ``epoch``: the
    file's (most common) epoch length.
    """
    if steps_s.size < EPOCH_CHANGE_RUN:
        return
    change = np.flatnonzero(steps_s[1:] != steps_s[:-1]) + 1
    starts = np.concatenate(([0], change))
    lengths = np.diff(np.concatenate((starts, [steps_s.size])))
    values = steps_s[starts]
    odd = np.flatnonzero((lengths >= EPOCH_CHANGE_RUN) & (values > 0) & (values != epoch))
    if odd.size:
        r = odd[0]
        i, other = int(starts[r]), int(values[r])  # step i goes from row i to row i + 1
        line = int(lines[i + 1])
        raise ReadError(
            path,
            f"epoch length changes from {epoch} s to {other} s at line {line} ({int(lengths[r])} steps of "
            f"{other} s from there); sleepfuse reads one epoch length per file: split the file before line "
            f"{line} or export it again with one epoch length",
        )
