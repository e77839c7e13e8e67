"""What the four sale plots show, defined once (no Qt): the window and the worksheet draw it.

* price against living area, coloured by region, the subject at its estimate with its
  single-sale prediction interval;
* the model's value against the sale price, with the line where they agree;
* residuals (sale minus model, response scale) against the model's value, with zero and
  two residual standard deviations;
* the map: the sales in kilometres east and north of the sales' median position (equal
  aspect, so equal ground distances look equal), the subject and distance rings around it.

:func:`sale_points` collects the numbers of every imported sale, used or not (a left-out
sale gets the model's value through the one prediction path where its inputs allow);
:func:`sale_plots` turns them into four :class:`PlotData`; :func:`subject_mark` places the
subject alone, so a view can move it without drawing the sales again.

Beyond :data:`MAX_DRAWN` sales a seeded random subsample is drawn (the same sales on every
redraw) and the plot says so in its ``note``.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ..engine.errors import AppraiseError
from ..engine.sales import ROW_COLUMN, Exclusion, SalesTable
from .numbers import money

if TYPE_CHECKING:  # pragma: no cover
    from ..engine.fitting import FitResult
    from ..engine.valuation import Valuation

NO_REGION = "(no region)"
AREA_UNIT_LABELS = {"ft2": "sq ft", "m2": "m²"}
MAX_DRAWN = 20_000
"""Most sales drawn in one plot; beyond it a seeded random subsample is drawn."""
SUBSAMPLE_SEED = 20_240_601
MAX_REGION_COLOURS = 7
"""Regions drawn each in its own colour; the smallest beyond this share one "other" group."""
EARTH_RADIUS_KM = 6371.0088  # IUGG mean Earth radius
RING_CHOICES_KM = (0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0)

TITLES = {
    "price_area": "Price against living area",
    "model_sale": "Model value against sale",
    "residuals": "Residuals",
    "location": "Where the sales are",
}


# --- the numbers behind the plots -------------------------------------------------------------
def drawn_positions(n: int, most: int | None = None) -> np.ndarray:
    """Positions of the points drawn out of ``n``: all, or a seeded random subsample of
    ``most`` (None: :data:`MAX_DRAWN`) beyond that (sorted, the same on every call)."""
    most = MAX_DRAWN if most is None else most
    if n <= most:
        return np.arange(n)
    rng = np.random.default_rng(SUBSAMPLE_SEED)
    return np.sort(rng.choice(n, size=most, replace=False))


def subsample_note(n: int, most: int | None = None) -> str | None:
    """What a plot of ``n`` sales says when it draws a subsample of ``most`` (None:
    :data:`MAX_DRAWN`), else None."""
    most = MAX_DRAWN if most is None else most
    if n <= most:
        return None
    return f"{most:,} of {n:,} sales drawn (a seeded random sample)"


@dataclass(frozen=True, eq=False)
class SalePoints:
    """One entry per sale in the sales table (imported rows), aligned arrays.

    ``used`` is False for sales the model or the user left out; ``reason`` says why.
    ``fitted`` is the model's value in price units (for a log response the
    smearing-corrected mean, as the valuation's estimate), also for a left-out sale when
    the model can be evaluated on it; NaN otherwise. ``resid`` is on the response scale
    (log price for a log response): sale minus model. ``east_km``/``north_km`` place the
    sale on the map relative to ``origin`` (latitude, longitude).
    """

    rows: np.ndarray
    sale_ids: np.ndarray
    price: np.ndarray
    area: np.ndarray | None
    region: np.ndarray | None
    lat: np.ndarray | None
    lon: np.ndarray | None
    used: np.ndarray
    reason: np.ndarray
    fitted: np.ndarray
    resid: np.ndarray
    area_unit: str
    roles: Mapping[str, str] = field(default_factory=dict)
    east_km: np.ndarray | None = None
    north_km: np.ndarray | None = None
    origin: tuple[float, float] | None = None
    groups: np.ndarray | None = None
    """Region label drawn for each sale (the smallest regions pooled as "other")."""

    def __len__(self) -> int:
        return len(self.rows)

    @property
    def unit_label(self) -> str:
        return AREA_UNIT_LABELS.get(self.area_unit, self.area_unit)

    def describe(self, i: int, currency: str = "$") -> str:
        """What a hover shows for sale ``i``: id, price, living area, region, file row."""
        lines = [f"Sale {self.sale_ids[i]}" if self.sale_ids[i] is not None else "Sale"]
        lines.append(f"Price {money(self.price[i], currency)}")
        if self.area is not None and math.isfinite(self.area[i]):
            lines.append(f"Living area {self.area[i]:,.0f} {self.unit_label}")
        if self.region is not None:
            lines.append(f"Region {self.region[i]}")
        if math.isfinite(self.fitted[i]):
            lines.append(f"Model {money(self.fitted[i], currency)}")
        lines.append(f"File row {int(self.rows[i])}")
        if not self.used[i]:
            lines.append(f"Excluded: {self.reason[i]}")
        return "\n".join(lines)

    def to_km(self, lat: float, lon: float) -> tuple[float, float] | None:
        """A position in the map's kilometres (east, north of ``origin``)."""
        if self.origin is None:
            return None
        e, n = _km(np.array([lat]), np.array([lon]), self.origin)
        return float(e[0]), float(n[0])

    def drawn(self) -> np.ndarray:
        """Positions of the sales drawn: all of them, or a seeded subsample beyond
        :data:`MAX_DRAWN` (sorted, the same on every call)."""
        return drawn_positions(len(self.rows))

    def subsample_note(self) -> str | None:
        return subsample_note(len(self.rows))


