"""Candidate terms, written as feature lines of the model file, from the columns and the model.

Each column that passed the guards (:mod:`.guards`) gets a small set of *forms*: the
ways it may enter the model, of which the model holds at most one at a time (the search
swaps one form for another). A column may also give *extras*, terms that go beside a
form (a hinge beside the straight line, an interaction). What is proposed, and why:

numeric column, many values
    as is; ``log(x)`` when every value is positive and the spread is right-skewed
    (sample skewness above :data:`SKEW_FOR_LOG`); ``log1p(x)`` when the same holds with
    zeros present (a basement area of 0); ``poly(x, degree=2)``; and the extra
    ``hinge(x, k)`` with the knot k at the median, rounded to two significant figures.
numeric column, few whole values (an ordered grade 1-10, a count)
    as a score (as is) and as a quadratic ``poly(x, degree=2)``.
numeric 0/1 column
    as is.
text column, 2 to :data:`MAX_LEVELS` levels
    ``onehot(c)``; when some level has fewer than :data:`MIN_LEVEL` sales and the
    expression language pools thin levels, ``onehot(c, min_count=5)`` instead.
    A text grade with a natural order (poor ... excellent) is also offered as a quadratic
    score ``poly(grade(c, 'poor', 'fair', ...), degree=2)`` (1, 2, ... in that order).
    The straight score alone is not offered for a text grade: on the sample town it was
    taken first, being one column, and the stopping rule then kept it over the better
    forms (leave-one-out log RMSE 0.0834 against 0.0824 with the quadratic offered).
date column
    only as ``months_between(date, 'effective date')``, a derived name.
coordinates (latitude and longitude roles)
    the distance to the centre of the sales (their median point, a derived name), and
    the size x distance interaction when a living-area role exists.
region role with a size term
    size x region (``size * onehot(region)``) when the expression language has it.
the current model
    dropping each term; every other form of the column a term encodes (a transform of
    a term already in the model).

Nothing here reads the price: forms and knots come from the columns alone.
"""

from __future__ import annotations

import keyword
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType

import numpy as np
import pandas as pd

from ..design import learn_design
from ..errors import AppraiseError
from ..fitting import FitResult
from ..functions import FUNCTIONS
from ..roles import header_words
from ..sales import column_kind
from .guards import Screen

SKEW_FOR_LOG = 1.0
"""Sample skewness above which a positive column is also offered on the log scale."""

MAX_LEVELS = 50
"""A text column with more levels than this is not offered as a category."""

MIN_LEVEL = 5
"""Fewer sales than this in a level is thin: pooled when the language can pool."""

HINGE_QUANTILES: tuple[tuple[float, str, bool], ...] = (
    (0.1, "10th percentile", False),
    (0.25, "lower quartile", False),
    (0.5, "median", True),
    (0.75, "upper quartile", True),
    (0.9, "90th percentile", True),
)
"""Where hinges are offered: knots at these shares of a column's values (no price used);
True: a change of slope above the knot (``hinge(x, k)``), False: below it
(``hinge(k - x, 0)``, the old end of a year built, say)."""

MAX_MISSING_SHARE = 0.02
"""A column missing on at most this share of the sales is still proposed; the search then
leaves those sales out (for every model it compares, so the comparison stays paired)."""

GRADE_MAX_VALUES = 10
"""A whole-number column with at most this many values is treated as a grade or count."""

ORDERED_VOCABULARIES: tuple[tuple[str, ...], ...] = (
    ("very poor", "poor", "fair", "average", "good", "very good", "excellent"),
    ("po", "fa", "ta", "gd", "ex"),
    ("low", "medium", "high"),
    ("bad", "fair", "good"),
    ("below average", "average", "above average"),
)
"""Text levels with a natural order (lower case, worst first)."""


@dataclass(frozen=True)
class Form:
    """One term a column may give.

    ``key`` is the column (or derived name) the term encodes; forms of one key replace
    each other, extras (``extra`` True) go beside them. ``why`` says why it was proposed.
    An extra that ``requires`` a key goes only beside a form of it: beside the one the
    model holds, or together with ``pair`` (a feature of that key) added in the same step
    (an interaction comes with its main effect); with no ``pair`` the key must be there.
    """

    feature: str
    key: str
    why: str
    extra: bool = False
    requires: str | None = None
    pair: str | None = None


