"""Market-conditions (time) index from a fitted model's time terms.

A *time group* is any feature group whose inputs include a date column of the fit (the
sale date, or any date read by ``months_between``/``years_between``): a linear months
term, a hinge in months, ``poly`` of months, period indicators. With :math:`t_e` the
effective date and :math:`d(t) = x_T(t) - x_T(t_e)` the change of the time columns,
the change in the response is :math:`\\Delta(t) = d(t)'\\hat\\beta_T` with variance
:math:`d(t)' V_{TT}\\, d(t)` (``V`` the coefficient covariance of the fit).

* log response: index :math:`I(t) = e^{\\Delta(t)}` (price at ``t`` relative to the
  effective date), band :math:`e^{\\Delta \\pm t_{q}\\,se}` (delta method on the log scale,
  exact after exponentiation of the bounds);
* linear response: the change :math:`\\Delta(t)` is in currency; the index is
  :math:`1 + \\Delta(t)/\\bar p` with :math:`\\bar p` the mean sale price of the fit,
  and the same band divided by :math:`\\bar p`.

No time group: the index is flat, ``has_time`` is False and the notes say no
market-conditions adjustment is applied.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from .jsonable import to_jsonable
from .valuation import DATE_SLACK_DAYS

if TYPE_CHECKING:  # pragma: no cover - typing only
    from .design import TermGroup
    from .fitting import FitResult

NO_TIME_NOTE = (
    "the model has no time term: no market-conditions adjustment is applied; "
    "the comparables' prices are used as of their sale dates"
)


def date_inputs(fit: FitResult) -> tuple[str, ...]:
    """The model's input columns that hold dates (the sale date and any other date)."""
    return tuple(
        c
        for c in fit.design.inputs
        if c in fit.frame.columns and pd.api.types.is_datetime64_any_dtype(fit.frame[c])
    )


def time_groups(fit: FitResult) -> tuple[TermGroup, ...]:
    """Feature groups whose inputs include a date column: the model's time terms."""
    dates = set(date_inputs(fit))
    return tuple(g for g in fit.design.groups if dates.intersection(g.inputs))


def group_positions(fit: FitResult, group: TermGroup) -> np.ndarray:
    """Positions in ``fit.params`` of a group's design columns."""
    names = list(fit.names)
    return np.array([names.index(c) for c in group.columns], dtype=int)


def at_dates(base: pd.DataFrame, columns: tuple[str, ...], dates) -> pd.DataFrame:
    """``base`` (one row) repeated once per date, every date column set to that date."""
    dates = pd.to_datetime(pd.Series(list(dates))).astype("datetime64[ns]").to_numpy()
    frame = pd.concat([base.iloc[[0]]] * len(dates), ignore_index=True)
    for c in columns:
        frame[c] = dates
    return frame


@dataclass(frozen=True, eq=False)
class MarketIndex:
    """Price index over the data's period relative to the effective date.

    ``dates`` are month ends from the first to the last sale (plus the effective date);
    ``index``/``low``/``high`` the index and its band at ``level``; ``change``/``se`` the
    change in the response (log, or currency for a linear response) and its SE.
    """

    effective_date: pd.Timestamp
    response: str
    has_time: bool
    groups: tuple[str, ...]
    level: float
    dates: tuple[pd.Timestamp, ...]
    index: np.ndarray
    low: np.ndarray
    high: np.ndarray
    change: np.ndarray
    se: np.ndarray
    first_sale: pd.Timestamp | None
    last_sale: pd.Timestamp | None
    monthly_rate: float | None = None
    notes: tuple[str, ...] = field(default=())

    @property
    def extrapolated(self) -> bool:
        if self.first_sale is None or self.last_sale is None:
            return False
        slack = pd.Timedelta(days=DATE_SLACK_DAYS)
        return not (self.first_sale <= self.effective_date <= self.last_sale + slack)

    def to_dict(self) -> dict:
        return to_jsonable(
            {
                "effective_date": self.effective_date,
                "has_time_term": self.has_time,
                "time_groups": list(self.groups),
                "level": self.level,
                "monthly_rate": self.monthly_rate,
                "extrapolated": self.extrapolated,
                "points": [
                    {"date": d, "index": i, "low": lo, "high": hi}
                    for d, i, lo, hi in zip(
                        self.dates, self.index, self.low, self.high, strict=True
                    )
                ],
                "notes": list(self.notes),
            }
        )


