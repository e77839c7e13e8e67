"""Neighbourhood (region) effects of a fitted model, with their uncertainty and tests.

Everything here is read from one fit: its coefficients :math:`b` and their covariance
:math:`V` under the fit's covariance type (classical, HC1 or HC3). Nothing is refitted.
Every quantity is a linear combination :math:`g'b` with standard error
:math:`\\sqrt{g'Vg}`, a t statistic on the fit's residual degrees of freedom and the
interval :math:`g'b \\pm t_{1-\\alpha/2,\\,n-p}\\sqrt{g'Vg}` (the t reference is what the
fit's own coefficient table uses, whatever the covariance type).

The region term is the ``onehot`` feature on the column mapped to the ``region`` role
(or the term named by the caller). With levels :math:`1..k` and the reference level
without a column:

Effects against the reference
    :math:`d_j = b_j` (0 for the reference). For a log response also the percentage
    effect :math:`e^{d_j} - 1` with interval :math:`[e^{L} - 1, e^{U} - 1]`, and the
    small-sample refinement of Kennedy (1981, *American Economic Review* 71(4)),
    :math:`e^{d_j - \\mathrm{Var}(d_j)/2} - 1`, which corrects the median bias of
    :math:`e^{d_j}`.

Effects against the average of all regions (effect coding)
    :math:`c_j = d_j - \\frac1k\\sum_l d_l`, i.e. :math:`c = (I - \\tfrac1k J) E b_R` with
    :math:`E` the k x (k-1) embedding that puts a zero row at the reference; covariance
    :math:`C V_R C'`. These equal the coefficients of sum-to-zero coding
    (``C(region, Sum)`` in a formula), so no arbitrary reference drives the story. The
    average is unweighted: every region counts once, whatever its number of sales.

Joint test
    Wald F that every region effect is zero: :math:`F = (Rb)'(RVR')^{-1}(Rb)/q` on
    (q, n-p) degrees of freedom, q = k-1 (statsmodels' ``f_test`` computes the same).

Pairwise contrasts
    :math:`d_i - d_j` for every pair, two-sided t p values adjusted by Holm's (1979)
    step-down method: with the m raw p values sorted, :math:`p_{(1)} \\le ... \\le
    p_{(m)}`, the adjusted :math:`\\tilde p_{(i)} = \\max_{l \\le i}\\min(1, (m-l+1)p_{(l)})`.
    It controls the family-wise error rate under any dependence between the contrasts.

Groups that cannot be told apart (candidate market areas)
    The regions are sorted by effect. A group is a maximal run of consecutive regions
    in that order within which no pair differs at the chosen level (Holm-adjusted p at or
    above :math:`\\alpha`). Runs may overlap (a region in the middle can be
    indistinguishable from both neighbours that differ from each other); each region
    gets the letters of the groups it belongs to, lowest effect first ("a", "b", ...).
    Regions that share a letter are candidates to pool into one market area; regions
    with no letter in common differ. It is a display of the tests, not a clustering.

Region slopes
    For a feature ``x * onehot(region)`` (one column ``x * region[l]`` per level but the
    reference) the slope of ``x`` in level l is :math:`b_x + b_{x\\cdot l}` (just
    :math:`b_x` in the reference level), ``b_x`` the coefficient of the plain feature
    ``x`` (taken as 0 when the model has none, with a warning). With ``x`` the living
    area and a linear response, the slope is the price per unit of area; for a log
    response it is the change in log price per unit, and the price per unit at the
    region's median sale price is :math:`\\text{slope}\\times\\text{median price}` (the
    median held fixed). A Wald F tests that every level has the same slope.

Location in space
    Each region's centroid is the mean latitude and longitude of its sales; the subject's
    distance to it is the haversine distance. When a feature uses
    ``distance_km(lat, lon, lat0, lon0)``, the location effect as a function of distance
    d from (lat0, lon0) is :math:`g(d)'b` with :math:`g(d) = x(d) - x(0)`: the design row of
    a base property (the subject, else the sale with the median fitted value) moved to
    distance d due north of the centre minus the same row at the centre, so that every
    term of the distance (its interaction with area included) counts and the region and
    every other attribute stay as they are.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd
from scipy import stats

from .design import level_label
from .errors import AppraiseError, ModelFileError
from .expressions import (
    Call,
    Column,
    DerivedRef,
    Name,
    NameScope,
    Number,
    Unary,
    feature_shape,
    parse_expression,
    to_text,
    walk,
)
from .functions import EARTH_MEAN_RADIUS_KM, distance_km
from .jsonable import to_jsonable
from .levels import MIN_LEVEL_SALES, thin_level_warnings

if TYPE_CHECKING:  # pragma: no cover
    from .design import TermGroup
    from .fitting import FitResult

DEFAULT_LEVEL = 0.95
"""Level of the effect intervals and of the pairwise tests (alpha = 1 - level)."""

PREMIUM_POINTS = 41
"""Distances at which the location effect is evaluated, from the centre outwards."""

NAN = float("nan")


# --- results ----------------------------------------------------------------------------
@dataclass(frozen=True)
class Estimate:
    """A linear combination of the coefficients with its standard error and interval."""

    value: float
    se: float
    low: float
    high: float
    t: float
    p: float

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "value": self.value,
                "se": self.se,
                "low": self.low,
                "high": self.high,
                "t": self.t,
                "p": self.p,
            }
        )


@dataclass(frozen=True)
class Percent:
    """A log-scale estimate as a percentage change: :math:`e^b - 1` and its interval."""

    value: float
    low: float
    high: float
    kennedy: float | None = None
    """:math:`e^{b - Var(b)/2} - 1` (Kennedy 1981), where it applies."""

    def to_dict(self) -> dict:
        out = {"value": self.value, "low": self.low, "high": self.high}
        if self.kennedy is not None:
            out["kennedy"] = self.kennedy
        return to_jsonable(out)


@dataclass(frozen=True)
class RegionTerm:
    """The ``onehot`` feature that holds the regions."""

    expression: str
    column: str
    reference: str
    levels: tuple[str, ...]
    columns: tuple[str | None, ...]
    """Design column of each level (None for the reference), in the order of ``levels``."""
    positions: tuple[int | None, ...]
    """Index of each level's column among the coefficients (None for the reference)."""

    def to_dict(self) -> dict:
        return {
            "expression": self.expression,
            "column": self.column,
            "reference": self.reference,
            "levels": list(self.levels),
        }


