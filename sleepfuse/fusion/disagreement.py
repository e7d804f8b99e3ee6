"""Nights ranked by how far two instruments disagree on one parameter, with the likely reason.

The ranking is what a research assistant spot-checks first. Differences are
test − reference (as in agreement.csv). Each night's difference is set
against the study's Bland–Altman limits of agreement for that parameter and
pair (Bland & Altman 1986, Lancet 1:307-310): ``loa_ratio`` =
(difference − bias) / ((loa_high − loa_low) / 2), so |loa_ratio| > 1 means the
night lies beyond the limits. The additive limits are used for every
parameter (also the right-skewed ones, whose ratio limits agreement.csv
reports as well), so the ratio reads the same way everywhere.

Nights whose two values share their source (``pairs.SHARED_SOURCE``, e.g.
diary − actigraphy TIB when the actigraphy window is the diary's) agree by
construction and are never ranked.

Likely reasons, checked in this order and all listed when several apply:

- ``non-wear``: the pair involves actigraphy and that night's actigraphy row
  has off-wrist minutes inside the sleep opportunity (``offwrist_min`` > 0);
- ``no lights markers``: the pair involves PSG and the PSG window does not
  come from the lights off/on markers;
- ``clock offset``: the pair involves actigraphy and the epoch-by-epoch
  comparison flagged a large best-fit clock shift on that night
  (``offset_flag`` of epochs_agreement);
- ``diary outlier``: the pair involves the diary and the diary's value lies
  more than ``outlier_mad`` (default 3) scaled median absolute deviations
  from the median of all included diary nights of the study for that
  parameter; MAD scaled by 1.4826 so it estimates the SD under normality
  (robust outlier rule as recommended by Leys et al. 2013, J Exp Soc Psychol
  49:764-766, from memory). With MAD = 0 no diary value is called an outlier.
"""

from __future__ import annotations

import math
from typing import Iterable

import numpy as np
import pandas as pd

from .pairs import SHARED_SOURCE, paired_nights, shared_parameters

PSG_MARKER_RULE = "lights off/on markers"
MAD_SCALE = 1.4826  # 1 / Phi^-1(3/4): MAD -> SD under normality
DISAGREEMENT_COLUMNS = [
    "participant", "night", "test_value", "reference_value", "difference", "abs_difference",
    "loa_ratio", "beyond_loa", "reason",
]
REASONS = ("non-wear", "no lights markers", "clock offset", "diary outlier")


def diary_outliers(nights: pd.DataFrame, parameter: str, *, outlier_mad: float = 3.0) -> set[tuple[str, str]]:
    """(participant, night) of included diary nights whose value is > outlier_mad scaled MADs from the study median."""
    if nights.empty or parameter not in nights.columns:
        return set()
    d = nights[(nights["source"] == "diary") & nights["included"]]
    values = d[parameter].to_numpy(float)
    ok = np.isfinite(values)
    if ok.sum() < 3:
        return set()
    med = float(np.median(values[ok]))
    mad = MAD_SCALE * float(np.median(np.abs(values[ok] - med)))
    if not mad > 0:
        return set()
    far = ok & (np.abs(values - med) > outlier_mad * mad)
    return set(zip(d["participant"].to_numpy()[far], d["night"].to_numpy()[far]))


def _limits(agreement: pd.DataFrame | None, pair: str, parameter: str) -> tuple[float, float, float]:
    if agreement is None or agreement.empty:
        return math.nan, math.nan, math.nan
    row = agreement[(agreement["pair"] == pair) & (agreement["parameter"] == parameter)]
    if row.empty:
        return math.nan, math.nan, math.nan
    r = row.iloc[0]
    return float(r["bias"]), float(r["loa_low"]), float(r["loa_high"])


