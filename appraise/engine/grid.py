"""Adjustment grid of the sales comparison approach, supported by the fitted model.

For a comparable :math:`c`, the subject :math:`s` (evaluated at the effective date, so
its time terms read the date of value) and a feature group :math:`k` (the design columns
one expression produced: a polynomial's monomials, an interaction, a ratio, a region's
indicators, the time terms) with positions :math:`P_k`:

.. math::  a_{ck} = (x_s - x_c)_{P_k}'\\,\\hat\\beta_{P_k},\\qquad
           \\operatorname{se}(a_{ck}) = \\sqrt{d' V_{P_kP_k} d},\\; d = (x_s - x_c)_{P_k}

so interactions, polynomials and ratios are exact (the intercept cancels). ``V`` is the
coefficient covariance of the fit's type.

* **Linear response**: the adjustments are currency and add up:
  adjusted price :math:`= p_c + \\sum_k a_{ck} = p_c + (\\hat y_s - \\hat y_c)`.
* **Log response**: the adjustments are multiplicative. They are applied in a stated
  order (market conditions first, then the groups in the model file's order), each to
  the price reached so far: :math:`P_0 = p_c`, :math:`P_k = P_{k-1} e^{a_{ck}}`, and the
  adjustment shown in currency is :math:`P_k - P_{k-1}`. Its standard error is by the delta
  method, :math:`P_{k-1} e^{a_{ck}} \\operatorname{se}(a_{ck})` (earlier steps held
  fixed). The adjusted price is :math:`p_c\\, e^{\\hat y_s - \\hat y_c}` whatever the order.
* Adjusted price SE: :math:`\\sqrt{D'VD}` (linear) or :math:`p_c e^{D'\\hat\\beta}\\sqrt{D'VD}`
  (log, delta method) with :math:`D = x_s - x_c`.
* Net adjustment % :math:`= |\\sum \\text{adj}| / p_c`; gross % :math:`= \\sum|\\text{adj}| / p_c`.

Flags: net above 15% or gross above 25% of the sale price. These limits are *common
practice*: the largest secondary-market guideline dropped them in 2014, but many lenders
and reviewers still look for them. A flag asks for the appraiser's comment; it never
blocks anything.

Reconciliation weights (default): inversely related to the gross adjustment,
:math:`w_c = \\dfrac{1/(g_c + \\varepsilon)}{\\sum_j 1/(g_j + \\varepsilon)}` with
:math:`g_c` the gross adjustment as a fraction of the sale price and
:math:`\\varepsilon = 0.02` (so a comparable needing almost nothing does not take all the
weight). User weights must be non-negative and sum to 1.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from .errors import SubjectError
from .jsonable import to_jsonable
from .market import date_inputs, group_positions, time_groups
from .valuation import prepare_subject

if TYPE_CHECKING:  # pragma: no cover - typing only
    from .fitting import FitResult
    from .market import MarketIndex
    from .valuation import Valuation

NET_LIMIT = 0.15
"""Common-practice review trigger for the net adjustment (fraction of sale price)."""
GROSS_LIMIT = 0.25
"""Common-practice review trigger for the gross adjustment (fraction of sale price)."""
WEIGHT_EPSILON = 0.02
"""The :math:`\\varepsilon` of the default reconciliation weights."""
WEIGHT_TOLERANCE = 1e-6


@dataclass(frozen=True)
class GridLimits:
    """Review triggers (fractions of the sale price); flagged above, never blocked."""

    net: float = NET_LIMIT
    gross: float = GROSS_LIMIT


def subject_at(fit: FitResult, subject: pd.DataFrame, effective_date) -> pd.DataFrame:
    """The one-row subject with every date input set to the effective date."""
    subject = subject.copy()
    eff = pd.to_datetime(pd.Series([effective_date])).astype("datetime64[ns]").to_numpy()
    subject["effective_date"] = eff
    for c in date_inputs(fit):
        subject[c] = eff
    return prepare_subject(fit, subject)


def ordered_groups(fit: FitResult):
    """Groups in the order adjustments are applied: market conditions first, then the
    model file's order."""
    times = time_groups(fit)
    return (*times, *(g for g in fit.design.groups if g not in times))