@dataclass(frozen=True)
class RegionEffect:
    """One region: its sales, its effect against the reference and against the average."""

    level: str
    count: int
    reference: bool
    thin: bool
    estimable: bool
    effect: Estimate
    coded: Estimate
    percent: Percent | None = None
    coded_percent: Percent | None = None

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "level": self.level,
                "count": self.count,
                "reference": self.reference,
                "thin": self.thin,
                "estimable": self.estimable,
                "effect": self.effect.to_dict(),
                "coded": self.coded.to_dict(),
                "percent": None if self.percent is None else self.percent.to_dict(),
                "coded_percent": None
                if self.coded_percent is None
                else self.coded_percent.to_dict(),
            }
        )


@dataclass(frozen=True)
class WaldTest:
    """Joint F test that some linear combinations of the coefficients are all zero."""

    hypothesis: str
    statistic: float
    df_num: int
    df_den: int
    p_value: float
    columns: tuple[str, ...]

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "hypothesis": self.hypothesis,
                "f": self.statistic,
                "df_num": self.df_num,
                "df_den": self.df_den,
                "p_value": self.p_value,
                "columns": list(self.columns),
            }
        )


@dataclass(frozen=True)
class Contrast:
    """The difference between two regions' effects (``first`` minus ``second``)."""

    first: str
    second: str
    difference: Estimate
    p_holm: float
    differ: bool
    """Holm-adjusted p below alpha."""
    percent: Percent | None = None

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "first": self.first,
                "second": self.second,
                "difference": self.difference.to_dict(),
                "p_holm": self.p_holm,
                "differ": self.differ,
                "percent": None if self.percent is None else self.percent.to_dict(),
            }
        )


@dataclass(frozen=True)
class RegionGroups:
    """Runs of regions (sorted by effect) that no test tells apart at ``alpha``."""

    alpha: float
    order: tuple[str, ...]
    groups: tuple[tuple[str, ...], ...]
    letters: tuple[tuple[str, str], ...]
    """(level, letters) in ``order``."""
    method: str

    def letters_of(self, level: str) -> str:
        return dict(self.letters).get(level, "")

    def to_dict(self) -> dict:
        return {
            "alpha": self.alpha,
            "order": list(self.order),
            "groups": [list(g) for g in self.groups],
            "letters": {lv: lt for lv, lt in self.letters},
            "method": self.method,
        }


@dataclass(frozen=True)
class RegionSlope:
    """The slope of one factor in one region."""

    level: str
    count: int
    reference: bool
    slope: Estimate
    price_per_unit: Estimate | None = None
    """For a log response: slope x the region's median sale price (median held fixed)."""

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "level": self.level,
                "count": self.count,
                "reference": self.reference,
                "slope": self.slope.to_dict(),
                "price_per_unit": None
                if self.price_per_unit is None
                else self.price_per_unit.to_dict(),
            }
        )


@dataclass(frozen=True)
class SlopeSet:
    """The per-region slopes implied by one ``x * onehot(region)`` feature."""

    factor: str
    expression: str
    main_column: str | None
    unit: str
    slopes: tuple[RegionSlope, ...]
    equal_slopes: WaldTest

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "factor": self.factor,
                "expression": self.expression,
                "main_column": self.main_column,
                "unit": self.unit,
                "slopes": [s.to_dict() for s in self.slopes],
                "equal_slopes_test": self.equal_slopes.to_dict(),
            }
        )


@dataclass(frozen=True)
class AreaPrice:
    """The model's price per unit of living area at one region's typical sale."""

    level: str
    count: int
    base: str
    """Which sale it is evaluated at (row and id)."""
    area: float
    value: float
    """Estimated price of that sale (the smearing mean for a log response)."""
    per_unit: Estimate

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "level": self.level,
                "count": self.count,
                "base": self.base,
                "area": self.area,
                "value": self.value,
                "per_unit": self.per_unit.to_dict(),
            }
        )


@dataclass(frozen=True)
class RegionCentroid:
    """Mean position of a region's sales, and the subject's distance to it."""

    level: str
    count: int
    latitude: float
    longitude: float
    subject_km: float | None = None

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "level": self.level,
                "count": self.count,
                "latitude": self.latitude,
                "longitude": self.longitude,
                "subject_km": self.subject_km,
            }
        )