def _column(frame: pd.DataFrame, name: str | None, kind: str = "number") -> np.ndarray | None:
    if name is None or name not in frame.columns:
        return None
    if kind == "number":
        return pd.to_numeric(frame[name], errors="coerce").to_numpy(dtype=float)
    values = frame[name].astype("string").fillna(NO_REGION).str.strip()
    # each distinct text made a Python string once (a million sales, a few regions)
    codes, uniques = pd.factorize(values.replace("", NO_REGION))
    return np.asarray(uniques, dtype=object)[codes]


def _km(
    lat: np.ndarray, lon: np.ndarray, origin: tuple[float, float]
) -> tuple[np.ndarray, np.ndarray]:
    """Equirectangular projection about ``origin``: exact enough at a town's scale
    (under 0.1% over 50 km away from the poles)."""
    lat0, lon0 = origin
    k = math.pi / 180 * EARTH_RADIUS_KM
    return (lon - lon0) * k * math.cos(math.radians(lat0)), (lat - lat0) * k


def region_groups(region: np.ndarray, weight_mask: np.ndarray | None = None) -> np.ndarray:
    """Each sale's drawn group: its region, or "other (k regions)" for the smallest ones
    beyond :data:`MAX_REGION_COLOURS` (counted among ``weight_mask`` sales, e.g. the used)."""
    counted = region if weight_mask is None else region[weight_mask]
    counts = pd.Series(counted, dtype=object).value_counts()
    levels = list(dict.fromkeys(region))
    if len(levels) <= MAX_REGION_COLOURS:
        return region
    order = sorted(levels, key=lambda lv: (-int(counts.get(lv, 0)), str(lv)))
    keep = set(order[: MAX_REGION_COLOURS - 1])
    small = [lv for lv in levels if lv not in keep]
    other = f"other ({len(small)} regions)"
    out = region.copy()
    out[~pd.Series(region, dtype=object).isin(keep).to_numpy()] = other
    return out


def group_order(groups: np.ndarray) -> list[str]:
    """Groups in drawing (and colour) order: sorted, the pooled "other" group last."""
    levels = sorted(set(groups), key=str)
    return [g for g in levels if not str(g).startswith("other (")] + [
        g for g in levels if str(g).startswith("other (")
    ]