@dataclass(frozen=True)
class CandidatePool:
    """Every form and extra proposed, the derived names they need, and what was skipped."""

    forms: tuple[Form, ...]
    derived: Mapping[str, str] = field(default_factory=lambda: MappingProxyType({}))
    skipped: tuple[tuple[str, str], ...] = ()
    notes: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        return {
            "forms": [
                {
                    "feature": f.feature,
                    "key": f.key,
                    "why": f.why,
                    "extra": f.extra,
                    "requires": f.requires,
                    "pair": f.pair,
                }
                for f in self.forms
            ],
            "derived": dict(self.derived),
            "skipped": [{"what": w, "reason": r} for w, r in self.skipped],
            "notes": list(self.notes),
        }


def language_has(function: str, keyword_name: str) -> bool:
    """Whether the expression language's ``function`` accepts ``keyword_name``."""
    info = FUNCTIONS.get(function)
    return info is not None and keyword_name in info.keywords


def reference(header: str, fit: FitResult) -> str:
    """How a feature line names ``header``: its role name, its header, or the backquoted header."""
    role = fit.sales.roles.role_of(header)
    cols = set(map(str, fit.frame.columns))
    if role and role not in cols and role not in fit.spec.derived:
        return role
    if header.isidentifier() and not keyword.iskeyword(header) and header not in FUNCTIONS:
        return header
    return f"`{header}`"


def _nice(x: float) -> str:
    """``x`` rounded to two significant figures, written without an exponent."""
    if x == 0 or not np.isfinite(x):
        return "0"
    digits = 1 - int(np.floor(np.log10(abs(x))))
    v = round(x, digits)
    return f"{v:.{max(digits, 0)}f}"


def _round_to_spread(x: float, spread: float) -> str:
    """``x`` rounded to the power of ten at or below a twentieth of ``spread`` (6,430 with
    an interquartile range of 4,000 -> 6,400), written without an exponent."""
    if not spread > 0:
        return _nice(x)
    e = int(np.floor(np.log10(spread / 20)))
    v = round(x / 10.0**e) * 10.0**e
    return f"{v:.{max(-e, 0)}f}"


def _skewness(v: np.ndarray) -> float:
    d = v - v.mean()
    s = np.sqrt(np.mean(d * d))
    return float(np.mean(d**3) / s**3) if s > 0 else 0.0


def _ordered(levels: set[str]) -> tuple[str, ...] | None:
    low = {header_words(v) for v in levels}
    for vocab in ORDERED_VOCABULARIES:
        if len(low) >= 3 and low <= set(vocab):
            return tuple(v for v in vocab if v in low)
    return None


def _grade_expression(name: str, levels, order: tuple[str, ...]) -> str | None:
    """``grade(name, 'Poor', 'Fair', ...)`` with the column's own level texts in the order
    of the vocabulary; None when a level cannot be quoted or two differ only in case."""
    ranked = sorted(levels, key=lambda lv: order.index(header_words(lv)))
    if len({str(lv).strip().casefold() for lv in ranked}) != len(ranked):
        return None
    quoted = []
    for lv in ranked:
        text = str(lv)
        if "'" not in text:
            quoted.append(f"'{text}'")
        elif '"' not in text:
            quoted.append(f'"{text}"')
        else:
            return None
    return f"grade({name}, {', '.join(quoted)})"