@dataclass(frozen=True)
class PremiumPoint:
    km: float
    change: float
    low: float
    high: float
    percent: Percent | None = None

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "km": self.km,
                "change": self.change,
                "low": self.low,
                "high": self.high,
                "percent": None if self.percent is None else self.percent.to_dict(),
            }
        )


@dataclass(frozen=True)
class LocationPremium:
    """Change in the response when the base property moves from the centre to d km."""

    centre: tuple[float, float]
    base: str
    columns: tuple[str, ...]
    """Design columns that change with the distance."""
    level: float
    points: tuple[PremiumPoint, ...]
    subject_km: float | None = None

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "centre": {"latitude": self.centre[0], "longitude": self.centre[1]},
                "base": self.base,
                "columns": list(self.columns),
                "level": self.level,
                "subject_km": self.subject_km,
                "points": [p.to_dict() for p in self.points],
            }
        )


@dataclass(frozen=True, eq=False)
class RegionAnalysis:
    """Everything :func:`analyse_regions` found about the regions of one fit."""

    term: RegionTerm
    response: str
    cov_type: str
    level: float
    n: int
    df_resid: int
    effects: tuple[RegionEffect, ...]
    joint: WaldTest
    pairwise: tuple[Contrast, ...]
    groups: RegionGroups
    slopes: tuple[SlopeSet, ...]
    centroids: tuple[RegionCentroid, ...]
    premium: LocationPremium | None
    subject_region: str | None
    strata: object | None = None
    """A :class:`appraise.engine.region_strata.StrataStudy` when asked for."""
    area_prices: tuple[AreaPrice, ...] = field(default=())
    """Price per unit of living area at each region's typical sale (see
    :func:`area_prices`); empty without a mapped living-area column in the model."""
    area_column: str | None = None
    warnings: tuple[str, ...] = field(default=())

    def effect(self, level: str) -> RegionEffect:
        for e in self.effects:
            if e.level == level:
                return e
        raise KeyError(level)

    def sorted_effects(self) -> tuple[RegionEffect, ...]:
        """Effects from the lowest to the highest (the reference at 0 among them)."""
        return tuple(sorted(self.effects, key=lambda e: (e.effect.value, e.level)))

    def to_dict(self) -> dict:
        """The JSON contract of ``appraise regions --json`` (see README)."""
        return to_jsonable(
            {
                "response": self.response,
                "cov_type": self.cov_type,
                "level": self.level,
                "n": self.n,
                "df_resid": self.df_resid,
                "region_term": self.term.to_dict(),
                "subject_region": self.subject_region,
                "effects": [e.to_dict() for e in self.effects],
                "joint_test": self.joint.to_dict(),
                "pairwise": [c.to_dict() for c in self.pairwise],
                "groups": self.groups.to_dict(),
                "slopes": [s.to_dict() for s in self.slopes],
                "area_prices": {
                    "column": self.area_column,
                    "regions": [a.to_dict() for a in self.area_prices],
                },
                "centroids": [c.to_dict() for c in self.centroids],
                "location_premium": None if self.premium is None else self.premium.to_dict(),
                "strata": None if self.strata is None else self.strata.to_dict(),
                "warnings": list(self.warnings),
            }
        )


# --- the arithmetic ----------------------------------------------------------------------
def combination(
    b: np.ndarray, cov: np.ndarray, g: np.ndarray, df: int, level: float, *, q: float | None = None
) -> Estimate:
    """:math:`g'b` with standard error :math:`\\sqrt{g'Vg}`, t, two-sided p and interval
    (``q``: the t quantile at ``level``, when the caller has it already)."""
    value = float(g @ b)
    var = float(g @ cov @ g)
    se = math.sqrt(var) if var > 0 else (0.0 if var == 0 else NAN)
    if not np.isfinite(se):
        return Estimate(value, NAN, NAN, NAN, NAN, NAN)
    if q is None:
        q = float(stats.t.ppf(0.5 + level / 2, df))
    if se == 0:
        return Estimate(value, 0.0, value, value, NAN, NAN)
    t = value / se
    p = float(2 * stats.t.sf(abs(t), df))
    return Estimate(value, se, value - q * se, value + q * se, t, p)


def percent_of(e: Estimate, *, kennedy: bool = True) -> Percent:
    """:math:`e^b - 1` with :math:`[e^L - 1, e^U - 1]`; with Kennedy's
    :math:`e^{b - se^2/2} - 1` when ``kennedy``."""
    k = math.expm1(e.value - e.se**2 / 2) if kennedy and np.isfinite(e.se) else None
    return Percent(math.expm1(e.value), math.expm1(e.low), math.expm1(e.high), k)


def wald_test(
    b: np.ndarray, cov: np.ndarray, R: np.ndarray, df: int, hypothesis: str, columns: Sequence[str]
) -> WaldTest:
    """:math:`F = (Rb)'(RVR')^{-1}(Rb)/q` on (q, df) degrees of freedom."""
    R = np.atleast_2d(np.asarray(R, dtype=float))
    q = R.shape[0]
    if q == 0:
        return WaldTest(hypothesis, NAN, 0, df, NAN, tuple(columns))
    rb = R @ b
    middle = R @ cov @ R.T
    try:
        f = float(rb @ np.linalg.solve(middle, rb)) / q
    except np.linalg.LinAlgError:
        f = NAN
    p = float(stats.f.sf(f, q, df)) if np.isfinite(f) else NAN
    return WaldTest(hypothesis, f, q, df, p, tuple(columns))