def sale_points(
    fit: FitResult | None = None,
    *,
    sales: SalesTable | None = None,
    user_exclusions: Iterable[Exclusion] = (),
) -> SalePoints:
    """Collect what the plots draw from a fit (or, before any fit, from the sales alone).

    ``user_exclusions`` made after ``fit`` was computed are shown as excluded at once,
    before the refit lands.
    """
    if fit is not None:
        sales = fit.sales
    if sales is None:
        raise ValueError("sale_points needs a fit or a sales table")
    frame = sales.frame
    roles = sales.roles
    rows = frame[ROW_COLUMN].to_numpy(dtype=np.int64)
    n = len(rows)
    price_col = fit.target if fit is not None else roles.column("price")
    price = _column(frame, price_col)
    if price is None:
        price = np.full(n, np.nan)
    id_col = roles.column("sale_id")
    if id_col in frame.columns:
        ids = frame[id_col].astype("string").to_numpy(dtype=object, na_value=None)
    else:
        ids = np.full(n, None, dtype=object)

    reason = np.full(n, None, dtype=object)
    used = np.ones(n, dtype=bool)
    fitted = np.full(n, np.nan)
    resid = np.full(n, np.nan)
    pos = pd.Index(rows)
    if fit is not None:
        at = pos.get_indexer(np.asarray(fit.rows, dtype=np.int64))
        ok = at >= 0
        used[:] = False
        used[at[ok]] = True
        fitted[at[ok]] = fit.fitted_price()[ok]
        resid[at[ok]] = np.asarray(fit.resid, dtype=float)[ok]
        ex_rows = np.array([e.row for e in fit.excluded], dtype=np.int64)
        ex_at = pos.get_indexer(ex_rows)
        for i, e in zip(ex_at, fit.excluded, strict=True):
            if i >= 0:
                reason[i] = e.reason
        _predict_left_out(fit, frame, ~used, price, fitted, resid)
    for e in user_exclusions:
        i = pos.get_indexer([int(e.row)])[0]
        if i >= 0:
            used[i] = False
            reason[i] = e.reason
    reason[~used & (reason == None)] = "left out of the model"  # noqa: E711 (elementwise)
    region = _column(frame, roles.column("region"), kind="text")
    lat = _column(frame, roles.column("latitude"))
    lon = _column(frame, roles.column("longitude"))
    east = north = origin = None
    if lat is not None and lon is not None:
        ok = np.isfinite(lat) & np.isfinite(lon)
        if ok.any():
            origin = (float(np.median(lat[ok])), float(np.median(lon[ok])))
            east, north = _km(lat, lon, origin)
    return SalePoints(
        rows=rows,
        sale_ids=ids,
        price=price,
        area=_column(frame, roles.column("living_area")),
        region=region,
        lat=lat,
        lon=lon,
        used=used,
        reason=reason,
        fitted=fitted,
        resid=resid,
        area_unit=sales.area_unit,
        roles=dict(roles.columns),
        east_km=east,
        north_km=north,
        origin=origin,
        groups=None if region is None else region_groups(region, used),
    )


def _predict_left_out(fit, frame, left_out, price, fitted, resid) -> None:
    """The model's value for sales it did not use, where their inputs allow (in place),
    through the one prediction path; a sale it cannot predict has no model value."""
    idx = np.flatnonzero(left_out)
    if idx.size == 0:
        return
    try:
        pred = fit.predict(frame.iloc[idx])
    except AppraiseError:
        return
    ok = pred.ok
    at = idx[ok]
    fitted[at] = pred.estimate[ok]
    with np.errstate(divide="ignore", invalid="ignore"):
        y = np.log(price[at]) if fit.spec.response == "log" else price[at]
    resid[at] = y - pred.fitted[ok]


def subject_number(
    subject: Mapping[str, Any] | None, roles: Mapping[str, str], role: str
) -> float | None:
    """A numeric subject attribute looked up by its sales column, else by its role name."""
    if not subject:
        return None
    for key in (roles.get(role), role):
        if key is not None and key in subject:
            try:
                v = float(subject[key])
            except (TypeError, ValueError):
                return None
            return v if math.isfinite(v) else None
    return None


# --- the plots --------------------------------------------------------------------------------
@dataclass(frozen=True)
class Axis:
    label: str
    money: bool = False


