"""How numbers are printed in the worksheet: one place, so the HTML, the PDF and
the tests all see the same strings.

Money is printed rounded to whole currency units with thousands separators
(``$412,500``); the currency symbol is a setting. Missing values print as an
em dash. Nothing here ever prints scientific notation: a coefficient of
-1.26986e-05 prints as ``-0.0000127`` (to the digits asked for), a p value
below 0.0001 as ``< 0.0001``.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Iterable
from decimal import Decimal
from numbers import Real

import numpy as np

MISSING = "\u2014"  # em dash

TINY = 1e-15
"""Below this magnitude a number prints as ``0`` (a float this small is rounding noise
in anything the workbench computes, and printing it positionally would take a line)."""


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
    """A general number to ``digits`` significant digits with thousands separators,
    never in scientific notation: ``-1.26986e-05 -> "-0.0000126986"``,
    ``1.031e+04 -> "10,310"``, ``0.0020677123 -> "0.00206771"``."""
    v = _finite(x)
    if v is None:
        return MISSING
    if abs(v) < TINY:
        return "0"
    return positional(v, digits)


def positional(v: float, digits: int) -> str:
    """``v`` rounded to ``digits`` significant digits, written out in full.

    Rounding goes through the ``e`` format (correctly rounded by Python); the
    result is then re-read as a :class:`~decimal.Decimal`, stripped of trailing
    zeros and printed positionally with thousands separators.
    """
    digits = max(1, int(digits))
    magnitude = math.floor(math.log10(abs(v)))
    if magnitude >= digits - 1:  # never round away whole units: 19,315.1 -> "19,315"
        return format(v, ",.0f")
    rounded = Decimal(format(v, f".{digits - 1}e")).normalize()
    text = format(rounded, ",f")
    return "-0" if text == "-0" else text


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
    """p values below 0.0001 print as ``< 0.0001``; others with four decimals."""
    v = _finite(p)
    if v is None:
        return MISSING
    if v < 0.0001:
        return "< 0.0001"
    return f"{v:.4f}"


def p_phrase(p: object) -> str:
    """A p value in a sentence: ``"p < 0.0001"`` or ``"p = 0.7193"`` (never ``p = <``)."""
    text = pvalue(p)
    return f"p {text}" if text.startswith("<") else f"p = {text}"


def signed_percent(points: object, digits: int = 2) -> str:
    """A change already in percent, with its sign and at least ``digits`` significant
    digits, so a small effect never rounds to ``"-0.00%"``: ``10.517 -> "+10.5%"``,
    ``0.397 -> "+0.40%"``, ``-0.00127 -> "-0.0013%"``."""
    v = _finite(points)
    if v is None:
        return MISSING
    if abs(v) < TINY:
        return "0%"
    decimals = max(1, digits - 1 - math.floor(math.log10(abs(v))))
    text = f"{v:+,.{decimals}f}"
    if float(text) == 0.0:  # rounding carried it below the digits shown
        text = f"{v:+,.{decimals + 1}f}"
    return f"{text}%"


def money_rate(x: object, symbol: str = "$") -> str:
    """An amount per unit (``$ per sq ft``): cents below 100, whole units above,
    at least two significant digits: ``123.456 -> "$123"``, ``12.345 -> "$12.35"``,
    ``-0.0123 -> "-$0.012"``."""
    v = _finite(x)
    if v is None:
        return MISSING
    if abs(v) >= 100:
        return money(v, symbol)
    sign = "-" if v < 0 else ""
    a = abs(v)
    if a < TINY:
        return f"{symbol}0"
    decimals = max(2, 1 - math.floor(math.log10(a)))
    return f"{sign}{symbol}{a:,.{decimals}f}"


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


SEPARATOR_FROM = 10000
"""A column holding a whole number this large gets thousands separators on all of its
whole numbers (prices, areas); smaller columns (years, counts) print bare."""


def column_format(values: Iterable[object]) -> Callable[[object], str]:
    """One format for every cell of a column, so that its numbers read alike.

    :func:`plain` leaves whole numbers below 10,000 without separators (a year reads
    1964, not 1,964), which puts ``8822`` beside ``13,981`` in a price column. Here the
    choice is made once for the column: if any whole number in it reaches 10,000,
    every whole number gets separators; other cells print as :func:`plain` does.
    """
    big = False
    if isinstance(values, np.ndarray) and values.dtype.kind in "fiu":
        # a typed column (a county's prices): decided in one vectorised pass
        f = values.astype(float, copy=False)
        with np.errstate(invalid="ignore"):
            whole = np.isfinite(f) & (f == np.round(f)) & (np.abs(f) >= SEPARATOR_FROM)
        big = bool(whole.any())
    else:
        for v in values:
            if isinstance(v, Real) and not isinstance(v, bool):
                f = _finite(v)
                if f is not None and f == int(f) and abs(f) >= SEPARATOR_FROM:
                    big = True
                    break
    if not big:
        return plain

    def text(v: object) -> str:
        if isinstance(v, Real) and not isinstance(v, bool):
            f = _finite(v)
            if f is not None and f == int(f) and abs(f) < 1e15:
                return f"{int(f):,}"
        return plain(v)

    return text


_SCIENTIFIC = re.compile(r"(?<![\w.])(-?)(\d+)(?:\.(\d+))?[eE]([+-]\d{2,3})(?!\w)(?!\.\d)")
"""Python's exponent form as ``format(x, "g")`` writes it (``4e-05``, ``1.2e+04``): the
exponent always has a sign and two digits, so ids such as ``AV-1e5`` are left alone."""


def unscientific(text: str) -> str:
    """Rewrite any number in scientific notation inside a sentence positionally, with
    the significant digits it had: ``"Cook's distance 0.0156 > 4e-05"`` ->
    ``"... > 0.00004"``. For messages built elsewhere (the engine's warnings and
    findings) before a person reads them."""

    def positional_text(m: re.Match) -> str:
        digits = len((m.group(2) + (m.group(3) or "")).lstrip("0")) or 1
        return number(float(m.group(0)), max(digits, 1))

    return _SCIENTIFIC.sub(positional_text, str(text))