@dataclass(frozen=True, eq=False)
class Adjustments:
    """Adjustments for many comparables at once (arrays: rows = comparables)."""

    groups: tuple[str, ...]
    is_time: tuple[bool, ...]
    response: np.ndarray  # (n, G) response-scale adjustment a_ck
    response_se: np.ndarray  # (n, G)
    amount: np.ndarray  # (n, G) currency
    amount_se: np.ndarray  # (n, G)
    sale_price: np.ndarray
    adjusted: np.ndarray
    adjusted_se: np.ndarray
    pred_subject: float
    pred_comp: np.ndarray
    ok: np.ndarray

    @property
    def net(self) -> np.ndarray:
        return self.amount.sum(axis=1)

    @property
    def gross(self) -> np.ndarray:
        return np.abs(self.amount).sum(axis=1)

    @property
    def net_pct(self) -> np.ndarray:
        return np.abs(self.net) / self.sale_price

    @property
    def gross_pct(self) -> np.ndarray:
        return self.gross / self.sale_price


def adjust(
    fit: FitResult, subject: pd.DataFrame, comps: pd.DataFrame, sale_price: np.ndarray
) -> Adjustments:
    """Group adjustments bringing each row of ``comps`` to ``subject`` (see module doc).

    ``subject`` must already be at the effective date (:func:`subject_at`).
    """
    Xs = np.asarray(fit.design.build(subject, unseen="raise").matrix, dtype=float)[0]
    built = fit.design.build(comps, unseen="flag")
    Xc = np.asarray(built.matrix, dtype=float)
    ok = np.asarray(built.row_ok, dtype=bool)
    D = Xs[None, :] - Xc
    beta, V = fit.params, fit.cov_params
    groups = ordered_groups(fit)
    times = set(time_groups(fit))
    n, G = len(comps), len(groups)
    a = np.zeros((n, G))
    a_se = np.zeros((n, G))
    for k, g in enumerate(groups):
        pos = group_positions(fit, g)
        d = D[:, pos]
        a[:, k] = d @ beta[pos]
        a_se[:, k] = np.sqrt(np.einsum("ij,jk,ik->i", d, V[np.ix_(pos, pos)], d))
    p = np.asarray(sale_price, dtype=float)
    total = D @ beta
    total_se = np.sqrt(np.einsum("ij,jk,ik->i", D, V, D))
    pred_s = float(Xs @ beta)
    pred_c = Xc @ beta
    if fit.response == "log":
        running = p[:, None] * np.exp(np.cumsum(a, axis=1))
        before = np.concatenate([p[:, None], running[:, :-1]], axis=1)
        amount = running - before
        amount_se = running * a_se
        adjusted = p * np.exp(pred_s - pred_c)
        adjusted_se = adjusted * total_se
    else:
        amount, amount_se = a, a_se
        adjusted = p + (pred_s - pred_c)
        adjusted_se = total_se
    del total
    return Adjustments(
        groups=tuple(g.expression for g in groups),
        is_time=tuple(g in times for g in groups),
        response=a,
        response_se=a_se,
        amount=amount,
        amount_se=amount_se,
        sale_price=p,
        adjusted=adjusted,
        adjusted_se=adjusted_se,
        pred_subject=pred_s,
        pred_comp=pred_c,
        ok=ok,
    )


def adjustment_flags(
    net_pct: float, gross_pct: float, limits: GridLimits = GridLimits()
) -> tuple[str, ...]:  # noqa: B008
    """Review flags: strictly above a limit is flagged; exactly at it is not."""
    out = []
    if net_pct > limits.net:
        out.append(
            f"net adjustment {net_pct:.1%} is above {limits.net:.0%} of the sale price: "
            "needs the appraiser's comment"
        )
    if gross_pct > limits.gross:
        out.append(
            f"gross adjustment {gross_pct:.1%} is above {limits.gross:.0%} of the sale price: "
            "needs the appraiser's comment"
        )
    return tuple(out)


def default_weights(gross_pct: Sequence[float]) -> np.ndarray:
    """:math:`w_c \\propto 1/(g_c + \\varepsilon)`, summing to 1 (module docstring)."""
    inv = 1.0 / (np.asarray(gross_pct, dtype=float) + WEIGHT_EPSILON)
    return inv / inv.sum()


