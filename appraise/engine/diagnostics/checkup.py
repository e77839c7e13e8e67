"""The whole model check-up: every diagnostic of a fitted model from one QR decomposition.

:func:`diagnose_arrays` works on plain arrays; :func:`diagnose` reads them from a
:class:`~appraise.engine.fitting.FitResult`. Neither forms an n x n matrix or refits
the model n times (k-fold cross-validation refits it k times).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from .collinearity import Collinearity, TermGroupRef, collinearity
from .crossval import KFold, LeaveOneOut, kfold, leave_one_out
from .decomposition import decompose
from .influence import Influence, SaleFlag, Thresholds, flag_sales, influence, thresholds
from .plain import plain
from .ratio_study import RatioStudy, ratio_study
from .residual_tests import ResidualTests, residual_tests
from .settings import DEFAULT_SETTINGS, DiagnosticSettings

if TYPE_CHECKING:  # pragma: no cover
    from ..fitting import FitResult


def _num(v: float) -> float | None:
    v = float(v)
    return v if np.isfinite(v) else None


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

    def flag_for_row(self, row: int) -> SaleFlag | None:
        """The flag of the sale at file row ``row``, if it has one."""
        for f in self.flags:
            if f.row == row:
                return f
        return None

    def sales_records(self) -> list[dict]:
        """One plain dict per sale (the ``sales`` section of the JSON)."""
        infl, loo = self.influence, self.loo
        flagged = {f.position: f.codes for f in self.flags}
        out = []
        for i in range(self.n):
            pred = loo.price_prediction[i]
            out.append(
                {
                    "row": int(self.rows[i]),
                    "sale_id": self.sale_ids[i],
                    "price": float(self.price[i]),
                    "leverage": _num(infl.leverage[i]),
                    "resid": _num(infl.resid[i]),
                    "student_internal": _num(infl.student_internal[i]),
                    "student_external": _num(infl.student_external[i]),
                    "cooks_distance": _num(infl.cooks_distance[i]),
                    "dffits": _num(infl.dffits[i]),
                    "loo_prediction": _num(pred),
                    "loo_error": _num(self.price[i] - pred),
                    "loo_low": _num(loo.low[i]),
                    "loo_high": _num(loo.high[i]),
                    "in_loo_interval": bool(loo.inside[i]),
                    "loo_ratio": _num(pred / self.price[i]),
                    "kfold_prediction": _num(self.kfold.price_prediction[i]),
                    "flags": list(flagged.get(i, ())),
                }
            )
        return out

    def to_dict(self) -> dict:
        """JSON-ready dict; keys are listed in ``appraise/commands/diagnose.py``."""
        return plain(
            {
                "response": self.response,
                "n": self.n,
                "p": self.p,
                "level": self.level,
                "settings": self.settings.to_dict(),
                "thresholds": self.thresholds.to_dict(),
                "sales": self.sales_records(),
                "flagged": [f.to_dict() for f in self.flags],
                "terms": [t.to_dict() for t in self.collinearity.terms],
                "columns": [c.to_dict() for c in self.collinearity.columns],
                "overall": {
                    "condition": self.collinearity.condition.to_dict(),
                    "residual_tests": self.residual_tests.to_dict(),
                    "accuracy": {
                        "leave_one_out": self.loo.to_dict(),
                        "kfold": self.kfold.to_dict(),
                    },
                    "ratio_study": self.ratio_study.to_dict(),
                },
                "warnings": list(self.warnings),
            }
        )


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
    smearing = float(np.mean(np.exp(infl.resid))) if response == "log" else 1.0
    limits = thresholds(n, p, settings)
    flags = flag_sales(infl, limits, rows, sale_ids)
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
    loo = leave_one_out(infl, price, response=response, smearing=smearing, level=level)
    folds = kfold(X, y, price, response=response, folds=settings.folds, seed=settings.seed, qr=qr)
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
    # below nominal by more than two binomial standard errors of a share of n_used sales
    if loo.n_used and loo.coverage < level - 2 * np.sqrt(level * (1 - level) / loo.n_used):
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
    """Check a fitted model: influence, collinearity, residual tests, accuracy, ratio study."""
    names = tuple(fit.design.names)
    return diagnose_arrays(
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
    )
