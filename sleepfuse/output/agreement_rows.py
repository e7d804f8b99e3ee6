"""Reading a row of agreement.csv for people: which rows are shown, which lines may be drawn, how numbers print.

Shared by the figures (``figures.py``) and the report (``report.py``,
``sections.py``), so both show the same rows the same way. Columns the
nested-nights statistics add (``by_construction``, ``reg_loa_m_min`` /
``reg_loa_m_max``, ``confidence``) are used when present; tables without
them are read as before.
"""

from __future__ import annotations

import math
from typing import Iterator

import numpy as np

from sleepfuse.fusion.agreement import MIN_PAIRS, PROPORTIONAL_P
from sleepfuse.model import numbers

CONFIDENCE = 0.95
"""Confidence level of agreement.csv's intervals when the table does not say (agreement_table's default)."""

_ON_LINE = 0.03
"""Corrected limits within this share of the y-axis span of the ordinary ones are not drawn again
(about 9 pt at the figure's size: two lines that close read as one double line; common practice)."""


def number_text(value, digits: int = 1, *, signed: bool = False) -> str:
    """A number as the figures and the report print it: ``model.numbers`` with the typographic minus."""
    return numbers.format_number(value, digits, signed=signed, minus=numbers.MINUS)


def interval_text(low, high, digits: int = 1) -> str:
    """An interval as the figures and the report print it ("−8.3 to 1.9")."""
    return numbers.format_interval(low, high, digits, minus=numbers.MINUS)


def stat_value(stats: dict, key: str) -> float:
    """A statistic of the row as a float; NaN when absent, blank or not a number."""
    value = stats.get(key)
    if value is None or isinstance(value, (bool, np.bool_)):
        return math.nan
    try:
        return float(value)
    except (TypeError, ValueError):
        return math.nan


def has_values(stats: dict, *keys: str) -> bool:
    return all(math.isfinite(stat_value(stats, k)) for k in keys)


def flag(value) -> bool:
    """A boolean column read back from CSV or Parquet (True, "True", "true", 1); blank is False."""
    if isinstance(value, str):
        return value.strip().lower() in ("true", "1", "yes")
    try:
        return bool(value) and not (isinstance(value, float) and math.isnan(value))
    except (TypeError, ValueError):
        return False


def by_construction(stats: dict) -> bool:
    """True for a row whose two sources share their value by construction (never drawn or ranked).

    agreement.csv says so in ``by_construction``; tables without that column
    are judged by their numbers: bias 0 and SD 0 over every paired night.
    """
    if "by_construction" in stats:
        return flag(stats.get("by_construction"))
    return (has_values(stats, "bias", "sd") and stat_value(stats, "n_nights") >= MIN_PAIRS
            and stat_value(stats, "bias") == 0.0 and stat_value(stats, "sd") == 0.0)


def confidence_of(stats: dict) -> float:
    level = stat_value(stats, "confidence")
    return level if 0 < level < 1 else CONFIDENCE


def proportional_bias_flagged(stats: dict) -> bool:
    """Proportional bias is reported when the slope's p-value is below PROPORTIONAL_P (common practice)."""
    return has_values(stats, "prop_slope", "prop_intercept", "prop_p") and stat_value(stats, "prop_p") < PROPORTIONAL_P


def regression_limit_range(stats: dict, lo: float, hi: float) -> tuple[float, float] | None:
    """Where on the mean axis the regression-based limits may be drawn, within [lo, hi].

    With ``reg_loa_m_min``/``reg_loa_m_max`` in the row, only inside that range
    (a blank range means: do not draw them). Without those columns, only where
    the upper line lies above the lower one, so crossing limits are never drawn.
    None when nothing is left to draw.
    """
    keys = ("reg_loa_intercept_low", "reg_loa_slope_low", "reg_loa_intercept_high", "reg_loa_slope_high")
    if not has_values(stats, *keys):
        return None
    if "reg_loa_m_min" in stats or "reg_loa_m_max" in stats:
        if not has_values(stats, "reg_loa_m_min", "reg_loa_m_max"):
            return None
        lo, hi = max(lo, stat_value(stats, "reg_loa_m_min")), min(hi, stat_value(stats, "reg_loa_m_max"))
    # width(m) = (ih − il) + (sh − sl)·m must stay positive
    a = stat_value(stats, "reg_loa_intercept_high") - stat_value(stats, "reg_loa_intercept_low")
    b = stat_value(stats, "reg_loa_slope_high") - stat_value(stats, "reg_loa_slope_low")
    if b > 0:
        lo = max(lo, -a / b)
    elif b < 0:
        hi = min(hi, -a / b)
    elif a <= 0:
        return None
    return (lo, hi) if hi > lo else None


def corrected_on_ordinary(stats: dict, span: float) -> bool:
    """True when the limits corrected for repeated nights would lie on the ordinary ones in the figure."""
    if not has_values(stats, "mn_loa_low", "mn_loa_high", "loa_low", "loa_high"):
        return True
    tol = _ON_LINE * span if span > 0 else 1e-9
    return (abs(stat_value(stats, "mn_loa_low") - stat_value(stats, "loa_low")) <= tol
            and abs(stat_value(stats, "mn_loa_high") - stat_value(stats, "loa_high")) <= tol)


def drawable_rows(agreement) -> Iterator[dict]:
    """Rows of the agreement table that get a figure: all but those agreeing by construction."""
    for _, row in agreement.iterrows():
        stats = row.to_dict()
        if not by_construction(stats):
            yield stats
