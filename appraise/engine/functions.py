"""The functions a feature expression may call, and nothing else.

Each function is listed once in :data:`FUNCTIONS` with its arity, the kind of each
argument, the keywords it accepts and a one-line summary (shown by the desktop
editor). The elementwise ones carry their numpy implementation; the expanding ones
(``onehot``, ``poly``) turn one expression into several design columns and are
materialised by :mod:`appraise.engine.design`.

All implementations take and return numpy arrays of equal length and let NaN
propagate: a missing input gives a missing output. They are called under
``numpy.errstate(all="ignore")``; values that come out non-finite (log of 0, square
root of a negative number...) are reported as row problems by the design, with the
function's ``nonfinite_hint``.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from types import MappingProxyType

import numpy as np

EARTH_MEAN_RADIUS_KM = 6371.0088
"""Mean radius of the Earth, R1 = (2a + b) / 3 of the GRS 80 ellipsoid (IUGG)."""

DAYS_PER_YEAR = 365.2425
"""Average length of the Gregorian calendar year in days (97 leap years in 400)."""

DAYS_PER_MONTH = DAYS_PER_YEAR / 12
"""Average Gregorian month, 30.436875 days: the unit of :func:`months_between`."""

# Kinds of argument, checked when an expression is evaluated.
NUMBER = "number"
DATE = "date"
DATE_OR_ISO = "date or 'YYYY-MM-DD'"
CATEGORY = "category"
GRADE_NAME = "grade name"  # a quoted level of an ordered grade, e.g. 'fair'


def hinge(x: np.ndarray, knot: np.ndarray) -> np.ndarray:
    """``max(x - knot, 0)``: zero up to the knot, then rising one for one."""
    return np.maximum(x - knot, 0.0)


def distance_km(lat: np.ndarray, lon: np.ndarray, lat0: np.ndarray, lon0: np.ndarray) -> np.ndarray:
    """Great-circle distance in km between (lat, lon) and (lat0, lon0), degrees.

    Haversine formula on a sphere of radius R = 6371.0088 km::

        a = sin^2(dphi / 2) + cos(phi) cos(phi0) sin^2(dlambda / 2)
        d = 2 R atan2(sqrt(a), sqrt(1 - a))     (= 2 R asin(sqrt(a)))

    A latitude outside [-90, 90] or a longitude outside [-180, 180] gives NaN.
    """
    lat, lon, lat0, lon0 = (np.asarray(v, dtype=float) for v in (lat, lon, lat0, lon0))
    valid = (
        (np.abs(lat) <= 90) & (np.abs(lat0) <= 90) & (np.abs(lon) <= 180) & (np.abs(lon0) <= 180)
    )
    phi, phi0 = np.radians(lat), np.radians(lat0)
    half_dphi = (phi - phi0) / 2
    half_dlam = np.radians(lon - lon0) / 2
    a = np.sin(half_dphi) ** 2 + np.cos(phi) * np.cos(phi0) * np.sin(half_dlam) ** 2
    a = np.clip(a, 0.0, 1.0)
    d = 2 * EARTH_MEAN_RADIUS_KM * np.arctan2(np.sqrt(a), np.sqrt(1.0 - a))
    return np.where(valid, d, np.nan)


def _days_between(date: np.ndarray, ref: np.ndarray) -> np.ndarray:
    # in seconds, not nanoseconds: int64 nanoseconds wrap after ~292 years (1702 to 2024 did)
    delta = np.asarray(date, dtype="datetime64[s]") - np.asarray(ref, dtype="datetime64[s]")
    return delta / np.timedelta64(86400, "s")


def months_between(date: np.ndarray, ref: np.ndarray) -> np.ndarray:
    """``(date - ref)`` in days divided by 365.2425 / 12 (an average Gregorian month).

    Negative for dates before ``ref``. Time of day counts as a fraction of a day.
    """
    return _days_between(date, ref) / DAYS_PER_MONTH


def years_between(date: np.ndarray, ref: np.ndarray) -> np.ndarray:
    """``(date - ref)`` in days divided by 365.2425 (an average Gregorian year)."""
    return _days_between(date, ref) / DAYS_PER_YEAR


def _fold(op: Callable[[np.ndarray, np.ndarray], np.ndarray]) -> Callable[..., np.ndarray]:
    def folded(first: np.ndarray, *rest: np.ndarray) -> np.ndarray:
        out = first
        for r in rest:
            out = op(out, r)
        return out

    return folded


@dataclass(frozen=True)
class FunctionInfo:
    """One callable of the expression language.

    ``params`` gives the kind of each positional argument; when ``max_args`` is
    None the last kind repeats. ``keywords`` are the only keyword arguments taken.
    ``text_params`` are the 0-based positions where a quoted string is allowed.
    """

    name: str
    signature: str
    summary: str
    params: tuple[str, ...]
    min_args: int
    max_args: int | None
    keywords: tuple[str, ...] = ()
    text_params: tuple[int, ...] = ()
    expanding: bool = False
    nonfinite_hint: str | None = None
    impl: Callable[..., np.ndarray] | None = field(default=None, compare=False, repr=False)

    def param_kind(self, position: int) -> str:
        return self.params[min(position, len(self.params) - 1)]


def _unary(name: str, impl: Callable, summary: str, hint: str | None = None) -> FunctionInfo:
    return FunctionInfo(
        name, f"{name}(x)", summary, (NUMBER,), 1, 1, nonfinite_hint=hint, impl=impl
    )


_ALL = (
    _unary("log", np.log, "natural logarithm", "log of a value <= 0?"),
    _unary("log10", np.log10, "base-10 logarithm", "log10 of a value <= 0?"),
    _unary("log1p", np.log1p, "log(1 + x), for counts that can be 0", "log1p of a value <= -1?"),
    _unary("sqrt", np.sqrt, "square root", "square root of a value < 0?"),
    _unary("exp", np.exp, "e to the power x", "exp overflow?"),
    _unary("abs", np.abs, "absolute value"),
    _unary("sin", np.sin, "sine of an angle in radians"),
    _unary("cos", np.cos, "cosine of an angle in radians"),
    FunctionInfo(
        name="min",
        signature="min(a, b, ...)",
        summary="elementwise smallest of its arguments",
        params=(NUMBER,),
        min_args=2,
        max_args=None,
        impl=_fold(np.minimum),
    ),
    FunctionInfo(
        name="max",
        signature="max(a, b, ...)",
        summary="elementwise largest of its arguments",
        params=(NUMBER,),
        min_args=2,
        max_args=None,
        impl=_fold(np.maximum),
    ),
    FunctionInfo(
        name="hinge",
        signature="hinge(x, knot)",
        summary="max(x - knot, 0): zero up to the knot, then x - knot",
        params=(NUMBER, NUMBER),
        min_args=2,
        max_args=2,
        impl=hinge,
    ),
    FunctionInfo(
        name="distance_km",
        signature="distance_km(lat, lon, lat0, lon0)",
        summary="great-circle (haversine) distance in km from (lat0, lon0), R = 6371.0088 km",
        params=(NUMBER, NUMBER, NUMBER, NUMBER),
        min_args=4,
        max_args=4,
        nonfinite_hint="latitude or longitude out of range?",
        impl=distance_km,
    ),
    FunctionInfo(
        name="months_between",
        signature="months_between(date, 'YYYY-MM-DD')",
        summary="(date - reference) in average Gregorian months of 30.436875 days",
        params=(DATE, DATE_OR_ISO),
        min_args=2,
        max_args=2,
        text_params=(1,),
        impl=months_between,
    ),
    FunctionInfo(
        name="years_between",
        signature="years_between(date, 'YYYY-MM-DD')",
        summary="(date - reference) in average Gregorian years of 365.2425 days",
        params=(DATE, DATE_OR_ISO),
        min_args=2,
        max_args=2,
        text_params=(1,),
        impl=years_between,
    ),
    FunctionInfo(
        name="onehot",
        signature="onehot(category, ref='level', min_count=5)",
        summary="a 0/1 column per level except the reference (default: the most frequent);"
        " min_count=k pools the levels with fewer than k sales into one 'other' level",
        params=(CATEGORY,),
        min_args=1,
        max_args=1,
        keywords=("ref", "min_count"),
        expanding=True,
    ),
    FunctionInfo(
        name="grade",
        signature="grade(category, 'poor', 'fair', 'good', 'excellent')",
        summary="an ordered grade as a score: 1 for the first level listed, 2 for the next, "
        "and so on (matched ignoring case); a value not listed cannot be used",
        params=(CATEGORY, GRADE_NAME),
        min_args=3,
        max_args=None,
        nonfinite_hint="a value not among the grades listed?",
    ),
    FunctionInfo(
        name="poly",
        signature="poly(a, b, ..., degree=m)",
        summary="every product of the inputs of total degree 1 to m, interactions included",
        params=(NUMBER,),
        min_args=1,
        max_args=None,
        keywords=("degree",),
        expanding=True,
    ),
)

FUNCTIONS: Mapping[str, FunctionInfo] = MappingProxyType({f.name: f for f in _ALL})
"""Every function an expression may call, by name."""

EXPANDING: frozenset[str] = frozenset(f.name for f in _ALL if f.expanding)
"""Functions that expand to several design columns and must be a whole feature."""
