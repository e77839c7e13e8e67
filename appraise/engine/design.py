"""From feature expressions to the design matrix, learned once and applied to any rows.

:func:`learn_design` parses every feature, resolves its names and learns from the
sales what must be learned (the levels of each ``onehot`` category and its
reference level). The result, a frozen :class:`DesignSpec`, turns any frame with
the same headers into numbers with :meth:`DesignSpec.build` -- the sales for
fitting, and the one-row subject frame for valuing, encoded exactly alike. A
subject with a level the sales never showed is an error, never a silent row of
zeros.

Design columns, in feature order after ``Intercept``:

* a plain expression gives one column named by its normalised text
  (``living_area * dist_km``);
* ``onehot(region)`` gives ``region[Heronmoor]``, one 0/1 column per level except
  the reference;
* ``x * onehot(region)`` (kind "onehot_product") gives ``x * region[Heronmoor]``, x times
  each level's indicator except the reference: with ``x`` and ``onehot(region)`` also in
  the model, the slope of x in a level is the coefficient of ``x`` plus that column's;
* ``poly(a, b, degree=m)`` gives every monomial of total degree 1..m:
  ``C(d + m, m) - 1`` columns for d inputs, ordered by degree and then
  lexicographically by input (``a``, ``b``, ``a^2``, ``a*b``, ``b^2``...).

A row is *not ok* when an input it needs is missing (NaN, NaT, empty text) or
when a feature value is not finite (log of 0...). Such rows are listed in
:attr:`Design.problems` with a reason; their matrix rows may hold NaN.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace
from itertools import combinations_with_replacement
from math import comb

import numpy as np
import pandas as pd

from .errors import DesignError, ExpressionError
from .expressions import (
    Binary,
    Call,
    Column,
    DerivedRef,
    NameScope,
    Node,
    Number,
    Text,
    Unary,
    columns_read,
    derived_order,
    feature_shape,
    is_atom,
    iso_date,
    nonfinite_hint,
    parse_expression,
    to_text,
)
from .functions import DATE, DATE_OR_ISO, FUNCTIONS
from .limits import design_size_problem
from .roles import RoleMap
from .sales import ROW_COLUMN

INTERCEPT = "Intercept"
"""Name of the constant column, first when the design has one."""

MAX_POLY_COLUMNS = 500
"""Most columns a single ``poly(...)`` may expand to."""

KINDS = ("plain", "onehot", "poly", "onehot_product")


@dataclass(frozen=True)
class TermGroup:
    """The design columns one feature expands to.

    ``expression`` is the feature's normalised text; ``kind`` is "plain", "onehot",
    "poly" or "onehot_product" (``x * onehot(c)``); ``reference`` is the reference
    level of a ``onehot`` (the level without a column), else None; ``inputs`` the frame headers the feature reads;
    ``levels`` every learned level of a ``onehot`` (the reference included), in
    order.
    """

    expression: str
    columns: tuple[str, ...]
    kind: str
    reference: str | None
    inputs: tuple[str, ...]
    levels: tuple[str, ...] = ()
    pooled: tuple[str, ...] = ()
    """``onehot(..., min_count=k)``: the levels pooled into the "other" level (whose name
    is in ``levels``); empty when nothing was pooled."""
    pool_label: str | None = None


@dataclass(frozen=True)
class _Term:
    """A feature with its resolved tree(s) and learned state; private to this module."""

    feature: str
    text: str
    kind: str
    args: tuple[Node, ...]
    inputs: tuple[str, ...]
    hint: str | None
    degree: int | None = None
    requested_ref: str | float | None = None
    levels: tuple[str, ...] = ()
    reference: str | None = None
    exponents: tuple[tuple[int, ...], ...] = ()
    columns: tuple[str, ...] = ()
    min_count: int | None = None
    pooled: tuple[str, ...] = ()
    pool_label: str | None = None

    @property
    def single_input(self) -> str | None:
        """The header to blame for a problem: the only input, when there is one."""
        return self.inputs[0] if len(self.inputs) == 1 else None


@dataclass(frozen=True, eq=False)
class Design:
    """The design matrix of some rows.

    ``matrix`` is (n, p) float64 with columns ``spec.names``; ``row_ok`` (n,) is
    False for rows that cannot be used; ``problems`` lists them as
    ``(position, reason, column)`` with position 0-based in the frame given to
    :meth:`DesignSpec.build` and column the header at fault (or None). Rows that
    are not ok may hold NaN. The arrays are read-only.
    """

    spec: DesignSpec
    matrix: np.ndarray
    row_ok: np.ndarray
    problems: tuple[tuple[int, str, str | None], ...]
    codes: np.ndarray | None = None
    """With ``build(..., codes_for=term)``: (n,) index of each row's level of that
    ``onehot`` term in its ``levels`` (-1 where missing or unknown); the term's indicator
    columns are then left out of ``matrix`` (the structured fit, :mod:`.absorb`)."""


@dataclass(frozen=True, eq=False)
class DesignSpec:
    """What the design learned from the sales; apply it to any rows with :meth:`build`.

    Attributes
    ----------
    intercept:
        Whether the first column is the constant ``Intercept``.
    groups:
        One :class:`TermGroup` per feature, in the order of ``features``.
    names:
        Design column names, ``"Intercept"`` first when there is one.
    inputs:
        Frame headers read, in first-use order.
    features:
        The feature expressions as given.
    """

    intercept: bool
    groups: tuple[TermGroup, ...]
    names: tuple[str, ...]
    inputs: tuple[str, ...]
    features: tuple[str, ...]
    _terms: tuple[_Term, ...] = field(default=(), repr=False)

    @property
    def p(self) -> int:
        """Number of design columns."""
        return len(self.names)

    def build(
        self, frame: pd.DataFrame, *, unseen: str = "raise", codes_for: str | None = None
    ) -> Design:
        """Encode ``frame`` (the sales, or a one-row subject) with the learned design.

        ``unseen="flag"`` reports a row holding a ``onehot`` level not learned from the
        sales as a row problem (not ok, with the reason) instead of raising; batch
        prediction uses it so one odd row does not stop the others. ``codes_for`` names
        a ``onehot`` term (its expression) handed over as level codes in
        :attr:`Design.codes` instead of indicator columns.

        Raises
        ------
        DesignError
            A needed header is absent; a value has the wrong type (text or dates where
            a number is needed, numbers where a date is needed); or, with
            ``unseen="raise"``, a usable row holds a ``onehot`` level not learned from
            the sales (the error names the column, the level and the known levels).
        """
        ev = _evaluate(self._terms, frame)
        n = len(frame)
        blocks = [np.ones((n, 1))] if self.intercept else []
        codes = None
        for term, values in zip(self._terms, ev.values, strict=True):
            if term.kind == "onehot" and term.text == codes_for:
                if unseen == "flag":
                    ev.flag_unseen(term, values)
                else:
                    _check_levels(term, values, ev.problem_of < 0, frame)
                codes = _level_codes(term, values)
                continue
            if term.kind in ("onehot", "onehot_product"):
                labels = values if term.kind == "onehot" else values[:, 0]
                if unseen == "flag":
                    ev.flag_unseen(term, labels)
                else:
                    _check_levels(term, labels, ev.problem_of < 0, frame)
                block = _indicators(term, labels)
                if term.kind == "onehot_product":
                    block = block * values[:, 1].astype(float)[:, None]
                blocks.append(block)
            else:
                blocks.append(values)
        matrix = np.hstack(blocks) if blocks else np.empty((n, 0))
        matrix = np.ascontiguousarray(matrix, dtype=np.float64)
        row_ok = ev.problem_of < 0
        matrix.setflags(write=False)
        row_ok.setflags(write=False)
        return Design(self, matrix, row_ok, ev.problem_list(), codes)

    def describe(self) -> list[tuple[str, tuple[str, ...]]]:
        """Each feature as given, with the design columns it expands to (for the worksheet)."""
        return [(f, g.columns) for f, g in zip(self.features, self.groups, strict=True)]

    def group_of(self, column: str) -> TermGroup | None:
        """The group a design column belongs to (None for the intercept)."""
        for g in self.groups:
            if column in g.columns:
                return g
        return None

    def to_dict(self) -> dict:
        """A plain record of the learned design (names, levels, references) for files."""
        return {
            "intercept": self.intercept,
            "names": list(self.names),
            "inputs": list(self.inputs),
            "features": [
                {
                    "feature": f,
                    "expression": g.expression,
                    "kind": g.kind,
                    "columns": list(g.columns),
                    "reference": g.reference,
                    "levels": list(g.levels),
                    "inputs": list(g.inputs),
                }
                for f, g in zip(self.features, self.groups, strict=True)
            ],
        }


def learn_design(
    features: Sequence[str],
    frame: pd.DataFrame,
    *,
    derived: Mapping[str, str] | None = None,
    roles: RoleMap | None = None,
    intercept: bool = True,
) -> DesignSpec:
    """Parse the features and learn the design from the sales in ``frame``.

    Parameters
    ----------
    features:
        Feature expressions. One expression gives one design column, except
        ``onehot(...)`` and ``poly(...)``, which expand and must be the whole
        expression. ``poly``'s inputs may be expressions themselves
        (``poly(age, log(lot_area), degree=2)``).
    frame:
        The sales. A name in an expression is looked up as a column header of
        ``frame``, else as a name in ``derived``, else as a role name that ``roles``
        maps to a header.
    derived:
        Named derived variables, name -> expression; they may use each other (a
        cycle is an error) but may not expand.
    roles:
        Role map, so that ``living_area`` works whatever the export called it.
    intercept:
        Whether to put a constant ``Intercept`` column first.

    Returns
    -------
    DesignSpec
        Frozen. For each ``onehot`` it holds the levels (as strings: numbers
        without a trailing ``.0``, dates as ``YYYY-MM-DD``; sorted numerically for
        numbers, alphabetically otherwise) and the reference level: ``ref=`` when
        given, else the most frequent level, ties going to the first in that order.
        Levels are learned only from rows that are otherwise usable: every input of
        every feature present and every other feature finite.

    Raises
    ------
    ExpressionError, UnknownNameError
        A feature cannot be parsed or names something unknown; two features give
        a column of the same name; a plain feature reads no column.
    DesignError
        The data cannot serve the design: wrong value types, an unknown reference
        level, a category with a single level, no usable rows to learn levels from.
    """
    if isinstance(features, str):
        raise ExpressionError("features must be a list of expressions, not one string")
    scope = NameScope.of([str(c) for c in frame.columns], derived, roles)
    terms = [_make_term(f, scope) for f in features]
    ev = _evaluate(terms, frame)
    usable = ev.problem_of < 0
    terms = [
        _learn_levels(t, v, usable)
        if t.kind == "onehot"
        else _learn_levels(t, v[:, 0], usable)
        if t.kind == "onehot_product"
        else t
        for t, v in zip(terms, ev.values, strict=True)
    ]
    from .absorb import ABSORB_MIN_COLUMNS  # here: absorb reads levels, which reads modelspec

    widest = max((len(t.columns) for t in terms if t.kind == "onehot"), default=0)
    size = design_size_problem(
        {t.feature: len(t.columns) for t in terms},
        len(frame),
        absorbed=widest if widest >= ABSORB_MIN_COLUMNS else 0,
    )
    if size is not None:
        raise DesignError(size)
    names = [INTERCEPT] if intercept else []
    origin: dict[str, str] = {INTERCEPT: "the intercept"} if intercept else {}
    for t in terms:
        for c in t.columns:
            if c in origin:
                raise ExpressionError(
                    f"design column '{c}' would come from both {origin[c]} and '{t.feature}'; "
                    "drop one of them"
                )
            origin[c] = f"'{t.feature}'"
            names.append(c)
    groups = tuple(
        TermGroup(
            t.text, t.columns, t.kind, t.reference, t.inputs, t.levels, t.pooled, t.pool_label
        )
        for t in terms
    )
    inputs = tuple(dict.fromkeys(h for t in terms for h in t.inputs))
    return DesignSpec(
        intercept=intercept,
        groups=groups,
        names=tuple(names),
        inputs=inputs,
        features=tuple(features),
        _terms=tuple(terms),
    )


# --- features -----------------------------------------------------------------------
def _make_term(feature: str, scope: NameScope) -> _Term:
    tree = scope.resolve(parse_expression(feature), feature)
    shape = feature_shape(tree)
    text = to_text(tree)
    inputs = columns_read(tree)
    hint = nonfinite_hint(tree)
    if shape.kind == "plain":
        if not inputs:
            raise ExpressionError(
                f"'{feature}' reads no column; a constant adds nothing beside the intercept"
            )
        return _Term(feature, text, "plain", shape.args, inputs, hint, columns=(text,))
    if shape.kind in ("onehot", "onehot_product"):
        return _Term(
            feature,
            text,
            shape.kind,
            shape.args,
            inputs,
            hint,
            requested_ref=shape.ref,
            min_count=shape.min_count,
        )
    d, m = len(shape.args), int(shape.degree or 0)
    if comb(d + m, m) - 1 > MAX_POLY_COLUMNS:
        raise ExpressionError(
            f"'{feature}' would expand to {comb(d + m, m) - 1} columns; "
            f"the limit is {MAX_POLY_COLUMNS}"
        )
    exps = poly_exponents(d, m)
    labels = [to_text(a) if is_atom(a) else f"({to_text(a)})" for a in shape.args]
    cols = tuple(monomial_name(labels, e) for e in exps)
    return _Term(
        feature, text, "poly", shape.args, inputs, hint, degree=m, exponents=exps, columns=cols
    )


def poly_exponents(d: int, degree: int) -> tuple[tuple[int, ...], ...]:
    """Exponent vectors of every monomial in d inputs of total degree 1..degree.

    Ordered by degree, then by ``itertools.combinations_with_replacement`` of the
    input indices. There are ``C(d + degree, degree) - 1`` of them.
    """
    out = []
    for k in range(1, degree + 1):
        for combo in combinations_with_replacement(range(d), k):
            e = [0] * d
            for i in combo:
                e[i] += 1
            out.append(tuple(e))
    return tuple(out)


def monomial_name(labels: Sequence[str], exponents: Sequence[int]) -> str:
    """``age^2*lot_area`` for labels (age, lot_area) and exponents (2, 1)."""
    return "*".join(
        lab if e == 1 else f"{lab}^{e}" for lab, e in zip(labels, exponents, strict=True) if e
    )


# --- reading columns ----------------------------------------------------------------------
@dataclass(frozen=True)
class _ColumnData:
    kind: str  # "number" | "date" | "text" | "empty"
    values: np.ndarray
    missing: np.ndarray


def _read_column(s: pd.Series) -> _ColumnData:
    if isinstance(s.dtype, pd.CategoricalDtype):
        s = s.astype(object)
    if pd.api.types.is_bool_dtype(s.dtype) or (
        pd.api.types.is_numeric_dtype(s.dtype) and not pd.api.types.is_complex_dtype(s.dtype)
    ):
        v = s.to_numpy(dtype=float, na_value=np.nan)
        return _ColumnData("number", v, np.isnan(v))
    if pd.api.types.is_datetime64_any_dtype(s.dtype):
        if getattr(s.dtype, "tz", None) is not None:
            s = s.dt.tz_convert(None)
        v = s.to_numpy(dtype="datetime64[ns]")
        return _ColumnData("date", v, np.isnat(v))
    if isinstance(s.dtype, pd.StringDtype):  # text only: the same result, vectorised
        missing = s.isna().to_numpy(dtype=bool) | s.str.strip().eq("").to_numpy(
            dtype=bool, na_value=False
        )
        if missing.all():
            return _ColumnData("empty", np.full(len(s), np.nan), missing)
        # each distinct text made a Python string once (Arrow hashes the column), not
        # once a sale: a county's region column is a million cells and a few names
        codes, uniques = pd.factorize(s, use_na_sentinel=True)
        v = np.append(np.asarray(uniques, dtype=object), None)[codes]
        v[missing] = None
        return _ColumnData("text", v, missing)
    obj = s.to_numpy(dtype=object)
    n = len(obj)
    missing = np.asarray(pd.isna(obj), dtype=bool)
    if any(issubclass(t, str) for t in set(map(type, obj[~missing]))):
        stripped = pd.Series(obj, dtype=object).str.strip()
        missing |= stripped.eq("").to_numpy(dtype=bool, na_value=False)
    present = obj[~missing]
    types = set(map(type, present))
    if not types:
        return _ColumnData("empty", np.full(n, np.nan), missing)
    if all(issubclass(t, int | float | np.number) for t in types):
        v = np.full(n, np.nan)
        v[~missing] = present.astype(float)
        return _ColumnData("number", v, missing)
    if all(issubclass(t, _dt.date | np.datetime64) for t in types):
        v = np.full(n, np.datetime64("NaT"), dtype="datetime64[ns]")
        v[~missing] = pd.to_datetime(pd.Series(present)).to_numpy(dtype="datetime64[ns]")
        return _ColumnData("date", v, missing)
    v = np.full(n, None, dtype=object)
    v[~missing] = list(map(str, present))
    return _ColumnData("text", v, missing)


# --- evaluation ---------------------------------------------------------------------------
class _Evaluator:
    """Evaluates resolved trees over one frame; caches columns and derived variables.

    Lives for one :func:`_evaluate` call only.
    """

    def __init__(self, frame: pd.DataFrame) -> None:
        self.frame = frame
        self.n = len(frame)
        self.columns: dict[str, _ColumnData] = {}
        self.derived: dict[str, np.ndarray] = {}

    def column(self, header: str, feature: str) -> _ColumnData:
        data = self.columns.get(header)
        if data is None:
            if header not in self.frame.columns:
                raise DesignError(
                    f"column '{header}', needed by '{feature}', is not in the data",
                    column=header,
                )
            data = _read_column(self.frame[header])
            self.columns[header] = data
        return data

    def value(self, node: Node, feature: str) -> np.ndarray | str:
        if isinstance(node, Number):
            return np.full(self.n, float(node.value))
        if isinstance(node, Text):
            return node.value
        if isinstance(node, Column):
            return self.column(node.header, feature).values
        if isinstance(node, DerivedRef):
            if node.name not in self.derived:
                # every variable it uses first, each once: no recursion across variables
                for ref in derived_order(node):
                    if ref.name not in self.derived:
                        self.derived[ref.name] = self.value(ref.expr, feature)
            return self.derived[node.name]
        if isinstance(node, Unary):
            return -self.number(node.operand, feature)
        if isinstance(node, Binary):
            left = self.number(node.left, feature)
            right = self.number(node.right, feature)
            if node.op == "+":
                return left + right
            if node.op == "-":
                return left - right
            if node.op == "*":
                return left * right
            if node.op == "/":
                return left / right
            return np.power(left, right)
        if isinstance(node, Call):
            return self.call(node, feature)
        raise TypeError(f"cannot evaluate {node!r}")

    def call(self, node: Call, feature: str) -> np.ndarray:
        info = FUNCTIONS[node.func]
        if node.func == "grade":
            return self.grade(node, feature)
        if info.impl is None:
            raise ExpressionError(f"in '{feature}': {node.func}(...) must be a whole feature")
        args = []
        for i, a in enumerate(node.args):
            kind = info.param_kind(i)
            if kind == DATE or kind == DATE_OR_ISO:
                args.append(self.date(a, feature, f"{node.func}(...) argument {i + 1}"))
            else:
                args.append(self.number(a, feature))
        return info.impl(*args)

    def grade(self, node: Call, feature: str) -> np.ndarray:
        """``grade(x, 'poor', 'fair', ...)``: 1 for the first level, 2 for the next, ...;
        matched on the level's text, trimmed and ignoring case (a number column's level
        as written, 3.0 as '3'); NaN for a missing value or a level not listed."""
        v = self.value(node.args[0], feature)
        if isinstance(v, str):
            raise ExpressionError(f"in '{feature}': grade(...) needs a column, not quoted text")
        order = {a.value.strip().casefold(): k + 1 for k, a in enumerate(node.args[1:])}
        out = np.full(len(v), np.nan)
        if v.dtype.kind == "M":
            raise DesignError(
                f"in '{feature}': grade(...) needs a column of levels, not dates",
                column=_header_of(node.args[0]),
            )
        present = ~pd.isna(v)
        if v.dtype.kind == "f":
            text = np.array([level_label(x) for x in v[present]], dtype=object)
        else:
            text = v[present].astype(str)
        keys = pd.Series(text, dtype=object).str.strip().str.casefold()
        out[present] = keys.map(order).to_numpy(dtype=float)
        return out

    def number(self, node: Node, feature: str) -> np.ndarray:
        v = self.value(node, feature)
        if isinstance(v, np.ndarray) and v.dtype.kind == "f":
            return v
        header = _header_of(node)
        what = f"'{to_text(node)}'" if header is None else f"column '{header}'"
        if isinstance(v, np.ndarray) and v.dtype.kind == "M":
            fix = "use months_between(...) or years_between(...) to make it a number"
            raise DesignError(f"in '{feature}': {what} holds dates; {fix}", column=header)
        raise DesignError(
            f"in '{feature}': {what} holds text, not numbers; "
            f"for a category use onehot({to_text(node)})",
            column=header,
        )

    def date(self, node: Node, feature: str, where: str) -> np.ndarray:
        if isinstance(node, Text):
            # day resolution: a literal such as '0001-01-01' lies outside datetime64[ns]
            return np.datetime64(iso_date(node.value).isoformat(), "D")
        v = self.value(node, feature)
        if isinstance(v, np.ndarray) and v.dtype.kind == "M":
            return v
        if isinstance(v, np.ndarray) and v.dtype.kind == "f" and np.isnan(v).all():
            return np.full(self.n, np.datetime64("NaT"), dtype="datetime64[ns]")
        header = _header_of(node)
        what = f"'{to_text(node)}'" if header is None else f"column '{header}'"
        held = "numbers" if isinstance(v, np.ndarray) and v.dtype.kind == "f" else "text"
        raise DesignError(
            f"in '{feature}': {where} must be a date, but {what} holds {held}", column=header
        )


def _header_of(node: Node) -> str | None:
    while isinstance(node, DerivedRef):
        node = node.expr
    return node.header if isinstance(node, Column) else None


@dataclass(frozen=True)
class _Evaluated:
    """Per-term values and the first problem of each row (-1: none)."""

    values: tuple[np.ndarray, ...]  # plain/poly: (n, k) float; onehot: (n,) labels or None
    problem_of: np.ndarray  # (n,) int index into reasons, -1 when the row is ok
    reasons: list[tuple[str, str | None]]

    def problem_list(self) -> tuple[tuple[int, str, str | None], ...]:
        pos = np.flatnonzero(self.problem_of >= 0)
        return tuple((int(i), *self.reasons[self.problem_of[i]]) for i in pos)

    def flag_unseen(self, t: _Term, labels: np.ndarray) -> None:
        """Mark rows (not yet flagged) whose ``onehot`` level was never learned."""
        ok = self.problem_of < 0
        known = pd.Series(labels, dtype=object).isin(t.levels).to_numpy()
        unseen = ok & ~pd.isna(labels) & ~known
        for level in dict.fromkeys(labels[unseen]):
            mask = unseen & (labels == level)
            self.problem_of[mask] = len(self.reasons)
            self.reasons.append(
                (
                    f"{t.text}: level '{level}' was not among the levels learned from the "
                    "sales; the model cannot value it",
                    t.single_input,
                )
            )


def _evaluate(terms: Sequence[_Term], frame: pd.DataFrame) -> _Evaluated:
    ev = _Evaluator(frame)
    n = len(frame)
    problem_of = np.full(n, -1, dtype=np.intp)
    reasons: list[tuple[str, str | None]] = []
    values = []

    def flag(mask: np.ndarray, reason: str, column: str | None) -> None:
        mask = mask & (problem_of < 0)
        if mask.any():
            problem_of[mask] = len(reasons)
            reasons.append((reason, column))

    with np.errstate(all="ignore"):
        for t in terms:
            for h in t.inputs:
                data = ev.column(h, t.feature)
                flag(data.missing, f"missing value for '{h}' needed by {t.text}", h)
            if t.kind == "onehot":
                values.append(_labels(ev, t))
                continue
            if t.kind == "onehot_product":
                factor = ev.number(t.args[1], t.feature)
                why = f"{t.text} is not finite" + (f" ({t.hint})" if t.hint else "")
                flag(~np.isfinite(factor), why, None)
                pair = np.empty((n, 2), dtype=object)
                pair[:, 0], pair[:, 1] = _labels(ev, t), factor
                values.append(pair)
                continue
            block = np.column_stack([ev.number(a, t.feature) for a in t.args])
            if t.kind == "poly":
                block = _monomials(block, t.exponents)
            block = block.astype(np.float64, copy=False).reshape(n, -1)
            bad = ~np.isfinite(block).all(axis=1)
            why = f"{t.text} is not finite" + (f" ({t.hint})" if t.hint else "")
            flag(bad, why, t.single_input)
            values.append(block)
    return _Evaluated(tuple(values), problem_of, reasons)


def _monomials(x: np.ndarray, exponents: Sequence[Sequence[int]]) -> np.ndarray:
    """Columns prod_j x[:, j] ** e_j for each exponent vector e."""
    out = np.ones((x.shape[0], len(exponents)))
    for k, e in enumerate(exponents):
        for j, power in enumerate(e):
            if power:
                out[:, k] *= x[:, j] ** power
    return out


# --- onehot ------------------------------------------------------------------------------
def _labels(ev: _Evaluator, t: _Term) -> np.ndarray:
    """The level of each row as a string (None when missing)."""
    arg = t.args[0]  # the category (a product's factor follows it)
    v = ev.value(arg, t.feature)
    if isinstance(v, str):
        raise ExpressionError(f"in '{t.feature}': onehot(...) needs a column, not quoted text")
    out = np.full(len(v), None, dtype=object)
    if v.dtype.kind in "fM":
        present = ~(np.isnan(v) if v.dtype.kind == "f" else np.isnat(v))
        uniq, inverse = np.unique(v[present], return_inverse=True)
        written = np.array([level_label(u) for u in uniq], dtype=object)
        out[present] = written[inverse]
    else:
        out[:] = v
    if t.pooled:  # a level pooled when the design was learned reads as the pool
        out[pd.Series(out, dtype=object).isin(t.pooled).to_numpy()] = t.pool_label
    return out


def level_label(value: float | str | np.datetime64) -> str:
    """How a category value is written as a level: 3.0 -> '3', 2.5 -> '2.5', dates ISO."""
    if isinstance(value, str):
        return value
    if isinstance(value, np.datetime64):
        day = value.astype("datetime64[D]")
        return str(day) if day == value else str(value.astype("datetime64[s]")).replace("T", " ")
    x = float(value)  # type: ignore[arg-type]
    if x.is_integer() and abs(x) < 1e15:
        return str(int(x))
    return repr(x)


def _sort_levels(levels: set[str]) -> list[str]:
    def numeric(s: str) -> float | None:
        try:
            return float(s)
        except ValueError:
            return None

    nums = {s: numeric(s) for s in levels}
    if all(v is not None for v in nums.values()):
        return sorted(levels, key=lambda s: (nums[s], s))
    return sorted(levels)


def _learn_levels(t: _Term, labels: np.ndarray, usable: np.ndarray) -> _Term:
    col = t.single_input
    seen = labels[usable & ~pd.isna(labels)]
    if len(seen) == 0:
        raise DesignError(
            f"'{t.feature}': no usable sales to learn the levels of {t.text} from", column=col
        )
    counts = pd.Series(seen).value_counts()
    levels = _sort_levels(set(counts.index))
    pooled: tuple[str, ...] = ()
    pool_label = None
    if t.min_count is not None:
        thin = [lv for lv in levels if counts[lv] < t.min_count]
        if thin:
            n_thin = int(sum(counts[lv] for lv in thin))
            pool_label = (
                f"other ({len(thin)} level{'s' if len(thin) != 1 else ''}, "
                f"{n_thin} sale{'s' if n_thin != 1 else ''})"
            )
            pooled = tuple(thin)
            if t.requested_ref is not None and level_label(t.requested_ref) in thin:
                raise DesignError(
                    f"'{t.feature}': the reference level '{level_label(t.requested_ref)}' has "
                    f"fewer than {t.min_count} sales and would be pooled; choose another",
                    column=col,
                )
            counts = counts.drop(thin)
            counts[pool_label] = n_thin
            levels = [lv for lv in levels if lv not in thin] + [pool_label]
    if t.requested_ref is None:
        top = counts.max()
        reference = next(lv for lv in levels if counts[lv] == top)
    else:
        reference = level_label(t.requested_ref)
        if reference not in levels:
            raise DesignError(
                f"'{t.feature}': reference level '{reference}' does not occur among the "
                f"usable sales; levels: {', '.join(levels)}",
                column=col,
            )
    if len(levels) < 2:
        raise DesignError(
            f"'{t.feature}': only one level ('{levels[0]}') among the usable sales, "
            "so there is nothing to compare it with; drop this feature",
            column=col,
        )
    prefix = to_text(t.args[0])
    if t.kind == "onehot_product":  # x * onehot(c): "x * c[level]", the slope shift of x
        factor = t.args[1]
        prefix = (to_text(factor) if is_atom(factor) else f"({to_text(factor)})") + " * " + prefix
    cols = tuple(f"{prefix}[{lv}]" for lv in levels if lv != reference)
    return replace(
        t,
        levels=tuple(levels),
        reference=reference,
        columns=cols,
        pooled=pooled,
        pool_label=pool_label,
    )


def _check_levels(t: _Term, labels: np.ndarray, ok: np.ndarray, frame: pd.DataFrame) -> None:
    unseen = ok & ~pd.isna(labels) & ~pd.Series(labels, dtype=object).isin(t.levels).to_numpy()
    if not unseen.any():
        return
    i = int(np.flatnonzero(unseen)[0])
    row = None
    if ROW_COLUMN in frame.columns:
        r = frame[ROW_COLUMN].iloc[i]
        row = int(r) if pd.notna(r) else None
    raise DesignError(
        f"{t.text}: level '{labels[i]}' (row position {i}) was not among the levels "
        f"learned from the sales ({', '.join(t.levels)}); the model cannot value it",
        column=t.single_input,
        row=row,
    )


def _indicators(t: _Term, labels: np.ndarray) -> np.ndarray:
    """0/1 columns for every level but the reference; NaN where the level is missing
    (or unknown, which only happens in rows that are not ok)."""
    codes = _level_codes(t, labels)
    cols = [
        np.where(codes < 0, np.nan, (codes == j).astype(float))
        for j, lv in enumerate(t.levels)
        if lv != t.reference
    ]
    return np.column_stack(cols) if cols else np.empty((len(labels), 0))


def _level_codes(t: _Term, labels: np.ndarray) -> np.ndarray:
    """Index of each row's level in ``t.levels``; -1 where missing or not learned."""
    # the labels as an object Index: left raw, pandas would first infer (and convert to)
    # its text dtype, four times the lookup itself
    known = pd.Index(list(t.levels), dtype=object)
    return known.get_indexer(pd.Index(labels, dtype=object)).astype(np.intp)


__all__ = [
    "INTERCEPT",
    "KINDS",
    "Design",
    "DesignSpec",
    "TermGroup",
    "learn_design",
    "level_label",
    "monomial_name",
    "poly_exponents",
]
