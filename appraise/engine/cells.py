"""Parsers for single cells of a sales export: numbers, dates, yes/no flags, text.

Each parser takes the text of one cell (or a typed value from a spreadsheet or
Parquet file) and returns the value, or raises ``ValueError`` whose message is a
short reason such as ``'$4l2,000' is not a number``. Callers turn that reason
into an exclusion or a note naming file, row and column; nothing here knows
about files or rows.

Nothing is guessed silently:

- numbers follow the decimal-mark setting strictly (``412.500,00`` is an error
  under decimal ``"."``, never 412.5);
- a date such as ``03/04/2024`` whose day and month could be swapped is
  reported as ambiguous, and only the caller's date-order setting resolves it.
"""

from __future__ import annotations

import math
import re
import unicodedata
from dataclasses import dataclass
from datetime import date, datetime, timedelta
from decimal import Decimal
from typing import Literal

import numpy as np

from .settings import AreaUnit, DateOrder, DecimalMark

# --- missing values ------------------------------------------------------------------

MISSING_MARKERS: frozenset[str] = frozenset(
    {"", "n/a", "na", "#n/a", "n.a.", "-", "--", "---", "null", "none", "nil", "?", "nan", "."}
)
"""Cell texts (compared case-insensitively, after stripping) that mean "no value"."""


def is_missing(value: object) -> bool:
    """True for ``None``, NaN/NaT and texts in :data:`MISSING_MARKERS`."""
    if type(value) is str:
        return value.strip().lower() in MISSING_MARKERS
    if value is None:
        return True
    if isinstance(value, str):
        return value.strip().lower() in MISSING_MARKERS
    if isinstance(value, float | np.floating):
        return math.isnan(value)
    if isinstance(value, np.datetime64):
        return bool(np.isnat(value))
    try:  # pandas.NaT and pandas.NA compare unequal to themselves or refuse to
        return bool(value != value)
    except (TypeError, ValueError):
        return True


# --- numbers -------------------------------------------------------------------------

_GROUP_SPACES = " \u00a0\u202f\u2009\u2007"  # space, no-break, narrow no-break, thin, figure
_CURRENCY_SIGNS = ("$", "€", "£", "¥", "₹", "₣")
_CURRENCY_CODES = ("US$", "CA$", "AU$", "C$", "A$", "USD", "EUR", "GBP", "CAD", "AUD", "CHF")
_MINUS_SIGNS = "-\u2212\u2012\u2013"  # hyphen-minus, minus, figure dash, en dash

_AREA_SUFFIX = re.compile(
    r"""(?ix)\s*(
        (?P<ft>sq\.?\s*f(?:ee)?t\.?|sqft|sf|ft\s*[²2]|square\s+f(?:ee|oo)t(?:age)?)
      | (?P<m>sq\.?\s*m(?:eters?|etres?)?\.?|sqm|m\s*[²2]|square\s+met(?:er|re)s?)
    )$"""
)

_NUMBER_EXPONENT = re.compile(r"[eE][+-]?\d+$")


def area_unit_of(text: str) -> AreaUnit | None:
    """The area unit named at the end of ``text`` (``"1,234 sq ft"`` -> ``"ft2"``), if any.

    Also used on headers once their brackets are removed: ``"Living Area m²"``.
    """
    m = _AREA_SUFFIX.search(text.strip())
    if m is None:
        return None
    return "ft2" if m.group("ft") else "m2"


def _strip_money(s: str, extra_symbol: str) -> tuple[str, bool]:
    """Remove currency signs/codes and one sign, in any order around the digits.

    Returns the rest and whether a minus sign was found.
    """
    signs = tuple(
        dict.fromkeys((*_CURRENCY_SIGNS, extra_symbol) if extra_symbol else _CURRENCY_SIGNS)
    )
    negative = False
    seen_sign = False
    changed = True
    while changed and s:
        changed = False
        upper = s.upper()
        for code in _CURRENCY_CODES:
            if upper.startswith(code):
                s, changed = s[len(code) :].strip(), True
                break
            if upper.endswith(code):
                s, changed = s[: -len(code)].strip(), True
                break
        for sign in signs:
            if s.startswith(sign):
                s, changed = s[len(sign) :].strip(), True
            elif s.endswith(sign):
                s, changed = s[: -len(sign)].strip(), True
        if not seen_sign and s and (s[0] in _MINUS_SIGNS or s[0] == "+"):
            negative = s[0] != "+"
            seen_sign = True
            s, changed = s[1:].strip(), True
    return s, negative


