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

from collections.abc import Callable

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from .cells import MISSING_MARKERS, is_missing

_WS = r"[ \t\n\v\f\r]*"  # the ASCII white space str.strip() removes
_PLAIN_ASCII = r"^[\t\n\v\f\r\x20-\x7e]*$"
"""Texts the fast paths may decide: printable ASCII and ASCII white space only (so that
``str.strip`` and ``str.lower`` act on them as the patterns below assume)."""

_FAST_NUMBER = {
    ".": r"-?\$?(?:[0-9]{1,3}(?:,[0-9]{3})+|[0-9]+)(?:\.[0-9]*)?",
    ",": r"-?\$?(?:[0-9]{1,3}(?:\.[0-9]{3})+|[0-9]+)(?:,[0-9]*)?",
}
_FAST_DATE = r"[0-9]{4}-[0-9]{2}-[0-9]{2}"
_FIRST_YEAR, _LAST_YEAR = 1678, 2261  # as cells.parse_date (datetime64[ns] range)


def _marker_pattern() -> str:
    def esc(m: str) -> str:
        return "".join(ch if ch.isalnum() or ch == "/" else "\\" + ch for ch in m)

    return "^" + _WS + "(?:" + "|".join(esc(m) for m in sorted(MISSING_MARKERS)) + ")" + _WS + "$"


_MARKERS = _marker_pattern()


def _whole(pattern: str) -> str:
    return "^" + _WS + pattern + _WS + "$"


def _texts(values: np.ndarray) -> tuple[np.ndarray, pa.Array, np.ndarray]:
    """The plain ``str`` entries: their positions, as an Arrow array, and which are plain
    ASCII (the ones a fast path may decide)."""
    if len(values) and pd.api.types.infer_dtype(values, skipna=False) == "string":
        at = np.arange(len(values))
    else:
        at = np.flatnonzero([type(v) is str for v in values])
    arr = pa.array(values[at], type=pa.string())
    plain = pc.match_substring_regex(arr, _PLAIN_ASCII).to_numpy(zero_copy_only=False)
    return at, arr, plain


def _is(arr: pa.Array, pattern: str, ignore_case: bool = False) -> np.ndarray:
    found = pc.match_substring_regex(arr, pattern, ignore_case=ignore_case)
    return found.to_numpy(zero_copy_only=False).astype(bool)


def strip_texts(values: np.ndarray) -> np.ndarray:
    """``str.strip()`` of every entry of an object array of ``str`` (plain-ASCII texts
    trimmed by Arrow at once, any other text by Python)."""
    out = np.empty(len(values), dtype=object)
    if not len(values):
        return out
    arr = pa.array(values, type=pa.string())
    plain = pc.match_substring_regex(arr, _PLAIN_ASCII).to_numpy(zero_copy_only=False)
    plain = plain.astype(bool)
    trimmed = pc.utf8_trim(arr, " \t\n\v\f\r")
    out[:] = values  # a text with nothing to trim stays the same object (no copy of it)
    cut = pc.not_equal(pc.binary_length(trimmed), pc.binary_length(arr))
    cut = cut.to_numpy(zero_copy_only=False).astype(bool) & plain
    if cut.any():
        out[cut] = trimmed.filter(pa.array(cut)).to_numpy(zero_copy_only=False)
    rest = np.flatnonzero(~plain)
    out[rest] = [v.strip() for v in values[rest]]
    return out


def missing_mask(values: np.ndarray) -> np.ndarray:
    """:func:`~appraise.engine.cells.is_missing` of every entry, plain texts tested at once."""
    return _mask(values, lambda arr: _is(arr, _MARKERS, ignore_case=True), is_missing)


def _mask(values: np.ndarray, on_texts, on_cell) -> np.ndarray:
    """``on_texts`` on the plain texts at once, ``on_cell`` on each other entry; NaN of a
    float column counts as True (missing and blank alike)."""
    if values.dtype.kind == "f":
        return np.isnan(values)
    values = np.asarray(values, dtype=object)
    out = np.zeros(len(values), dtype=bool)
    decided = np.zeros(len(values), dtype=bool)
    at, arr, plain = _texts(values)
    if len(at):
        out[at] = on_texts(arr) & plain
        decided[at] = plain
    rest = np.flatnonzero(~decided)
    out[rest] = [on_cell(v) for v in values[rest]]
    return out


def _is_blank(v: object) -> bool:
    return v is None or (isinstance(v, float) and v != v) or (isinstance(v, str) and not v.strip())


def blank_mask(values: np.ndarray) -> np.ndarray:
    """True where an entry holds nothing at all: None, NaN or only white space."""
    return _mask(values, lambda arr: _is(arr, "^" + _WS + "$"), _is_blank)


def fast_numbers(values: np.ndarray, decimal: str = ".") -> tuple[np.ndarray, np.ndarray]:
    """Numbers read from the entries whose shape makes the reading certain.

    Returns ``(numbers, decided)``: ``numbers[i]`` is the value where ``decided[i]``,
    NaN elsewhere. Typed finite numbers are decided as they are; plain-ASCII texts are
    decided when they fit the strict pattern of the module docstring.
    """
    n = len(values)
    numbers = np.full(n, np.nan)
    decided = np.zeros(n, dtype=bool)
    if values.dtype.kind in "fiu":
        v = values.astype(np.float64)
        decided = np.isfinite(v)
        numbers[decided] = v[decided]
        return numbers, decided
    at, arr, plain = _texts(values)
    if len(at):
        match = _is(arr, _whole(_FAST_NUMBER[decimal])) & plain
        if match.any():
            group = "," if decimal == "." else "."
            digits = pc.utf8_trim_whitespace(arr.filter(pa.array(match)))
            digits = pc.replace_substring(digits, "$", "")
            digits = pc.replace_substring(digits, group, "")
            if decimal == ",":
                digits = pc.replace_substring(digits, ",", ".")
            pos = at[match]
            numbers[pos] = pc.cast(digits, pa.float64()).to_numpy(zero_copy_only=False)
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
    if values.dtype.kind != "O":
        return out, decided
    at, arr, plain = _texts(values)
    if not len(at):
        return out, decided
    match = _is(arr, _whole(_FAST_DATE)) & plain
    if not match.any():
        return out, decided
    texts = pc.utf8_trim_whitespace(arr.filter(pa.array(match)))
    years = pc.cast(pc.utf8_slice_codeunits(texts, 0, 4), pa.int32()).to_numpy()
    in_range = (years >= _FIRST_YEAR) & (years <= _LAST_YEAR)
    parsed = pc.strptime(texts, format="%Y-%m-%d", unit="ns", error_is_null=True)
    # a day the month does not have may roll over: keep only dates that print back as written
    same = pc.equal(pc.strftime(parsed, format="%Y-%m-%d"), texts)
    same = pc.fill_null(same, False).to_numpy(zero_copy_only=False).astype(bool)
    dates = parsed.to_numpy(zero_copy_only=False).astype("datetime64[ns]")
    good = in_range & same & ~np.isnat(dates)
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


__all__ = [
    "blank_mask",
    "fast_iso_dates",
    "fast_numbers",
    "missing_mask",
    "parse_rest",
    "strip_texts",
]