def _numeric_forms(name: str, key: str, v: np.ndarray, is_derived: bool) -> list[Form]:
    distinct = np.unique(v)
    label = "derived " if is_derived else ""
    if distinct.size == 2:
        return [Form(name, key, f"{label}two-valued column, as a 0/1 flag")]
    whole = bool(np.all(distinct == np.round(distinct)))
    if whole and distinct.size <= GRADE_MAX_VALUES:
        what = f"few whole values ({distinct.size}, {_nice(distinct[0])} to {_nice(distinct[-1])})"
        return [
            Form(name, key, f"{label}{what}: as a score"),
            Form(f"poly({name}, degree=2)", key, f"{label}{what}: as a quadratic score"),
        ]
    forms = [Form(name, key, f"{label}numeric column, as is")]
    skew = _skewness(v)
    if distinct[0] > 0 and skew > SKEW_FOR_LOG:
        forms.append(
            Form(f"log({name})", key, f"positive and right-skewed (skewness {skew:.2f}): log")
        )
    elif distinct[0] == 0 and skew > SKEW_FOR_LOG and np.mean(v > 0) > 0.5:
        forms.append(
            Form(
                f"log1p({name})",
                key,
                f"zero or positive and right-skewed (skewness {skew:.2f}): log(1 + x)",
            )
        )
    forms.append(Form(f"poly({name}, degree=2)", key, "a curve: quadratic"))
    q1, q3 = np.quantile(v, [0.25, 0.75])
    for share, label, upward in HINGE_QUANTILES:
        knot = _round_to_spread(float(np.quantile(v, share)), float(q3 - q1))
        beyond = float(np.mean(v > float(knot))) if upward else float(np.mean(v < float(knot)))
        feature = f"hinge({name}, {knot})" if upward else f"hinge({knot} - {name}, 0)"
        side = "above" if upward else "below"
        if 0.05 <= beyond <= 0.95 and not any(f.feature == feature for f in forms):
            forms.append(
                Form(
                    feature,
                    key,
                    f"a change of slope {side} the {label} ({knot})",
                    extra=True,
                    requires=key,
                )
            )
    return forms


def _evaluate(fit: FitResult, name: str, derived: Mapping[str, str]) -> np.ndarray | None:
    try:
        d = learn_design([name], fit.frame, derived=derived, roles=fit.sales.roles, intercept=False)
        built = d.build(fit.frame)
    except AppraiseError:
        return None
    if not np.all(built.row_ok) or built.matrix.shape[1] != 1:
        return None
    return np.asarray(built.matrix[:, 0], dtype=float)


def mentions(text: str, name: str) -> bool:
    """Whether ``name`` occurs in ``text`` as a whole name."""
    return re.search(rf"(?<![\w`]){re.escape(name)}(?![\w`])", text) is not None


