"""Value the subject property: a point estimate and a prediction interval for one sale.

For a design row :math:`x_0` of the subject, with :math:`\\hat y_0 = x_0'\\hat\\beta`,
:math:`V` the coefficient covariance of the chosen type (classical:
:math:`s^2 (X'X)^{-1}`) and :math:`s^2` the residual variance:

* interval for the mean of similar properties:
  :math:`\\hat y_0 \\pm t_{1-\\alpha/2,\\,n-p}\\sqrt{x_0' V x_0}`
* prediction interval for a single new sale (what the subject's price can be):
  :math:`\\hat y_0 \\pm t_{1-\\alpha/2,\\,n-p}\\sqrt{s^2 + x_0' V x_0}`;
  with classical errors this is :math:`\\hat y_0 \\pm t\\, s \\sqrt{1 + x_0'(X'X)^{-1}x_0}`.
  statsmodels' ``get_prediction(...).summary_frame()`` ``obs_ci_*`` computes the same.

For a log response the interval is computed on the log scale and exponentiated;
:math:`e^{\\hat y_0}` estimates the *median* price and the point estimate is Duan's
(1983) smearing estimate of the mean, :math:`e^{\\hat y_0}\\cdot\\frac1n\\sum e^{\\hat e_i}`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import pandas as pd

from .errors import SubjectError
from .fitting import FitResult
from .jsonable import to_jsonable
from .levels import subject_level_warnings
from .prediction import check_level, predict
from .sales import ROW_COLUMN

DATE_SLACK_DAYS = 90
"""An effective date up to this many days past the last sale is normal practice, not flagged."""


@dataclass(frozen=True)
class Valuation:
    """The subject's value under a fitted model.

    ``estimate`` is in price units (the smearing-corrected mean for a log response);
    ``median`` is :math:`e^{\\hat y_0}` for a log response and None for a linear one.
    ``low``/``high`` bound the prediction interval for one sale at ``level``;
    ``mean_low``/``mean_high`` the interval for the mean (for a log response: for the
    median) price of similar properties.
    """

    estimate: float
    median: float | None
    low: float
    high: float
    level: float
    mean_low: float
    mean_high: float
    response: str
    leverage: float
    max_sample_leverage: float
    df: int
    se_obs: float
    se_mean: float
    warnings: tuple[str, ...] = field(default=())
    subject: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        """The stable JSON contract of ``appraise value --json`` (extra keys may be added)."""
        d: dict = {"estimate": self.estimate}
        if self.median is not None:
            d["median"] = self.median
        d["interval"] = {"level": self.level, "low": self.low, "high": self.high}
        d["mean_interval"] = {"level": self.level, "low": self.mean_low, "high": self.mean_high}
        d["warnings"] = list(self.warnings)
        d["response"] = self.response
        d["leverage"] = self.leverage
        d["max_sample_leverage"] = self.max_sample_leverage
        d["df"] = self.df
        d["subject"] = self.subject
        return d


def _date_inputs(fit: FitResult) -> list[str]:
    return [c for c in fit.design.inputs if pd.api.types.is_datetime64_any_dtype(fit.frame[c])]


def prepare_subject(fit: FitResult, subject: pd.DataFrame) -> pd.DataFrame:
    """Set the subject's sale date to the effective date when the model needs a date.

    The subject has not sold: time terms are evaluated at the effective date of value,
    the subject's ``effective_date`` first (it wins over a sale date the subject file may
    also carry, so the date typed as the date of value is the one used), else the
    subject's own sale date, else the model file's ``effective_date``.
    """
    if len(subject) != 1:
        raise SubjectError(f"the subject must be exactly one row, not {len(subject)}")
    subject = subject.copy()
    own = "effective_date" in subject.columns and not pd.isna(subject["effective_date"].iloc[0])
    for col in _date_inputs(fit):
        have = col in subject.columns and not pd.isna(subject[col].iloc[0])
        if have and not own:
            continue
        eff = None
        if own:
            eff = subject["effective_date"].iloc[0]
        elif fit.spec.effective_date:
            eff = fit.spec.effective_date
        if eff is None:
            raise SubjectError(
                "the model uses the sale date; give the subject an 'effective_date' "
                "(the date of value) or set effective_date in the model file",
                column=col,
            )
        subject[col] = pd.to_datetime(pd.Series([eff])).astype("datetime64[ns]").to_numpy()
    return subject


def value_subject(fit: FitResult, subject: pd.DataFrame, level: float | None = None) -> Valuation:
    """Value a one-row subject frame with ``fit``: a one-row :func:`.prediction.predict`
    plus the warnings a reader needs beside the value.

    Raises
    ------
    SubjectError
        The subject lacks a value the model needs, or is not one row.
    DesignError
        The subject has a category level never seen in the sales.
    """
    level = fit.spec.level if level is None else check_level(level)
    subject = prepare_subject(fit, subject)
    missing = [c for c in fit.design.inputs if c not in subject.columns]
    if missing:
        raise SubjectError(
            "the subject lacks value(s) the model needs: " + ", ".join(missing), column=missing[0]
        )
    pred = predict(fit, subject, level, unseen="raise")
    if not pred.ok[0]:
        raise SubjectError(f"cannot value the subject: {pred.reasons[0]}", column=pred.columns[0])
    lo, hi = (float(v[0]) for v in pred.interval(level))
    mlo, mhi = (float(v[0]) for v in pred.interval(level, kind="mean"))
    median = None if pred.median is None else float(pred.median[0])
    h0 = float(pred.leverage[0])
    h_max = float(fit.leverage().max())
    warnings = subject_level_warnings(fit.design, fit.levels, subject, fit.spec.min_level_sales)
    warnings += extrapolation_warnings(fit, subject)
    if h0 > h_max:
        warnings.append(
            f"the subject's leverage {h0:.3f} exceeds the largest among the sales ({h_max:.3f}): "
            "its combination of attributes is unlike any sale, so the estimate is an extrapolation"
        )
    warnings.extend(fit.warnings)
    if fit.spec.response == "linear" and lo < 0:
        warnings.append("the lower bound is negative: a linear response fits this subject poorly")

    subj = {k: to_jsonable(v) for k, v in subject.iloc[0].items() if k != ROW_COLUMN}
    return Valuation(
        estimate=float(pred.estimate[0]),
        median=median,
        low=lo,
        high=hi,
        level=level,
        mean_low=mlo,
        mean_high=mhi,
        response=fit.spec.response,
        leverage=h0,
        max_sample_leverage=h_max,
        df=fit.df_resid,
        se_obs=float(pred.se_obs[0]),
        se_mean=float(pred.se_mean[0]),
        warnings=tuple(warnings),
        subject=subj,
    )


def extrapolation_warnings(fit: FitResult, subject: pd.DataFrame) -> list[str]:
    """One warning per raw numeric or date input of the subject outside the sales' range."""
    out = []
    for col in fit.design.inputs:
        s = fit.frame[col]
        v = subject[col].iloc[0]
        if pd.isna(v):
            continue
        if pd.api.types.is_datetime64_any_dtype(s):
            lo, hi = s.min(), s.max()
            v = pd.Timestamp(v)
            slack = pd.Timedelta(days=DATE_SLACK_DAYS)
            if v < lo - slack or v > hi + slack:
                out.append(
                    f"'{col}' {v.date()} is more than {DATE_SLACK_DAYS} days outside the sales' "
                    f"range {lo.date()} to {hi.date()}: the time trend is extrapolated"
                )
        elif pd.api.types.is_numeric_dtype(s):
            lo, hi = float(s.min()), float(s.max())
            fv = float(v)
            if fv < lo or fv > hi:
                out.append(
                    f"'{col}' {fv:g} is outside the sales' range {lo:g} to {hi:g}: "
                    "the estimate is an extrapolation"
                )
    return out
