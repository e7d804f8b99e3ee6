"""Actigraphy sleep/wake scoring on 1-min activity counts (SLEEP_PARAMETERS.md).

Published algorithms, each named by its paper:

- Cole–Kripke (Cole, Kripke, Gruen, Mullaney & Gillin 1992, *Sleep*
  15:461–469) with the Webster rescoring rules (Webster et al. 1982, *Sleep*
  5:389–399, as applied by Cole & Kripke 1992);
- Sadeh (Sadeh, Sharkey & Carskadon 1994, *Sleep* 17:201–207).

Both are defined on 1-min epochs; shorter epochs are summed into minutes
first (:func:`epochs_to_minutes`, common practice). Every function is a pure,
vectorised function of numpy arrays; NaN marks a missing minute.

What was checked and what stays from memory
-------------------------------------------
The published papers are not in the project library; the formulas were
checked against secondary descriptions of the papers found with the
project's search tool:

- Cole–Kripke 1-min set "1min-p0.001" (P = 0.001; weights 106, 54, 58, 76,
  230, 74, 67 on A₋₄ … A₊₂; D ≥ 1 → wake; zero-padding at the series edges):
  CONFIRMED by a secondary description of the 1992 paper.
- Cole–Kripke set "1min-p0.00001" (P = 0.00001; 404, 598, 326, 441, 1408,
  508, 350): NOT confirmed, FROM MEMORY.
- Webster rescoring rules: NOT confirmed, FROM MEMORY (see
  :func:`webster_rescore` for the exact reading implemented).
- Sadeh 1994 (PS = 7.601 − 0.065·MW₅ − 1.08·NAT − 0.056·SD₆ − 0.703·LG;
  11-min centred window for MW₅ and NAT, 50 ≤ count < 100 for NAT, SD over
  the epoch and the five before it, LG = ln(count + 1), PS ≥ 0 → sleep):
  CONFIRMED by a secondary description of the 1994 paper. The cap of 300
  counts, the SD's degrees of freedom and the edge handling are NOT stated
  there: cap FROM MEMORY; ddof and edges are our documented choices.

The device counts must be in the units the paper's coefficients expect. The
two algorithms were fitted on different devices and count modes, so each has
its own scale (study.toml ``[actigraphy] cole_kripke_scale``, ``sadeh_scale``;
unset, both take the shared ``count_scale``); the scale used is stated in the
provenance of every run.

Missing minutes (NaN) and non-wear minutes are neither sleep nor wake in
every rule (SLEEP_PARAMETERS.md): Webster rescoring never treats them as
wake (:func:`webster_rescore`), Sadeh's windows leave them out.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from .minutes import _as_1d_float, _as_counts, epochs_to_minutes  # noqa: F401 (epochs_to_minutes: public here too)
from .runs import fill_runs, runs

if TYPE_CHECKING:  # pragma: no cover
    from sleepfuse.model.config import ActigraphySection

# set name -> (P, (w-4, w-3, w-2, w-1, w0, w+1, w+2)); Cole et al. 1992, 1-min epochs.
COLE_KRIPKE_COEFFICIENTS: dict[str, tuple[float, tuple[float, ...]]] = {
    # Confirmed against a secondary description of Cole et al. 1992.
    "1min-p0.001": (0.001, (106.0, 54.0, 58.0, 76.0, 230.0, 74.0, 67.0)),
    # From memory (not confirmed).
    "1min-p0.00001": (0.00001, (404.0, 598.0, 326.0, 441.0, 1408.0, 508.0, 350.0)),
}
_CK_BEFORE, _CK_AFTER = 4, 2

# Webster rescoring rules (Webster et al. 1982 as used by Cole et al. 1992; from memory).
# "After wake": (minimum wake run, minutes; the next k minutes of sleep become wake).
WEBSTER_AFTER_WAKE: tuple[tuple[int, int], ...] = ((4, 1), (10, 3), (15, 4))
# "Flanked": (longest sleep run, minutes; minimum wake run on each side, minutes).
WEBSTER_FLANKED: tuple[tuple[int, int], ...] = ((6, 10), (10, 20))

# Sadeh et al. 1994 discriminant function (confirmed against a secondary description).
SADEH_OFFSET = 7.601
SADEH_WEIGHTS = {"mw5": -0.065, "nat": -1.08, "sd6": -0.056, "lg": -0.703}
SADEH_HALF_WINDOW = 5  # MW5 / NAT window: the epoch ± 5 epochs (11 min)
SADEH_SD_WINDOW = 6  # SD over the epoch and the five before it


def cole_kripke_index(
    counts_1min: np.ndarray, *, coefficients: str = "1min-p0.001", count_scale: float = 1.0
) -> np.ndarray:
    """Cole–Kripke activity index D per minute (Cole et al. 1992, 1-min epochs).

    D(t) = P · Σ wₖ · s·A(t+k), k = −4 … +2, where s = ``count_scale``.
    Edges: neighbours beyond the ends of the series are counted as 0 counts
    (zero-padding); a missing (NaN) neighbour inside the series is likewise
    counted as 0. D is NaN at a minute whose own count is NaN or infinite
    (infinite counts are missing), and wherever D itself overflows.
    """
    if coefficients not in COLE_KRIPKE_COEFFICIENTS:
        raise ValueError(
            f"unknown Cole–Kripke coefficient set {coefficients!r}; "
            f"allowed: {', '.join(COLE_KRIPKE_COEFFICIENTS)}"
        )
    if not 0 < count_scale < np.inf:
        raise ValueError(f"count_scale must be a positive number, got {count_scale!r}")
    a = _as_counts(counts_1min, "counts_1min")
    missing = np.isnan(a)
    p, w = COLE_KRIPKE_COEFFICIENTS[coefficients]
    n = a.size
    scale = float(count_scale)
    # The scaled counts written straight into the zero-padded buffer: the same
    # values as zero-padding where(missing, 0, a)·scale (a missing minute gets
    # 0·scale, as there), without the two temporaries.
    padded = np.zeros(_CK_BEFORE + n + _CK_AFTER)
    body = padded[_CK_BEFORE : _CK_BEFORE + n]
    any_missing = bool(missing.any())
    with np.errstate(over="ignore", invalid="ignore"):  # D beyond float range: missing (below)
        np.multiply(a, scale, out=body)
        if any_missing:
            body[missing] = 0.0 * scale
        # correlate: out[t] = Σ_j padded[t + j] · w[j] = Σ_k w_k · A[t + k], k = j − 4.
        d = np.correlate(padded, np.asarray(w), mode="valid")
        d *= p  # the products p·x, in place
    if any_missing:
        d[missing] = np.nan
    d[np.isinf(d)] = np.nan
    return d


WEBSTER_ORDERS = ("sequential", "parallel")


def _neighbour_wake(lengths: np.ndarray, values: np.ndarray, idx: np.ndarray, step: int) -> np.ndarray:
    """Length of the wake run right before (step −1) or after (step +1) each run ``idx``; 0 if that
    neighbour is sleep, a missing stretch or the end of the series (neither is wake)."""
    j = idx + step
    inside = (j >= 0) & (j < lengths.size)
    jj = np.clip(j, 0, lengths.size - 1)
    return np.where(inside & (values[jj] == _WAKE), lengths[jj], 0)


_WAKE, _SLEEP, _UNKNOWN = 0, 1, 2


def webster_rescore(sleep: np.ndarray, unknown: np.ndarray | None = None, *, order: str = "sequential") -> np.ndarray:
    """Webster rescoring rules on a 1-min sleep (True) / wake (False) series.

    Rules (Webster et al. 1982 as applied by Cole et al. 1992; from memory):

    1. after ≥ 4 min of wake, the next 1 min of sleep → wake;
    2. after ≥ 10 min of wake, the next 3 min of sleep → wake;
    3. after ≥ 15 min of wake, the next 4 min of sleep → wake;
    4. a sleep run of ≤ 6 min with ≥ 10 min of wake on each side → wake;
    5. a sleep run of ≤ 10 min with ≥ 20 min of wake on each side → wake.

    Reading implemented: rules 1–3 look at the wake runs of the original
    scoring; of the rules that apply to a wake run the largest k wins, and
    the first min(k, run length) minutes of the sleep run that follows are
    rescored. ``order`` (``[actigraphy] webster_order``; the paper's order
    is not checked, from memory): "sequential" (default) judges rules 4–5
    once, together, on the runs left by rules 1–3; "parallel" judges them on
    the original runs (this keeps more sleep on restless nights). Not iterated.

    ``unknown`` minutes (missing counts, non-wear) are neither sleep nor
    wake in every rule: they are never rescored, a wake run ends at them,
    and a sleep run next to them has no wake on that side. The ends of the
    series are not wake either. Returns sleep with unknown minutes False.
    """
    if order not in WEBSTER_ORDERS:
        raise ValueError(f"webster order must be one of {', '.join(WEBSTER_ORDERS)}, got {order!r}")
    s = np.asarray(sleep, dtype=bool)
    if s.ndim != 1:
        raise ValueError(f"sleep must be a 1-D array, got shape {s.shape}")
    state = s.astype(np.int8)
    if unknown is not None:
        u = np.asarray(unknown, dtype=bool)
        if u.shape != s.shape:
            raise ValueError(f"unknown must have the shape of sleep, got {u.shape} and {s.shape}")
        state[u] = _UNKNOWN
    out = state == _SLEEP
    if s.size == 0:
        return out
    start, length, value = runs(state)
    sl = np.flatnonzero(value == _SLEEP)
    if sl.size == 0:
        return out
    # Rules 1-3: k minutes at the head of each sleep run after a qualifying wake run.
    prev_wake = _neighbour_wake(length, value, sl, -1)
    k_after = np.zeros(sl.size, dtype=np.intp)
    for min_wake, k in WEBSTER_AFTER_WAKE:  # ascending k: later rules override
        k_after = np.where(prev_wake >= min_wake, k, k_after)
    cut = np.minimum(k_after, length[sl])
    fill_runs(out, start[sl], cut, False)
    # Rules 4-5 on the runs left by rules 1-3 (sequential) or on the original runs (parallel).
    judged = state if order == "parallel" else np.where(state == _SLEEP, out.astype(np.int8), state)
    start2, length2, value2 = runs(judged)
    sl2 = np.flatnonzero(value2 == _SLEEP)
    before = _neighbour_wake(length2, value2, sl2, -1)
    after = _neighbour_wake(length2, value2, sl2, +1)
    flanked = np.zeros(sl2.size, dtype=bool)
    for max_sleep, min_wake in WEBSTER_FLANKED:
        flanked |= (length2[sl2] <= max_sleep) & (before >= min_wake) & (after >= min_wake)
    fill_runs(out, start2[sl2][flanked], length2[sl2][flanked], False)
    return out


def cole_kripke(
    counts_1min: np.ndarray,
    *,
    coefficients: str = "1min-p0.001",
    count_scale: float = 1.0,
    webster: bool = True,
    webster_order: str = "sequential",
    unknown: np.ndarray | None = None,
) -> np.ndarray:
    """Sleep (True) per minute by Cole–Kripke 1992: D < 1 → sleep, D ≥ 1 → wake.

    Webster rescoring (:func:`webster_rescore`, ``webster_order``) follows
    when ``webster``; missing (NaN) minutes and ``unknown`` minutes (e.g.
    non-wear) are neither sleep nor wake in it, and come back False (the
    caller masks them).
    """
    d = cole_kripke_index(counts_1min, coefficients=coefficients, count_scale=count_scale)
    missing = np.isnan(d)
    if unknown is not None:
        missing = missing | np.asarray(unknown, dtype=bool)
    sleep = (d < 1.0) & ~missing  # NaN compares False
    return webster_rescore(sleep, missing, order=webster_order) if webster else sleep


def _window_sums(x: np.ndarray, before: int, after: int) -> np.ndarray:
    """Σ x[t−before … t+after] over the part of the window inside the series."""
    c = np.concatenate(([0.0], np.cumsum(x)))
    n = x.size
    idx = np.arange(n)
    lo = np.clip(idx - before, 0, n)
    hi = np.clip(idx + after + 1, 0, n)
    return c[hi] - c[lo]


def sadeh_terms(counts_1min: np.ndarray, *, cap: float = 300.0) -> dict[str, np.ndarray]:
    """The terms of Sadeh et al. 1994 per minute, on counts capped at ``cap``.

    - ``mw5``: mean count over the 11-min window centred on the epoch;
    - ``nat``: number of epochs in that window with 50 ≤ count < 100;
    - ``sd6``: sample standard deviation (ddof = 1) of the epoch and the five
      before it;
    - ``lg``: ln(count + 1) of the epoch;
    - ``ps``: 7.601 − 0.065·mw5 − 1.08·nat − 0.056·sd6 − 0.703·lg.

    Edges and gaps (our choice, documented): windows are truncated at the
    ends of the series and NaN minutes are left out of them, so mw5 and sd6
    use the minutes available; sd6 is 0 when only one minute is available.
    ``lg`` and ``ps`` are NaN at a NaN minute.
    """
    if not cap > 0:
        raise ValueError(f"cap must be a positive number of counts, got {cap!r}")
    a = _as_counts(counts_1min, "counts_1min")
    missing = np.isnan(a)
    x = np.where(missing, 0.0, np.minimum(a, float(cap)))
    ok = (~missing).astype(float)
    h = SADEH_HALF_WINDOW
    n_win = _window_sums(ok, h, h)
    with np.errstate(invalid="ignore", divide="ignore"):
        mw5 = np.where(n_win > 0, _window_sums(x, h, h) / n_win, np.nan)
    nat = _window_sums(((x >= 50) & (x < 100) & ~missing).astype(float), h, h)
    b = SADEH_SD_WINDOW - 1
    n6 = _window_sums(ok, b, 0)
    s1 = _window_sums(x, b, 0)
    s2 = _window_sums(x * x, b, 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        var = (s2 - s1 * s1 / n6) / (n6 - 1)
    sd6 = np.where(n6 > 1, np.sqrt(np.clip(var, 0.0, None)), np.where(n6 == 1, 0.0, np.nan))
    lg = np.where(missing, np.nan, np.log(x + 1.0))
    w = SADEH_WEIGHTS
    ps = SADEH_OFFSET + w["mw5"] * mw5 + w["nat"] * nat + w["sd6"] * sd6 + w["lg"] * lg
    return {"mw5": mw5, "nat": nat, "sd6": sd6, "lg": lg, "ps": ps}


def sadeh(counts_1min: np.ndarray, *, cap: float = 300.0) -> np.ndarray:
    """Sleep (True) per minute by Sadeh et al. 1994: PS ≥ 0 → sleep; NaN minutes → wake."""
    ps = sadeh_terms(counts_1min, cap=cap)["ps"]
    return ps >= 0.0  # NaN compares False -> wake


def score_sleep_wake(counts: np.ndarray, epoch_s: float, settings: "ActigraphySection",
                     unknown: np.ndarray | None = None) -> np.ndarray:
    """Sleep (True) per MINUTE from raw epoch counts, by the study's algorithm.

    Sums epochs into minutes, multiplies by the algorithm's count scale
    (``settings.scale_for``: ``cole_kripke_scale`` / ``sadeh_scale``, else
    ``count_scale``) and runs Cole–Kripke (+ Webster when ``settings.webster``,
    in ``settings.webster_order``) or Sadeh (cap ``settings.sadeh_cap``).
    NaN minutes and ``unknown`` minutes (per minute, e.g. non-wear) are
    neither sleep nor wake in the Webster rules; they come back False and
    the caller masks them.
    """
    minutes = epochs_to_minutes(counts, epoch_s)
    algorithm = settings.algorithm
    scale = settings.scale_for(algorithm)
    if algorithm == "cole-kripke":
        return cole_kripke(
            minutes,
            coefficients=settings.coefficients,
            count_scale=scale,
            webster=settings.webster,
            webster_order=settings.webster_order,
            unknown=None if unknown is None else np.asarray(unknown, dtype=bool)[: minutes.size],
        )
    if algorithm == "sadeh":
        if not scale > 0:
            raise ValueError(f"count scale must be a positive number, got {scale!r}")
        return sadeh(minutes * float(scale), cap=settings.sadeh_cap)
    raise ValueError(f"unknown actigraphy algorithm {algorithm!r}; allowed: cole-kripke, sadeh")


WEBSTER_ORDER_TEXT = {
    "sequential": "rules 4-5 judge the sleep runs left after rules 1-3 (from memory; the paper's order is not checked)",
    "parallel": "rules 4-5 judge the original sleep runs, as rules 1-3 do (from memory; the paper's order is not checked)",
}
MISSING_RULE = "missing and non-wear minutes are neither sleep nor wake in every rule (never rescored, never a wake flank)"


def algorithm_provenance(settings: "ActigraphySection") -> dict:
    """The sleep/wake algorithm of a run as provenance.json states it: coefficients, count scale, rules."""
    algorithm = settings.algorithm
    out = {"actigraphy_algorithm": algorithm, "count_scale": settings.scale_for(algorithm),
           "count_scale_key": _scale_key(settings, algorithm), "nonwear": settings.nonwear,
           "missing_minutes": MISSING_RULE}
    if algorithm == "cole-kripke":
        p, weights = COLE_KRIPKE_COEFFICIENTS[settings.coefficients]
        out.update(coefficient_set=settings.coefficients, P=p, weights_minus4_to_plus2=list(weights),
                   webster_rescoring=settings.webster, reference="Cole, Kripke et al. 1992, Sleep 15:461-469")
        if settings.webster:
            out.update(webster_order=settings.webster_order, webster_order_reading=WEBSTER_ORDER_TEXT[settings.webster_order],
                       webster_reference="Webster et al. 1982, Sleep 5:389-399, as applied by Cole et al. 1992 (rules from memory)")
    else:
        out.update(sadeh_cap=settings.sadeh_cap, reference="Sadeh, Sharkey & Carskadon 1994, Sleep 17:201-207")
    return out


def _scale_key(settings: "ActigraphySection", algorithm: str) -> str:
    own = "cole_kripke_scale" if algorithm == "cole-kripke" else "sadeh_scale"
    return f"actigraphy.{own}" if getattr(settings, own) > 0 else "actigraphy.count_scale"