def propose(fit: FitResult, screen: Screen) -> CandidatePool:
    """Forms and extras for every allowed column and derived name (see the module text)."""
    frame = fit.frame
    n = len(frame)
    derived = dict(fit.spec.derived)
    added: dict[str, str] = {}
    forms: list[Form] = []
    skipped: list[tuple[str, str]] = []
    notes: list[str] = []
    roles = fit.sales.roles
    allowed = set(screen.allowed)
    pool_levels = language_has("onehot", "min_count")

    for col in screen.allowed:
        s = frame[col]
        kind = column_kind(s)
        missing = int(s.isna().sum())
        if missing > MAX_MISSING_SHARE * n:
            skipped.append((col, f"missing on {missing:,} of the {n:,} sales used"))
            continue
        s = s.dropna()
        name = reference(col, fit)
        if kind == "number":
            v = s.to_numpy(dtype=float)
            if not np.all(np.isfinite(v)):
                skipped.append((col, "holds values that are not finite"))
                continue
            if np.unique(v).size < 2:
                skipped.append((col, "the same value on every sale"))
                continue
            forms.extend(_numeric_forms(name, col, v, False))
        else:
            labels = s.astype(str)
            counts = labels.value_counts()
            if counts.size < 2:
                skipped.append((col, "a single level"))
                continue
            if counts.size > MAX_LEVELS:
                skipped.append((col, f"{counts.size:,} levels: too many for a category"))
                continue
            order = _ordered(set(counts.index))
            thin = int((counts < MIN_LEVEL).sum())
            why = f"category with {counts.size} levels"
            if order:
                why = f"ordered grade ({' < '.join(order)}), as levels"
                scored = _grade_expression(name, counts.index, order)
                if scored is not None:
                    what = f"ordered grade ({' < '.join(order)})"
                    forms.append(
                        Form(f"poly({scored}, degree=2)", col, f"{what}: as a quadratic score")
                    )
            if thin and pool_levels:
                forms.append(
                    Form(
                        f"onehot({name}, min_count={MIN_LEVEL})",
                        col,
                        f"{why}; {thin} level(s) with fewer than {MIN_LEVEL} sales pooled",
                    )
                )
            else:
                if thin:
                    why += f" ({thin} with fewer than {MIN_LEVEL} sales)"
                forms.append(Form(f"onehot({name})", col, why))

    # dates: only through months_between
    for r in screen.refused:
        if r.column in frame.columns and column_kind(frame[r.column]) == "date":
            col = r.column
            if frame[col].isna().any():
                skipped.append((col, "a date missing on some sales"))
                continue
            name = reference(col, fit)
            existing = next(
                (k for k, e in derived.items() if "months_between" in e and mentions(e, name)),
                None,
            )
            if existing is None:
                ref = fit.spec.effective_date or str(frame[col].max().date())
                existing = _free_name("sale_months", frame, derived, added)
                added[existing] = f"months_between({name}, '{ref}')"
            why = "market conditions: months to the effective date"
            forms.append(Form(existing, existing, why))
            forms.append(
                Form(
                    f"poly({existing}, degree=2)",
                    existing,
                    "market conditions that bend: quadratic",
                )
            )

    # derived names of the model file (forms of those the model uses serve as swaps)
    for name in derived:
        if any(f.feature == name for f in forms):
            continue
        v = _evaluate(fit, name, derived)
        if v is None:
            skipped.append((name, "derived name that cannot be evaluated on every sale"))
            continue
        inputs = _inputs_of(fit, name, derived)
        if not inputs <= allowed | {c.column for c in screen.refused if "date" in c.reason}:
            skipped.append((name, "derived from a column the guards refused"))
            continue
        if np.unique(v).size >= 2:
            forms.extend(_numeric_forms(name, name, v, True))

    # coordinates: distance to the centre, and size x distance
    lat, lon = roles.column("latitude"), roles.column("longitude")
    area = roles.column("living_area")
    if lat in allowed and lon in allowed and not frame[[lat, lon]].isna().any().any():
        existing = next((k for k, e in derived.items() if "distance_km" in e), None)
        dist_key = existing
        if existing is None:
            c_lat = float(np.median(frame[lat].to_numpy(dtype=float)))
            c_lon = float(np.median(frame[lon].to_numpy(dtype=float)))
            existing = _free_name("centre_km", frame, derived, added)
            added[existing] = (
                f"distance_km({reference(lat, fit)}, {reference(lon, fit)}, "
                f"{c_lat:.4f}, {c_lon:.4f})"
            )
            why = "distance to the median point of the sales, in km"
            forms.append(Form(existing, existing, why))
            dist_key = existing
        if area in allowed and not frame[area].isna().any():
            a = reference(area, fit)
            forms.append(
                Form(
                    f"{a} * {existing}",
                    f"{a} * {existing}",
                    "size x distance to the centre: floor area worth less far out",
                    extra=True,
                    requires=dist_key,
                    pair=existing,
                )
            )
    region = roles.column("region")
    if region in allowed and area in allowed and "onehot_product" in _kinds():
        size = next(
            (g.expression for g in fit.design.groups if g.kind == "plain" and area in g.inputs
             and len(g.inputs) == 1),
            reference(area, fit),
        )  # fmt: skip
        forms.append(
            Form(
                f"{size} * onehot({reference(region, fit)})",
                f"{size} x region",
                "region x size: a different price per unit of area in each region",
                extra=True,
                requires=region,
                pair=f"onehot({reference(region, fit)})",
            )
        )
    return CandidatePool(
        forms=tuple(_dedupe(forms)),
        derived=MappingProxyType(added),
        skipped=tuple(skipped),
        notes=tuple(notes),
    )


def _kinds() -> tuple[str, ...]:
    from .. import design

    return tuple(getattr(design, "KINDS", ()))


def _inputs_of(fit: FitResult, name: str, derived: Mapping[str, str]) -> set[str]:
    try:
        d = learn_design([name], fit.frame, derived=derived, roles=fit.sales.roles, intercept=False)
    except AppraiseError:
        return set()
    return set(d.inputs)


def _free_name(base: str, frame: pd.DataFrame, *taken: Mapping[str, str]) -> str:
    name, k = base, 2
    while name in frame.columns or any(name in t for t in taken):
        name, k = f"{base}_{k}", k + 1
    return name


def _dedupe(forms: list[Form]) -> list[Form]:
    seen: set[str] = set()
    out = []
    for f in forms:
        if f.feature not in seen:
            seen.add(f.feature)
            out.append(f)
    return out
