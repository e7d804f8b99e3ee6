"""Runs of equal values in a 1-D array: the one run-length encoding every scoring module uses.

``run_bounds`` gives the boundaries, ``runs`` the (starts, lengths, values)
table, ``true_runs`` only the runs of True of a bool array, and ``fill_runs``
writes a value over a set of runs (common practice: run-length encoding).
"""

from __future__ import annotations

import numpy as np


def run_bounds(x: np.ndarray) -> np.ndarray:
    """Run boundaries of a non-empty 1-D array: 0, every i with x[i] != x[i−1], then x.size.

    Run r is x[b[r]:b[r + 1]] (starts = b[:-1], lengths = diff(b)), without
    building the lengths and values.
    """
    change = np.flatnonzero(x[1:] != x[:-1])
    bounds = np.empty(change.size + 2, dtype=np.intp)
    bounds[0] = 0
    np.add(change, 1, out=bounds[1:-1])
    bounds[-1] = x.size
    return bounds


def runs(x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Maximal runs of a 1-D integer/bool array: (starts, lengths, values); empty arrays for an empty one."""
    x = np.asarray(x)
    if x.size == 0:
        empty = np.zeros(0, dtype=np.intp)
        return empty, empty, x[:0]
    b = run_bounds(x)
    return b[:-1], np.diff(b), x[b[:-1]]


def true_runs(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Starts and lengths of the runs of True in a 1-D bool array (the True rows of ``runs``)."""
    framed = np.zeros(x.size + 2, dtype=np.int8)  # a False before and after
    framed[1:-1] = x
    edges = framed[1:] - framed[:-1]
    starts = (edges == 1).nonzero()[0]
    return starts, (edges == -1).nonzero()[0] - starts


def fill_runs(out: np.ndarray, starts: np.ndarray, lengths: np.ndarray, value: bool) -> None:
    """out[s : s + l] = value for every (s, l) of ``starts``/``lengths`` (disjoint runs, l ≥ 0).

    Writes only the elements of the runs (their indices built from the run
    table), so its cost follows the minutes rescored, not the series length.
    """
    total = int(lengths.sum())
    if total:
        offsets = np.cumsum(lengths) - lengths  # where each run begins in the index list
        out[np.arange(total) + np.repeat(starts - offsets, lengths)] = value