def rank_disagreements(
    nights: pd.DataFrame,
    test: str,
    reference: str,
    parameter: str,
    *,
    agreement: pd.DataFrame | None = None,
    epoch_rows: Iterable[dict] | pd.DataFrame | None = None,
    by: str = "relative",
    outlier_mad: float = 3.0,
) -> pd.DataFrame:
    """All paired nights of (test, reference) ranked by disagreement on ``parameter``, largest first.

    ``agreement`` is the agreement table (for the limits); without it or with
    too few nights for limits, ``loa_ratio`` is NaN and the ranking falls back
    to the absolute difference. ``by`` is "relative" (|loa_ratio|) or
    "absolute" (|difference|, in the parameter's unit).
    """
    if by not in ("relative", "absolute"):
        raise ValueError(f"by must be 'relative' or 'absolute', got {by!r}")
    if parameter not in shared_parameters(test, reference):
        raise ValueError(f"{parameter!r} is not reported by both {test} and {reference}")
    if nights.empty:
        return pd.DataFrame(columns=DISAGREEMENT_COLUMNS)
    paired = paired_nights(nights, test, reference)
    t = paired[f"{parameter}_test"].to_numpy(float)
    r = paired[f"{parameter}_ref"].to_numpy(float)
    ok = np.isfinite(t) & np.isfinite(r) & ~_identical_by_construction(nights, paired, test, reference, parameter)
    paired, t, r = paired[ok], t[ok], r[ok]
    diff = t - r
    bias, low, high = _limits(agreement, f"{test}-{reference}", parameter)
    half = (high - low) / 2.0
    if np.isfinite(half) and half > 0:
        ratio = (diff - bias) / half
        beyond = (diff < low) | (diff > high)
    else:
        ratio = np.full(diff.size, np.nan)
        beyond = np.zeros(diff.size, dtype=bool)
    out = pd.DataFrame({
        "participant": paired["participant"].to_numpy(object),
        "night": paired["night"].to_numpy(object),
        "test_value": t, "reference_value": r, "difference": diff, "abs_difference": np.abs(diff),
        "loa_ratio": ratio, "beyond_loa": beyond,
    })
    out["reason"] = _reasons(nights, out, test, reference, parameter, epoch_rows, outlier_mad)
    key = np.abs(ratio) if by == "relative" and np.isfinite(ratio).any() else np.abs(diff)
    order = np.lexsort((-np.abs(diff), -np.nan_to_num(key, nan=-np.inf)))
    return out.iloc[order].reset_index(drop=True)[DISAGREEMENT_COLUMNS]


def _identical_by_construction(nights: pd.DataFrame, paired: pd.DataFrame, test: str, reference: str,
                                parameter: str) -> np.ndarray:
    """Paired nights whose two values share their source (pairs.SHARED_SOURCE): never ranked."""
    found = SHARED_SOURCE.get((test, reference, parameter))
    if found is None or "window_rule" not in nights.columns or paired.empty:
        return np.zeros(len(paired), dtype=bool)
    source, rule, _ = found
    rows = nights[(nights["source"] == source) & (nights["window_rule"] == rule)]
    shared = set(zip(rows["participant"], rows["night"]))
    return np.array([k in shared for k in zip(paired["participant"], paired["night"])], dtype=bool)


def _reasons(nights: pd.DataFrame, ranked: pd.DataFrame, test: str, reference: str, parameter: str,
             epoch_rows, outlier_mad: float) -> list[str]:
    sources = {test, reference}
    keys = list(zip(ranked["participant"], ranked["night"]))
    found: dict[tuple[str, str], list[str]] = {k: [] for k in keys}
    by_source = {s: nights[nights["source"] == s].set_index(["participant", "night"]) for s in sources}
    if "actigraphy" in sources:
        offwrist = by_source["actigraphy"]["offwrist_min"]
        for k in keys:
            v = offwrist.get(k, math.nan)
            if np.isfinite(v) and v > 0:
                found[k].append(f"non-wear ({v:.0f} min)")
    if "psg" in sources:
        rule = by_source["psg"]["window_rule"]
        for k in keys:
            if k in rule.index and rule.get(k) != PSG_MARKER_RULE:
                found[k].append("no lights markers")
    if "actigraphy" in sources and epoch_rows is not None:
        erows = pd.DataFrame(epoch_rows)
        if not erows.empty:
            flagged = erows[erows["offset_flag"].astype(bool)]
            shift = dict(zip(zip(flagged["participant"], flagged["night"]), flagged["clock_offset_min"]))
            for k in keys:
                if k in shift:
                    found[k].append(f"clock offset ({shift[k]:+.0f} min)")
    if "diary" in sources:
        outliers = diary_outliers(nights, parameter, outlier_mad=outlier_mad)
        for k in keys:
            if k in outliers:
                found[k].append("diary outlier")
    return ["; ".join(found[k]) for k in keys]
