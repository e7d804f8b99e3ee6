"""Epoch-by-epoch agreement of actigraphy against PSG, and the clock offset between them.

PSG is the reference. Both series are put on the PSG's 30-s grid in
absolute time. Clock-offset convention: ``offset_s`` is what must be ADDED
to the actigraph's clock times to match the PSG clock (an actigraph whose
clock runs 7 min fast needs offset_s = −420).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from sleepfuse.model.stages import Stage

_NAN = float("nan")
# Stage codes as plain ints: numpy compares an int8 array with a Python int several times faster than
# with an IntEnum member, and the comparison is the same (an IntEnum member is that int).
_WAKE, _N1, _SLEEP = int(Stage.WAKE), int(Stage.N1), int(Stage.SLEEP)


def _kappa_parts(psg: np.ndarray, act: np.ndarray, valid: np.ndarray, axis: int = -1):
    """Counts of the 2 × 2 table (sleep = positive), along ``axis``: tp, fn, tn, fp."""
    tp = np.sum(psg & act & valid, axis=axis)
    fn = np.sum(psg & ~act & valid, axis=axis)
    tn = np.sum(~psg & ~act & valid, axis=axis)
    fp = np.sum(~psg & act & valid, axis=axis)
    return tp, fn, tn, fp


def _kappa(tp, fn, tn, fp) -> np.ndarray:
    """Cohen 1960 kappa, (p_o − p_e)/(1 − p_e), from 2 × 2 counts; NaN when undefined."""
    tp, fn, tn, fp = (np.asarray(v, dtype=float) for v in (tp, fn, tn, fp))
    n = tp + fn + tn + fp
    with np.errstate(invalid="ignore", divide="ignore"):
        po = (tp + tn) / n
        pe = ((tp + fn) * (tp + fp) + (tn + fp) * (tn + fn)) / n**2
        kappa = (po - pe) / (1.0 - pe)
    return np.where((n > 0) & (pe < 1.0), kappa, np.nan)


def epoch_agreement(
    psg_sleep: np.ndarray, act_sleep: np.ndarray, valid: np.ndarray | None = None
) -> dict:
    """Sensitivity, specificity, accuracy and Cohen's kappa of actigraphy sleep/wake vs PSG.

    Sensitivity = PSG sleep scored sleep by actigraphy, specificity = PSG
    wake scored wake (common practice in actigraphy validation); kappa of
    Cohen 1960. Only epochs where ``valid`` is True count. NaN when a ratio
    has no epochs to divide by.
    """
    psg = np.asarray(psg_sleep, dtype=bool).ravel()
    act = np.asarray(act_sleep, dtype=bool).ravel()
    ok = np.ones(psg.shape, bool) if valid is None else np.asarray(valid, dtype=bool).ravel()
    if not (psg.shape == act.shape == ok.shape):
        raise ValueError(
            "psg_sleep, act_sleep and valid must have one value per epoch, got lengths "
            f"{psg.size}, {act.size} and {ok.size}"
        )
    tp, fn, tn, fp = (int(v) for v in _kappa_parts(psg, act, ok))
    return _stats(tp, fn, tn, fp, float(_kappa(tp, fn, tn, fp)))


def _stats(tp: int, fn: int, tn: int, fp: int, kappa: float) -> dict:
    """The dict of ``epoch_agreement`` from the 2 × 2 counts (Python ints) and kappa."""
    n = tp + fn + tn + fp

    def ratio(a: int, b: int) -> float:
        return a / b if b else _NAN

    return {
        "n_epochs": n,
        "sensitivity": ratio(tp, tp + fn),
        "specificity": ratio(tn, tn + fp),
        "accuracy": ratio(tp + tn, n),
        "kappa": kappa,
    }


def _grid_parts(psg_start, psg_epoch_s, psg_codes, act_start, act_epoch_s, act_sleep,
                act_valid, window):
    """Shared validation: PSG midpoints in seconds after act_start, PSG state and scored mask."""
    codes = np.asarray(psg_codes).ravel()
    act = np.asarray(act_sleep, dtype=bool).ravel()
    act_ok = np.asarray(act_valid, dtype=bool).ravel()
    if act.shape != act_ok.shape:
        raise ValueError(
            f"act_sleep and act_valid must have the same length, got {act.size} and {act_ok.size}"
        )
    if not psg_epoch_s > 0 or not act_epoch_s > 0:
        raise ValueError(
            f"epoch lengths must be positive seconds, got PSG {psg_epoch_s}, actigraphy {act_epoch_s}"
        )
    psg_start, act_start = pd.Timestamp(psg_start), pd.Timestamp(act_start)
    try:
        lag = (psg_start - act_start).total_seconds()
    except TypeError as exc:
        raise ValueError(
            "PSG and actigraphy start times must both carry a time zone or both be naive "
            f"(got {psg_start} and {act_start})"
        ) from exc
    mid = lag + (np.arange(codes.size) + 0.5) * float(psg_epoch_s)
    psg_sleep = (codes >= _N1) & (codes <= _SLEEP)  # sleepfuse.model.stages.is_sleep (tested equal)
    scored = psg_sleep | (codes == _WAKE)
    if window is not None:
        lo, hi = (pd.Timestamp(t) for t in window)
        try:
            lo_s, hi_s = (lo - act_start).total_seconds(), (hi - act_start).total_seconds()
        except TypeError as exc:
            raise ValueError("window times must match the recordings' time-zone awareness") from exc
        scored = scored & (mid >= lo_s) & (mid < hi_s)
    return mid, psg_sleep, scored, act, act_ok


def _lookup(mid, offsets_s, act_epoch_s, act, act_ok):
    """Actigraphy state and validity at each PSG midpoint, one row per offset."""
    # Tiny tolerance so float error never moves a midpoint lying on a boundary to the earlier epoch.
    j = np.floor((mid[None, :] - np.asarray(offsets_s, float)[:, None]) / act_epoch_s + 1e-9)
    inside = (j >= 0) & (j < act.size)
    j = np.clip(j, 0, max(act.size - 1, 0)).astype(np.intp)
    if act.size == 0:
        return np.zeros(j.shape, bool), np.zeros(j.shape, bool)
    return act[j] & inside, act_ok[j] & inside


def common_grid(
    psg_start: pd.Timestamp,
    psg_epoch_s: float,
    psg_codes: np.ndarray,
    act_start: pd.Timestamp,
    act_epoch_s: float,
    act_sleep: np.ndarray,
    act_valid: np.ndarray,
    *,
    window: tuple[pd.Timestamp, pd.Timestamp] | None = None,
    offset_s: float = 0.0,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """PSG sleep, actigraphy sleep and validity on the PSG's epoch grid in absolute time.

    Each PSG epoch takes the state of the actigraphy epoch containing its
    midpoint, the actigraph clock shifted by ``offset_s`` (added to
    actigraphy times). Valid = PSG epoch scored (wake or sleep), the
    actigraphy epoch exists and is valid, and the PSG midpoint lies in
    ``window`` [start, end) when given (PSG clock).
    """
    mid, psg_sleep, scored, act, act_ok = _grid_parts(
        psg_start, psg_epoch_s, psg_codes, act_start, act_epoch_s, act_sleep, act_valid, window
    )
    a, ok = _lookup(mid, [offset_s], float(act_epoch_s), act, act_ok)
    return psg_sleep, a[0], scored & ok[0]


def _shift_counts(mid, psg_sleep, act_epoch_s, act, act_ok, k_max):
    """The 2 × 2 table (tp, fn, tn, fp) at every offset k·act_epoch_s, k = −k_max..k_max.

    Shifting the actigraph clock by k epochs moves every PSG midpoint's
    actigraphy epoch from j to j − k, so each count is a cross-correlation of
    per-epoch PSG tallies (scored epochs, PSG-sleep epochs per actigraphy
    epoch) with the actigraphy series: O(epochs × offsets) integer
    multiply-adds in C, exact. Each count at offset k is what ``common_grid``
    with ``offset_s = k·act_epoch_s`` counts (tests/test_fusion_epochs.py).
    """
    n_off = 2 * k_max + 1
    zeros = np.zeros(n_off, dtype=np.int64)
    if mid.size == 0 or act.size == 0:
        return zeros, zeros.copy(), zeros.copy(), zeros.copy()
    j0 = np.floor(mid / act_epoch_s + 1e-9).astype(np.int64)
    lo, hi = int(j0.min()), int(j0.max())
    n_psg_at = np.bincount(j0 - lo, minlength=hi - lo + 1)  # scored PSG epochs per actigraphy epoch
    sleep_at = np.bincount(j0 - lo, weights=psg_sleep, minlength=hi - lo + 1).astype(np.int64)

    def window(series: np.ndarray) -> np.ndarray:
        """series[lo − k_max .. hi + k_max] as int64, 0 outside the recording."""
        out = np.zeros(hi - lo + 1 + 2 * k_max, dtype=np.int64)
        a, b = max(lo - k_max, 0), min(hi + k_max + 1, series.size)
        if a < b:
            out[a - (lo - k_max): b - (lo - k_max)] = series[a:b]
        return out

    ok_w = window(act_ok)
    a_ok_w = window(act & act_ok)
    # np.correlate(w, c, "valid")[m] = sum_t w[m + t]·c[t]; offset k is m = k_max − k
    n_ok = np.correlate(ok_w, n_psg_at, "valid")[::-1]
    n_psg = np.correlate(ok_w, sleep_at, "valid")[::-1]
    n_act = np.correlate(a_ok_w, n_psg_at, "valid")[::-1]
    tp = np.correlate(a_ok_w, sleep_at, "valid")[::-1]
    fn, fp = n_psg - tp, n_act - tp
    return tp, fn, n_ok - n_psg - fp, fp


def best_clock_offset(
    psg_start: pd.Timestamp,
    psg_epoch_s: float,
    psg_codes: np.ndarray,
    act_start: pd.Timestamp,
    act_epoch_s: float,
    act_sleep: np.ndarray,
    act_valid: np.ndarray,
    *,
    window: tuple[pd.Timestamp, pd.Timestamp] | None = None,
    max_offset_min: float = 30.0,
) -> dict:
    """Clock offset (s, added to actigraphy times) that maximises epoch-by-epoch kappa.

    Every whole actigraphy epoch within ±max_offset_min is tried; ties go to
    the smallest |offset|, then the earlier one. Returns offset_s,
    kappa_at_zero, kappa_at_best, n_offsets (common practice: a search, not
    a published estimator). offset_s is NaN when kappa is undefined at every
    offset.
    """
    mid, psg_sleep, scored, act, act_ok = _grid_parts(
        psg_start, psg_epoch_s, psg_codes, act_start, act_epoch_s, act_sleep, act_valid, window
    )
    k_max = _offset_steps(max_offset_min, act_epoch_s)
    counts = _shift_counts(mid[scored], psg_sleep[scored], float(act_epoch_s), act, act_ok, k_max)
    return _pick_offset(_kappa(*counts), np.arange(-k_max, k_max + 1) * float(act_epoch_s), k_max)


def _offset_steps(max_offset_min: float, act_epoch_s: float) -> int:
    """Whole actigraphy epochs searched on each side of zero."""
    if not 0 <= max_offset_min <= 1e6:
        raise ValueError(f"max_offset_min must be between 0 and 1e6 minutes, got {max_offset_min!r}")
    return int(np.floor(max_offset_min * 60.0 / float(act_epoch_s) + 1e-9))


def _pick_offset(kappas: np.ndarray, offsets: np.ndarray, k_max: int) -> dict:
    """The result of ``best_clock_offset`` from kappa at every offset (offsets[k_max] is 0)."""
    zero = int(k_max)
    out = {"offset_s": _NAN, "kappa_at_zero": float(kappas[zero]), "kappa_at_best": _NAN,
           "n_offsets": int(offsets.size)}
    if np.all(np.isnan(kappas)):
        return out
    best_kappa = np.nanmax(kappas)
    ties = np.flatnonzero(kappas >= best_kappa - 1e-12)
    pick = ties[np.lexsort((offsets[ties], np.abs(offsets[ties])))[0]]
    out["offset_s"] = float(offsets[pick])
    out["kappa_at_best"] = float(kappas[pick])
    return out


def night_agreement(
    psg_start, psg_epoch_s, psg_codes, act_start, act_epoch_s, act_sleep, act_valid, *,
    window, max_offset_min: float,
) -> tuple[dict, tuple[int, int, int, int], dict] | None:
    """A night's epoch agreement at the files' clocks, its 2 × 2 counts, and ``best_clock_offset``.

    One offset search gives all three: offset 0 is one of the searched
    offsets, where each scored PSG midpoint falls in the actigraphy epoch
    that ``common_grid`` takes, so the counts there are ``epoch_agreement``'s
    (tests/test_fusion_epochs.py). Returns None when no epoch is valid at
    offset 0.
    """
    step = float(act_epoch_s)
    mid, psg_sleep, scored, act, act_ok = _grid_parts(
        psg_start, psg_epoch_s, psg_codes, act_start, act_epoch_s, act_sleep, act_valid, window
    )
    k_max = _offset_steps(max_offset_min, step)
    offsets = np.arange(-k_max, k_max + 1) * step
    counts = _shift_counts(mid[scored], psg_sleep[scored], step, act, act_ok, k_max)
    zero = tuple(int(v[k_max]) for v in counts)
    if sum(zero) == 0:
        return None
    kappas = _kappa(*counts)
    return _stats(*zero, float(kappas[k_max])), zero, _pick_offset(kappas, offsets, k_max)
