"""How numbers are printed in the worksheet: one place, so the HTML, the PDF and
the tests all see the same strings.

Money is printed rounded to whole currency units with thousands separators
(``$412,500``); the currency symbol is a setting. Missing values print as an
em dash.
"""

from __future__ import annotations

import math
from numbers import Real

MISSING = "\u2014"  # em dash


def _finite(x: object) -> float | None:
    if x is None or isinstance(x, bool):
        return None
    try:
        v = float(x)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def whole_units(x: float) -> int:
    """Round to whole currency units, halves away from zero (412,499.5 -> 412,500).

    Python's ``round`` rounds halves to even; a valuation printed on paper should
    not depend on that, so halves go away from zero as on a calculator.
    """
    return int(math.copysign(math.floor(abs(x) + 0.5), x))


def money(x: object, symbol: str = "$") -> str:
    """``412500.4 -> "$412,500"``; ``-1200 -> "-$1,200"``; missing -> em dash."""
    v = _finite(x)
    if v is None:
        return MISSING
    units = whole_units(v)
    sign = "-" if units < 0 else ""
    return f"{sign}{symbol}{abs(units):,}"


def number(x: object, digits: int = 6) -> str:
    """A general number to ``digits`` significant digits with thousands separators."""
    v = _finite(x)
    if v is None:
        return MISSING
    if v == 0:
        return "0"
    return format(v, f",.{digits}g")


def fixed(x: object, decimals: int = 3) -> str:
    """A number with a fixed count of decimals (``0.6319``), thousands separated."""
    v = _finite(x)
    if v is None:
        return MISSING
    return format(v, f",.{decimals}f")


def integer(x: object) -> str:
    v = _finite(x)
    if v is None:
        return MISSING
    return f"{whole_units(v):,}"


def pvalue(p: object) -> str:
    """p-values below 0.0001 print as ``<0.0001``; others with four decimals."""
    v = _finite(p)
    if v is None:
        return MISSING
    if v < 0.0001:
        return "<0.0001"
    return f"{v:.4f}"


def percent(x: object, decimals: int = 0) -> str:
    """A fraction as a percentage: ``0.9 -> "90%"``."""
    v = _finite(x)
    if v is None:
        return MISSING
    return f"{100.0 * v:.{decimals}f}%"


def plain(x: object) -> str:
    """Any value as short text: numbers without spurious decimals, dates as ISO."""
    if x is None or type(x).__name__ in ("NAType", "NaTType"):
        return MISSING
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, Real):
        v = _finite(x)
        if v is None:
            return MISSING
        if v == int(v) and abs(v) < 1e15:
            return f"{int(v):,}" if abs(v) >= 10000 else str(int(v))
        return number(v)
    iso = getattr(x, "isoformat", None)
    if callable(iso):
        text = str(iso())
        return text[:10] if text.endswith("T00:00:00") else text
    text = str(x)
    return text if text else MISSING
