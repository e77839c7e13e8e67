"""What the model assistant will never propose, and why.

Two guards run on every column of the sales before a single candidate is written:

Leakage guard (the price must not explain itself)
    * the target column (the price itself);
    * a column whose header says it is a price, a value or an assessment: a list or
      asking price, an assessed or appraised value, a price per area;
    * a column computed from the price: absolute correlation above
      :data:`LEAK_CORRELATION` with the price or with log price, or a column that times
      (or, on the log scale, plus) some other column reproduces the price with that
      correlation (a price per square foot times the area);
    * the sale id, a row number or any other identifier (a text column with a different
      value on (nearly) every sale, or a whole-number column counting 1, 2, 3...);
    * a date column as it stands: dates enter only through the time functions
      (``months_between``), which the candidates use.

Fair-lending guard (protected characteristics and their proxies stay out)
    * a header naming a protected characteristic (race, colour, ethnicity or national
      origin, religion, sex or gender, familial or marital status, disability, the age
      of the occupants) or a demographic share of an area (percent of a population
      group in a tract, block or zip code);
    * text values that are themselves protected categories (at least two levels such
      as "female"/"male", or "hispanic"/"asian").

The lists are deliberately broad: a column refused by mistake costs one line the user
can add by hand, with the warning :func:`protected_columns` returns repeated on the
worksheet; a protected column proposed by the tool would be a fault.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..roles import RoleMap, header_words
from ..sales import ROW_COLUMN, column_kind

LEAK_CORRELATION = 0.98
"""Absolute correlation with price (or log price) above which a column is refused."""

ID_SHARE = 0.95
"""A text column with distinct values on more than this share of the sales is an identifier."""

LEAKAGE = "leakage"
FAIR_LENDING = "fair lending"

_PRICE_WORDS = {
    "price", "prices", "priced", "pricing", "ppsf", "ppsqft", "ppsm", "assessment",
    "assessments", "assessed", "assessor", "appraised", "appraisal", "valuation",
    "value", "values", "valued", "worth", "avm", "estimate", "zestimate",
}  # fmt: skip
_PRICE_PHRASES = (
    ("list",),
    ("listing",),
    ("asking",),
    ("sold", "for"),
    ("sale", "amount"),
    ("sales", "amount"),
    ("per", "sq"),
    ("per", "sqft"),
    ("per", "square"),
    ("per", "foot"),
    ("per", "ft"),
    ("per", "m2"),
    ("per", "area"),
    ("tax", "value"),
    ("market", "value"),
)
_ID_WORDS = {"id", "ids", "identifier", "uid", "pid", "parcel", "apn", "mls", "row",
             "rownum", "index", "idx", "record", "recno", "order", "serial", "key"}  # fmt: skip

# characteristic -> header words (any) and phrases (all words, in order)
_PROTECTED: Mapping[str, tuple[set[str], tuple[tuple[str, ...], ...]]] = {
    "race or colour": (
        {"race", "races", "racial", "skin", "complexion"},
        (("colour", "of", "skin"), ("color", "of", "skin")),
    ),
    "ethnicity or national origin": (
        {
            "ethnic",
            "ethnicity",
            "ethnicities",
            "hispanic",
            "latino",
            "latina",
            "latinx",
            "nationality",
            "citizenship",
            "immigrant",
            "immigrants",
            "ancestry",
            "foreign",
        },
        (("national", "origin"), ("country", "of", "birth"), ("born", "abroad")),
    ),  # fmt: skip
    "religion": ({"religion", "religious", "faith", "denomination", "church", "mosque"}, ()),
    "sex or gender": (
        {"sex", "gender", "female", "male", "females", "males", "women", "men", "woman", "man"},
        (),
    ),
    "familial or marital status": (
        {"familial", "marital", "married", "pregnant", "pregnancy", "children", "kids"},
        (("family", "status"), ("household", "type"), ("single", "parent")),
    ),
    "disability": ({"disability", "disabled", "handicap", "handicapped", "impairment"}, ()),
    "age of the occupants": (
        {"elderly", "seniors", "retirees"},
        (
            ("owner", "age"),
            ("age", "of", "owner"),
            ("occupant", "age"),
            ("age", "of", "occupant"),
            ("age", "of", "occupants"),
            ("buyer", "age"),
            ("seller", "age"),
            ("resident", "age"),
            ("head", "of", "household"),
        ),
    ),
    "a demographic share of an area": (
        {
            "minority",
            "minorities",
            "demographic",
            "demographics",
            "black",
            "blacks",
            "white",
            "whites",
            "asian",
            "asians",
        },
        (
            ("share", "of", "population"),
            ("percent", "population"),
            ("pct", "population"),
            ("population", "share"),
        ),
    ),  # fmt: skip
}
_DEMOGRAPHIC_CONTEXT = {"pct", "percent", "share", "proportion", "fraction", "prop", "tract",
                        "census", "block", "zip", "population", "residents", "neighbourhood",
                        "neighborhood", "area"}  # fmt: skip
_COLOUR_PARTS = {"exterior", "paint", "roof", "siding", "trim", "door", "wall", "walls",
                 "brick", "stone", "facade", "shutter", "shutters", "cabinet", "cabinets",
                 "floor", "carpet", "house", "garage", "fence"}  # fmt: skip
_PROTECTED_VALUES = {
    "female", "male", "woman", "man", "women", "men", "hispanic", "latino", "latina",
    "asian", "african american", "caucasian", "native american", "pacific islander",
    "christian", "muslim", "jewish", "hindu", "buddhist", "catholic", "protestant",
    "married", "divorced", "widowed", "disabled", "non hispanic", "not hispanic",
}  # fmt: skip
_COLOUR_NAMES = {"white", "black", "brown", "red", "yellow"}


@dataclass(frozen=True)
class Refusal:
    """A column the assistant will not use: ``guard`` is "leakage" or "fair lending"."""

    column: str
    guard: str
    reason: str

    def to_dict(self) -> dict:
        return {"column": self.column, "guard": self.guard, "reason": self.reason}


@dataclass(frozen=True)
class Screen:
    """The columns that passed both guards, and every refusal with its reason."""

    allowed: tuple[str, ...]
    refused: tuple[Refusal, ...]

    def refused_by(self, guard: str) -> tuple[Refusal, ...]:
        return tuple(r for r in self.refused if r.guard == guard)

    def to_dict(self) -> dict:
        return {"allowed": list(self.allowed), "refused": [r.to_dict() for r in self.refused]}


def _words(header: str) -> tuple[str, ...]:
    return tuple(header_words(header).split())


def _has(words: tuple[str, ...], phrase: tuple[str, ...]) -> bool:
    k = len(phrase)
    return any(words[i : i + k] == phrase for i in range(len(words) - k + 1))


def protected_reason(header: str, values: Iterable[str] = ()) -> str | None:
    """Why a column looks like a protected characteristic or a proxy for one, else None."""
    words = _words(header)
    wset = set(words)
    for what, (single, phrases) in _PROTECTED.items():
        hit = sorted(wset & single)
        if what == "a demographic share of an area" and hit and not (wset & _DEMOGRAPHIC_CONTEXT):
            hit = []  # "white" alone may be a paint colour; a share of a tract is not
        if what == "sex or gender" and hit and wset & {"bath", "baths", "room", "rooms"}:
            hit = []
        phrase = next((" ".join(p) for p in phrases if _has(words, p)), None)
        if hit or phrase:
            return f"header suggests {what} ('{phrase or hit[0]}')"
    if wset & {"colour", "color", "colours", "colors"} and not wset & _COLOUR_PARTS:
        return "header suggests race or colour ('colour' of a person, not of a house part)"
    levels = {header_words(v) for v in values}
    named = sorted(levels & _PROTECTED_VALUES)
    colours = levels & _COLOUR_NAMES
    if len(named) >= 2 or (named and colours):
        shown = ", ".join(f"'{v}'" for v in (named + sorted(colours))[:4])
        return f"values are protected categories ({shown})"
    return None


def _price_name_reason(header: str) -> str | None:
    words = _words(header)
    hit = sorted(set(words) & _PRICE_WORDS)
    if hit:
        return f"header says it is a price, a value or an assessment ('{hit[0]}')"
    phrase = next((" ".join(p) for p in _PRICE_PHRASES if _has(words, p)), None)
    if phrase:
        return f"header says it is derived from a price ('{phrase}')"
    return None


def _is_identifier(header: str, s: pd.Series, kind: str, n: int) -> str | None:
    words = set(_words(header))
    if words & _ID_WORDS and (kind == "text" or s.nunique() > ID_SHARE * n):
        return "an identifier (header names an id or a row number)"
    if kind == "text" and n >= 20 and s.nunique() > ID_SHARE * n:
        return f"an identifier ({s.nunique():,} different values among {n:,} sales)"
    if kind == "number" and n >= 20:
        v = s.to_numpy(dtype=float)
        v = v[np.isfinite(v)]
        if v.size == n and np.all(v == np.round(v)):
            d = np.diff(np.sort(v))
            if np.unique(v).size == v.size and d.size and np.all(d == 1):
                return "a row number (whole numbers counting up by one, one per sale)"
    return None


def _corr_matrix_with(a: np.ndarray, targets: np.ndarray) -> np.ndarray:
    """Absolute correlation of every column of ``a`` (n, m) with every column of
    ``targets`` (n, t), over rows where both are finite (pairwise)."""
    out = np.zeros((a.shape[1], targets.shape[1]))
    for j in range(targets.shape[1]):
        t = targets[:, j]
        ok = np.isfinite(a) & np.isfinite(t)[:, None]
        cnt = ok.sum(axis=0)
        x = np.where(ok, a, 0.0)
        tt = np.where(ok, t[:, None], 0.0)
        with np.errstate(invalid="ignore", divide="ignore"):
            mx = x.sum(axis=0) / cnt
            mt = tt.sum(axis=0) / cnt
            cov = (np.where(ok, (x - mx) * (tt - mt), 0.0)).sum(axis=0)
            vx = (np.where(ok, (x - mx) ** 2, 0.0)).sum(axis=0)
            vt = (np.where(ok, (tt - mt) ** 2, 0.0)).sum(axis=0)
            r = np.abs(cov / np.sqrt(vx * vt))
        out[:, j] = np.where((cnt > 2) & np.isfinite(r), r, 0.0)
    return out


def screen_columns(
    frame: pd.DataFrame, target: str, roles: RoleMap | None = None, *, exempt: Iterable[str] = ()
) -> Screen:
    """Run both guards over every column of the sales.

    Parameters
    ----------
    frame:
        The sales used (cleaned columns as the importer gives them).
    target:
        The header of the price column.
    roles:
        The role map: the sale-id role is refused as an identifier.
    exempt:
        Columns not to screen for a price by correlation (none by default). The
        fair-lending and name checks apply to every column regardless.
    """
    roles = roles or RoleMap({})
    exempt = set(exempt)
    id_col = roles.column("sale_id")
    price = pd.to_numeric(frame[target], errors="coerce").to_numpy(dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        log_price = np.where(price > 0, np.log(np.where(price > 0, price, 1.0)), np.nan)
    n = len(frame)
    refused: dict[str, Refusal] = {}
    numeric: list[str] = []
    for col in frame.columns:
        if col == ROW_COLUMN:
            continue
        if col == target:
            refused[col] = Refusal(col, LEAKAGE, "the price itself")
            continue
        s = frame[col]
        kind = column_kind(s)
        values = s.dropna().astype(str).unique()[:200] if kind == "text" else ()
        why = protected_reason(col, values)
        if why:
            refused[col] = Refusal(col, FAIR_LENDING, why)
            continue
        if col == id_col:
            refused[col] = Refusal(col, LEAKAGE, "the sale id")
            continue
        why = _price_name_reason(col)
        if why:
            refused[col] = Refusal(col, LEAKAGE, why)
            continue
        why = _is_identifier(col, s, kind, n)
        if why:
            refused[col] = Refusal(col, LEAKAGE, why)
            continue
        if kind == "date":
            refused[col] = Refusal(
                col, LEAKAGE, "a date: used only through months_between, never as it stands"
            )
            continue
        if kind == "number" and col not in exempt:
            numeric.append(col)
    _correlation_guard(frame, numeric, price, log_price, refused)
    allowed = tuple(c for c in frame.columns if c != ROW_COLUMN and c not in refused)
    return Screen(allowed, tuple(refused.values()))


def _correlation_guard(
    frame: pd.DataFrame,
    numeric: list[str],
    price: np.ndarray,
    log_price: np.ndarray,
    refused: dict[str, Refusal],
) -> None:
    if not numeric:
        return
    a = frame[numeric].to_numpy(dtype=float)
    targets = np.column_stack([price, log_price])
    r = _corr_matrix_with(a, targets)
    for j, col in enumerate(numeric):
        if r[j].max() > LEAK_CORRELATION:
            which = "price" if r[j, 0] >= r[j, 1] else "log price"
            refused[col] = Refusal(
                col, LEAKAGE, f"correlation {r[j].max():.3f} with {which}: computed from the price?"
            )
    # a price per area: log(column) + log(other) tracks log price
    left = [j for j, c in enumerate(numeric) if c not in refused]
    if len(left) < 2:
        return
    with np.errstate(invalid="ignore", divide="ignore"):
        logs = np.where(a[:, left] > 0, np.log(np.where(a[:, left] > 0, a[:, left], 1.0)), np.nan)
    for i, j in enumerate(left):
        sums = logs[:, [i]] + np.delete(logs, i, axis=1)
        rr = _corr_matrix_with(sums, log_price[:, None])[:, 0]
        if rr.size and rr.max() > LEAK_CORRELATION:
            others = [numeric[k] for k in left if k != j]
            other = others[int(np.argmax(rr))]
            col = numeric[j]
            # of the pair, refuse the one that is not a plain attribute: the one whose
            # own correlation with log price is the weaker (an area alone tracks price
            # better than a price per area does)
            k = left[int(np.argmax(rr)) + (1 if int(np.argmax(rr)) >= i else 0)]
            mine = _corr_matrix_with(a[:, [j]], log_price[:, None])[0, 0]
            theirs = _corr_matrix_with(a[:, [k]], log_price[:, None])[0, 0]
            if mine <= theirs and col not in refused:
                refused[col] = Refusal(
                    col,
                    LEAKAGE,
                    f"times '{other}' it reproduces the price (correlation {rr.max():.3f} "
                    "on the log scale): a price per area?",
                )


def protected_columns(features_inputs: Iterable[str], frame: pd.DataFrame) -> tuple[str, ...]:
    """Warnings for columns a model reads that the fair-lending guard would refuse.

    A user may put such a column in a model by hand; the worksheet then repeats the
    warning returned here (one text per column).
    """
    out = []
    for col in dict.fromkeys(features_inputs):
        if col not in frame.columns:
            continue
        s = frame[col]
        values = s.dropna().astype(str).unique()[:200] if column_kind(s) == "text" else ()
        why = protected_reason(col, values)
        if why:
            out.append(
                f"the model reads '{col}', which the fair-lending guard would not propose: {why}"
            )
    return tuple(out)
