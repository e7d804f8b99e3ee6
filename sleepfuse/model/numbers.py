"""How numbers and p-values are shown to people: one formatter for the app, the figures and the report.

Short, fixed-width values with '–' for missing (the app's tables), and p-values
printed "< 0.001" below 0.001 rather than as a rounded zero (common practice in
reporting, e.g. the APA style guide; from memory).
"""

from __future__ import annotations

import math
import numbers as _abc

MISSING = "–"
MINUS = "−"
"""The typographic minus (U+2212), as matplotlib writes it on axes: figures and the report print with it."""


def _finite(value) -> bool:
    """A finite real number (numpy scalars included; bools and strings are not numbers here)."""
    return isinstance(value, _abc.Real) and not isinstance(value, bool) and math.isfinite(value)


def fmt(value: float, unit: str = "min", *, signed: bool = False) -> str:
    """A value for a narrow column: whole numbers as such, else one decimal (30-s epochs give half minutes)."""
    if not _finite(value):
        return MISSING
    digits = 0 if float(value).is_integer() and not unit.startswith("%") else 1
    text = f"{value:+.{digits}f}" if signed else f"{value:.{digits}f}"
    return _no_negative_zero(text, signed)


def format_number(value: float, digits: int = 2, *, signed: bool = False, minus: str = "-") -> str:
    """A value with a fixed number of decimals, '–' when missing, never '-0.0'.

    ``minus``: the sign written before negative values ("−", ``MINUS``, in figures and the report).
    """
    if not _finite(value):
        return MISSING
    text = f"{value:+.{digits}f}" if signed else f"{value:.{digits}f}"
    text = _no_negative_zero(text, signed)
    return minus + text[1:] if text.startswith("-") else text


def format_interval(low: float, high: float, digits: int = 1, *, minus: str = "-") -> str:
    """A confidence interval as "low to high"; '–' when either end is missing."""
    if not (_finite(low) and _finite(high)):
        return MISSING
    return f"{format_number(low, digits, minus=minus)} to {format_number(high, digits, minus=minus)}"


def format_p(p: float) -> str:
    """A p-value: '< 0.001' below 0.001, else three decimals; '–' when missing."""
    if not _finite(p):
        return MISSING
    if p < 0.001:
        return "< 0.001"
    return f"{p:.3f}"


def format_p_text(p: float) -> str:
    """A p-value after its letter: "p < 0.001", "p = 0.038"."""
    text = format_p(p)
    return f"p {text}" if text.startswith("<") else f"p = {text}"


def format_level(confidence: float) -> str:
    """A confidence level as a percentage: 0.95 -> "95%", 0.975 -> "97.5%"."""
    return f"{100 * confidence:g}%" if _finite(confidence) else MISSING


def _no_negative_zero(text: str, signed: bool) -> str:
    """'-0.0' (a small negative value rounded to zero) reads as a sign error: print zero as zero."""
    digits = text.lstrip("+-")
    if text.startswith("-") and digits.strip("0.") == "":
        return ("+" if signed else "") + digits
    return text


def plural(n: int, noun: str, nouns: str | None = None) -> str:
    """'1 error', '2 errors', '0 errors' (English count and noun; ``nouns`` for an irregular plural)."""
    return f"{n} {noun if n == 1 else (nouns or noun + 's')}"
