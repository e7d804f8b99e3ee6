"""Sleep parameters of one sleep opportunity from its epoch codes (SLEEP_PARAMETERS.md).

The caller cuts the window [start, end) (lights off to lights on, or tried to
sleep to out of bed) and passes the Stage codes of the epochs inside it. The
definitions follow the AASM scoring manual (total recording time, sleep
latency, TST, sleep efficiency, REM latency) with the sleepfuse conventions
written in SLEEP_PARAMETERS.md: WASO stops at the end of the last sleep epoch
and the wake after it is reported separately as ``terminal_wake_min``;
unscored and off-wrist epochs are neither sleep nor wake.
"""

from __future__ import annotations

import math

import numpy as np

from sleepfuse.model.stages import Stage

from .runs import true_runs

COMMON_PARAMETERS = (
    "tib_min",
    "sol_min",
    "lps_min",
    "tst_min",
    "spt_min",
    "waso_min",
    "terminal_wake_min",
    "se_pct",
    "nwak",
)
STAGE_PARAMETERS = (
    "n1_min",
    "n2_min",
    "n3_min",
    "rem_min",
    "n1_pct",
    "n2_pct",
    "n3_pct",
    "rem_pct",
    "rem_latency_min",
)
EXTRA_PARAMETERS = ("unscored_min", "offwrist_min")

_VALID_CODES = np.array([int(s) for s in Stage])
_CODE_MIN, _CODE_MAX = int(_VALID_CODES.min()), int(_VALID_CODES.max())
# The Stage codes form one contiguous range, so a min/max check equals np.isin (and is much cheaper).
_CODES_CONTIGUOUS = set(_VALID_CODES.tolist()) == set(range(_CODE_MIN, _CODE_MAX + 1))
_WAKE, _N1, _N2, _N3, _REM = int(Stage.WAKE), int(Stage.N1), int(Stage.N2), int(Stage.N3), int(Stage.REM)
_SLEEP, _UNSCORED, _OFFWRIST = int(Stage.SLEEP), int(Stage.UNSCORED), int(Stage.OFFWRIST)
_NAN = float("nan")


def _min_epochs(minutes: float, epoch_min: float, *, at_least: int = 1) -> int:
    """Smallest whole number of epochs spanning at least ``minutes`` (float-safe)."""
    return max(at_least, math.ceil(minutes / epoch_min - 1e-9))


def _check_options(epoch_s: float, lps_run_min: float, min_wake_bout_min: float) -> None:
    if not epoch_s > 0:
        raise ValueError(f"epoch_s must be a positive number of seconds, got {epoch_s!r}")
    if not lps_run_min > 0:
        raise ValueError(f"lps_run_min must be a positive number of minutes, got {lps_run_min!r}")
    if not min_wake_bout_min >= 0:
        raise ValueError(f"min_wake_bout_min must be zero or more minutes, got {min_wake_bout_min!r}")


def _check_codes(codes: np.ndarray) -> np.ndarray:
    codes = np.asarray(codes)
    if codes.ndim != 1:
        raise ValueError(f"stage codes must be a 1-D array, got shape {codes.shape}")
    if codes.size and not np.issubdtype(codes.dtype, np.integer):
        if not np.all(np.isfinite(codes)) or np.any(codes != np.round(codes)):
            raise ValueError("stage codes must be integers (sleepfuse.model.stages.Stage values)")
    codes = codes.astype(np.int16, copy=False)
    if _CODES_CONTIGUOUS and (codes.size == 0 or (int(codes.min()) >= _CODE_MIN and int(codes.max()) <= _CODE_MAX)):
        return codes
    bad = ~np.isin(codes, _VALID_CODES)
    if bad.any():
        raise ValueError(
            f"unknown stage code(s) {sorted(set(codes[bad].tolist()))}; "
            f"allowed: {sorted(_VALID_CODES.tolist())} (sleepfuse.model.stages.Stage)"
        )
    return codes


