"""How numbers are written for people, in one place: the terminal summary, the reports, the
texts, the figures and the screen's table all format through these. Full precision stays in the
JSON, the CSV and the tidy table; these are for reading only. None and non-finite values read
'n/a' (or stay empty where a table cell is meant: `compact`)."""

from __future__ import annotations

import math


def number(x, digits: int = 3) -> str:
    """Fixed decimals; a value too small for them (0 < |x| < 10^-digits) in scientific notation
    with digits - 1 decimals; 'n/a' when undefined; anything that is not a number as its text."""
    if x is None:
        return "n/a"
    try:
        value = float(x)
    except (TypeError, ValueError):
        return str(x)
    if not math.isfinite(value):
        return "n/a"
    if value != 0 and abs(value) < 10 ** (-digits):
        return f"{value:.{digits - 1}e}"
    return f"{value:.{digits}f}"


def fixed(value: float | None, decimals: int) -> str:
    """Fixed decimals, as the decision's texts quote numbers; 'n/a' when undefined."""
    if value is None:
        return "n/a"
    return f"{value:.{decimals}f}"


def percent(value: float, decimals: int) -> str:
    """A proportion as a percentage, one decimal fewer than the other numbers."""
    return f"{value * 100:.{max(decimals - 1, 0)}f}%"


def p_value(p: float | None) -> str:
    """A p-value: three decimals, '< 0.001' below that, 'n/a' when undefined."""
    if p is None:
        return "n/a"
    return "< 0.001" if p < 0.001 else f"{p:.3f}"


def count_or(x) -> str:
    """Whole numbers (counts, sizes) as such; other values with two decimals (`number`)."""
    if x is not None and float(x).is_integer() and abs(x) < 1e15:
        return str(int(x))
    return number(x, 2)


def compact(x, digits: int = 3) -> str:
    """A table cell of the screen: floats with `digits` decimals, or `digits` significant
    digits when below 10^-3 in size; other values as their text; None empty."""
    if x is None:
        return ""
    if isinstance(x, float):
        return f"{x:.{digits}g}" if abs(x) < 1e-3 and x != 0 else f"{x:.{digits}f}"
    return str(x)
