"""Fit the hedonic model: ordinary least squares with statsmodels as the estimator of record.

The steps, each of which records what it leaves out:

1. rows the importer already excluded stay excluded;
2. the model file's ``[[exclude]]`` list and the user's exclusions drop sales by id/row;
3. rows lacking a value a feature needs (or giving a non-finite feature) are excluded,
   naming the column;
4. the design is learned on the rows that remain (category levels, references),
   checked for rank deficiency (naming the terms involved), and fitted.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Iterable
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import pandas as pd

from .absorb import (
    ABSORB_MIN_COLUMNS,
    AbsorbedFit,
    AbsorbedResults,
    absorb_fit,
    absorbed_level_counts,
    collinear_error,
)
from .design import DesignSpec, TermGroup, learn_design
from .errors import FitError, ModelFileError
from .exclusions import reason_kind
from .levels import (
    LevelCount,
    level_counts,
    single_sale_columns,
    thin_level_warnings,
)
from .limits import design_scale_problem, unusable_summary
from .modelspec import ModelSpec
from .prediction import Prediction, predict
from .sales import ROW_COLUMN, Exclusion, SalesTable
from .spread import SpreadModel, fit_spread

COEF_CI_LEVEL = 0.95
"""Level of the coefficient confidence intervals (the prediction level is the model's ``level``)."""

STATSMODELS_COV = {
    "classical": "nonrobust",
    "HC0": "HC0",
    "HC1": "HC1",
    "HC2": "HC2",
    "HC3": "HC3",
}
MIN_SALES_PER_TERM = 10  # common practice: fewer than ~10 observations per term is thin


@dataclass(frozen=True)
class TermEstimate:
    """One row of the coefficient table."""

    name: str
    coef: float
    se: float
    t: float
    p: float
    ci_low: float
    ci_high: float
    note: str | None = None
    """Why the term has no standard error (e.g. "not estimable: one sale"), else None."""

    def to_dict(self) -> dict:
        return {
            "name": self.name,
            "coef": self.coef,
            "se": self.se,
            "t": self.t,
            "p": self.p,
            "ci_low": self.ci_low,
            "ci_high": self.ci_high,
            "note": self.note,
        }


@dataclass(frozen=True, eq=False)
class FitResult:
    """A fitted hedonic model and everything needed to value, check and report it.

    ``y``, ``fitted`` and ``resid`` are on the response scale (log price for a log
    response); ``price`` is always the sale price. ``rows`` are the file rows of the
    sales used, in the order of ``X``'s rows. ``xtx_inv`` is the classical
    :math:`(X'X)^{-1}`; ``cov_params`` the coefficient covariance of ``cov_type``.
    ``smearing`` is Duan's factor :math:`\\frac1n\\sum e^{\\hat e_i}` for a log
    response and 1.0 for a linear one. ``path`` says how it was fitted: ``"dense"``
    (statsmodels on the whole design) or ``"structured"`` (a large ``onehot`` term
    absorbed, :mod:`.absorb`, held in ``structure``; ``X`` is then built only when asked).
    """

    spec: ModelSpec
    design: DesignSpec
    sales: SalesTable
    frame: pd.DataFrame
    dense: np.ndarray | None
    """The design of the sales used (None on the structured path: see ``X``)."""
    y: np.ndarray
    price: np.ndarray
    rows: np.ndarray
    sale_ids: tuple[str | None, ...]
    excluded: tuple[Exclusion, ...]
    terms: tuple[TermEstimate, ...]
    params: np.ndarray
    n: int
    p: int
    df_resid: int
    r2: float
    adj_r2: float
    sigma: float
    aic: float
    bic: float
    llf: float
    cov_type: str
    fitted: np.ndarray
    resid: np.ndarray
    smearing: float
    xtx_inv: np.ndarray
    cov_params: np.ndarray
    target: str
    warnings: tuple[str, ...] = field(default=())
    levels: tuple[LevelCount, ...] = field(default=())
    """Sales per level of every ``onehot`` term (:mod:`.levels`)."""
    spread: SpreadModel | None = None
    """The fitted model of the error spread (``spread = "modelled"``), else None."""
    path: str = "dense"
    structure: AbsorbedFit | None = None

    @cached_property
    def X(self) -> np.ndarray:
        """The (n, p) design of the sales used; on the structured path built on first use."""
        if self.dense is not None:
            return self.dense
        assert self.structure is not None
        return self.structure.dense_design()

    def design_column(self, name: str) -> np.ndarray:
        """One column of the design of the sales used, without building the whole design."""
        j = self.names.index(name)
        a = self.structure
        if a is None:
            return self.X[:, j]
        hit = np.flatnonzero(a.z_pos == j)
        if hit.size:
            return a.Z[:, int(hit[0])]
        col = int(np.flatnonzero(a.d_pos == j)[0])
        return (a.col_of_level[a.codes] == col).astype(float)

    @cached_property
    def _medians(self) -> dict[str, float]:
        return {}

    def design_median(self, name: str) -> float:
        """The median of one design column over the sales used (computed once a column:
        the coefficient table reads a polynomial's slope there on every redraw)."""
        hit = self._medians.get(name)
        if hit is None:
            hit = self._medians[name] = float(np.median(self.design_column(name)))
        return hit

    def design_row(self, pos: int) -> np.ndarray:
        """The design row (p,) of the sale at position ``pos``, without the whole design."""
        a = self.structure
        if a is None:
            return self.X[pos]
        out = np.zeros(self.p)
        out[a.z_pos] = a.Z[pos]
        col = a.col_of_level[a.codes[pos]]
        if col >= 0:
            out[a.d_pos[col]] = 1.0
        return out

    @property
    def path_text(self) -> str:
        """One line saying how the model was fitted."""
        a = self.structure
        if a is None:
            return "dense design, statsmodels OLS"
        return (
            f"structured: {a.term} absorbed ({len(a.counts)} levels), "
            f"{len(a.z_pos)} other columns solved by {a.method}"
        )

    @property
    def names(self) -> tuple[str, ...]:
        return self.design.names

    @property
    def response(self) -> str:
        return self.spec.response

    def fitted_price(self) -> np.ndarray:
        """Fitted values in price units (smearing-corrected mean for a log response)."""
        if self.spec.response == "log":
            return np.exp(self.fitted) * self.smearing
        return self.fitted

    def predict(self, frame: pd.DataFrame, level: float | None = None) -> Prediction:
        """Predict any rows (the subject, comparables, a batch): see :mod:`.prediction`."""
        return predict(self, frame, level)

    def leverage(self) -> np.ndarray:
        """Hat diagonal :math:`h_i = x_i'(X'X)^{-1}x_i` of the sales used."""
        if self.structure is not None:
            return self.structure.leverage()
        return np.einsum("ij,ij->i", self.X @ self.xtx_inv, self.X)  # one BLAS product

    def references(self) -> dict[str, str]:
        """Reference level of each ``onehot`` feature."""
        return {g.expression: g.reference for g in self.design.groups if g.kind == "onehot"}

    def to_dict(self) -> dict:
        """The stable JSON contract of ``appraise fit --json`` (extra keys may be added)."""
        return {
            "n": self.n,
            "df_resid": self.df_resid,
            "r2": self.r2,
            "adj_r2": self.adj_r2,
            "sigma": self.sigma,
            "response": self.spec.response,
            "cov_type": self.cov_type,
            "path": self.path,
            "target": self.target,
            "ci_level": COEF_CI_LEVEL,
            "aic": self.aic,
            "bic": self.bic,
            "smearing": self.smearing,
            "references": self.references(),
            "terms": [t.to_dict() for t in self.terms],
            "excluded": [e.to_dict() for e in self.excluded],
            "warnings": list(self.warnings),
            "levels": [c.to_dict() for c in self.levels],
            "spread": {"method": "constant"} if self.spread is None else self.spread.to_dict(),
        }


def resolve_target(sales: SalesTable, target: str) -> str:
    """The frame column holding the target: a header, else a role name."""
    if target in sales.frame.columns:
        return target
    col = sales.roles.column(target)
    if col is not None and col in sales.frame.columns:
        return col
    raise ModelFileError(
        f"'target': no column or role named {target!r}; columns are "
        + ", ".join(c for c in sales.frame.columns if c != ROW_COLUMN),
        file=sales.source.path,
    )


def _model_exclusions(
    sales: SalesTable, spec: ModelSpec, user_exclusions: Iterable[Exclusion]
) -> tuple[np.ndarray, list[Exclusion], list[str]]:
    """Mask of rows kept after the model file's and the user's exclusions."""
    frame = sales.frame
    keep = np.ones(len(frame), dtype=bool)
    out: list[Exclusion] = []
    notes: list[str] = []
    rows = frame[ROW_COLUMN].to_numpy()
    id_col = sales.roles.column("sale_id")
    user_exclusions = tuple(user_exclusions)
    # the ids as Arrow text (no Python string per sale), only when something is excluded
    ids = (
        frame[id_col].astype("string").fillna("").str.strip()
        if id_col in frame.columns and (spec.exclude or user_exclusions)
        else None
    )
    if spec.exclude:
        if ids is None:
            raise ModelFileError(
                "'exclude' lists sale ids but the sales have no sale-id column mapped",
                file=sales.source.path,
            )
        for e in spec.exclude:
            hit = np.flatnonzero(ids.eq(e.sale_id).to_numpy(dtype=bool) & keep)
            if hit.size == 0:
                notes.append(
                    f"model file excludes sale {e.sale_id!r}, which is not among the sales used"
                )
            for i in hit:
                keep[i] = False
                out.append(Exclusion(int(rows[i]), e.sale_id, e.reason, None, "model"))
    row_pos = {int(r): i for i, r in enumerate(rows)} if user_exclusions else {}
    for e in user_exclusions:
        i = row_pos.get(int(e.row))
        if i is None or not keep[i]:
            continue
        keep[i] = False
        sid = None if ids is None else (ids.iloc[i] or None)
        out.append(Exclusion(int(rows[i]), sid, e.reason, e.column, "user"))
    return keep, out, notes


def _rank_problem(X: np.ndarray, names: tuple[str, ...]) -> tuple[str, ...] | None:
    """Names of the columns caught in an exact linear dependence, or None when full rank.

    Uses the SVD: right singular vectors of (numerically) zero singular values span
    the null space; columns with a non-negligible loading there are involved.
    """
    scale = np.linalg.norm(X, axis=0)
    zero_cols = [names[j] for j in np.flatnonzero(scale == 0)]
    if zero_cols:
        return tuple(zero_cols)
    Xs = X / scale
    _, s, vt = np.linalg.svd(Xs, full_matrices=False)
    tol = s.max() * max(X.shape) * np.finfo(float).eps * 10
    null = vt[s <= tol]
    if null.shape[0] == 0:
        return None
    load = np.abs(null).max(axis=0)
    return tuple(names[j] for j in np.flatnonzero(load > 1e-6))


def fit_model(
    sales: SalesTable,
    spec: ModelSpec,
    *,
    user_exclusions: Iterable[Exclusion] = (),
    path: str = "auto",
) -> FitResult:
    """Fit ``spec`` to ``sales`` by OLS and return a frozen :class:`FitResult`.

    ``path`` (:data:`FIT_PATHS`): ``"auto"`` absorbs the largest ``onehot`` term when it
    has :data:`.absorb.ABSORB_MIN_COLUMNS` columns or more, or from :data:`ABSORB_MIN_SALES`
    sales (the structured fit of :mod:`.absorb`, equal to statsmodels on the dense
    design), else fits the dense design
    with statsmodels; ``"dense"`` and ``"structured"`` force one of them.

    Raises
    ------
    ModelFileError
        Unknown target, or an exclude list without a sale-id column.
    ExpressionError, DesignError
        A feature cannot be parsed or evaluated.
    FitError
        Not more sales than terms.
    CollinearityError
        The design is rank deficient; the message names the terms involved.
    """
    target = resolve_target(sales, spec.target)
    keep, excluded, notes = _model_exclusions(sales, spec, user_exclusions)
    frame = _rows(sales.frame, keep)
    id_col = sales.roles.column("sale_id")

    def sale_id(pos: int) -> str | None:
        if id_col is None or id_col not in frame.columns:
            return None
        v = frame[id_col].iloc[pos]
        return None if pd.isna(v) else str(v)

    price_all = pd.to_numeric(frame[target], errors="coerce").to_numpy(dtype=float)
    bad_price = ~np.isfinite(price_all) | ((price_all <= 0) if spec.response == "log" else False)
    for pos in np.flatnonzero(bad_price):
        excluded.append(
            Exclusion(
                int(frame[ROW_COLUMN].iloc[pos]),
                sale_id(pos),
                "target is missing"
                if not np.isfinite(price_all[pos])
                else "target must be positive for a log response",
                target,
                "model",
            )
        )
    frame = _rows(frame, ~bad_price)
    if len(frame) == 0:  # every sale excluded: say why instead of building an empty design
        left_out = [*sales.excluded, *excluded]
        counts = Counter(reason_kind(e.reason) for e in left_out)
        why = ", ".join(f"{kind} {k:,}" for kind, k in counts.most_common(3))
        raise FitError(
            f"no sale is left to fit: all {sales.source.rows_in_file:,} rows are excluded"
            + (f" (by reason: {why})" if why else ""),
            file=sales.source.path,
        )

    # learn_design learns category levels only from rows whose inputs are all usable, so
    # one learn and one build settle both the design and the rows it can use.
    design = learn_design(
        spec.features, frame, derived=spec.derived, roles=sales.roles, intercept=spec.intercept
    )
    group = _absorbed_group(design, path, len(frame))
    built = design.build(frame, codes_for=None if group is None else group.expression)
    for pos, reason, column in built.problems:
        excluded.append(
            Exclusion(int(frame[ROW_COLUMN].iloc[pos]), sale_id(pos), reason, column, "model")
        )
    ok = np.asarray(built.row_ok, dtype=bool)
    frame = _rows(frame, ok)
    X = np.asarray(built.matrix, dtype=float)
    X = np.ascontiguousarray(X if ok.all() else X[ok])  # no copy when every row is used
    names = design.names
    n, p = len(X), design.p
    if n <= p:
        raise FitError(
            f"{n} usable sales for {p} terms: a fit needs more sales than terms "
            "(drop terms or add sales)" + unusable_summary(built.problems),
            file=sales.source.path,
        )
    scale = design_scale_problem(X, _matrix_names(names, group))
    if scale is not None:
        raise FitError(scale, file=sales.source.path)
    price = pd.to_numeric(frame[target]).to_numpy(dtype=float)
    y = np.log(price) if spec.response == "log" else price
    structure = None
    if group is None:
        res = _dense_ols(X, y, names, sales.source.path)
        # the hat diagonal from statsmodels' own pseudo-inverse: no second factorisation
        leverage = np.einsum("ij,ji->i", X, res.model.pinv_wexog)
        counts = level_counts(design, X)
    else:
        d_set = set(group.columns)
        structure = absorb_fit(
            X,
            y,
            np.asarray(built.codes)[ok],
            len(group.levels),
            group.levels.index(group.reference),
            names=names,
            z_pos=[j for j, c in enumerate(names) if c not in d_set],
            d_pos=[names.index(c) for c in group.columns],
            term=group.expression,
            file=sales.source.path,
        )
        res = AbsorbedResults.of(structure)
        leverage = structure.leverage()
        counts = absorbed_level_counts(design, structure)
    if spec.cov_type in ("HC2", "HC3"):
        _refuse_hc3_at_leverage_one(
            leverage, frame, counts, sale_id, sales.source.path, spec.cov_type
        )
    cov_type = STATSMODELS_COV[spec.cov_type]
    if cov_type != "nonrobust":
        res = (
            res.get_robustcov_results(cov_type=cov_type, use_t=True)
            if structure is None
            else AbsorbedResults.of(structure, cov_type)
        )
    ci = np.asarray(res.conf_int(alpha=1 - COEF_CI_LEVEL))
    lone = single_sale_columns(counts)
    nan = float("nan")
    terms = tuple(
        TermEstimate(names[j], float(res.params[j]), nan, nan, nan, nan, nan, LONE_NOTE)
        if names[j] in lone
        else TermEstimate(
            names[j],
            float(res.params[j]),
            float(res.bse[j]),
            float(res.tvalues[j]),
            float(res.pvalues[j]),
            float(ci[j, 0]),
            float(ci[j, 1]),
        )
        for j in range(p)
    )
    resid = np.asarray(res.resid, dtype=float)
    warnings = [*thin_level_warnings(counts, spec.min_level_sales), *notes]
    if n < MIN_SALES_PER_TERM * p:
        warnings.append(
            f"thin data: {n} sales for {p} terms ({n / p:.1f} per term; "
            f"common practice asks for at least {MIN_SALES_PER_TERM})"
        )
    fitted = np.asarray(res.fittedvalues, dtype=float)
    spread = None
    if spec.spread == "modelled":
        spread = fit_spread(
            fitted,
            resid,
            leverage,
            frame,
            df_resid=int(res.df_resid),
            terms=spec.spread_terms,
            derived=spec.derived,
            roles=sales.roles,
        )
    return FitResult(
        spec=spec,
        design=design,
        sales=sales,
        frame=frame,
        dense=X if structure is None else None,
        y=y,
        price=price,
        rows=frame[ROW_COLUMN].to_numpy(dtype=int),
        sale_ids=(
            _id_texts(frame[id_col])
            if id_col is not None and id_col in frame.columns
            else (None,) * n
        ),
        excluded=tuple(sorted((*sales.excluded, *excluded), key=lambda e: e.row)),
        terms=terms,
        params=np.asarray(res.params, dtype=float),
        n=n,
        p=p,
        df_resid=int(res.df_resid),
        r2=float(res.rsquared),
        adj_r2=float(res.rsquared_adj),
        sigma=float(np.sqrt(res.scale)),
        aic=float(res.aic),
        bic=float(res.bic),
        llf=float(res.llf),
        cov_type=spec.cov_type,
        fitted=fitted,
        resid=resid,
        smearing=float(np.mean(np.exp(resid))) if spec.response == "log" else 1.0,
        xtx_inv=np.asarray(res.normalized_cov_params, dtype=float),
        cov_params=np.asarray(res.cov_params(), dtype=float),
        target=target,
        warnings=tuple(warnings),
        levels=counts,
        spread=spread,
        path="dense" if structure is None else "structured",
        structure=structure,
    )


def _id_texts(column: pd.Series) -> tuple[str | None, ...]:
    """Each sale id as text, None where missing (a text column without a Python loop)."""
    if isinstance(column.dtype, pd.StringDtype):
        out: list[str | None] = []
        for lo in range(0, len(column), _ID_SLICE):  # the lock is free between slices
            out.extend(column.iloc[lo : lo + _ID_SLICE].to_numpy(dtype=object, na_value=None))
        return tuple(out)
    return tuple(None if pd.isna(v) else str(v) for v in column.tolist())


_ID_SLICE = 50_000
"""Sale ids made Python strings per call: a call holds the interpreter lock, so a pool
thread fitting a million sales leaves the window's thread a turn every few milliseconds."""


def _matrix_names(names: tuple[str, ...], group: TermGroup | None) -> tuple[str, ...]:
    """The columns of the built matrix: all of them, or all but the absorbed term's."""
    if group is None:
        return names
    absorbed = set(group.columns)
    return tuple(c for c in names if c not in absorbed)


def _rows(frame: pd.DataFrame, mask: np.ndarray) -> pd.DataFrame:
    """The rows of ``mask``, renumbered; without a copy when all are kept (pandas
    copy-on-write keeps the shared data safe)."""
    if mask.all():
        return frame.reset_index(drop=True)
    return frame.loc[mask].reset_index(drop=True)


FIT_PATHS = ("auto", "dense", "structured")
"""``fit_model(path=...)``: choose by size, statsmodels on the dense design, or absorbed."""


ABSORB_MIN_SALES = 100_000
"""From this many sales ``path="auto"`` absorbs a ``onehot`` term however few its levels:
statsmodels' pseudo-inverse of a tall design holds the interpreter lock for about a
second a million rows (the window's thread stops turning while a pool thread fits)."""


def _absorbed_group(design: DesignSpec, path: str, n: int = 0) -> TermGroup | None:
    """The ``onehot`` term to absorb: the one with the most columns, when it has at least
    :data:`.absorb.ABSORB_MIN_COLUMNS` or there are :data:`ABSORB_MIN_SALES` sales
    (``path="auto"``), or always (``"structured"``)."""
    if path not in FIT_PATHS:
        raise ValueError(f"path must be one of {', '.join(FIT_PATHS)}, not {path!r}")
    onehots = [g for g in design.groups if g.kind == "onehot" and g.columns]
    if path == "dense" or not onehots:
        if path == "structured":
            raise FitError("the structured fit needs a onehot(...) term to absorb")
        return None
    big = max(onehots, key=lambda g: len(g.columns))
    if path == "auto" and len(big.columns) < ABSORB_MIN_COLUMNS and n < ABSORB_MIN_SALES:
        return None
    return big


def _dense_ols(X: np.ndarray, y: np.ndarray, names: tuple[str, ...], file: str | None):
    """statsmodels OLS (classical covariance) on the dense design; its pseudo-inverse's
    SVD decides the rank, and only a deficient design is searched for the columns to name."""
    # statsmodels is imported here, not at module level: it takes seconds to import and
    # commands that never fit (appraise --help, appraise data) should not pay for it.
    import warnings

    from statsmodels.regression.linear_model import OLS
    from statsmodels.tools.sm_exceptions import SingularMatrixWarning

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SingularMatrixWarning)
        res = OLS(y, X).fit(use_t=True)
    if res.model.rank < X.shape[1]:
        involved = _rank_problem(X, names)
        if involved is not None:
            raise collinear_error(involved, file)
    return res


LONE_NOTE = (
    "not estimable: the level is held by one sale, whose price the coefficient only reproduces"
)


def _refuse_hc3_at_leverage_one(h, frame, counts, sale_id, file, cov_type="HC3") -> None:
    """HC3 divides each squared residual by (1 - h)^2 and HC2 by (1 - h): at leverage 1 (a
    level held by one sale) that is 0/0 and the standard errors explode. Refuse, naming
    the sale."""
    at = np.flatnonzero(h >= 1 - 1e-8)
    if at.size == 0:
        return
    i = int(at[0])
    lone = [f"{c.term} '{c.level}'" for c in counts if c.count == 1]
    sid = sale_id(i)
    raise FitError(
        f"{cov_type} standard errors cannot be computed: the sale on row "
        f"{int(frame[ROW_COLUMN].iloc[i])}"
        + (f" ({sid})" if sid else "")
        + " has leverage 1"
        + (f" (it alone holds {', '.join(lone)})" if lone else "")
        + "; pool or drop that level, or choose HC1",
        file=file,
    )