@dataclass(frozen=True)
class RefLine:
    """A reference line: ``"diagonal"`` (y = x), ``"horizontal"`` at y = ``value``,
    ``"vertical"`` at x = ``value``."""

    kind: str
    value: float = 0.0
    label: str | None = None
    dashed: bool = True


@dataclass(frozen=True)
class SubjectMark:
    """Where the subject is drawn: a star at (x, y) where both are given, with a vertical
    interval bar ``low``..``high`` (the single-sale prediction interval) where it has one,
    and/or a line through the estimate (``line``: "horizontal" at y / "vertical" at x)."""

    x: float | None
    y: float | None
    low: float | None = None
    high: float | None = None
    line: str | None = None
    rings_km: tuple[float, ...] = ()


@dataclass(frozen=True, eq=False)
class PlotData:
    """One sale plot: per-sale coordinates aligned with the :class:`SalePoints`, axes,
    reference lines, the subject, and a caption for print. ``message`` replaces the plot
    when it cannot be drawn (no fit, a role not mapped)."""

    kind: str
    title: str
    x_axis: Axis
    y_axis: Axis
    x: np.ndarray | None = None
    y: np.ndarray | None = None
    lines: tuple[RefLine, ...] = ()
    subject: SubjectMark | None = None
    equal_aspect: bool = False
    message: str | None = None
    note: str | None = None
    caption: str = ""
    sigma: float | None = None


def _level(valuation: Valuation | None) -> str:
    return "" if valuation is None else f"{100.0 * float(valuation.level):g}% "


def subject_mark(
    kind: str,
    points: SalePoints,
    valuation: Valuation | None,
    subject: Mapping[str, Any] | None = None,
) -> SubjectMark | None:
    """Where the subject goes in plot ``kind`` (None when it cannot be placed)."""
    if kind == "price_area":
        area0 = subject_number(
            valuation.subject if valuation else None, points.roles, "living_area"
        )
        if valuation is None or area0 is None:
            return None
        return SubjectMark(area0, valuation.estimate, valuation.low, valuation.high)
    if kind == "model_sale":
        if valuation is None:
            return None
        est = valuation.estimate
        return SubjectMark(est, est, valuation.low, valuation.high, line="horizontal")
    if kind == "residuals":
        if valuation is None:
            return None
        return SubjectMark(valuation.estimate, None, line="vertical")
    if kind == "location":
        source = valuation.subject if valuation is not None else subject
        lat0 = subject_number(source, points.roles, "latitude")
        lon0 = subject_number(source, points.roles, "longitude")
        if lat0 is None or lon0 is None or points.origin is None:
            return None
        e, n = _km(np.array([lat0]), np.array([lon0]), points.origin)
        return SubjectMark(float(e[0]), float(n[0]), rings_km=_rings(points, e[0], n[0]))
    raise ValueError(f"unknown plot kind {kind!r}")


def _rings(points: SalePoints, e0: float, n0: float) -> tuple[float, ...]:
    """Up to three round distances from the subject that fall within the sales' spread."""
    if points.east_km is None or points.north_km is None:
        return ()
    d = np.hypot(points.east_km - e0, points.north_km - n0)
    d = d[np.isfinite(d)]
    if d.size == 0:
        return ()
    reach = float(np.quantile(d, 0.9))
    fits = [r for r in RING_CHOICES_KM if r <= reach]
    return tuple(fits[-3:]) if fits else (RING_CHOICES_KM[0],)


def price_area_plot(
    points: SalePoints, valuation: Valuation | None = None, currency: str = "$"
) -> PlotData:
    base = dict(
        kind="price_area",
        title=TITLES["price_area"],
        x_axis=Axis(f"Gross living area ({points.unit_label})"),
        y_axis=Axis(f"Sale price ({currency})", money=True),
    )
    if points.area is None:
        return PlotData(
            **base, message="No living-area column is mapped: map one under column roles."
        )
    return PlotData(
        **base,
        x=points.area,
        y=points.price,
        subject=subject_mark("price_area", points, valuation),
        note=points.subsample_note(),
        caption=(
            "Sale price against living area, coloured by region; the subject (star) is drawn "
            f"at its estimate with its {_level(valuation)}prediction interval for one sale."
        ),
    )


