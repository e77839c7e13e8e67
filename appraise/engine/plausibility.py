"""The importer's plausibility rules: values that read as numbers or dates but cannot be right.

A cell such as ``1e308``, ``-1500`` or ``2261-01-01`` parses, and without a check it
would go straight into the fit and give a plausible-looking wrong value. Each rule here
is a setting of :class:`PlausibilityRules` with a documented default; a row that breaks
one is excluded with a reason naming the row, the column and the value, or -- where
the rule cannot tell a typo from a convention -- a note says what was seen and what
was done. Nothing is ever used silently.

=====================================  ============================  ======================
rule                                   default                       outcome
=====================================  ============================  ======================
sale date before ``earliest_sale``     1900-01-01                    row excluded
sale date after reference + margin     today (or the effective       row excluded
                                       date given) + 31 days
price above ``max_price``              1,000,000,000                 row excluded
price below ``min_price``              1,000                         row excluded, unless
                                                                     the file's median is
                                                                     below 1,000 too
                                                                     (``thousands_median``:
                                                                     prices in thousands):
                                                                     note
price below ``min_price_absolute``     0.01                          row excluded, always
living or lot area not positive        --                            row excluded
living area above ``max_living_area``  100,000 (file's unit)         row excluded
lot area above ``max_lot_area``        1,000,000,000 (file's unit)   row excluded
year built after the sale year         more than 1 year after:       row excluded;
                                       ``year_built_margin``         within it: note
grouping separator ambiguity           decided per file              note
=====================================  ============================  ======================

Grouping separators: ``412.500`` is 412.5 with a ``.`` decimal mark and 412,500 with
``.`` grouping. A cell alone cannot say which, so the file decides: cells that read
*only* one way (``1.021.000`` or ``412.500,00`` only with decimal ``,``;
``412,500.00`` only with decimal ``.``) are counted in the price and area columns, and
the whole file is read with the mark most of them need (the setting when none or
equally many do). The choice, and how many ambiguous cells it settled, is a note.
"""

from __future__ import annotations

import datetime as _dt
import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from .cell_columns import fast_numbers
from .cells import brief, clean_text, parse_number
from .coded_cells import CodedCells


@dataclass(frozen=True)
class PlausibilityRules:
    """Limits a sale's values must keep to; each documented in the module table.

    Parameters
    ----------
    earliest_sale:
        Sales dated before this are excluded.
    reference_date:
        The date sales may not be later than (plus ``future_margin_days``): the
        effective date of the valuation when known, else ``None`` for today.
    future_margin_days:
        Days a sale may lie after ``reference_date`` (a contract signed, not yet recorded).
    min_price, max_price:
        The plausible range of a price, in the file's currency. Below ``min_price``
        a row is excluded unless the file's median price is below it too; then the
        file is taken to state prices in another unit (thousands) and a note says so.
    min_price_absolute:
        Below this a price is excluded whatever the file's scale.
    max_living_area, max_lot_area:
        Largest plausible areas, in the file's area unit; areas must be positive.
    min_living_area:
        Smallest plausible living area, in the file's area unit (5: absurd in square feet
        and in square metres alike). A cell such as ``1,500 sq ft`` in a file whose decimal
        mark was decided to be ``,`` reads as 1.5 and was used. As for prices, a file whose
        median living area is below it is taken to state areas in another unit (thousands
        of square feet) and noted, not excluded.
    year_built_margin:
        Years a building's year built may lie after its sale year (sold before
        completion) before the row is excluded; within the margin a note counts them.
    thousands_median:
        A file whose median price is below both this and ``min_price`` is taken to
        state prices in thousands (or another unit): its low prices are noted, not
        excluded.
    """

    earliest_sale: _dt.date = _dt.date(1900, 1, 1)
    reference_date: _dt.date | None = None
    future_margin_days: int = 31
    min_price: float = 1_000.0
    max_price: float = 1_000_000_000.0
    min_price_absolute: float = 0.01
    max_living_area: float = 100_000.0
    min_living_area: float = 5.0
    max_lot_area: float = 1_000_000_000.0
    year_built_margin: int = 1
    thousands_median: float = 1_000.0

    def latest_sale(self, today: _dt.date | None = None) -> _dt.date:
        """The last plausible sale date: reference (or today) plus the margin."""
        ref = self.reference_date or today or _dt.date.today()
        try:
            return ref + _dt.timedelta(days=self.future_margin_days)
        except OverflowError:  # past 9999-12-31 (or before year 1): the calendar's end
            return _dt.date.max if self.future_margin_days >= 0 else _dt.date.min