def check_weights(weights: Sequence[float], n: int) -> np.ndarray:
    w = np.asarray(list(weights), dtype=float)
    if len(w) != n:
        raise SubjectError(f"give one weight per comparable: {n} comparables, {len(w)} weights")
    if not np.all(np.isfinite(w)) or np.any(w < 0):
        raise SubjectError("reconciliation weights must be finite and not negative")
    if abs(w.sum() - 1.0) > WEIGHT_TOLERANCE:
        raise SubjectError(f"reconciliation weights must sum to 1; these sum to {w.sum():.6f}")
    return w


@dataclass(frozen=True)
class Adjustment:
    group: str
    market_conditions: bool
    amount: float
    se: float
    response_change: float
    response_se: float

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "group": self.group,
                "market_conditions": self.market_conditions,
                "amount": self.amount,
                "se": self.se,
                "response_change": self.response_change,
                "response_se": self.response_se,
            }
        )


@dataclass(frozen=True)
class GridColumn:
    """One comparable in the grid."""

    sale_id: str
    sale_price: float
    sale_date: pd.Timestamp | None
    distance_km: float | None
    months: float | None
    same_region: bool | None
    pinned: bool
    adjustments: tuple[Adjustment, ...]
    net: float
    gross: float
    net_pct: float
    gross_pct: float
    adjusted: float
    adjusted_se: float
    pred_comparable: float
    weight: float
    flags: tuple[str, ...] = field(default=())
    comment: str = ""

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "sale_id": self.sale_id,
                "sale_price": self.sale_price,
                "sale_date": self.sale_date,
                "similarity": {
                    "distance_km": self.distance_km,
                    "months_to_effective_date": self.months,
                    "same_region": self.same_region,
                    "gross_adjustment_pct": self.gross_pct,
                },
                "pinned": self.pinned,
                "adjustments": [a.to_dict() for a in self.adjustments],
                "net": {"amount": self.net, "pct": self.net_pct},
                "gross": {"amount": self.gross, "pct": self.gross_pct},
                "adjusted_price": {"amount": self.adjusted, "se": self.adjusted_se},
                "prediction_at_comparable": self.pred_comparable,
                "weight": self.weight,
                "flags": list(self.flags),
                "comment": self.comment,
            }
        )


@dataclass(frozen=True)
class Reconciliation:
    value: float
    low: float
    high: float
    weights: tuple[float, ...]
    weights_from: str  # "gross adjustment" or "user"
    regression_estimate: float
    regression_low: float
    regression_high: float
    level: float

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "value": self.value,
                "range": {"low": self.low, "high": self.high},
                "weights": list(self.weights),
                "weights_from": self.weights_from,
                "regression": {
                    "estimate": self.regression_estimate,
                    "interval": {
                        "level": self.level,
                        "low": self.regression_low,
                        "high": self.regression_high,
                    },
                },
            }
        )


ORDER_NOTE_LOG = (
    "log response: adjustments are multiplicative, applied in the order shown (market "
    "conditions first), each to the price reached so far; standard errors by the delta method"
)
ORDER_NOTE_LINEAR = "linear response: adjustments are in currency and add up"


@dataclass(frozen=True, eq=False)
class Grid:
    """The adjustment grid, its reconciliation and the market-conditions index."""

    effective_date: pd.Timestamp
    response: str
    groups: tuple[str, ...]
    comparables: tuple[GridColumn, ...]
    reconciliation: Reconciliation
    market: MarketIndex
    pred_subject: float
    limits: GridLimits
    warnings: tuple[str, ...]
    order_note: str
    caution: str

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "effective_date": self.effective_date,
                "response": self.response,
                "adjustment_order": list(self.groups),
                "order_note": self.order_note,
                "prediction_at_subject": self.pred_subject,
                "limits": {"net_pct": self.limits.net, "gross_pct": self.limits.gross},
                "comparables": [c.to_dict() for c in self.comparables],
                "weights": [c.weight for c in self.comparables],
                "reconciliation": self.reconciliation.to_dict(),
                "market_conditions": self.market.to_dict(),
                "warnings": list(self.warnings),
                "caution": self.caution,
            }
        )