def _plain_digits(body: str, decimal: DecimalMark) -> str | None:
    """``body`` (digits, group separators, one decimal mark) as ``"1234.5"``, or None.

    Grouping must be regular: a first group of 1-3 digits, then groups of
    exactly three, all with the same separator. The separators allowed are
    spaces, the apostrophe and whichever of ``.``/``,`` is not the decimal mark.
    """
    group_chars = _GROUP_SPACES + "'" + ("," if decimal == "." else ".")
    whole, _, frac = body.partition(decimal)
    if frac and not frac.isdigit():
        return None
    if whole and not whole.isdigit():
        seps = {ch for ch in whole if not ch.isdigit()}
        if len(seps) != 1 or not seps <= set(group_chars):
            return None
        parts = whole.split(seps.pop())
        if not (1 <= len(parts[0]) <= 3 and parts[0].isdigit()):
            return None
        if any(len(p) != 3 or not p.isdigit() for p in parts[1:]):
            return None
        whole = "".join(parts)
    if not (whole or frac) or not (whole + frac).isascii():  # other scripts' digits: not in exports
        return None
    return f"{whole or '0'}.{frac or '0'}"


def parse_number(value: object, *, decimal: DecimalMark = ".", currency_symbol: str = "$") -> float:
    """Read one number cell.

    Accepts typed numbers (int, float, Decimal; bool as 1/0) and texts such as
    ``$412,500``, ``412 500``, ``412.500,00`` (decimal ","), ``(1,200)``
    (negative), ``EUR 1.234,5``, ``1,234.5 sq ft`` or ``95 m²``, ``1.2e5``.

    Raises
    ------
    ValueError
        With a short reason: the text is not a number under this decimal mark
        (the message says when the other mark would read it), or it is infinite.
    """
    if isinstance(value, bool | np.bool_):
        return 1.0 if value else 0.0
    if isinstance(value, int | float | Decimal | np.integer | np.floating):
        v = float(value)
        if not math.isfinite(v):
            raise ValueError(f"'{brief(str(value))}' is not a finite number")
        return v
    if isinstance(value, datetime | date):
        raise ValueError(f"'{brief(str(value))}' is a date, not a number")
    text = str(value)
    v = _read_number_text(text, decimal, currency_symbol)
    if v is None:
        other: DecimalMark = "," if decimal == "." else "."
        hint = ""
        if _read_number_text(text, other, currency_symbol) is not None:
            hint = f" with decimal mark '{decimal}' (it would read with decimal mark '{other}')"
        raise ValueError(f"'{brief(text.strip())}' is not a number{hint}")
    return v


_PLAIN_NUMBER = {".": re.compile(r"-?\d+(?:\.\d*)?"), ",": re.compile(r"-?\d+(?:,\d*)?")}
_DIGITS_AND_SEPARATORS = re.compile(r"[\d.,'" + _GROUP_SPACES + "]+")


