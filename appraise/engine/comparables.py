"""Comparable selection: rank the sales used in the fit by similarity to the subject.

For every sale of the fit (a *candidate*) the module measures

* ``distance_km``: great-circle (haversine) distance from the subject, when both have
  coordinates;
* ``months``: months from the sale date to the effective date (positive = sold before);
* ``same_region``: whether the sale lies in the subject's region;
* ``gross_pct``: the gross adjustment the grid would need, as a fraction of the sale
  price (the model's own measure of dissimilarity, :mod:`.grid`).

Similarity score (smaller = more similar), documented and set in :class:`SelectionSettings`::

    score = 100 * gross_pct + km_weight * distance_km + month_weight * |months|
            + other_region_penalty * (not same_region)

Missing measures add nothing. Filters (max distance, max months, same region only) drop
candidates; pinned comparables are always kept and come first. The default selection
is the best ``count`` (4, within the 3 to 6 that lender guidance commonly expects).
Fewer than three, or any sold more than twelve months before the effective date, is
warned about, never blocked.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from .errors import SubjectError
from .functions import distance_km, months_between
from .grid import adjust
from .jsonable import to_jsonable
from .market import date_inputs
from .sales import ROW_COLUMN

if TYPE_CHECKING:  # pragma: no cover - typing only
    from .fitting import FitResult

MIN_COMPARABLES = 3
"""Common lender guidance: at least three closed comparable sales."""
RECENT_MONTHS = 12.0
"""Common lender guidance: sales normally within the last twelve months."""


@dataclass(frozen=True)
class SelectionSettings:
    """Filters, score weights and how many comparables to take by default."""

    max_km: float | None = None
    max_months: float | None = None
    same_region_only: bool = False
    count: int = 4
    km_weight: float = 1.0
    month_weight: float = 0.5
    other_region_penalty: float = 10.0

    def __post_init__(self) -> None:
        if not 1 <= int(self.count) <= 50:
            raise SubjectError(f"the number of comparables must be 1 to 50, not {self.count}")

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "max_km": self.max_km,
                "max_months": self.max_months,
                "same_region_only": self.same_region_only,
                "count": self.count,
            }
        )

    @classmethod
    def from_dict(cls, d: dict) -> SelectionSettings:
        keys = ("max_km", "max_months", "same_region_only", "count")
        return cls(**{k: d[k] for k in keys if k in d})


def _column(fit: FitResult, role: str) -> str | None:
    col = fit.sales.roles.column(role)
    return col if col is not None and col in fit.frame.columns else None


def sale_labels(fit: FitResult) -> tuple[str, ...]:
    """Each fitted sale's id, or ``row N`` (its file row) when the sales have no id column."""
    rows = fit.frame[ROW_COLUMN].to_numpy() if ROW_COLUMN in fit.frame.columns else fit.rows
    return tuple(
        str(s) if s is not None and str(s).strip() else f"row {int(r)}"
        for s, r in zip(fit.sale_ids, rows, strict=True)
    )


def sale_date_column(fit: FitResult) -> str | None:
    col = _column(fit, "sale_date")
    if col is None:
        dates = date_inputs(fit)
        col = dates[0] if dates else None
    return col


def candidates(
    fit: FitResult,
    subject: pd.DataFrame,
    effective_date,
    settings: SelectionSettings = SelectionSettings(),  # noqa: B008
) -> pd.DataFrame:
    """Every sale of the fit with its similarity measures and score, positions as in
    ``fit.frame`` (column ``pos``), plus ``eligible`` (passes the filters)."""
    f = fit.frame
    n = len(f)
    eff = pd.Timestamp(effective_date)
    out = pd.DataFrame({"pos": np.arange(n), "sale_id": list(sale_labels(fit))})
    out["sale_price"] = np.asarray(fit.price, dtype=float)
    dcol = sale_date_column(fit)
    if dcol is not None:
        out["sale_date"] = pd.to_datetime(f[dcol]).to_numpy()
        out["months"] = -months_between(f[dcol].to_numpy(), np.datetime64(eff.to_datetime64()))
    else:
        out["sale_date"] = pd.NaT
        out["months"] = np.nan
    lat, lon = _column(fit, "latitude"), _column(fit, "longitude")
    if lat and lon and lat in subject.columns and lon in subject.columns:
        out["distance_km"] = distance_km(
            f[lat].to_numpy(float),
            f[lon].to_numpy(float),
            float(subject[lat].iloc[0]),
            float(subject[lon].iloc[0]),
        )
        out["latitude"], out["longitude"] = f[lat].to_numpy(float), f[lon].to_numpy(float)
    else:
        out["distance_km"] = np.nan
    reg = _column(fit, "region")
    if reg and reg in subject.columns and not pd.isna(subject[reg].iloc[0]):
        out["region"] = f[reg].astype(str).to_numpy()
        out["same_region"] = out["region"] == str(subject[reg].iloc[0])
    else:
        out["same_region"] = pd.Series([None] * n, dtype=object)
    adj = adjust(fit, subject, f, out["sale_price"].to_numpy())
    out["gross_pct"] = np.where(adj.ok, adj.gross_pct, np.nan)
    out["net_pct"] = np.where(adj.ok, adj.net_pct, np.nan)
    score = 100 * out["gross_pct"].fillna(0)
    score = score + settings.km_weight * out["distance_km"].fillna(0)
    score = score + settings.month_weight * out["months"].abs().fillna(0)
    other = out["same_region"].map(lambda v: v is False or v is np.False_)
    score = score + settings.other_region_penalty * other.astype(float)
    out["score"] = np.where(adj.ok, score, np.inf)
    eligible = pd.Series(adj.ok, index=out.index)
    if settings.max_km is not None:
        eligible &= out["distance_km"].fillna(np.inf) <= settings.max_km
    if settings.max_months is not None:
        eligible &= out["months"].abs().fillna(np.inf) <= settings.max_months
    if settings.same_region_only:
        eligible &= out["same_region"].map(lambda v: bool(v) if v is not None else False)
    out["eligible"] = eligible.to_numpy()
    return out