def holm(pvalues: Sequence[float]) -> np.ndarray:
    """Holm's step-down adjusted p values (NaN stays NaN and is not counted in m).

    .. math:: \\tilde p_{(i)} = \\max_{l \\le i} \\min\\big(1, (m - l + 1)\\, p_{(l)}\\big)
    """
    p = np.asarray(pvalues, dtype=float)
    out = np.full(p.shape, NAN)
    ok = np.flatnonzero(np.isfinite(p))
    m = ok.size
    if m == 0:
        return out
    order = ok[np.argsort(p[ok], kind="stable")]
    scaled = np.minimum(1.0, (m - np.arange(m)) * p[order])
    out[order] = np.maximum.accumulate(scaled)
    return out


def group_regions(
    order: Sequence[str], differ: dict[frozenset[str], bool], alpha: float
) -> RegionGroups:
    """Maximal runs of ``order`` with no pair that differs (see the module docstring)."""
    k = len(order)
    runs: list[tuple[int, int]] = []
    for i in range(k):
        j = i
        while j + 1 < k and not any(
            differ.get(frozenset((order[m], order[j + 1])), False) for m in range(i, j + 1)
        ):
            j += 1
        if not runs or j > runs[-1][1]:
            runs.append((i, j))
    groups = tuple(tuple(order[i : j + 1]) for i, j in runs)
    names = [_letter(g) for g in range(len(groups))]
    letters = tuple(
        (lv, "".join(names[g] for g, grp in enumerate(groups) if lv in grp)) for lv in order
    )
    method = (
        "regions sorted by effect; each group is a maximal run of consecutive regions in "
        f"which no pair differs at Holm-adjusted p < {alpha_text(alpha)}; regions sharing a letter "
        "cannot be told apart"
    )
    return RegionGroups(alpha, tuple(order), groups, letters, method)


def alpha_text(alpha: float) -> str:
    """A test level written out (0.05, 0.001, 0.0001), never in scientific notation."""
    text = f"{alpha:.6f}".rstrip("0").rstrip(".")
    return text or "0"


def _letter(i: int) -> str:
    s = ""
    i += 1
    while i:
        i, r = divmod(i - 1, 26)
        s = chr(ord("a") + r) + s
    return s


# --- finding the terms -------------------------------------------------------------------
def find_region_term(fit: FitResult, term: str | None = None) -> RegionTerm:
    """The ``onehot`` feature holding the regions.

    ``term`` may name the feature (as written or normalised) or the column it reads;
    otherwise the ``onehot`` on the column mapped to the ``region`` role is used.

    Raises
    ------
    ModelFileError
        The model has no such feature.
    """
    onehots = [
        (f, g)
        for f, g in zip(fit.design.features, fit.design.groups, strict=True)
        if g.kind == "onehot"
    ]
    if term is not None:
        hit = [g for f, g in onehots if term in (f, g.expression) or g.inputs == (term,)]
    else:
        region_col = fit.sales.roles.column("region")
        hit = [g for _, g in onehots if region_col is not None and g.inputs == (region_col,)]
    if not hit:
        have = ", ".join(g.expression for _, g in onehots) or "none"
        what = f"named '{term}'" if term is not None else "on the column with the 'region' role"
        raise ModelFileError(
            f"the model has no onehot(...) feature {what} (onehot features: {have}); "
            "add onehot(region) to the features, or name the term to use",
        )
    g = hit[0]
    pos = {c: j for j, c in enumerate(fit.names)}
    missing = [c for c in g.columns if c not in pos]
    if missing:
        raise ModelFileError(
            f"{g.expression}: the fit holds no coefficients for {', '.join(missing)}, so the "
            "region effects cannot be read from it"
        )
    # each level's column, found once ("region[Old Mill]" ends with "[Old Mill]"); the
    # first column ending so wins, as a search per level would give it
    of_level: dict[str, str] = {}
    for c in g.columns:
        for lv in _bracketed_suffixes(c):
            of_level.setdefault(lv, c)
    cols: list[str | None] = []
    for lv in g.levels:
        if lv == g.reference:
            cols.append(None)
        else:
            cols.append(of_level[lv])
    return RegionTerm(
        expression=g.expression,
        column=g.inputs[0],
        reference=str(g.reference),
        levels=tuple(g.levels),
        columns=tuple(cols),
        positions=tuple(None if c is None else pos[c] for c in cols),
    )


def _products_on(fit: FitResult, region: RegionTerm) -> list[TermGroup]:
    return [
        g
        for g in fit.design.groups
        if g.kind == "onehot_product" and region.column in g.inputs and g.levels
    ]


def _factor_text(group: TermGroup) -> str:
    shape = feature_shape(parse_expression(group.expression))
    return to_text(shape.args[1])


def _is_name(text: str) -> bool:
    return isinstance(parse_expression(text, allow_expanding=False), Name)


# --- the analysis ------------------------------------------------------------------------
def _bracketed_suffixes(column: str) -> list[str]:
    """Every ``x`` for which ``column`` ends with ``[x]`` (a level may hold brackets)."""
    if not column.endswith("]"):
        return []
    return [column[i + 1 : -1] for i, ch in enumerate(column) if ch == "["]