def market_index(
    fit: FitResult,
    subject: pd.DataFrame,
    effective_date,
    level: float | None = None,
    dates=None,
) -> MarketIndex:
    """The market-conditions index of ``fit`` at the subject's other attributes.

    ``subject`` is a one-row frame with every model input (its date columns are
    overwritten); ``dates`` default to month ends over the sales' period.
    """
    from scipy import stats

    level = fit.spec.level if level is None else float(level)
    eff = pd.Timestamp(effective_date)
    dcols = date_inputs(fit)
    first = last = None
    if dcols:
        sd = pd.to_datetime(fit.frame[dcols[0]]).dropna()
        if len(sd):
            first, last = sd.min(), sd.max()
    if dates is None:
        if first is not None:
            dates = pd.date_range(first.normalize(), last.normalize(), freq="MS").tolist()
            dates = sorted({*dates, first.normalize(), last.normalize(), eff})
        else:
            dates = [eff]
    dates = [pd.Timestamp(d) for d in dates]
    groups = time_groups(fit)
    notes: list[str] = []
    n = len(dates)
    if not groups:
        notes.append(NO_TIME_NOTE)
        ones, zeros = np.ones(n), np.zeros(n)
        return MarketIndex(
            eff,
            fit.response,
            False,
            (),
            level,
            tuple(dates),
            ones,
            ones,
            ones,
            zeros,
            zeros,
            first,
            last,
            None,
            tuple(notes),
        )
    pos = np.concatenate([group_positions(fit, g) for g in groups])
    frame = at_dates(subject, dcols, [*dates, eff])
    X = np.asarray(fit.design.build(frame, unseen="flag").matrix, dtype=float)[:, pos]
    D = X[:-1] - X[-1]
    beta = fit.params[pos]
    V = fit.cov_params[np.ix_(pos, pos)]
    change = D @ beta
    se = np.sqrt(np.einsum("ij,jk,ik->i", D, V, D))
    tq = float(stats.t.ppf(1 - (1 - level) / 2, fit.df_resid))
    if fit.response == "log":
        index, low, high = np.exp(change), np.exp(change - tq * se), np.exp(change + tq * se)
    else:
        mean_price = float(np.mean(fit.price))
        index = 1 + change / mean_price
        low, high = index - tq * se / mean_price, index + tq * se / mean_price
    rate = None
    if len(groups) == 1 and groups[0].columns == (groups[0].expression,) and len(pos) == 1:
        # one plain time column: its slope per month, if it is a months count
        probe = at_dates(subject, dcols, [eff, eff + pd.Timedelta(days=365.2425 / 12)])
        Xp = np.asarray(fit.design.build(probe, unseen="flag").matrix, dtype=float)[:, pos]
        step = float(Xp[1, 0] - Xp[0, 0])
        if np.isfinite(step) and step != 0:
            slope = float(beta[0]) * step
            rate = float(np.expm1(slope)) if fit.response == "log" else slope
    if first is not None and not (first <= eff <= last + pd.Timedelta(days=DATE_SLACK_DAYS)):
        notes.append(
            f"the effective date {eff.date()} lies outside the sales' dates "
            f"({first.date()} to {last.date()}): the market-conditions index is extrapolated there"
        )
    return MarketIndex(
        eff,
        fit.response,
        True,
        tuple(g.expression for g in groups),
        level,
        tuple(dates),
        index,
        low,
        high,
        change,
        se,
        first,
        last,
        rate,
        tuple(notes),
    )


__all__ = ["NO_TIME_NOTE", "MarketIndex", "date_inputs", "market_index", "time_groups"]