@dataclass(frozen=True)
class Selection:
    """The chosen comparables (positions in ``fit.frame``), ranked candidates and warnings."""

    rows: tuple[int, ...]
    sale_ids: tuple[str, ...]
    pinned: tuple[str, ...]
    warnings: tuple[str, ...] = field(default=())


def select(
    table: pd.DataFrame,
    settings: SelectionSettings = SelectionSettings(),  # noqa: B008
    pinned: Sequence[str] = (),
    chosen: Sequence[str] | None = None,
) -> Selection:
    """Pinned first, then the best-scoring eligible candidates up to ``settings.count``.

    ``chosen`` (sale ids) replaces the ranking with exactly those comparables.
    """
    ids = table["sale_id"].tolist()
    where = {s: i for i, s in enumerate(ids)}
    pinned = tuple(str(p) for p in pinned)
    for s in (*pinned, *(chosen or ())):
        if str(s) not in where:
            raise SubjectError(f"comparable '{s}' is not among the sales used in the fit")
    if chosen is not None:
        picks = [where[str(s)] for s in chosen]
    else:
        picks = [where[p] for p in pinned]
        ranked = table[table["eligible"]].sort_values("score", kind="stable")
        for pos in ranked["pos"]:
            if len(picks) >= max(settings.count, len(pinned)):
                break
            if pos not in picks:
                picks.append(int(pos))
    warnings = []
    if len(picks) < MIN_COMPARABLES:
        warnings.append(
            f"{len(picks)} comparable(s) chosen: lender guidance commonly asks for at least "
            f"{MIN_COMPARABLES} closed sales"
        )
    months = table["months"].to_numpy()[picks] if picks else np.array([])
    old = [
        ids[p] for p, m in zip(picks, months, strict=True) if np.isfinite(m) and m > RECENT_MONTHS
    ]
    if old:
        warnings.append(
            "sold more than 12 months before the effective date (explain why they are used): "
            + ", ".join(old)
        )
    return Selection(tuple(picks), tuple(ids[p] for p in picks), pinned, tuple(warnings))


@dataclass(frozen=True)
class ComparablesChoice:
    """What the user chose for the sales comparison, as kept in the workfile.

    ``chosen`` None means "the ranking's best"; ``weights`` None the default weights;
    ``effective_date`` ISO text or None (then the subject's or the model file's).
    """

    effective_date: str | None = None
    filters: SelectionSettings = SelectionSettings()  # noqa: RUF009 - frozen, safe
    pinned: tuple[str, ...] = ()
    chosen: tuple[str, ...] | None = None
    weights: tuple[float, ...] | None = None
    comments: tuple[tuple[str, str], ...] = ()
    net_limit: float = 0.15
    gross_limit: float = 0.25

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "effective_date": self.effective_date,
                "filters": self.filters.to_dict(),
                "pinned": list(self.pinned),
                "chosen": None if self.chosen is None else list(self.chosen),
                "weights": None if self.weights is None else list(self.weights),
                "comments": dict(self.comments),
                "limits": {"net_pct": self.net_limit, "gross_pct": self.gross_limit},
            }
        )

    @classmethod
    def from_dict(cls, d: dict | None) -> ComparablesChoice:
        if not d:
            return cls()
        try:
            limits = d.get("limits") or {}
            return cls(
                effective_date=d.get("effective_date"),
                filters=SelectionSettings.from_dict(d.get("filters") or {}),
                pinned=tuple(str(x) for x in d.get("pinned") or ()),
                chosen=None if d.get("chosen") is None else tuple(str(x) for x in d["chosen"]),
                weights=None if d.get("weights") is None else tuple(float(x) for x in d["weights"]),
                comments=tuple((str(k), str(v)) for k, v in (d.get("comments") or {}).items()),
                net_limit=float(limits.get("net_pct", 0.15)),
                gross_limit=float(limits.get("gross_pct", 0.25)),
            )
        except (TypeError, ValueError, AttributeError) as exc:
            raise SubjectError(f"the workfile's comparables cannot be read: {exc}") from None


__all__ = [
    "ComparablesChoice",
    "MIN_COMPARABLES",
    "RECENT_MONTHS",
    "Selection",
    "SelectionSettings",
    "candidates",
    "sale_date_column",
    "select",
]