def _read_number_text(text: str, decimal: DecimalMark, currency_symbol: str) -> float | None:
    s = text.strip()
    if _PLAIN_NUMBER[decimal].fullmatch(s):  # the common case, read at once
        return float(s.replace(",", ".")) if decimal == "," else float(s)
    if _DIGITS_AND_SEPARATORS.fullmatch(s):  # no sign, currency or unit to strip
        plain = _plain_digits(s, decimal)
        return None if plain is None else float(plain)
    s = unicodedata.normalize("NFC", s)
    negative = False
    if s.startswith("(") and s.endswith(")"):
        negative, s = True, s[1:-1].strip()
    unit = _AREA_SUFFIX.search(s)
    if unit is not None:
        s = s[: unit.start()].strip()
    s, minus = _strip_money(s, currency_symbol)
    if minus and negative:
        return None  # "(-5)": not a form any export writes
    exponent = ""
    m = _NUMBER_EXPONENT.search(s)
    if m is not None:
        exponent, s = m.group(), s[: m.start()]
        if not s.replace(decimal, "", 1).isdigit():
            return None  # exponents only on plain numbers, never grouped ones
    plain = _plain_digits(s, decimal)
    if plain is None:
        return None
    v = float(plain + exponent)
    if not math.isfinite(v):
        return None
    return -v if (negative or minus) else v


# --- dates ---------------------------------------------------------------------------

DateForm = Literal["iso", "day_first", "month_first", "ambiguous", "named", "serial"]

_TIME = r"(?:[T ](\d{1,2}):(\d{2})(?::(\d{2})(?:\.\d+)?)?\s*([AaPp][Mm])?(?:Z|[+-]\d{2}:?\d{2})?)?"
_ISO = re.compile(r"(\d{4})([-/.])(\d{1,2})\2(\d{1,2})" + _TIME)
_ISO_BASIC = re.compile(r"(\d{4})(\d{2})(\d{2})")
_NUMERIC = re.compile(r"(\d{1,2})([-/.])(\d{1,2})\2(\d{2}|\d{4})" + _TIME)
_DAY_NAMED = re.compile(
    r"(\d{1,2})(?:st|nd|rd|th)?[ \-/.]+([A-Za-z]{3,9})\.?[ \-/.,]+(\d{4})" + _TIME
)
_NAMED_DAY = re.compile(
    r"([A-Za-z]{3,9})\.?[ \-/.]+(\d{1,2})(?:st|nd|rd|th)?,?[ \-/.]+(\d{4})" + _TIME
)

_MONTHS = {
    name: i + 1
    for i, names in enumerate(
        [
            ("jan", "january"),
            ("feb", "february"),
            ("mar", "march"),
            ("apr", "april"),
            ("may",),
            ("jun", "june"),
            ("jul", "july"),
            ("aug", "august"),
            ("sep", "sept", "september"),
            ("oct", "october"),
            ("nov", "november"),
            ("dec", "december"),
        ]
    )
    for name in names
}

# datetime64[ns] covers 1677-09-21 .. 2262-04-11; stay inside it with whole years.
_FIRST_YEAR, _LAST_YEAR = 1678, 2261
_EXCEL_EPOCH = datetime(1899, 12, 30)  # serial 1 = 1900-01-01 once Excel's 1900 leap day is past


@dataclass(frozen=True)
class DateReading:
    """A parsed date cell.

    ``form`` says how it was read: ``"iso"`` (year first, or day and month equal),
    ``"day_first"``/``"month_first"`` (unambiguous because one part exceeds 12),
    ``"ambiguous"`` (day and month could be swapped; resolved by the date order,
    ``value`` is None under ``"ISO"``), ``"named"`` (month written as a word) or
    ``"serial"`` (a spreadsheet day number).
    """

    value: datetime | None
    form: DateForm


def _time_of(groups: tuple[str | None, ...], text: str) -> timedelta:
    hh, mm, ss, ampm = groups
    if hh is None:
        return timedelta(0)
    h, m, s = int(hh), int(mm), int(ss or 0)
    if ampm is not None:
        if not 1 <= h <= 12:
            raise ValueError(f"'{brief(text)}' is not a date")
        h = h % 12 + (12 if ampm.lower() == "pm" else 0)
    if h > 23 or m > 59 or s > 59:
        raise ValueError(f"'{brief(text)}' is not a date")
    return timedelta(hours=h, minutes=m, seconds=s)


def _make(y: int, m: int, d: int, text: str) -> datetime:
    if not _FIRST_YEAR <= y <= _LAST_YEAR:
        raise ValueError(f"'{brief(text)}' is outside the years {_FIRST_YEAR}-{_LAST_YEAR}")
    try:
        return datetime(y, m, d)
    except ValueError:
        raise ValueError(f"'{brief(text)}' is not a date") from None