DEFAULT_RULES = PlausibilityRules()


Check = tuple[np.ndarray, Callable[[int], str], str]
"""One rule's verdict: rows that break it (mask), the reason for row ``i``, the column."""


def _money(v: float) -> str:
    if abs(v) >= 1e15 or (v != 0 and abs(v) < 0.01):
        return f"{v:.3g}".replace("e+", " x 10^").replace("e-", " x 10^-")
    return f"{v:,.2f}".rstrip("0").rstrip(".")


@dataclass
class RowChecks:
    """The rules, grouped where the importer ranks them among its own reasons.

    The importer takes a row's *first* reason in a fixed order: price, then the
    price rules (:meth:`price`), sale date, then :meth:`sale_date`, arm's-length
    flag, then :meth:`rest` (areas, year built), then duplicate sale ids. Each method
    gets the rows still open and returns :data:`Check` verdicts to take in order;
    what a rule notes rather than excludes is collected in :attr:`notes`.

    ``values``: role -> (column header, cleaned values) for ``price``, ``sale_date``,
    ``living_area``, ``lot_area``, ``year_built`` (missing roles are skipped);
    ``raw``: column header -> the cells as read, quoted in the reasons.
    """

    values: Mapping[str, tuple[str, np.ndarray]]
    raw: Mapping[str, Sequence[object]]
    rules: PlausibilityRules = DEFAULT_RULES
    today: _dt.date | None = None
    notes: list[str] = field(default_factory=list)

    def cell(self, column: str, i: int) -> str:
        v = self.raw[column][i]
        return "" if v is None else brief(clean_text(v))

    def price(self, open_rows: np.ndarray) -> list[Check]:
        if "price" not in self.values:
            return []
        r, (col, price) = self.rules, self.values["price"]
        finite = np.isfinite(price)
        with np.errstate(invalid="ignore"):
            high = price > r.max_price  # an infinite price too (a number too long to hold)
            tiny = finite & (price < r.min_price_absolute)
            low = finite & (price < r.min_price) & ~tiny
        out: list[Check] = [
            (high, lambda i: f"price '{self.cell(col, i)}' is above the plausible "
             f"{_money(r.max_price)}", col),
            (tiny, lambda i: f"price '{self.cell(col, i)}' is below {_money(r.min_price_absolute)}",
             col),
        ]  # fmt: skip
        kept = open_rows & finite & (price > 0) & ~high & ~tiny
        median = float(np.median(price[kept])) if kept.any() else np.nan
        if np.isfinite(median) and median < min(r.min_price, r.thousands_median):
            k = int(np.count_nonzero(low & kept))
            if k:
                self.notes.append(
                    f"prices in '{col}' are mostly below {_money(r.min_price)} (median "
                    f"{_money(median)}): taken to be stated in thousands or another unit and "
                    f"kept as read ({k:,} below {_money(r.min_price)})"
                )
        else:
            out.append(
                (low, lambda i: f"price '{self.cell(col, i)}' is below the plausible "
                 f"{_money(r.min_price)}", col)
            )  # fmt: skip
        return out

    def sale_date(self, open_rows: np.ndarray) -> list[Check]:
        if "sale_date" not in self.values:
            return []
        r, (col, dates) = self.rules, self.values["sale_date"]
        days = np.asarray(dates, dtype="datetime64[D]")  # day resolution: no span overflows
        known = ~np.isnat(days)
        last_date = r.latest_sale(self.today)
        ref = "the effective date" if r.reference_date else "today"
        return [
            (known & (days < np.datetime64(r.earliest_sale, "D")),
             lambda i: f"sale date '{self.cell(col, i)}' is before {r.earliest_sale.isoformat()}",
             col),
            (known & (days > np.datetime64(last_date, "D")),
             lambda i: f"sale date '{self.cell(col, i)}' is after {ref} plus "
             f"{r.future_margin_days} days ({last_date.isoformat()})", col),
        ]  # fmt: skip

    def rest(self, open_rows: np.ndarray) -> list[Check]:
        r = self.rules
        out: list[Check] = []
        for role, top in (("living_area", r.max_living_area), ("lot_area", r.max_lot_area)):
            if role not in self.values:
                continue
            col, area = self.values[role]
            with np.errstate(invalid="ignore"):  # NaN (missing) breaks neither; +-inf does
                nonpos, huge = area <= 0, area > top
            what = role.replace("_", " ")
            out.append(
                (nonpos, lambda i, w=what, c=col: f"{w} '{self.cell(c, i)}' is not positive", col)
            )
            if role == "living_area":
                with np.errstate(invalid="ignore"):
                    tiny = (area > 0) & (area < r.min_living_area)
                    typical = area[open_rows & np.isfinite(area) & (area > 0)]
                median = float(np.median(typical)) if len(typical) else np.nan
                if median < r.min_living_area:  # a file stating areas in thousands: noted
                    self.notes.append(
                        f"living areas in '{col}' are mostly below {r.min_living_area:,g} "
                        f"(median {median:,g}): taken to be stated in another unit "
                        f"(thousands?) and kept as read ({int(np.count_nonzero(tiny)):,} below)"
                    )
                else:
                    out.append(
                        (tiny, lambda i, c=col: f"living area '{self.cell(c, i)}' is below the "
                         f"plausible {r.min_living_area:,g}", col)
                    )  # fmt: skip
            out.append(
                (huge, lambda i, w=what, c=col, t=top: f"{w} '{self.cell(c, i)}' is above the "
                 f"plausible {t:,.0f}", col)
            )  # fmt: skip
        if "year_built" in self.values and "sale_date" in self.values:
            col, built = self.values["year_built"]
            years = np.asarray(self.values["sale_date"][1], dtype="datetime64[Y]")
            known = ~np.isnat(years) & np.isfinite(built)
            sale_year = np.where(known, years.astype(np.int64) + 1970, 0)
            with np.errstate(invalid="ignore"):
                after = known & (built > sale_year)
                far = after & (built > sale_year + r.year_built_margin)
            margin = f"{r.year_built_margin} year{'s' * (r.year_built_margin != 1)}"
            out.append(
                (far, lambda i: f"year built '{self.cell(col, i)}' is after the sale year "
                 f"{sale_year[i]} (by more than {margin})", col)
            )  # fmt: skip
            k = int(np.count_nonzero(after & ~far & open_rows))
            if k:
                self.notes.append(
                    f"{k:,} sale{'s were' if k > 1 else ' was'} recorded before the year built in "
                    f"'{col}' (sold before completion?); kept"
                )
        return out