def build_grid(
    fit: FitResult,
    subject: pd.DataFrame,
    rows: Sequence[int],
    *,
    effective_date,
    valuation: Valuation,
    market: MarketIndex,
    similarity: pd.DataFrame,
    pinned: Sequence[str] = (),
    weights: Sequence[float] | None = None,
    limits: GridLimits = GridLimits(),  # noqa: B008
    warnings: Sequence[str] = (),
    comments: dict[str, str] | None = None,
    caution: str = "",
) -> Grid:
    """The grid for the comparables at positions ``rows`` of ``fit.frame``.

    ``similarity`` is the candidates' frame of :func:`.comparables.candidates` (indexed
    like ``fit.frame``); ``subject`` is at the effective date already.
    """
    rows = list(rows)
    if not rows:
        raise SubjectError("choose at least one comparable for the adjustment grid")
    comps = fit.frame.iloc[rows]
    price = np.asarray(fit.price, dtype=float)[rows]
    adj = adjust(fit, subject, comps, price)
    if not adj.ok.all():
        bad = [similarity["sale_id"].iloc[r] for r, ok in zip(rows, adj.ok, strict=True) if not ok]
        raise SubjectError(
            "these comparables cannot be adjusted (a value is missing): " + ", ".join(map(str, bad))
        )
    w = default_weights(adj.gross_pct) if weights is None else check_weights(weights, len(rows))
    comments = comments or {}
    pinned = set(pinned)
    cols = []
    for i, r in enumerate(rows):
        sim = similarity.iloc[r]
        sid = str(sim["sale_id"])
        cols.append(
            GridColumn(
                sale_id=sid,
                sale_price=float(price[i]),
                sale_date=sim.get("sale_date"),
                distance_km=_num(sim.get("distance_km")),
                months=_num(sim.get("months")),
                same_region=None
                if pd.isna(sim.get("same_region"))
                else bool(sim.get("same_region")),
                pinned=sid in pinned,
                adjustments=tuple(
                    Adjustment(
                        g,
                        t,
                        float(adj.amount[i, k]),
                        float(adj.amount_se[i, k]),
                        float(adj.response[i, k]),
                        float(adj.response_se[i, k]),
                    )
                    for k, (g, t) in enumerate(zip(adj.groups, adj.is_time, strict=True))
                ),
                net=float(adj.net[i]),
                gross=float(adj.gross[i]),
                net_pct=float(adj.net_pct[i]),
                gross_pct=float(adj.gross_pct[i]),
                adjusted=float(adj.adjusted[i]),
                adjusted_se=float(adj.adjusted_se[i]),
                pred_comparable=float(adj.pred_comp[i]),
                weight=float(w[i]),
                flags=adjustment_flags(float(adj.net_pct[i]), float(adj.gross_pct[i]), limits),
                comment=comments.get(sid, ""),
            )
        )
    rec = Reconciliation(
        value=float(np.dot(w, adj.adjusted)),
        low=float(adj.adjusted.min()),
        high=float(adj.adjusted.max()),
        weights=tuple(float(x) for x in w),
        weights_from="gross adjustment" if weights is None else "user",
        regression_estimate=valuation.estimate,
        regression_low=valuation.low,
        regression_high=valuation.high,
        level=valuation.level,
    )
    return Grid(
        effective_date=pd.Timestamp(effective_date),
        response=fit.response,
        groups=adj.groups,
        comparables=tuple(cols),
        reconciliation=rec,
        market=market,
        pred_subject=adj.pred_subject,
        limits=limits,
        warnings=tuple(warnings) + market.notes,
        order_note=ORDER_NOTE_LOG if fit.response == "log" else ORDER_NOTE_LINEAR,
        caution=caution,
    )


def _num(v) -> float | None:
    return None if v is None or pd.isna(v) else float(v)


__all__ = [
    "GROSS_LIMIT",
    "NET_LIMIT",
    "Adjustment",
    "Adjustments",
    "Grid",
    "GridColumn",
    "GridLimits",
    "Reconciliation",
    "adjust",
    "adjustment_flags",
    "build_grid",
    "check_weights",
    "default_weights",
    "ordered_groups",
    "subject_at",
]
