"""A ratio study of the model's values against the sale prices.

Definitions follow the IAAO Standard on Ratio Studies (approved April 2013), with
:math:`r_i = A_i / S_i` (A the model's value, S the sale price):

* median ratio; mean ratio :math:`\\bar r`; weighted mean :math:`\\sum A / \\sum S`;
* COD :math:`= 100\\, \\overline{|r - \\tilde r|} / \\tilde r` (:math:`\\tilde r` the median);
* PRD :math:`= \\bar r / (\\sum A/\\sum S)`;
* PRB: the slope of :math:`(r - \\tilde r)/\\tilde r` regressed, with an intercept, on
  :math:`\\log_2\\big(\\tfrac12 (A/\\tilde r + S)\\big)`, i.e. the fractional change in the
  ratio when value doubles; with its 95 % confidence interval (t, n-2 df);
* optional outlier trim: drop ratios outside :math:`Q_1 - 3\\,IQR` and
  :math:`Q_3 + 3\\,IQR` (quartiles by linear interpolation, numpy's default).

The measures are pluggable because the standard is being revised: each is a
:class:`Measure` (name, label, compute, acceptable range, source), and
:data:`IAAO_2013_MEASURES` lists the ones reported. Adding a measure means writing its
compute function and adding one entry to that tuple.

Acceptable ranges for single-family residential property, as recorded in the
project's domain notes (``DOMAIN.md`` section 3, which marks what was verified in a
retrieved text of the standard and what is recalled from memory):
median level 0.90-1.10 (verified); COD 5-15 (verified; 5-10 for newer or homogeneous
areas - memory; below 5 may mean sales chasing or an unrepresentative sample - memory);
PRD 0.98-1.03 (verified); PRB within +/-0.05 (verified; outside +/-0.10 unacceptable -
memory). PPE10, the share of values within 10 % of price, comes from
single-property valuation practice (memory) and has no range in the standard.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass

import numpy as np

from .plain import plain


def _stats():
    """scipy.stats, imported on first use: it takes about a second to import, and commands
    that never run the checks (appraise fit, value) should not pay for it."""
    from scipy import stats

    return stats


NAN = float("nan")


@dataclass(frozen=True)
class MeasureValue:
    """A measure's value and, where it has one, its confidence interval."""

    value: float
    ci_low: float = NAN
    ci_high: float = NAN


def ratios(pred: np.ndarray, price: np.ndarray) -> np.ndarray:
    return np.asarray(pred, dtype=float) / np.asarray(price, dtype=float)


def median_ratio(pred: np.ndarray, price: np.ndarray) -> MeasureValue:
    return MeasureValue(float(np.median(ratios(pred, price))))


def mean_ratio(pred: np.ndarray, price: np.ndarray) -> MeasureValue:
    return MeasureValue(float(np.mean(ratios(pred, price))))


def weighted_mean_ratio(pred: np.ndarray, price: np.ndarray) -> MeasureValue:
    return MeasureValue(float(np.sum(pred) / np.sum(price)))


def cod(pred: np.ndarray, price: np.ndarray) -> MeasureValue:
    """Coefficient of dispersion, in percent."""
    r = ratios(pred, price)
    med = np.median(r)
    return MeasureValue(float(100.0 * np.mean(np.abs(r - med)) / med))


def prd(pred: np.ndarray, price: np.ndarray) -> MeasureValue:
    """Price-related differential."""
    return MeasureValue(mean_ratio(pred, price).value / weighted_mean_ratio(pred, price).value)


def prb(pred: np.ndarray, price: np.ndarray, level: float = 0.95) -> MeasureValue:
    """Coefficient of price-related bias, with its confidence interval at ``level``.

    OLS slope :math:`b = \\sum (x-\\bar x)(z-\\bar z) / \\sum (x-\\bar x)^2` with
    :math:`z = (r-\\tilde r)/\\tilde r`, :math:`x = \\log_2(\\frac12(A/\\tilde r + S))`;
    standard error :math:`\\sqrt{\\frac{\\sum \\hat u^2/(n-2)}{\\sum (x-\\bar x)^2}}`.
    """
    pred = np.asarray(pred, dtype=float)
    price = np.asarray(price, dtype=float)
    r = pred / price
    med = np.median(r)
    z = (r - med) / med
    x = np.log2(0.5 * (pred / med + price))
    n = r.size
    xc = x - x.mean()
    sxx = float(xc @ xc)
    if n < 3 or sxx == 0:
        return MeasureValue(NAN)
    slope = float(xc @ (z - z.mean())) / sxx
    resid = z - z.mean() - slope * xc
    se = np.sqrt(float(resid @ resid) / (n - 2) / sxx)
    half = float(_stats().t.ppf(0.5 + level / 2, n - 2)) * se
    return MeasureValue(slope, slope - half, slope + half)


def ppe10(pred: np.ndarray, price: np.ndarray) -> MeasureValue:
    """Share (in percent) of values within 10 % of the sale price."""
    r = ratios(pred, price)
    return MeasureValue(float(100.0 * np.mean(np.abs(r - 1.0) <= 0.10)))


@dataclass(frozen=True)
class Measure:
    """One ratio-study measure: how to compute it and what range is acceptable.

    ``low``/``high`` are ``None`` when the source gives no bound on that side.
    """

    name: str
    label: str
    compute: Callable[[np.ndarray, np.ndarray], MeasureValue]
    low: float | None = None
    high: float | None = None
    source: str = ""
    note: str = ""

    @property
    def has_range(self) -> bool:
        return self.low is not None or self.high is not None

    def verdict(self, value: float) -> str:
        """ "within", "outside" or "no range"."""
        if not self.has_range or not np.isfinite(value):
            return "no range"
        if self.low is not None and value < self.low:
            return "outside"
        if self.high is not None and value > self.high:
            return "outside"
        return "within"