def sleep_parameters(
    codes: np.ndarray,
    epoch_s: float,
    *,
    staged: bool = False,
    lps_run_min: float = 10.0,
    min_wake_bout_min: float = 0.0,
) -> dict[str, float]:
    """Standard sleep parameters (minutes, %, counts) of one sleep opportunity.

    ``codes``: Stage codes of the epochs in [start, end); ``epoch_s``: epoch
    length in seconds. Returns COMMON_PARAMETERS + ``unscored_min`` +
    ``offwrist_min``, and STAGE_PARAMETERS when ``staged`` (PSG).

    Definitions (AASM manual; SLEEP_PARAMETERS.md):

    - tib = n · epoch / 60 (total recording time of the window);
    - sol = start to the first sleep epoch (N1, N2, N3, R or unstaged S);
    - lps = start to the first epoch of the first run of ≥ ``lps_run_min``
      minutes of uninterrupted sleep (wake, unscored and off-wrist interrupt);
    - tst = sleep epochs; spt = first sleep epoch to end of last sleep epoch;
    - waso = wake epochs inside the SPT, so spt = tst + waso + unscored and
      off-wrist epochs inside the SPT;
    - terminal_wake = end of last sleep epoch to the end of the window (a span,
      whatever its epochs hold), so tib = sol + spt + terminal_wake;
    - se = 100 · tst / tib;
    - nwak = maximal runs of consecutive wake epochs inside the SPT lasting
      ≥ max(1 epoch, ``min_wake_bout_min``); an unscored/off-wrist epoch ends a run;
    - stage minutes over the whole window, ``*_pct`` = 100 · stage / tst;
    - rem_latency = first sleep epoch to the first R epoch.

    No sleep at all: tst 0, se 0, spt 0, waso 0, nwak 0 and sol, lps,
    terminal_wake, rem_latency, ``*_pct`` NaN. Empty window: tib 0, all else NaN.

    Computed by ``sleep_parameters_many`` with this one window (one implementation).
    """
    return sleep_parameters_many([codes], epoch_s, staged=staged, lps_run_min=lps_run_min,
                                 min_wake_bout_min=min_wake_bout_min)[0]


def _first_per_window(positions: np.ndarray, window_of: np.ndarray, m: int) -> tuple[np.ndarray, np.ndarray]:
    """For sorted ``positions`` with their (sorted) window numbers: the first position in each of the
    ``m`` windows and whether the window has one at all."""
    lo = window_of.searchsorted(np.arange(m), side="left")
    has = lo < window_of.size
    has[has] = window_of[lo[has]] == has.nonzero()[0]
    first = np.zeros(m, dtype=np.int64)
    first[has] = positions[lo[has]]
    return first, has