def level_positions(labels: np.ndarray) -> dict[str, np.ndarray]:
    """The positions of each label's rows, in order: one sort for all of them (a county's
    thousand tracts would otherwise compare a million labels a thousand times)."""
    codes, uniques = pd.factorize(labels)
    order = np.argsort(codes, kind="stable")
    bounds = np.cumsum(np.bincount(codes, minlength=len(uniques)))[:-1]
    return dict(zip(uniques.tolist(), np.split(order, bounds), strict=True))


def level_labels(values: pd.Series) -> np.ndarray:
    """Each value written as the design writes a level (3.0 -> '3', dates ISO), so rows
    can be matched with the levels of a ``onehot`` term; missing values become ''."""
    # each distinct value labelled once (a county: a million sales, a few regions)
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    labels = [level_label(v) for v in np.asarray(uniques, dtype=object).tolist()]
    return np.array([*labels, ""], dtype=object)[codes]


def has_region_term(fit: FitResult) -> bool:
    """Whether the model has a ``onehot`` feature on the column with the ``region`` role."""
    try:
        find_region_term(fit)
    except ModelFileError:
        return False
    return True


def subject_record_frame(fit: FitResult, record: Mapping[str, object]) -> pd.DataFrame:
    """A one-row frame from a subject record keyed by headers (``Valuation.subject``),
    with date columns read as dates like the sales' own."""
    frame = pd.DataFrame([dict(record)])
    for col in frame.columns:
        if col in fit.frame.columns and pd.api.types.is_datetime64_any_dtype(fit.frame[col]):
            frame[col] = pd.to_datetime(frame[col], errors="coerce").astype("datetime64[ns]")
    return frame


MAX_PAIRWISE_LEVELS = 40
"""Most regions whose every pair is tested (780 pairs); beyond, the subject's region (or
the reference) is compared with each other region and no groups are formed."""


