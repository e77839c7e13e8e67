"""The whole model check-up: every diagnostic of a fitted model from one QR decomposition.

:func:`diagnose_arrays` works on plain arrays; :func:`diagnose` reads them from a
:class:`~appraise.engine.fitting.FitResult`. Neither forms an n x n matrix or refits
the model n times (k-fold cross-validation refits it k times). A structured fit (a
region block absorbed, ``fit.structure``) is checked by :mod:`.structured` without its
dense design, to the same numbers; both end in :func:`assemble_diagnostics`.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from ..errors import AppraiseError
from .collinearity import Collinearity, TermGroupRef, collinearity
from .coverage import SegmentCoverage, coverage_by_segment, fifths
from .crossval import KFold, LeaveOneOut, kfold, leave_one_out
from .decomposition import decompose
from .influence import Influence, SaleFlag, Thresholds, flag_sales, influence, thresholds
from .plain import plain
from .ratio_study import RatioStudy, ratio_study
from .residual_tests import ResidualTests, residual_tests
from .settings import DEFAULT_SETTINGS, DiagnosticSettings

if TYPE_CHECKING:  # pragma: no cover
    from ..fitting import FitResult


def _finite_list(a: np.ndarray) -> list[float | None]:
    """``a`` as Python floats, NaN and infinities as None."""
    a = np.asarray(a, dtype=float)
    ok = np.isfinite(a).tolist()
    return [v if good else None for v, good in zip(a.tolist(), ok, strict=True)]


@dataclass(frozen=True, eq=False)
class Diagnostics:
    """Everything the check-up found. Arrays follow the order of the design's rows."""

    settings: DiagnosticSettings
    response: str
    level: float
    n: int
    p: int
    names: tuple[str, ...]
    rows: np.ndarray
    sale_ids: tuple[str | None, ...]
    price: np.ndarray
    influence: Influence
    thresholds: Thresholds
    flags: tuple[SaleFlag, ...]
    collinearity: Collinearity
    residual_tests: ResidualTests
    loo: LeaveOneOut
    kfold: KFold
    ratio_study: RatioStudy
    warnings: tuple[str, ...]
    coverage: SegmentCoverage | None = None
    """Coverage of the leave-one-out intervals by segment (:mod:`.coverage`)."""

    def flag_for_row(self, row: int) -> SaleFlag | None:
        """The flag of the sale at file row ``row``, if it has one."""
        for f in self.flags:
            if f.row == row:
                return f
        return None

    def sales_records(self) -> list[dict]:
        """One plain dict per sale (the ``sales`` section of the JSON).

        Built column by column (``tolist`` then NaN to None), so 50,000 sales take a
        fraction of a second.
        """
        infl, loo = self.influence, self.loo
        pred = loo.price_prediction
        codes = [[] for _ in range(self.n)]
        for f in self.flags:
            codes[f.position] = list(f.codes)
        with np.errstate(invalid="ignore", divide="ignore"):
            columns = {
                "row": np.asarray(self.rows, dtype=int).tolist(),
                "sale_id": list(self.sale_ids),
                "price": _finite_list(self.price),
                "leverage": _finite_list(infl.leverage),
                "resid": _finite_list(infl.resid),
                "student_internal": _finite_list(infl.student_internal),
                "student_external": _finite_list(infl.student_external),
                "cooks_distance": _finite_list(infl.cooks_distance),
                "dffits": _finite_list(infl.dffits),
                "loo_prediction": _finite_list(pred),
                "loo_error": _finite_list(self.price - pred),
                "loo_low": _finite_list(loo.low),
                "loo_high": _finite_list(loo.high),
                "in_loo_interval": np.asarray(loo.inside, dtype=bool).tolist(),
                "loo_ratio": _finite_list(pred / self.price),
                "kfold_prediction": _finite_list(self.kfold.price_prediction),
                "flags": codes,
            }
        keys = tuple(columns)
        return [
            dict(zip(keys, values, strict=True)) for values in zip(*columns.values(), strict=True)
        ]

    def to_dict(self, *, sales: bool = True) -> dict:
        """JSON-ready dict; keys are listed in ``appraise/commands/diagnose.py``.

        ``sales=False`` leaves out the per-sale list (the bulk of it for large data),
        for readers that only need the flagged sales and the summaries.
        """
        out = plain(
            {
                "response": self.response,
                "n": self.n,
                "p": self.p,
                "level": self.level,
                "settings": self.settings.to_dict(),
                "thresholds": self.thresholds.to_dict(),
                "flagged": [f.to_dict() for f in self.flags],
                "terms": [t.to_dict() for t in self.collinearity.terms],
                "columns": [c.to_dict() for c in self.collinearity.columns],
                "overall": {
                    "condition": self.collinearity.condition.to_dict(),
                    "residual_tests": self.residual_tests.to_dict(),
                    "accuracy": {
                        "leave_one_out": self.loo.to_dict(),
                        "kfold": self.kfold.to_dict(),
                        "coverage_by_segment": None
                        if self.coverage is None
                        else self.coverage.to_dict(),
                    },
                    "ratio_study": self.ratio_study.to_dict(),
                },
                "warnings": list(self.warnings),
            }
        )
        if sales:
            out = {**{k: out[k] for k in ("response", "n", "p", "level", "settings",
                                          "thresholds")},
                   "sales": self.sales_records(),
                   **out}  # fmt: skip
        return out