def check_values(
    values: Mapping[str, tuple[str, np.ndarray]],
    raw: Mapping[str, Sequence[object]],
    open_rows: np.ndarray,
    rules: PlausibilityRules = DEFAULT_RULES,
    *,
    today: _dt.date | None = None,
) -> tuple[list[tuple[int, str, str]], list[str]]:
    """Every rule on the rows still open, in the importer's order: (position, reason,
    column) per excluded row, first reason only, and the notes."""
    checks = RowChecks(values, raw, rules, today)
    open_rows = open_rows.copy()
    found: list[tuple[int, str, str]] = []
    for stage in (checks.price, checks.sale_date, checks.rest):
        for mask, why, column in stage(open_rows):
            for i in np.flatnonzero(mask & open_rows):
                found.append((int(i), why(int(i)), column))
            open_rows[mask] = False
    return sorted(found), checks.notes


# --- grouping separators -------------------------------------------------------------------
_SEPARATED = re.compile(r"\d[.,]\d")
_AMBIGUOUS = re.compile(r"[^\d.,]*[1-9]\d{0,2}[.,]\d{3}(?![\d.,])[^\d.,]*")


@dataclass(frozen=True)
class DecimalDecision:
    """The decimal mark the whole file is read with, and the note saying why."""

    mark: str
    note: str | None
    ambiguous: int
    evidence: Mapping[str, int]