def excel_serial_to_datetime(serial: float) -> datetime:
    """A spreadsheet day number (1900 date system) as a datetime.

    ``datetime(1899, 12, 30) + serial days``; exact for serials from 61
    (1900-03-01) on, which is every date a sales export holds.
    """
    if not 61 <= serial < 2958466:
        raise ValueError(f"'{serial:g}' is not a spreadsheet date")
    return _EXCEL_EPOCH + timedelta(days=float(serial))


def parse_date(value: object, *, order: DateOrder = "ISO", serial_ok: bool = False) -> DateReading:
    """Read one date cell.

    Accepted: ``2024-03-05``, ``2024/03/05``, ``2024.3.5``, ``20240305``,
    ``2024-03-05T00:00:00`` (time kept, zone dropped), ``05/03/2024``,
    ``5.3.2024``, ``13-04-2024 14:30``, ``5 Mar 2024``, ``March 5, 2024``,
    typed dates, and (``serial_ok``) spreadsheet day numbers.

    For ``a/b/yyyy`` with both ``a`` and ``b`` at most 12 and different, the
    reading is ``"ambiguous"``: ``order`` "DMY" or "MDY" resolves it; under
    "ISO" ``value`` is None and the caller must report it. When one part
    exceeds 12 the date is read the only way it can be (``"day_first"`` or
    ``"month_first"``) whatever the order; the caller decides whether that
    contradicts the order.

    Raises
    ------
    ValueError
        Not a date, an impossible date (31/02/2024), a two-digit year, or a
        year outside 1678-2261.
    """
    if isinstance(value, datetime):
        return DateReading(value.replace(tzinfo=None), "iso")
    if isinstance(value, date):
        return DateReading(datetime(value.year, value.month, value.day), "iso")
    if isinstance(value, np.datetime64):
        return DateReading(value.astype("datetime64[us]").item(), "iso")
    if isinstance(value, int | float | np.integer | np.floating) and not isinstance(value, bool):
        if serial_ok:
            return DateReading(excel_serial_to_datetime(float(value)), "serial")
        raise ValueError(f"'{brief(str(value))}' is a number, not a date")
    text = str(value).strip()
    m = _ISO.fullmatch(text)
    if m is not None:
        y, mo, d = int(m.group(1)), int(m.group(3)), int(m.group(4))
        return DateReading(_make(y, mo, d, text) + _time_of(m.groups()[4:], text), "iso")
    m = _ISO_BASIC.fullmatch(text)
    if m is not None:
        return DateReading(_make(int(m.group(1)), int(m.group(2)), int(m.group(3)), text), "iso")
    m = _NUMERIC.fullmatch(text)
    if m is not None:
        a, b, year = int(m.group(1)), int(m.group(3)), m.group(4)
        if len(year) == 2:
            raise ValueError(f"'{brief(text)}' has a two-digit year; write the year in full")
        y = int(year)
        t = _time_of(m.groups()[4:], text)
        if a > 12 and b > 12:
            raise ValueError(f"'{brief(text)}' is not a date")
        if a > 12:
            return DateReading(_make(y, b, a, text) + t, "day_first")
        if b > 12:
            return DateReading(_make(y, a, b, text) + t, "month_first")
        if a == b:
            return DateReading(_make(y, a, a, text) + t, "iso")
        if order == "DMY":
            return DateReading(_make(y, b, a, text) + t, "ambiguous")
        if order == "MDY":
            return DateReading(_make(y, a, b, text) + t, "ambiguous")
        return DateReading(None, "ambiguous")
    for pattern, day_group, month_group in ((_DAY_NAMED, 1, 2), (_NAMED_DAY, 2, 1)):
        m = pattern.fullmatch(text)
        if m is not None and m.group(month_group).lower() in _MONTHS:
            month = _MONTHS[m.group(month_group).lower()]
            d = int(m.group(day_group))
            t = _time_of(m.groups()[3:], text)
            return DateReading(_make(int(m.group(3)), month, d, text) + t, "named")
    raise ValueError(f"'{brief(text)}' is not a date")