IAAO_SOURCE = "IAAO Standard on Ratio Studies (2013), single-family residential"

IAAO_2013_MEASURES: tuple[Measure, ...] = (
    Measure("median", "median ratio", median_ratio, 0.90, 1.10, IAAO_SOURCE + " (verified)"),
    Measure("mean", "mean ratio", mean_ratio),
    Measure("weighted_mean", "weighted mean ratio", weighted_mean_ratio),
    Measure(
        "cod",
        "COD",
        cod,
        5.0,
        15.0,
        IAAO_SOURCE + " (verified)",
        "5-10 for newer or homogeneous areas (memory); below 5 may mean sales chasing or an "
        "unrepresentative sample (memory)",
    ),
    Measure(
        "prd",
        "PRD",
        prd,
        0.98,
        1.03,
        IAAO_SOURCE + " (verified)",
        "above the range: lower-priced properties valued relatively high (regressive)",
    ),
    Measure(
        "prb",
        "PRB",
        prb,
        -0.05,
        0.05,
        IAAO_SOURCE + " (verified)",
        "outside +/-0.10 unacceptable (memory); interval is 95 %",
    ),
    Measure(
        "ppe10",
        "PPE10 (% within 10 % of price)",
        ppe10,
        None,
        None,
        "single-property valuation practice (memory)",
    ),
)
"""The measures reported, in order. Add a measure here (one place) to report it."""


@dataclass(frozen=True)
class MeasureResult:
    name: str
    label: str
    value: float
    ci_low: float
    ci_high: float
    low: float | None
    high: float | None
    verdict: str
    source: str
    note: str

    def range_text(self) -> str:
        """The acceptable range in words, e.g. "0.9 to 1.1", "at least 5"; "" if none."""
        if self.low is not None and self.high is not None:
            return f"{self.low:g} to {self.high:g}"
        if self.low is not None:
            return f"at least {self.low:g}"
        if self.high is not None:
            return f"at most {self.high:g}"
        return ""

    def to_dict(self) -> dict:
        return plain(
            {
                "name": self.name,
                "label": self.label,
                "value": self.value,
                "ci_low": self.ci_low,
                "ci_high": self.ci_high,
                "range_low": self.low,
                "range_high": self.high,
                "verdict": self.verdict,
                "source": self.source,
                "note": self.note,
            }
        )


@dataclass(frozen=True)
class TrimmedSale:
    row: int
    sale_id: str | None
    ratio: float

    def to_dict(self) -> dict:
        return plain(asdict(self))


@dataclass(frozen=True)
class RatioStudy:
    n: int
    """Sales the measures were computed on (after any trim)."""
    trim: bool
    fences: tuple[float, float] | None
    """(Q1 - 3 IQR, Q3 + 3 IQR) when trimming."""
    trimmed: tuple[TrimmedSale, ...]
    measures: tuple[MeasureResult, ...]

    def get(self, name: str) -> MeasureResult:
        for m in self.measures:
            if m.name == name:
                return m
        raise KeyError(name)

    def to_dict(self) -> dict:
        return plain(
            {
                "n": self.n,
                "trim": self.trim,
                "fences": list(self.fences) if self.fences is not None else None,
                "trimmed": [t.to_dict() for t in self.trimmed],
                "measures": [m.to_dict() for m in self.measures],
            }
        )


def trim_fences(r: np.ndarray, multiple: float = 3.0) -> tuple[float, float]:
    """:math:`(Q_1 - k\\,IQR,\\ Q_3 + k\\,IQR)` with k = ``multiple``."""
    q1, q3 = np.quantile(r, [0.25, 0.75])
    iqr = q3 - q1
    return float(q1 - multiple * iqr), float(q3 + multiple * iqr)


def ratio_study(
    pred: np.ndarray,
    price: np.ndarray,
    *,
    trim: bool = False,
    rows: Sequence[int] | np.ndarray | None = None,
    sale_ids: Sequence[str | None] | None = None,
    measures: Sequence[Measure] = IAAO_2013_MEASURES,
) -> RatioStudy:
    """Compute every measure on the sales with a finite value; trim first if asked.

    ``rows``/``sale_ids`` (one per sale) only label the trimmed sales in the result.
    """
    pred = np.asarray(pred, dtype=float)
    price = np.asarray(price, dtype=float)
    n_all = pred.size
    rows = np.arange(1, n_all + 1) if rows is None else np.asarray(rows)
    sale_ids = (None,) * n_all if sale_ids is None else tuple(sale_ids)
    keep = np.isfinite(pred) & np.isfinite(price) & (price > 0)
    fences = None
    trimmed: list[TrimmedSale] = []
    if trim and keep.sum() >= 4:
        r = pred / np.where(keep, price, 1.0)
        fences = trim_fences(r[keep])
        out = keep & ((r < fences[0]) | (r > fences[1]))
        trimmed = [TrimmedSale(int(rows[i]), sale_ids[i], float(r[i])) for i in np.flatnonzero(out)]
        keep &= ~out
    a, s = pred[keep], price[keep]
    results = []
    for m in measures:
        v = m.compute(a, s) if a.size else MeasureValue(NAN)
        results.append(
            MeasureResult(
                m.name,
                m.label,
                v.value,
                v.ci_low,
                v.ci_high,
                m.low,
                m.high,
                m.verdict(v.value),
                m.source,
                m.note,
            )
        )
    return RatioStudy(int(keep.sum()), bool(trim), fences, tuple(trimmed), tuple(results))
