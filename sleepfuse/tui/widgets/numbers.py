"""How numbers are shown in tables: short, fixed width, '–' for missing."""

from __future__ import annotations

import math


def fmt(value: float, unit: str = "min", *, signed: bool = False) -> str:
    """A value for a narrow column: whole numbers as such, else one decimal (30-s epochs give half minutes)."""
    if value is None or not isinstance(value, (int, float)) or not math.isfinite(value):
        return "–"
    digits = 0 if float(value).is_integer() and not unit.startswith("%") else 1
    return f"{value:+.{digits}f}" if signed else f"{value:.{digits}f}"