def model_sale_plot(
    points: SalePoints,
    fit: FitResult | None,
    valuation: Valuation | None = None,
    currency: str = "$",
) -> PlotData:
    base = dict(
        kind="model_sale",
        title=TITLES["model_sale"],
        x_axis=Axis(f"Sale price ({currency})", money=True),
        y_axis=Axis(f"Model value ({currency})", money=True),
    )
    if fit is None:
        return PlotData(**base, message="No fit yet.")
    return PlotData(
        **base,
        x=points.price,
        y=points.fitted,
        lines=(RefLine("diagonal", 0.0, "model = sale"),),
        subject=subject_mark("model_sale", points, valuation),
        note=points.subsample_note(),
        caption=(
            "The model's value against the sale price; on the dashed line they agree. "
            f"The subject is drawn on the line with its {_level(valuation)}prediction interval."
        ),
    )


def residual_plot(
    points: SalePoints,
    fit: FitResult | None,
    valuation: Valuation | None = None,
    currency: str = "$",
) -> PlotData:
    log = fit is not None and fit.spec.response == "log"
    base = dict(
        kind="residuals",
        title=TITLES["residuals"],
        x_axis=Axis(f"Model value ({currency})", money=True),
        y_axis=Axis("Residual (log of price)")
        if log
        else Axis(f"Residual ({currency})", money=True),
    )
    if fit is None:
        return PlotData(**base, message="No fit yet.")
    s = float(fit.sigma)
    return PlotData(
        **base,
        x=points.fitted,
        y=points.resid,
        lines=(
            RefLine("horizontal", 0.0, None, dashed=False),
            RefLine("horizontal", 2 * s, "+2s"),
            RefLine("horizontal", -2 * s, "-2s"),
        ),
        subject=subject_mark("residuals", points, valuation),
        note=points.subsample_note(),
        sigma=s,
        caption=(
            "Residuals (sale minus model"
            + (", log scale" if log else "")
            + ") against the model's value, with zero and two residual standard deviations. "
            "A funnel or a curve suggests uneven spread or a missing term."
        ),
    )


def location_plot(
    points: SalePoints,
    valuation: Valuation | None = None,
    subject: Mapping[str, Any] | None = None,
) -> PlotData:
    base = dict(
        kind="location",
        title=TITLES["location"],
        x_axis=Axis("East (km)"),
        y_axis=Axis("North (km)"),
        equal_aspect=True,
    )
    if points.east_km is None:
        return PlotData(
            **base, message="Latitude and longitude are not mapped: map them under column roles."
        )
    lat0, lon0 = points.origin
    return PlotData(
        **base,
        x=points.east_km,
        y=points.north_km,
        subject=subject_mark("location", points, valuation, subject),
        note=points.subsample_note(),
        caption=(
            f"The sales in kilometres east and north of their median position ({lat0:.4f}, "
            f"{lon0:.4f}), drawn to scale; the subject is the star, with distance rings."
        ),
    )


def sale_plots(
    points: SalePoints,
    fit: FitResult | None,
    valuation: Valuation | None = None,
    *,
    subject: Mapping[str, Any] | None = None,
    currency: str = "$",
) -> tuple[PlotData, PlotData, PlotData, PlotData]:
    """The four sale plots, in the order the window lays them out."""
    return (
        price_area_plot(points, valuation, currency),
        model_sale_plot(points, fit, valuation, currency),
        residual_plot(points, fit, valuation, currency),
        location_plot(points, valuation, subject),
    )


__all__ = [
    "MAX_DRAWN",
    "NO_REGION",
    "TITLES",
    "Axis",
    "PlotData",
    "RefLine",
    "SalePoints",
    "SubjectMark",
    "group_order",
    "location_plot",
    "model_sale_plot",
    "price_area_plot",
    "region_groups",
    "residual_plot",
    "sale_plots",
    "sale_points",
    "subject_mark",
    "subject_number",
]