def analyse_regions(
    fit: FitResult,
    *,
    subject: pd.DataFrame | Mapping[str, object] | None = None,
    level: float = DEFAULT_LEVEL,
    term: str | None = None,
    min_sales: int = MIN_LEVEL_SALES,
    strata: bool = True,
    trim: bool = False,
    location: bool = True,
) -> RegionAnalysis:
    """Effects, tests, groups, slopes, centroids, location effect and (optionally) the
    ratio study by stratum for the region term of ``fit``.

    Parameters
    ----------
    subject:
        The subject's one-row frame, or its record keyed by headers (optional): its
        region, its distance to each centroid, and the base row of the location effect.
    level:
        Level of every interval; the pairwise tests and groups use alpha = 1 - level.
    term:
        The region feature, when it is not the ``onehot`` on the ``region`` role.
    min_sales:
        A region with fewer sales is thin (marked and warned).
    strata, trim:
        Whether to add the ratio study by region and price tier (and to trim outlying
        ratios in it).
    location:
        Whether to compute the location effect along the distance to the centre.
    """
    region = find_region_term(fit, term)
    if subject is not None and not isinstance(subject, pd.DataFrame):
        subject = subject_record_frame(fit, subject)
    b = np.asarray(fit.params, dtype=float)
    V = np.asarray(fit.cov_params, dtype=float)
    df = int(fit.df_resid)
    q = float(stats.t.ppf(0.5 + level / 2, df))
    p = b.size
    alpha = 1.0 - level
    log = fit.response == "log"
    counts = {c.level: c.count for c in fit.levels if c.term == region.expression}
    k = len(region.levels)
    lone = {lv for lv in region.levels if counts.get(lv, 0) <= 1}
    warnings = thin_level_warnings(
        tuple(c for c in fit.levels if c.term == region.expression), min_sales
    )

    def unit(j: int | None) -> np.ndarray:
        g = np.zeros(p)
        if j is not None:
            g[j] = 1.0
        return g

    g_level = {lv: unit(j) for lv, j in zip(region.levels, region.positions, strict=True)}
    mean_g = sum(g_level.values()) / k

    effects = []
    for lv in region.levels:
        is_ref = lv == region.reference
        est = combination(b, V, g_level[lv], df, level, q=q)
        if lv in lone and not is_ref:
            est = Estimate(est.value, NAN, NAN, NAN, NAN, NAN)
        coded = combination(b, V, g_level[lv] - mean_g, df, level, q=q)
        effects.append(
            RegionEffect(
                level=lv,
                count=int(counts.get(lv, 0)),
                reference=is_ref,
                thin=counts.get(lv, 0) < min_sales,
                estimable=lv not in lone,
                effect=est,
                coded=coded,
                percent=percent_of(est) if log else None,
                coded_percent=percent_of(coded, kennedy=False) if log else None,
            )
        )

    joint_cols = [
        (c, j)
        for lv, c, j in zip(region.levels, region.columns, region.positions, strict=True)
        if j is not None and lv not in lone
    ]
    R = np.array([unit(j) for _, j in joint_cols]).reshape(len(joint_cols), p)
    joint = wald_test(
        b, V, R, df, f"every effect of {region.expression} is zero", [c for c, _ in joint_cols]
    )
    if lone & set(region.levels) - {region.reference}:
        warnings.append(
            "levels held by one sale are left out of the joint test and the pairwise table: "
            + ", ".join(sorted(lone - {region.reference}))
        )

    subject_region = None
    if subject is not None and region.column in subject.columns and len(subject):
        v = subject[region.column].iloc[0]
        subject_region = None if pd.isna(v) else level_label(v)
    usable = [lv for lv in region.levels if lv not in lone]
    every_pair = len(usable) <= MAX_PAIRWISE_LEVELS
    if every_pair:
        pairs = [(a, c) for i, a in enumerate(usable) for c in usable[i + 1 :]]
    else:  # k(k-1)/2 tests would be a table nobody reads and Holm would drown them
        anchor = subject_region if subject_region in usable else region.reference
        who = "the subject's region" if anchor == subject_region else "the reference"
        pairs = [(anchor, c) for c in usable if c != anchor]
        every = len(usable) * (len(usable) - 1) // 2
        warnings.append(
            f"{len(usable):,} regions: every pair would be {every:,} comparisons, so the "
            f"pairwise table compares {anchor} ({who}) with each other region, Holm-adjusted "
            f"over those {len(pairs):,}; no groups are formed (they need every pair; at most "
            f"{MAX_PAIRWISE_LEVELS} regions)"
        )
    diffs = [combination(b, V, g_level[a] - g_level[c], df, level, q=q) for a, c in pairs]
    adjusted = holm([d.p for d in diffs])
    pairwise = tuple(
        Contrast(
            a,
            c,
            d,
            float(ph),
            bool(np.isfinite(ph) and ph < alpha),
            percent_of(d, kennedy=False) if log else None,
        )
        for (a, c), d, ph in zip(pairs, diffs, adjusted, strict=True)
    )
    differ = {frozenset((c.first, c.second)): c.differ for c in pairwise}
    order = [
        e.level
        for e in sorted(effects, key=lambda e: (e.effect.value, e.level))
        if e.level not in lone
    ]
    if every_pair:
        groups = group_regions(order, differ, alpha)
    else:
        groups = RegionGroups(
            alpha,
            tuple(order),
            (),
            (),
            f"not formed: groups need a test of every pair, and {len(order):,} regions "
            f"are more than {MAX_PAIRWISE_LEVELS}",
        )

    slopes = tuple(
        _slopes(fit, region, g, b, V, df, level, counts) for g in _products_on(fit, region)
    )
    for s in slopes:
        if s.main_column is None:
            warnings.append(
                f"{s.expression}: the model has no plain feature {s.factor}, so the slope in "
                f"the reference level is taken as 0; add {s.factor} as a feature"
            )

    area_col = fit.sales.roles.column("living_area")
    per_area = area_prices(fit, region, level) if area_col in fit.design.inputs else ()

    centroids = region_centroids(fit, region, subject)
    premium = location_premium(fit, subject=subject, level=level) if location else None

    study = None
    if strata:
        from .region_strata import stratified_study

        study = stratified_study(fit, region_column=region.column, trim=trim)
        warnings.extend(study.warnings)
    return RegionAnalysis(
        term=region,
        response=fit.response,
        cov_type=fit.cov_type,
        level=level,
        n=fit.n,
        df_resid=df,
        effects=tuple(effects),
        joint=joint,
        pairwise=pairwise,
        groups=groups,
        slopes=slopes,
        centroids=centroids,
        premium=premium,
        subject_region=subject_region,
        strata=study,
        area_prices=per_area,
        area_column=area_col if per_area else None,
        warnings=tuple(warnings),
    )


def _slopes(
    fit: FitResult,
    region: RegionTerm,
    group: TermGroup,
    b: np.ndarray,
    V: np.ndarray,
    df: int,
    level: float,
    counts: dict[str, int],
) -> SlopeSet:
    names = list(fit.names)
    p = b.size
    q = float(stats.t.ppf(0.5 + level / 2, df))
    factor = _factor_text(group)
    main = factor if factor in names else None
    base = np.zeros(p)
    if main is not None:
        base[names.index(main)] = 1.0
    at_level = level_positions(level_labels(fit.frame[region.column]))
    out = []
    for lv in group.levels:
        g = base.copy()
        if lv != group.reference:
            col = next(c for c in group.columns if c.endswith(f"[{lv}]"))
            g[names.index(col)] += 1.0
        est = combination(b, V, g, df, level, q=q)
        ppu = None
        if fit.response == "log" and _is_name(factor):
            idx = at_level.get(lv)
            med = float(np.median(fit.price[idx])) if idx is not None and idx.size else NAN
            ppu = Estimate(
                est.value * med, est.se * med, est.low * med, est.high * med, est.t, est.p
            )
        out.append(RegionSlope(lv, int(counts.get(lv, 0)), lv == group.reference, est, ppu))
    # equal slopes: every product column is zero
    R = np.zeros((len(group.columns), p))
    for i, c in enumerate(group.columns):
        R[i, names.index(c)] = 1.0
    test = wald_test(b, V, R, df, f"{factor} has the same slope in every level", group.columns)
    if fit.response == "log":
        unit = f"change in log price per unit of {factor}"
    else:
        unit = f"price per unit of {factor}"
    return SlopeSet(factor, group.expression, main, unit, tuple(out), test)