def sleep_parameters_many(
    windows,
    epoch_s: float,
    *,
    staged: bool = False,
    lps_run_min: float = 10.0,
    min_wake_bout_min: float = 0.0,
) -> list[dict[str, float]]:
    """The parameters of ``sleep_parameters`` for every window of ``windows``, in one vectorised pass.

    The one implementation of the definitions (``sleep_parameters`` calls it
    with one window). The windows are laid side by side with a separator epoch
    that is neither sleep nor wake, so each window's values do not depend on
    its neighbours (tests/test_scoring_parameters_many.py). Unknown codes in
    any window raise ValueError.
    """
    _check_options(epoch_s, lps_run_min, min_wake_bout_min)
    arrays = [np.asarray(c) for c in windows]
    m = len(arrays)
    if m == 0:
        return []
    for c in arrays:
        if c.ndim != 1:
            raise ValueError(f"stage codes must be a 1-D array, got shape {c.shape}")
    keys = COMMON_PARAMETERS + EXTRA_PARAMETERS + (STAGE_PARAMETERS if staged else ())
    n = np.array([c.size for c in arrays], dtype=np.int64)
    codes = _check_codes(np.concatenate(arrays) if m > 1 else arrays[0])
    ep = float(epoch_s) / 60.0
    # Windows side by side, each followed by one separator epoch that is neither sleep nor wake,
    # so no run of sleep or wake crosses from one window into the next.
    offset = np.zeros(m, dtype=np.int64)  # where each window starts in ``padded``
    np.cumsum(n[:-1] + 1, out=offset[1:])
    padded = np.full(int(n.sum()) + m, _CODE_MIN - 1, dtype=np.int16)
    inside = np.ones(padded.size, dtype=bool)
    inside[offset + n] = False
    padded[inside] = codes
    window_of_epoch = np.repeat(np.arange(m), n)

    width = _CODE_MAX - _CODE_MIN + 1
    tally = np.bincount(window_of_epoch * width + (codes - _CODE_MIN), minlength=m * width).reshape(m, width)

    def count(code: int) -> np.ndarray:
        return tally[:, code - _CODE_MIN]

    nan = np.full(m, _NAN)
    out: dict[str, np.ndarray] = {k: nan for k in keys}
    tib = n * ep
    out["tib_min"] = tib
    empty = n == 0
    n_sleep = sum(count(c) for c in range(_N1, _SLEEP + 1))
    tst = n_sleep * ep

    def some(values: np.ndarray, where: np.ndarray) -> np.ndarray:
        return np.where(where, values, _NAN)

    with np.errstate(divide="ignore", invalid="ignore"):
        out["unscored_min"] = some(count(_UNSCORED).astype(np.float64) * ep, ~empty)
        out["offwrist_min"] = some(count(_OFFWRIST).astype(np.float64) * ep, ~empty)
        out["tst_min"] = some(tst, ~empty)
        out["se_pct"] = some(100.0 * tst / tib, ~empty)
        if staged:
            for key, stage in (("n1", _N1), ("n2", _N2), ("n3", _N3), ("rem", _REM)):
                minutes = count(stage).astype(np.float64) * ep
                out[f"{key}_min"] = some(minutes, ~empty)
                out[f"{key}_pct"] = some(100.0 * minutes / tst, n_sleep > 0)

    slept = n_sleep > 0
    no_sleep = ~empty & ~slept
    sleep = (padded >= _N1) & (padded <= _SLEEP)
    sleep_at = sleep.nonzero()[0]
    sleep_window = offset.searchsorted(sleep_at, side="right") - 1
    first, _ = _first_per_window(sleep_at, sleep_window, m)
    last_pos = sleep_window.searchsorted(np.arange(m), side="right") - 1
    last = np.where(slept, sleep_at[np.maximum(last_pos, 0)] if sleep_at.size else 0, 0)
    first_rel, last_rel = first - offset, last - offset
    out["sol_min"] = some(first_rel * ep, slept)
    out["spt_min"] = np.where(slept, (last_rel + 1 - first_rel) * ep, np.where(no_sleep, 0.0, _NAN))
    out["terminal_wake_min"] = some((n - 1 - last_rel) * ep, slept)

    wake = padded == _WAKE
    wake_before = np.concatenate(([0], np.cumsum(wake, dtype=np.int64)))
    waso = (wake_before[np.where(slept, last + 1, 0)] - wake_before[np.where(slept, first, 0)]).astype(np.float64)
    out["waso_min"] = np.where(slept, waso * ep, np.where(no_sleep, 0.0, _NAN))

    starts, lengths = true_runs(sleep)
    persistent = lengths >= _min_epochs(lps_run_min, ep)
    p_starts = starts[persistent]
    p_first, p_has = _first_per_window(p_starts, offset.searchsorted(p_starts, side="right") - 1, m)
    out["lps_min"] = some((p_first - offset).astype(np.float64) * ep, slept & p_has)

    w_starts, w_lengths = true_runs(wake)
    w_window = offset.searchsorted(w_starts, side="right") - 1
    bout = _min_epochs(min_wake_bout_min, ep) if min_wake_bout_min > 0 else 1
    # a wake run inside the sleep period starts after its first sleep epoch and before its last
    interior = slept[w_window] & (w_starts > first[w_window]) & (w_starts < last[w_window]) & (w_lengths >= bout)
    nwak = np.bincount(w_window[interior], minlength=m).astype(np.float64)
    out["nwak"] = np.where(slept, nwak, np.where(no_sleep, 0.0, _NAN))

    if staged:
        rem_at = (padded == _REM).nonzero()[0]
        rem_first, rem_has = _first_per_window(rem_at, offset.searchsorted(rem_at, side="right") - 1, m)
        out["rem_latency_min"] = some((rem_first - first).astype(np.float64) * ep, slept & rem_has)

    columns = [out[k].tolist() for k in keys]
    return [dict(zip(keys, values)) for values in zip(*columns)]
