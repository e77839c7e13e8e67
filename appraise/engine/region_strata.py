"""The ratio study by stratum: by region and by price tier (IAAO Standard on Ratio Studies,
stratified analysis).

A model can meet the standard's ranges overall and fail in one neighbourhood or one price
range; the standard asks for the figures per stratum too. The values compared with the
sale prices are the leave-one-out values (each sale valued by the model fitted without
it), exactly those of the overall ratio study in ``appraise diagnose``:
:math:`\\hat y_{(i)} = y_i - e_i/(1-h_i)`, in price units (Duan's smearing factor of the
full fit for a log response); a sale with leverage 1 has none and is left out. The
measures (median ratio, COD, PRD, PRB, ...) and their ranges are those of
:mod:`appraise.engine.diagnostics.ratio_study`, computed on each stratum's sales alone.

Price tiers are the quartiles of the sale price of the sales used (numpy's linear
interpolation): tier 1 holds prices up to Q1, tier 2 above Q1 up to the median, tier 3
above the median up to Q3, tier 4 above Q3. Stratifying by sale price itself tilts the
ratios (a sale that happened to sell low lands in a low tier with a high ratio), so the
lowest tier tends to look over-valued and the highest under-valued even for a fair model;
read a tier's level beside that effect, and the PRD/PRB of all sales for vertical equity
(within a tier the price range is cut short, so a tier's PRD and PRB are not judged).

A stratum with fewer than :data:`MIN_STRATUM_SALES` sales is marked thin: its COD and PRB
rest on too few ratios to be read against the ranges (common practice; the standard warns
against conclusions from small samples).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from .diagnostics.crossval import to_price
from .diagnostics.ratio_study import RatioStudy, ratio_study
from .jsonable import to_jsonable

if TYPE_CHECKING:  # pragma: no cover
    from .fitting import FitResult

MIN_STRATUM_SALES = 20
"""Fewer sales than this in a stratum is thin (common practice)."""

LEVERAGE_ONE_TOL = 1e-10

TIER_METHOD = (
    "quartiles of the sale price (linear interpolation): tier 1 up to Q1, tier 2 to the "
    "median, tier 3 to Q3, tier 4 above Q3"
)


@dataclass(frozen=True, eq=False)
class Stratum:
    """One stratum's sales and its ratio study."""

    kind: str
    """"region" or "price tier"."""
    label: str
    n: int
    thin: bool
    study: RatioStudy
    price_low: float | None = None
    price_high: float | None = None

    def measure(self, name: str) -> float:
        return self.study.get(name).value

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "kind": self.kind,
                "label": self.label,
                "n": self.n,
                "thin": self.thin,
                "price_low": self.price_low,
                "price_high": self.price_high,
                "study": self.study.to_dict(),
            }
        )


@dataclass(frozen=True, eq=False)
class StrataStudy:
    """The overall ratio study and the same measures by region and by price tier."""

    overall: RatioStudy
    by_region: tuple[Stratum, ...]
    by_tier: tuple[Stratum, ...]
    tier_edges: tuple[float, float, float]
    tier_method: str
    min_sales: int
    warnings: tuple[str, ...]

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "overall": self.overall.to_dict(),
                "by_region": [s.to_dict() for s in self.by_region],
                "by_tier": [s.to_dict() for s in self.by_tier],
                "tier_edges": list(self.tier_edges),
                "tier_method": self.tier_method,
                "min_sales": self.min_sales,
            }
        )


def _level_order(level: str) -> tuple:
    """Numbers in numeric order (2 before 10), then text alphabetically."""
    try:
        return (0, float(level), level)
    except ValueError:
        return (1, 0.0, level)


def loo_values(fit: FitResult) -> np.ndarray:
    """Leave-one-out value of each sale in price units (NaN at leverage 1)."""
    h = fit.leverage()
    ok = (1.0 - h) > LEVERAGE_ONE_TOL
    loo = np.where(ok, fit.y - fit.resid / np.where(ok, 1.0 - h, 1.0), np.nan)
    return to_price(loo, fit.response, fit.smearing)


def price_tiers(price: np.ndarray) -> tuple[np.ndarray, tuple[float, float, float]]:
    """Tier (1..4) of each price and the quartile edges (Q1, median, Q3)."""
    price = np.asarray(price, dtype=float)
    q1, q2, q3 = (float(q) for q in np.quantile(price, [0.25, 0.5, 0.75]))
    tier = 1 + (price > q1).astype(int) + (price > q2) + (price > q3)
    return tier, (q1, q2, q3)


def stratified_study(
    fit: FitResult,
    *,
    region_column: str | None,
    trim: bool = False,
    min_sales: int = MIN_STRATUM_SALES,
) -> StrataStudy:
    """The leave-one-out ratio study overall, per level of ``region_column`` (levels in
    sorted order) and per price tier."""
    pred = loo_values(fit)
    price = np.asarray(fit.price, dtype=float)
    rows = np.asarray(fit.rows)
    ids = fit.sale_ids

    def study(mask: np.ndarray) -> RatioStudy:
        return study_at(np.flatnonzero(mask))

    def study_at(idx: np.ndarray) -> RatioStudy:
        return ratio_study(
            pred[idx], price[idx], trim=trim, rows=rows[idx], sale_ids=[ids[i] for i in idx]
        )

    warnings: list[str] = []
    by_region: list[Stratum] = []
    if region_column is not None and region_column in fit.frame.columns:
        from .regions import level_labels, level_positions

        at_level = level_positions(level_labels(fit.frame[region_column]))
        for lv in sorted(set(at_level) - {""}, key=_level_order):
            s = study_at(at_level[lv])  # positions in file order, as the mask gave them
            by_region.append(Stratum("region", lv, s.n, s.n < min_sales, s))
    tier, edges = price_tiers(price)
    bounds = [(None, edges[0]), (edges[0], edges[1]), (edges[1], edges[2]), (edges[2], None)]
    by_tier = []
    for t, (lo, hi) in enumerate(bounds, start=1):
        s = study(tier == t)
        by_tier.append(Stratum("price tier", f"tier {t}", s.n, s.n < min_sales, s, lo, hi))
    for st in (*by_region, *by_tier):
        if st.thin:
            warnings.append(
                f"ratio study: {st.kind} '{st.label}' has {st.n} sales (fewer than {min_sales}); "
                "its figures are too thin to read against the ranges"
            )
            continue
        judged = ("median", "cod") if st.kind == "price tier" else ("median", "cod", "prd", "prb")
        for m in st.study.measures:
            if m.verdict == "outside" and m.name in judged:
                warnings.append(
                    f"ratio study, {st.kind} '{st.label}': {m.label} {m.value:.4f} is outside "
                    f"{m.range_text()}"
                )
    return StrataStudy(
        overall=study(np.ones(price.size, dtype=bool)),
        by_region=tuple(by_region),
        by_tier=tuple(by_tier),
        tier_edges=edges,
        tier_method=TIER_METHOD,
        min_sales=min_sales,
        warnings=tuple(warnings),
    )


__all__ = [
    "MIN_STRATUM_SALES",
    "Stratum",
    "StrataStudy",
    "loo_values",
    "price_tiers",
    "stratified_study",
]