def _distinct_texts(cells: Sequence[object]) -> dict[str, int]:
    """Each distinct text cell holding a separator, with its count, in order of first
    appearance (cells are hashed once by pandas; only distinct texts are searched)."""
    if isinstance(cells, np.ndarray) and cells.dtype.kind in "biuf":
        return {}  # a typed number column (Parquet, XLSX) holds no text
    if isinstance(cells, CodedCells):
        codes, uniques = cells.factorized()
    else:
        values = np.empty(len(cells), dtype=object)
        values[:] = cells
        codes, uniques = pd.factorize(values, use_na_sentinel=True)
    counts = np.bincount(codes[codes >= 0], minlength=len(uniques))
    return {
        u: int(c)
        for u, c in zip(uniques, counts, strict=True)
        if isinstance(u, str) and _SEPARATED.search(u)
    }


def _fast_reads(texts: list[str]) -> dict[str, dict[str, bool]]:
    """For each mark, the texts certain to read with it (the importer's vectorised fast
    path, :mod:`.cell_columns`); the others are tried one by one."""
    values = np.array(texts, dtype=object)
    out = {}
    for mark in (".", ","):
        decided = fast_numbers(values, mark)[1] if len(values) else np.zeros(0, bool)
        out[mark] = dict(zip(texts, decided.tolist(), strict=True))
    return out


def decide_decimal_mark(
    columns: Mapping[str, Sequence[object]],
    setting: str,
    *,
    currency_symbol: str = "$",
) -> DecimalDecision:
    """Decide, for the whole file, which mark is the decimal one.

    ``columns`` are the price and area columns as read (header -> cells). A text
    cell with one separator followed by exactly three digits (``412.500``) reads
    both ways and is *ambiguous*; a cell that reads with only one mark is evidence
    for it. The mark with more evidence wins (the setting on a tie); the note reports
    the choice whenever ambiguous cells exist or the choice differs from the setting.
    """
    other = "," if setting == "." else "."
    evidence = {".": 0, ",": 0}
    ambiguous = 0
    example_amb: str | None = None
    example_ev: dict[str, str] = {}
    for cells in columns.values():
        texts = _distinct_texts(cells)
        fast_reads = _fast_reads(list(texts))
        for text, count in texts.items():
            if _AMBIGUOUS.fullmatch(text.strip()):
                ambiguous += count
                example_amb = example_amb or text.strip()
                continue
            reads = [
                m for m in (".", ",") if fast_reads[m].get(text) or _reads(text, m, currency_symbol)
            ]
            if len(reads) == 1:
                evidence[reads[0]] += count
                example_ev.setdefault(reads[0], text.strip())
    mark = other if evidence[other] > evidence[setting] else setting
    note = None
    read_as = _value_text(example_amb, mark, currency_symbol) if example_amb else ""
    if mark != setting:
        note = (
            f"decimal mark: {evidence[other]:,} cell(s) such as '{example_ev[other]}' read only "
            f"with decimal mark '{other}' and {evidence[setting]:,} only with '{setting}', so the "
            f"whole file is read with decimal mark '{other}' (the setting was '{setting}')"
        )
        if ambiguous:
            note += f"; {ambiguous:,} cell(s) such as '{example_amb}' are read as {read_as}"
    elif ambiguous and evidence[setting]:
        note = (
            f"decimal mark '{mark}' as set, confirmed by {evidence[setting]:,} cell(s) such as "
            f"'{example_ev[setting]}'; {ambiguous:,} cell(s) such as '{example_amb}' are read "
            f"as {read_as}"
        )
    elif ambiguous:
        note = (
            f"decimal mark '{mark}' as set, but nothing in the file confirms it: {ambiguous:,} "
            f"cell(s) such as '{example_amb}' are read as {read_as}; if "
            f"{_value_text(example_amb, other, currency_symbol)} is meant, set the decimal "
            f"mark to '{other}'"
        )
    return DecimalDecision(mark, note, ambiguous, dict(evidence))


