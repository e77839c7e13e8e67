"""Candidate models side by side, ranked by leave-one-out error in price units.

Leave-one-out RMSE in price units compares a linear and a log response on the same
footing. AIC and BIC do not: a log response's likelihood is of log price. Its
price-scale counterpart adds the Jacobian of :math:`y = \\log S`,
:math:`-2\\sum\\log|dy/dS| = 2\\sum \\log S_i`, so ``aic_price``/``bic_price`` compare
across responses (for a linear response they equal AIC/BIC). Every figure compares
only models fitted on the same sales; a warning says when they were not.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import asdict, dataclass, replace
from typing import TYPE_CHECKING

import numpy as np

from ..errors import AppraiseError
from .checkup import Diagnostics, diagnose
from .plain import plain
from .settings import DEFAULT_SETTINGS, DiagnosticSettings

if TYPE_CHECKING:  # pragma: no cover
    from ..fitting import FitResult


@dataclass(frozen=True)
class ModelRow:
    """One candidate's figures. ``rank`` 1 has the smallest leave-one-out RMSE."""

    label: str
    rank: int
    response: str
    n: int
    p: int
    loo_rmse: float
    kfold_rmse: float
    loo_mdape: float
    adj_r2: float
    aic: float
    bic: float
    aic_price: float
    bic_price: float
    cod: float
    coverage: float
    level: float

    def to_dict(self) -> dict:
        return plain(asdict(self))


@dataclass(frozen=True)
class Comparison:
    rows: tuple[ModelRow, ...]
    """Best first."""
    warnings: tuple[str, ...]

    def to_dict(self) -> dict:
        return plain({"models": [r.to_dict() for r in self.rows], "warnings": list(self.warnings)})


def price_scale_ic(fit: FitResult) -> tuple[float, float]:
    """AIC and BIC of the model as a density of the sale price (see module docstring)."""
    if fit.spec.response == "log":
        jac = 2.0 * float(np.sum(np.log(fit.price)))
        return fit.aic + jac, fit.bic + jac
    return fit.aic, fit.bic


def _row(label: str, fit: FitResult, diag: Diagnostics) -> ModelRow:
    aic_p, bic_p = price_scale_ic(fit)
    return ModelRow(
        label=label,
        rank=0,
        response=fit.spec.response,
        n=fit.n,
        p=fit.p,
        loo_rmse=diag.loo.rmse_price,
        kfold_rmse=diag.kfold.rmse_price,
        loo_mdape=diag.loo.mdape,
        adj_r2=fit.adj_r2,
        aic=fit.aic,
        bic=fit.bic,
        aic_price=aic_p,
        bic_price=bic_p,
        cod=diag.ratio_study.get("cod").value,
        coverage=diag.loo.coverage,
        level=diag.level,
    )


def compare_models(
    fits: Sequence[FitResult],
    labels: Sequence[str] | None = None,
    settings: DiagnosticSettings = DEFAULT_SETTINGS,
) -> Comparison:
    """Diagnose each fit and rank them by leave-one-out RMSE in price units.

    Warns when the models were fitted on different sales (their exclusions differ
    because they read different inputs), naming n of each and the rows not shared.
    """
    if labels is None:
        labels = [f"model {k + 1}" for k in range(len(fits))]
    if len(labels) != len(fits):
        raise AppraiseError(f"{len(labels)} labels for {len(fits)} models")
    rows = [_row(lab, fit, diagnose(fit, settings)) for lab, fit in zip(labels, fits, strict=True)]
    order = sorted(
        range(len(rows)), key=lambda k: (not np.isfinite(rows[k].loo_rmse), rows[k].loo_rmse)
    )
    ranked = tuple(replace(rows[k], rank=r + 1) for r, k in enumerate(order))
    warnings: list[str] = []
    row_sets = [frozenset(int(v) for v in fit.rows) for fit in fits]
    if len(set(row_sets)) > 1:
        shared = frozenset.intersection(*row_sets)
        counts = ", ".join(f"{lab}: n = {fit.n}" for lab, fit in zip(labels, fits, strict=True))
        odd = sorted(frozenset.union(*row_sets) - shared)
        shown = ", ".join(str(r) for r in odd[:12]) + (" ..." if len(odd) > 12 else "")
        warnings.append(
            f"the models use different sales ({counts}); file rows not used by all: {shown}. "
            "Each model needs different inputs, so different rows were left out: compare "
            "with care, or exclude the same sales from all"
        )
    if len({fit.spec.response for fit in fits}) > 1:
        warnings.append(
            "linear and log responses: compare AIC/BIC on the price scale (aic_price, "
            "bic_price), not the raw AIC/BIC"
        )
    return Comparison(ranked, tuple(warnings))