def diagnose_arrays(
    X: np.ndarray,
    y: np.ndarray,
    price: np.ndarray,
    *,
    names: Sequence[str],
    groups: Sequence[TermGroupRef] = (),
    response: str = "linear",
    level: float = 0.90,
    cov_type: str = "classical",
    rows: Sequence[int] | np.ndarray | None = None,
    sale_ids: Sequence[str | None] | None = None,
    settings: DiagnosticSettings = DEFAULT_SETTINGS,
    spread=None,
) -> Diagnostics:
    """Run the check-up on a design ``X``, response ``y`` and sale prices ``price``.

    ``y`` is the response the model was fitted on (``log(price)`` for a log response).
    The smearing factor for price-unit predictions is recomputed from the residuals
    (Duan: mean of :math:`e^{\\hat e_i}`), which is what the fit reports.
    ``groups`` default to one term per non-constant column.
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    price = np.asarray(price, dtype=float)
    n, p = X.shape
    names = tuple(names)
    rows = np.arange(2, n + 2) if rows is None else np.asarray(rows, dtype=int)
    sale_ids = (None,) * n if sale_ids is None else tuple(sale_ids)
    if not groups:
        groups = tuple(
            TermGroupRef(names[j], "plain", (j,)) for j in range(p) if np.ptp(X[:, j]) != 0
        )
    level = float(settings.level if settings.level is not None else level)

    qr = decompose(X, names)
    infl = influence(X, y, qr)
    coll = collinearity(
        X,
        names,
        groups,
        vif_limit=settings.vif_limit,
        gvif_root_limit=settings.gvif_root_limit,
        condition_threshold=settings.condition_threshold,
        qr=qr,
    )
    tests = residual_tests(
        infl.resid, X, alpha=settings.alpha, response=response, cov_type=cov_type, qr=qr
    )
    folds = kfold(X, y, price, response=response, folds=settings.folds, seed=settings.seed, qr=qr)
    return assemble_diagnostics(
        infl,
        coll,
        tests,
        folds,
        price,
        names=names,
        response=response,
        level=level,
        rows=rows,
        sale_ids=sale_ids,
        settings=settings,
        spread=spread,
    )


def assemble_diagnostics(
    infl: Influence,
    coll: Collinearity,
    tests: ResidualTests,
    folds: KFold,
    price: np.ndarray,
    *,
    names: tuple[str, ...],
    response: str,
    level: float,
    rows: np.ndarray,
    sale_ids: tuple[str | None, ...],
    settings: DiagnosticSettings,
    spread=None,
) -> Diagnostics:
    """The rest of the check-up from its design-dependent parts (influence, collinearity,
    residual tests, k-fold), however those were computed: flags, leave-one-out accuracy,
    the ratio study and the warnings in words."""
    n, p = infl.n, infl.p
    smearing = float(np.mean(np.exp(infl.resid))) if response == "log" else 1.0
    limits = thresholds(n, p, settings)
    flags = flag_sales(infl, limits, rows, sale_ids)
    loo = leave_one_out(
        infl,
        price,
        response=response,
        smearing=smearing,
        level=level,
        spread=spread,
    )
    study = ratio_study(
        loo.price_prediction, price, trim=settings.trim, rows=rows, sale_ids=sale_ids
    )

    warnings: list[str] = []
    if loo.n_without:
        warnings.append(
            f"{loo.n_without} sale(s) alone fix a coefficient (leverage 1, e.g. the only sale "
            "of a category level): they have no leave-one-out prediction and are left out of "
            "PRESS, leave-one-out accuracy, coverage and the ratio study"
        )
    if folds.n_unpredictable:
        warnings.append(
            f"k-fold: {folds.n_unpredictable} sale(s) could not be predicted from the other "
            "folds (a category level only they have); left out of the k-fold figures"
        )
    warnings.extend(coll.warnings)
    warnings.extend(tests.suggestions[:1])
    if loo.coverage_short:
        warnings.append(
            f"only {100 * loo.coverage:.0f}% of sales lie inside their own leave-one-out "
            f"{100 * level:.0f}% prediction interval: the intervals are too narrow"
        )
    for m in study.measures:
        if m.verdict == "outside":
            warnings.append(
                f"ratio study: {m.label} {m.value:.4g} is outside {m.range_text()} ({m.source})"
            )
    return Diagnostics(
        settings=settings,
        response=response,
        level=level,
        n=n,
        p=p,
        names=names,
        rows=rows,
        sale_ids=sale_ids,
        price=price,
        influence=infl,
        thresholds=limits,
        flags=flags,
        collinearity=coll,
        residual_tests=tests,
        loo=loo,
        kfold=folds,
        ratio_study=study,
        warnings=tuple(warnings),
    )


def term_groups(names: Sequence[str], groups: Sequence) -> tuple[TermGroupRef, ...]:
    """Design-column positions of each ``TermGroup`` (expression, columns by name, kind,
    inputs)."""
    pos = {name: j for j, name in enumerate(names)}
    return tuple(
        TermGroupRef(
            g.expression,
            g.kind,
            tuple(pos[c] for c in g.columns if c in pos),
            tuple(getattr(g, "inputs", ()) or ()),
        )
        for g in groups
    )


def diagnose(fit: FitResult, settings: DiagnosticSettings = DEFAULT_SETTINGS) -> Diagnostics:
    """Check a fitted model: influence, collinearity, residual tests, accuracy, ratio study,
    and the coverage of the leave-one-out intervals by segment."""
    names = tuple(fit.design.names)
    if fit.structure is not None:  # absorbed region block: never the dense design
        from .structured import diagnose_structured

        d = diagnose_structured(fit, settings)
    else:
        d = diagnose_arrays(
            fit.X,
            fit.y,
            fit.price,
            names=names,
            groups=term_groups(names, fit.design.groups),
            response=fit.spec.response,
            level=fit.spec.level,
            cov_type=fit.cov_type,
            rows=fit.rows,
            sale_ids=fit.sale_ids,
            settings=settings,
            spread=fit.spread,
        )
    coverage = coverage_by_segment(
        d.loo.inside,
        np.isfinite(d.loo.low),
        coverage_splits(fit, settings.coverage_term),
        level=d.level,
        spread="constant" if fit.spread is None else "modelled",
    )
    extra = tuple(
        f"leave-one-out coverage {100 * s.coverage:.0f}% for {s.by} {s.label} ({s.n} sales) "
        f"against the nominal {100 * d.level:.0f}%: the intervals there are "
        + ("too narrow" if s.coverage < d.level else "too wide")
        for s in coverage.outside()
    )
    return dataclasses.replace(d, coverage=coverage, warnings=(*d.warnings, *extra))


def _labels(column: pd.Series) -> np.ndarray:
    """A column as an object array (None where missing), each distinct value made a
    Python object once: pandas hashes the column (Arrow for text), not a loop per sale."""
    codes, uniques = pd.factorize(column, use_na_sentinel=True)
    return np.append(np.asarray(uniques, dtype=object), None)[codes]


def coverage_splits(fit: FitResult, term: str | None) -> dict[str, np.ndarray]:
    """The splits of :func:`.coverage.coverage_by_segment` for ``fit``: fifths of the
    predicted price, the regions, and ``term`` (a column or role) when given."""
    splits: dict[str, np.ndarray] = {"predicted price": fifths(fit.fitted)}
    region = fit.sales.roles.column("region")
    if region is not None and region in fit.frame.columns:
        splits["region"] = _labels(fit.frame[region])
    if term:
        col = term if term in fit.frame.columns else fit.sales.roles.column(term)
        if col is not None and col in fit.frame.columns:
            values = pd.to_numeric(fit.frame[col], errors="coerce")
            if values.notna().mean() > 0.95 and values.nunique() > 5:
                splits[term] = fifths(values.to_numpy(dtype=float))
            else:
                splits[term] = _labels(fit.frame[col])
        else:  # a derived variable or an expression with one number per sale
            from ..design import learn_design

            try:
                design = learn_design(
                    [term],
                    fit.frame,
                    derived=fit.spec.derived,
                    roles=fit.sales.roles,
                    intercept=False,
                )
                built = design.build(fit.frame, unseen="flag")
            except AppraiseError as exc:
                raise AppraiseError(
                    f"coverage term {term!r} is not a column, a role or an expression: {exc}"
                ) from None
            m = np.asarray(built.matrix, dtype=float)
            if m.shape[1] != 1:
                raise AppraiseError(
                    f"coverage term {term!r} gives {m.shape[1]} columns; name one column, "
                    "role or number per sale"
                )
            values = np.where(np.asarray(built.row_ok, dtype=bool), m[:, 0], np.nan)
            splits[term] = fifths(values)
    return splits