def _value_text(text: str, mark: str, currency_symbol: str) -> str:
    try:
        v = parse_number(text, decimal=mark, currency_symbol=currency_symbol)  # type: ignore[arg-type]
    except ValueError:
        return "unreadable"
    return f"{v:,.2f}".rstrip("0").rstrip(".")


def _reads(text: str, mark: str, currency_symbol: str) -> bool:
    try:
        parse_number(text, decimal=mark, currency_symbol=currency_symbol)  # type: ignore[arg-type]
    except ValueError:
        return False
    return True


def effective_date_of(subject: Mapping[str, object] | None, model_date: object) -> object:
    """The date of value: the subject's ``effective_date`` when it has one, else the
    model file's (``model_date``), else None -- the order the valuation itself uses."""
    own = (subject or {}).get("effective_date")
    if own is not None and not (isinstance(own, str) and not own.strip()) and own == own:
        return own
    return model_date or None


def rules_at(when: object, base: PlausibilityRules = DEFAULT_RULES) -> PlausibilityRules:
    """``base`` with ``when`` (the effective date: a date, a timestamp or ISO text) as the
    date sales may not lie after (plus the margin).

    ``base`` is returned unchanged when it names a reference date of its own (a rules
    file said so), when ``when`` is empty, or when it is not a date (whoever reads the
    date reports that, with its file and field).
    """
    if base.reference_date is not None or when is None:
        return base
    if isinstance(when, _dt.datetime):
        day = when.date()
    elif isinstance(when, _dt.date):
        day = when
    else:
        try:
            day = _dt.date.fromisoformat(str(when).strip()[:10])
        except ValueError:
            return base
    return replace(base, reference_date=day)


# --- reading the rules from a file -----------------------------------------------------------
def rules_from_mapping(data: Mapping[str, object], *, source: str = "<rules>") -> PlausibilityRules:
    """Rules from a mapping of field -> value (a TOML table); unknown keys and wrong types
    are a :class:`~appraise.engine.errors.DataError` naming the key.

    Example (``rules.toml``)::

        min_price = 50_000
        max_price = 5_000_000
        earliest_sale = 2015-01-01
        future_margin_days = 0
    """
    import dataclasses

    from .errors import DataError

    fields = {f.name: f for f in dataclasses.fields(PlausibilityRules)}
    out: dict[str, object] = {}
    for key, value in data.items():
        if key not in fields:
            raise DataError(
                f"'{key}' is not a plausibility rule (rules: {', '.join(fields)})", file=source
            )
        if key in ("earliest_sale", "reference_date"):
            if isinstance(value, str):
                try:
                    value = _dt.date.fromisoformat(value)
                except ValueError:
                    value = None
            if not isinstance(value, _dt.date) or isinstance(value, _dt.datetime):
                raise DataError(f"'{key}' must be a date written YYYY-MM-DD", file=source)
        elif key in ("future_margin_days", "year_built_margin"):
            if isinstance(value, bool) or not isinstance(value, int) or not 0 <= value <= 36_500:
                raise DataError(f"'{key}' must be a whole number from 0 to 36,500", file=source)
        else:
            if isinstance(value, bool) or not isinstance(value, int | float) or not value >= 0:
                raise DataError(f"'{key}' must be a number, 0 or more", file=source)
            value = float(value)
        out[key] = value
    rules = dataclasses.replace(DEFAULT_RULES, **out)  # type: ignore[arg-type]
    if rules.min_price > rules.max_price:
        raise DataError("'min_price' is above 'max_price'", file=source)
    if rules.min_living_area > rules.max_living_area:
        raise DataError("'min_living_area' is above 'max_living_area'", file=source)
    return rules