def area_prices(
    fit: FitResult, region: RegionTerm, level: float = DEFAULT_LEVEL, step: float = 0.5
) -> tuple[AreaPrice, ...]:
    r"""Price per unit of living area implied by the model at each region's typical sale
    (the one with the median fitted value among the region's sales).

    With :math:`g = (x(A+\delta) - x(A-\delta)) / 2\delta` the derivative of the design
    row with respect to the living area A (central difference: exact for terms linear in
    A, error of order :math:`\delta^2 / A^2` for ``log(A)``), the derivative of the
    response is :math:`g'b`. For a linear response that is the price per unit, variance
    :math:`g'Vg`. For a log response the price per unit is
    :math:`\hat P\, g'b` with :math:`\hat P = e^{x'b} s` (s Duan's factor, held fixed),
    and the delta method gives the gradient :math:`h = \hat P (g + (g'b)\,x)`, variance
    :math:`h'Vh`. Every term of the model that reads the area counts: its interaction
    with distance, and a product ``living_area * onehot(region)`` when there is one.
    """
    area_col = fit.sales.roles.column("living_area")
    if area_col is None or area_col not in fit.frame.columns:
        return ()
    b = np.asarray(fit.params, dtype=float)
    V = np.asarray(fit.cov_params, dtype=float)
    q = float(stats.t.ppf(0.5 + level / 2, fit.df_resid))
    at_level = level_positions(level_labels(fit.frame[region.column]))
    out = []
    for lv in region.levels:
        idx = at_level.get(lv)
        if idx is None or idx.size == 0:
            continue
        pos = int(idx[np.argsort(fit.fitted[idx], kind="stable")[idx.size // 2]])
        row = fit.frame.iloc[[pos, pos]].reset_index(drop=True)
        area = float(row[area_col].iloc[0])
        row[area_col] = [area + step, area - step]
        built = fit.design.build(row, unseen="flag")
        if not built.row_ok.all():
            continue
        X2 = np.asarray(built.matrix, dtype=float)
        g = (X2[0] - X2[1]) / (2 * step)
        x = fit.design_row(pos)
        slope = float(g @ b)
        if fit.response == "log":
            price = float(np.exp(x @ b) * fit.smearing)
            h = price * (g + slope * x)
            value = price * slope
        else:
            price = float(x @ b)
            h = g
            value = slope
        se = math.sqrt(max(float(h @ V @ h), 0.0))
        t = value / se if se > 0 else NAN
        est = Estimate(
            value,
            se,
            value - q * se,
            value + q * se,
            t,
            float(2 * stats.t.sf(abs(t), fit.df_resid)) if se > 0 else NAN,
        )
        sid = fit.sale_ids[pos]
        base = f"row {int(fit.rows[pos])}" + (f" ({sid})" if sid else "")
        out.append(AreaPrice(lv, int(idx.size), base, area, price, est))
    return tuple(out)


def region_centroids(
    fit: FitResult, region: RegionTerm, subject: pd.DataFrame | None = None
) -> tuple[RegionCentroid, ...]:
    """Mean latitude and longitude of each region's sales used in the fit (empty when the
    sales have no mapped coordinates), with the subject's haversine distance to each."""
    lat_col = fit.sales.roles.column("latitude")
    lon_col = fit.sales.roles.column("longitude")
    frame = fit.frame
    if lat_col not in frame.columns or lon_col not in frame.columns:
        return ()
    lat = pd.to_numeric(frame[lat_col], errors="coerce").to_numpy(dtype=float)
    lon = pd.to_numeric(frame[lon_col], errors="coerce").to_numpy(dtype=float)
    at_level = level_positions(level_labels(frame[region.column]))
    located = np.isfinite(lat) & np.isfinite(lon)
    s_lat = s_lon = None
    if subject is not None and lat_col in subject.columns and lon_col in subject.columns:
        s_lat = pd.to_numeric(subject[lat_col], errors="coerce").to_numpy(dtype=float)[:1]
        s_lon = pd.to_numeric(subject[lon_col], errors="coerce").to_numpy(dtype=float)[:1]
    out = []
    for lv in region.levels:
        idx = at_level.get(lv, np.zeros(0, dtype=np.intp))
        m = idx[located[idx]]
        if not m.size:
            continue
        c_lat, c_lon = float(lat[m].mean()), float(lon[m].mean())
        km = None
        if s_lat is not None and np.isfinite(s_lat).all() and np.isfinite(s_lon).all():
            km = float(distance_km(s_lat, s_lon, np.array([c_lat]), np.array([c_lon]))[0])
        out.append(RegionCentroid(lv, int(m.size), c_lat, c_lon, km))
    return tuple(out)


# --- location effect ---------------------------------------------------------------------
@dataclass(frozen=True)
class DistanceCentre:
    latitude_column: str
    longitude_column: str
    latitude: float
    longitude: float


def _constant(node) -> float | None:
    if isinstance(node, Number):
        return float(node.value)
    if isinstance(node, Unary) and node.op == "-":
        v = _constant(node.operand)
        return None if v is None else -v
    return None


def _header(node) -> str | None:
    while isinstance(node, DerivedRef):
        node = node.expr
    return node.header if isinstance(node, Column) else None


def distance_centre(fit: FitResult) -> DistanceCentre | None:
    """The (lat0, lon0) of the first ``distance_km(lat, lon, lat0, lon0)`` a feature uses
    with constant centre and column coordinates (derived variables followed), else None."""
    scope = NameScope.of(list(fit.sales.frame.columns), fit.spec.derived, fit.sales.roles)
    for f in fit.design.features:
        tree = scope.resolve(parse_expression(f), f)
        for node in walk(tree):
            if isinstance(node, Call) and node.func == "distance_km" and len(node.args) == 4:
                la, lo = _header(node.args[0]), _header(node.args[1])
                c_la, c_lo = _constant(node.args[2]), _constant(node.args[3])
                if None not in (la, lo, c_la, c_lo):
                    return DistanceCentre(la, lo, c_la, c_lo)  # type: ignore[arg-type]
    return None


NICE_STEPS_KM = (0.05, 0.1, 0.2, 0.25, 0.5, 1.0, 2.0, 2.5, 5.0, 10.0, 20.0, 25.0, 50.0)


def distance_grid(top: float, points: int = PREMIUM_POINTS) -> np.ndarray:
    """0, s, 2s, ... up to ``top`` (never beyond the farthest sale), s the smallest round
    step giving at most ``points`` distances."""
    if not np.isfinite(top) or top <= 0:
        return np.array([0.0])
    step = next((s for s in NICE_STEPS_KM if top / s <= points - 1), top / (points - 1))
    return np.arange(0.0, top + 1e-9 * step, step)


def location_premium(
    fit: FitResult,
    *,
    subject: pd.DataFrame | None = None,
    level: float = DEFAULT_LEVEL,
    max_km: float | None = None,
    points: int = PREMIUM_POINTS,
) -> LocationPremium | None:
    """The change in the response from the centre out to ``max_km`` (default: the farthest
    sale), with its band at ``level``; None when no feature uses a distance to a centre."""
    centre = distance_centre(fit)
    if centre is None:
        return None
    frame = fit.frame
    base_name = "subject"
    base = None
    if subject is not None and len(subject):
        base = subject.iloc[[0]].reset_index(drop=True)
        try:
            if not fit.design.build(base, unseen="flag").row_ok[0]:
                base = None
        except AppraiseError:  # the subject lacks an input: use a typical sale instead
            base = None
    if base is None:
        order = np.argsort(fit.fitted, kind="stable")
        pos = int(order[len(order) // 2])
        base = frame.iloc[[pos]].reset_index(drop=True)
        sid = fit.sale_ids[pos]
        base_name = f"the sale with the median fitted value (row {int(fit.rows[pos])}" + (
            f", {sid})" if sid else ")"
        )
    lat = pd.to_numeric(frame[centre.latitude_column], errors="coerce").to_numpy(dtype=float)
    lon = pd.to_numeric(frame[centre.longitude_column], errors="coerce").to_numpy(dtype=float)
    dists = distance_km(
        lat, lon, np.full_like(lat, centre.latitude), np.full_like(lat, centre.longitude)
    )
    top = float(max_km) if max_km is not None else float(np.nanmax(dists))
    km = distance_grid(top, points)
    points = km.size
    rows = pd.concat([base] * points, ignore_index=True)
    rows[centre.latitude_column] = centre.latitude + np.degrees(km / EARTH_MEAN_RADIUS_KM)
    rows[centre.longitude_column] = centre.longitude
    built = fit.design.build(rows, unseen="flag")
    X = np.asarray(built.matrix, dtype=float)
    G = X - X[0]
    changed = np.flatnonzero(np.abs(G).max(axis=0) > 0)
    if changed.size == 0 or not built.row_ok.all():
        return None
    b = np.asarray(fit.params, dtype=float)
    V = np.asarray(fit.cov_params, dtype=float)
    log = fit.response == "log"
    q = float(stats.t.ppf(0.5 + level / 2, fit.df_resid))
    pts = []
    for d, g in zip(km, G, strict=True):
        e = combination(b, V, g, fit.df_resid, level, q=q)
        pts.append(
            PremiumPoint(
                float(d), e.value, e.low, e.high, percent_of(e, kennedy=False) if log else None
            )
        )
    s_km = None
    if base_name == "subject" and {centre.latitude_column, centre.longitude_column} <= set(
        base.columns
    ):
        s = distance_km(
            pd.to_numeric(base[centre.latitude_column]).to_numpy(dtype=float),
            pd.to_numeric(base[centre.longitude_column]).to_numpy(dtype=float),
            np.array([centre.latitude]),
            np.array([centre.longitude]),
        )
        s_km = float(s[0]) if np.isfinite(s[0]) else None
    return LocationPremium(
        centre=(centre.latitude, centre.longitude),
        base=base_name,
        columns=tuple(fit.names[j] for j in changed),
        level=level,
        points=tuple(pts),
        subject_km=s_km,
    )


__all__ = [
    "DEFAULT_LEVEL",
    "AreaPrice",
    "Contrast",
    "Estimate",
    "LocationPremium",
    "Percent",
    "RegionAnalysis",
    "RegionCentroid",
    "RegionEffect",
    "RegionGroups",
    "RegionSlope",
    "RegionTerm",
    "SlopeSet",
    "WaldTest",
    "alpha_text",
    "analyse_regions",
    "area_prices",
    "combination",
    "distance_centre",
    "distance_grid",
    "find_region_term",
    "group_regions",
    "has_region_term",
    "level_labels",
    "holm",
    "location_premium",
    "percent_of",
    "region_centroids",
    "subject_record_frame",
    "wald_test",
]