# --- yes/no flags --------------------------------------------------------------------

_YES = frozenset(
    {
        "yes",
        "y",
        "true",
        "t",
        "1",
        "arms length",
        "arm length",
        "al",
        "qualified",
        "valid",
        "market",
        "open market",
    }
)
_NO = frozenset(
    {
        "no",
        "n",
        "false",
        "f",
        "0",
        "nal",
        "non al",
        "unqualified",
        "not qualified",
        "invalid",
        "non market",
        "not market",
    }
)
# Words an export uses for a sale that is not at arm's length.
_NOT_AT_ARMS_LENGTH = frozenset(
    {
        "foreclosure",
        "family",
        "family transfer",
        "relative",
        "related",
        "related party",
        "related parties",
        "auction",
        "reo",
        "bank owned",
        "gift",
        "distressed",
        "forced sale",
        "court ordered",
        "divorce",
        "estate transfer",
        "inheritance",
    }
)
_NEGATIONS = frozenset({"non", "not", "no", "nal"})
_ARMS_LENGTH_WORDS = frozenset({"yes", "y", "true", "arms", "arm", "length", "sale", "transaction"})


def normalise_words(text: str) -> str:
    """Lower case, apostrophes dropped, other punctuation as spaces, single spaces."""
    t = unicodedata.normalize("NFKC", text).lower()
    t = re.sub(r"['’`´]", "", t)
    t = re.sub(r"[^0-9a-z]+", " ", t)
    return t.strip()


def parse_flag(value: object) -> bool:
    """Read an arm's-length flag: True for an arm's-length sale, False otherwise.

    Accepts yes/no, y/n, true/false, t/f, 1/0, "arm's length" and its negations
    ("non-arm's length", "not arm's length", "NAL"), qualified/unqualified,
    and words that name a sale not at arm's length (foreclosure, family
    transfer, related party, auction, REO, bank owned, gift...).

    Raises
    ------
    ValueError
        For anything else: an unknown word is never taken as yes.
    """
    if isinstance(value, bool | np.bool_):
        return bool(value)
    if isinstance(value, int | float | np.integer | np.floating) and float(value) in (0.0, 1.0):
        return float(value) == 1.0
    words = normalise_words(str(value))
    tokens = words.split()
    if "arms" in tokens or "arm" in tokens:
        if _NEGATIONS & set(tokens):
            return False
        if set(tokens) <= _ARMS_LENGTH_WORDS:
            return True
    if words in _YES:
        return True
    if words in _NO or words in _NOT_AT_ARMS_LENGTH:
        return False
    if tokens and tokens[0] in _NEGATIONS and " ".join(tokens[1:]) in _YES:
        return False
    raise ValueError(f"'{brief(str(value).strip())}' is not yes or no")


# --- text ----------------------------------------------------------------------------


BRIEF_CHARS = 80
"""A cell quoted in a reason or a note is cut to this many characters."""


def brief(text: str, limit: int = BRIEF_CHARS) -> str:
    """``text`` as a reason quotes it: whole when short, else its start and its length
    (a cell of five million digits must not make a five-megabyte message)."""
    if len(text) <= limit:
        return text
    return f"{text[: limit - 20]}… ({len(text):,} characters)"


def clean_text(value: object) -> str:
    """A text cell: stripped, inner runs of white space kept as they are.

    Typed values become their plain text: ``107.0`` -> ``"107"``, a date -> ISO.
    """
    if type(value) is str:
        return value.strip()
    if isinstance(value, bool | np.bool_):
        return "yes" if value else "no"
    if isinstance(value, float | np.floating) and float(value).is_integer():
        return str(int(value))
    if isinstance(value, datetime):
        return (
            value.isoformat(sep=" ")
            if value.time() != datetime.min.time()
            else value.date().isoformat()
        )
    if isinstance(value, date):
        return value.isoformat()
    return str(value).strip()
