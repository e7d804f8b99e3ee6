"""How numbers and p-values are shown to people: one formatter for the app, the figures and the report.

Short, fixed-width values with '–' for missing (the app's tables), and p-values
printed "< 0.001" below 0.001 rather than as a rounded zero (common practice in
reporting, e.g. the APA style guide; from memory).
"""

from __future__ import annotations

import math

MISSING = "–"


def _finite(value) -> bool:
    return value is not None and isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)


def fmt(value: float, unit: str = "min", *, signed: bool = False) -> str:
    """A value for a narrow column: whole numbers as such, else one decimal (30-s epochs give half minutes)."""
    if not _finite(value):
        return MISSING
    digits = 0 if float(value).is_integer() and not unit.startswith("%") else 1
    text = f"{value:+.{digits}f}" if signed else f"{value:.{digits}f}"
    return _no_negative_zero(text, signed)


def format_number(value: float, digits: int = 2, *, signed: bool = False) -> str:
    """A value with a fixed number of decimals, '–' when missing, never '-0.0'."""
    if not _finite(value):
        return MISSING
    text = f"{value:+.{digits}f}" if signed else f"{value:.{digits}f}"
    return _no_negative_zero(text, signed)


def format_p(p: float) -> str:
    """A p-value: '< 0.001' below 0.001, else three decimals; '–' when missing."""
    if not _finite(p):
        return MISSING
    if p < 0.001:
        return "< 0.001"
    return f"{p:.3f}"


def _no_negative_zero(text: str, signed: bool) -> str:
    """'-0.0' (a small negative value rounded to zero) reads as a sign error: print zero as zero."""
    digits = text.lstrip("+-")
    if text.startswith("-") and digits.strip("0.") == "":
        return ("+" if signed else "") + digits
    return text
