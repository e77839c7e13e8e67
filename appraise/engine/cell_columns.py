"""Whole columns of cells read at once: the vectorised fast path before ``cells.py``.

The rules of a cell stay those of :mod:`appraise.engine.cells`; this module only decides,
with vectorised string operations, the cells whose reading is certain from their shape,
and leaves every other cell to the per-cell parser. Each fast path accepts a strict
subset of what the per-cell parser reads and gives the same value for it:

* a number written ``[-][$]digits[.digits]`` or ``[-][$]d,ddd,ddd[.digits]`` (decimal
  mark ``"."``; with decimal ``","`` the roles of ``.`` and ``,`` swap) is the float of
  its digits, exactly as :func:`~appraise.engine.cells.parse_number` reads it;
* a date written ``YYYY-MM-DD`` with a year in 1678-2261 and a real day is that day
  (form ``"iso"``), exactly as :func:`~appraise.engine.cells.parse_date` reads it;
* a text is a missing marker when its stripped, lower-cased form is in
  :data:`~appraise.engine.cells.MISSING_MARKERS`.

Everything else (grouping by spaces, units, parentheses, other currencies, named months,
impossible dates...) goes to the per-cell parser, so its reason text is unchanged.
"""

from __future__ import annotations

import re
from collections.abc import Callable

import numpy as np
import pandas as pd

from .cells import MISSING_MARKERS, is_missing

_FAST_NUMBER = {
    ".": re.compile(r"-?\$?(?:[0-9]{1,3}(?:,[0-9]{3})+|[0-9]+)(?:\.[0-9]*)?"),
    ",": re.compile(r"-?\$?(?:[0-9]{1,3}(?:\.[0-9]{3})+|[0-9]+)(?:,[0-9]*)?"),
}
_FAST_DATE = re.compile(r"[0-9]{4}-[0-9]{2}-[0-9]{2}")
_FIRST_YEAR, _LAST_YEAR = 1678, 2261  # as cells.parse_date (datetime64[ns] range)


def _str_positions(values: np.ndarray) -> np.ndarray:
    """Positions of the plain ``str`` entries of an object array."""
    if values.dtype.kind == "U":
        return np.arange(len(values))
    return np.flatnonzero([type(v) is str for v in values])


def missing_mask(values: np.ndarray) -> np.ndarray:
    """:func:`~appraise.engine.cells.is_missing` of every entry, texts tested at once."""
    values = np.asarray(values, dtype=object) if values.dtype.kind != "f" else values
    if values.dtype.kind == "f":
        return np.isnan(values)
    out = np.zeros(len(values), dtype=bool)
    at = _str_positions(values)
    if len(at):
        texts = pd.Series(values[at], dtype=object)
        out[at] = texts.str.strip().str.lower().isin(MISSING_MARKERS).to_numpy()
    if len(at) < len(values):
        rest = np.ones(len(values), dtype=bool)
        rest[at] = False
        out[rest] = [is_missing(v) for v in values[rest]]
    return out


def blank_mask(values: np.ndarray) -> np.ndarray:
    """True where an entry holds nothing at all: None, NaN or only white space."""
    if values.dtype.kind == "f":
        return np.isnan(values)
    out = np.zeros(len(values), dtype=bool)
    at = _str_positions(values)
    if len(at):
        out[at] = (pd.Series(values[at], dtype=object).str.strip() == "").to_numpy()
    if len(at) < len(values):
        rest = np.ones(len(values), dtype=bool)
        rest[at] = False
        out[rest] = [
            v is None or (isinstance(v, float) and v != v) or (isinstance(v, str) and not v.strip())
            for v in values[rest]
        ]
    return out


def fast_numbers(values: np.ndarray, decimal: str = ".") -> tuple[np.ndarray, np.ndarray]:
    """Numbers read from the entries whose shape makes the reading certain.

    Returns ``(numbers, decided)``: ``numbers[i]`` is the value where ``decided[i]``,
    NaN elsewhere. Typed finite numbers are decided as they are; texts are decided
    when they fit the strict pattern of the module docstring.
    """
    n = len(values)
    numbers = np.full(n, np.nan)
    decided = np.zeros(n, dtype=bool)
    if values.dtype.kind in "fiu":
        v = values.astype(np.float64)
        decided = np.isfinite(v)
        numbers[decided] = v[decided]
        return numbers, decided
    at = _str_positions(values)
    if len(at):
        texts = pd.Series(values[at], dtype=object).str.strip()
        match = texts.str.fullmatch(_FAST_NUMBER[decimal].pattern).to_numpy(dtype=bool)
        if match.any():
            group = "," if decimal == "." else "."
            digits = texts[match].str.replace("$", "", regex=False)
            digits = digits.str.replace(group, "", regex=False)
            if decimal == ",":
                digits = digits.str.replace(",", ".", regex=False)
            parsed = digits.to_numpy(dtype=str).astype(np.float64)
            pos = at[match]
            numbers[pos] = parsed
            decided[pos] = True
    typed = np.array([_finite_plain_number(v) for v in values], dtype=bool) & ~decided
    if typed.any():
        numbers[typed] = values[typed].astype(np.float64)
        decided |= typed
    return numbers, decided


def _finite_plain_number(v: object) -> bool:
    if type(v) is float:
        return v - v == 0.0  # False for inf and NaN
    return type(v) is int and abs(v) < 2**1000


def fast_iso_dates(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``YYYY-MM-DD`` texts read at once: ``(datetime64[ns] values, decided)``."""
    n = len(values)
    out = np.full(n, np.datetime64("NaT"), dtype="datetime64[ns]")
    decided = np.zeros(n, dtype=bool)
    at = _str_positions(values)
    if not len(at):
        return out, decided
    texts = pd.Series(values[at], dtype=object).str.strip()
    match = texts.str.fullmatch(_FAST_DATE.pattern).to_numpy(dtype=bool)
    if not match.any():
        return out, decided
    years = texts[match].str.slice(0, 4).astype(int).to_numpy()
    in_range = (years >= _FIRST_YEAR) & (years <= _LAST_YEAR)
    dates = pd.to_datetime(texts[match], format="%Y-%m-%d", errors="coerce")
    dates = dates.to_numpy(dtype="datetime64[ns]")
    good = in_range & ~np.isnat(dates)
    pos = at[match][good]
    out[pos] = dates[good]
    decided[pos] = True
    return out, decided


def parse_rest(
    values: np.ndarray, decided: np.ndarray, parse: Callable[[object], object]
) -> tuple[dict[int, object], dict[int, str]]:
    """``parse`` for each entry not ``decided`` (and not missing): values and reasons by position."""
    got: dict[int, object] = {}
    why: dict[int, str] = {}
    for i in np.flatnonzero(~decided):
        v = values[i]
        if is_missing(v):
            continue
        try:
            got[int(i)] = parse(v)
        except ValueError as exc:
            why[int(i)] = str(exc)
    return got, why


__all__ = ["blank_mask", "fast_iso_dates", "fast_numbers", "missing_mask", "parse_rest"]
