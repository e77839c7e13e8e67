"""Predict any rows with a fitted model: the one prediction path of the tool.

The subject, the comparables of the grid, a batch of properties, the sales left out of
the fit (drawn on the plots) and the model assistant's candidates all go through
:func:`predict`. For a design row :math:`x_0`, :math:`\\hat y_0 = x_0'\\hat\\beta`,
:math:`V` the coefficient covariance of the fit's type (classical: :math:`s^2(X'X)^{-1}`)
and :math:`s_0^2` the error variance of one sale at that row (the constant :math:`s^2`
unless the fit models the spread):

* standard error of the mean (a typical similar property): :math:`\\sqrt{x_0' V x_0}`;
* standard error of a single sale (this property): :math:`\\sqrt{s_0^2 + x_0' V x_0}`
  (:math:`s_0^2` from :mod:`.spread` when the model file says ``spread = "modelled"``);
* intervals :math:`\\hat y_0 \\pm t_{1-\\alpha/2,\\,n-p}\\,se`. statsmodels'
  ``get_prediction(...).summary_frame()`` computes the same (``mean_ci_*``, ``obs_ci_*``).

For a log response :math:`e^{\\hat y_0}` estimates the *median* price, the mean is Duan's
(1983) smearing estimate :math:`e^{\\hat y_0}\\cdot\\frac1n\\sum e^{\\hat e_i}`, and the
bounds are the log-scale bounds exponentiated.

Rows that cannot be predicted (a missing input, a non-finite feature, a category level the
sales never had) come back with ``ok`` False and their reason; they are never dropped.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from .errors import SubjectError

if TYPE_CHECKING:  # pragma: no cover - typing only
    from .fitting import FitResult
    from .spread import SpreadModel


@dataclass(frozen=True, eq=False)
class Prediction:
    """Predictions for some rows, on the response scale and in price.

    All arrays have one entry per row given to :func:`predict`, in that order; rows that
    are not ``ok`` hold NaN and a ``reason`` (with the ``column`` at fault, when known).

    Attributes
    ----------
    response:
        ``"linear"`` or ``"log"``.
    level:
        Level of the intervals held (:meth:`interval` gives any other level).
    df:
        Residual degrees of freedom of the fit (for the t quantile).
    fitted:
        :math:`\\hat y_0` on the response scale (log price for a log response).
    se_mean, se_obs:
        Standard errors of the mean and of a single sale, response scale.
    leverage:
        :math:`x_0'(X'X)^{-1}x_0` (the classical hat value of the row).
    smearing:
        Duan's factor (1.0 for a linear response).
    """

    response: str
    level: float
    df: int
    fitted: np.ndarray
    se_mean: np.ndarray
    se_obs: np.ndarray
    leverage: np.ndarray
    ok: np.ndarray
    reasons: tuple[str | None, ...]
    columns: tuple[str | None, ...]
    smearing: float
    spread: SpreadModel | None = None
    """The fit's spread model: its empirical multiplier replaces the t quantile."""

    def __len__(self) -> int:
        return len(self.fitted)

    # --- response scale ----------------------------------------------------------------
    def t_quantile(self, level: float | None = None) -> float:
        """The interval's multiplier: :math:`t_{1-\\alpha/2,\\,df}`, or with a modelled
        spread the empirical quantile of :meth:`.spread.SpreadModel.multiplier`."""
        # scipy.special's inverse t distribution is what scipy.stats.t.ppf computes, without
        # the second scipy.stats takes to import
        from scipy.special import stdtrit

        level = self.level if level is None else check_level(level)
        if self.spread is not None:
            return self.spread.multiplier(level)
        return float(stdtrit(self.df, 1 - (1 - level) / 2))

    def response_interval(
        self, level: float | None = None, *, kind: str = "obs"
    ) -> tuple[np.ndarray, np.ndarray]:
        """Bounds on the response scale; ``kind`` ``"obs"`` (one sale) or ``"mean"``."""
        se = {"obs": self.se_obs, "mean": self.se_mean}[kind]
        tq = self.t_quantile(level)
        return self.fitted - tq * se, self.fitted + tq * se

    # --- price scale -------------------------------------------------------------------
    @property
    def estimate(self) -> np.ndarray:
        """Point estimate in price: the mean (smearing-corrected for a log response)."""
        if self.response == "log":
            return np.exp(self.fitted) * self.smearing
        return self.fitted

    @property
    def median(self) -> np.ndarray | None:
        """:math:`e^{\\hat y_0}` for a log response, None for a linear one."""
        return np.exp(self.fitted) if self.response == "log" else None

    def interval(
        self, level: float | None = None, *, kind: str = "obs"
    ) -> tuple[np.ndarray, np.ndarray]:
        """Price-scale bounds at ``level``: the single-sale interval, or ``kind="mean"``."""
        lo, hi = self.response_interval(level, kind=kind)
        if self.response == "log":
            return np.exp(lo), np.exp(hi)
        return lo, hi

    @property
    def low(self) -> np.ndarray:
        return self.interval()[0]

    @property
    def high(self) -> np.ndarray:
        return self.interval()[1]

    def to_frame(self, level: float | None = None) -> pd.DataFrame:
        """One row per predicted row: estimate, median, bounds, standard errors, reason."""
        lo, hi = self.interval(level)
        mlo, mhi = self.interval(level, kind="mean")
        data = {"estimate": self.estimate}
        if self.response == "log":
            data["median"] = self.median
        data.update(
            low=lo,
            high=hi,
            mean_low=mlo,
            mean_high=mhi,
            fitted=self.fitted,
            se_mean=self.se_mean,
            se_obs=self.se_obs,
            leverage=self.leverage,
            reason=list(self.reasons),
        )
        return pd.DataFrame(data)


def check_level(level: float) -> float:
    level = float(level)
    if not 0 < level < 1:
        raise SubjectError(f"level must be strictly between 0 and 1, not {level}")
    return level


def predict(
    fit: FitResult, frame: pd.DataFrame, level: float | None = None, *, unseen: str = "flag"
) -> Prediction:
    """Predict every row of ``frame`` with ``fit`` (see the module docstring).

    Raises
    ------
    DesignError
        ``frame`` lacks a column the model reads (a row-level problem, such as a
        missing value or an unseen category level, is reported per row instead;
        ``unseen="raise"`` makes an unseen level an error, as for the subject).
    """
    level = fit.spec.level if level is None else check_level(level)
    structure = getattr(fit, "structure", None)
    absorbed = None if structure is None else structure.term
    built = fit.design.build(frame, unseen=unseen, codes_for=absorbed)
    n = len(frame)
    ok = np.asarray(built.row_ok, dtype=bool).copy()
    reasons: list[str | None] = [None] * n
    columns: list[str | None] = [None] * n
    for pos, reason, column in built.problems:
        reasons[pos] = reason
        columns[pos] = column
    X = np.asarray(built.matrix, dtype=float)
    fitted = np.full(n, np.nan)
    var_mean = np.full(n, np.nan)
    lev = np.full(n, np.nan)
    if ok.any() and structure is not None:
        # structured fit: the absorbed term comes as level codes, never as dense rows
        fitted[ok], var_mean[ok], lev[ok] = structure.predict_rows(
            X[ok], np.asarray(built.codes)[ok], fit.cov_params
        )
    elif ok.any():
        Xo = X[ok]
        fitted[ok] = Xo @ fit.params
        # x_i' V x_i as a row sum of (X V) * X: one matrix product (BLAS), not an n p^2 loop
        var_mean[ok] = np.einsum("ij,ij->i", Xo @ fit.cov_params, Xo)
        lev[ok] = np.einsum("ij,ij->i", Xo @ fit.xtx_inv, Xo)
    _classical_for_lone_levels(fit, X, ok, var_mean, lev, built.codes)
    err_var, spread_problems = error_variance(fit, frame, ok, fitted)
    for pos, reason, column in spread_problems:
        if ok[pos]:
            ok[pos] = False
            reasons[pos], columns[pos] = reason, column
    var_obs = np.where(ok, var_mean + err_var, np.nan)
    return Prediction(
        response=fit.spec.response,
        level=level,
        df=fit.df_resid,
        fitted=fitted,
        se_mean=np.sqrt(var_mean),
        se_obs=np.sqrt(var_obs),
        leverage=lev,
        ok=ok,
        reasons=tuple(reasons),
        columns=tuple(columns),
        smearing=fit.smearing,
        spread=fit.spread,
    )


def _classical_for_lone_levels(fit, X, ok, var_mean, lev, codes=None) -> None:
    """A robust (HC) covariance gives a direction fixed by a single sale zero variance
    (that sale's residual is 0), so a row in a level held by one sale would get an
    interval of no width for the mean. For such rows the classical variance
    :math:`s^2 h_0` is used instead (the level is also warned as not estimable)."""
    if fit.cov_type == "classical" or not ok.any():
        return
    names = list(fit.design.names)
    structure = getattr(fit, "structure", None)
    touched = np.zeros(len(ok), dtype=bool)
    if structure is not None:  # X holds the numeric block; the absorbed term comes as codes
        names = [names[j] for j in structure.z_pos]
        lone_level = structure.counts == 1
        lone_level[structure.reference] = False
        if codes is not None and lone_level.any():
            c = np.asarray(codes)
            touched |= ok & (c >= 0) & lone_level[np.maximum(c, 0)]
    lone = [names.index(c.column) for c in fit.levels if c.count == 1 and c.column in names]
    if lone:
        touched |= ok & (np.abs(np.nan_to_num(X[:, lone])) > 0).any(axis=1)
    var_mean[touched] = fit.sigma**2 * lev[touched]


def error_variance(
    fit: FitResult, frame: pd.DataFrame, ok: np.ndarray, fitted: np.ndarray
) -> tuple[np.ndarray, list[tuple[int, str, str | None]]]:
    """Variance of one sale's error at each row, and the rows where it cannot be had.

    The fit's :math:`s^2` for every row, or, when the fit models the spread
    (``spread = "modelled"``), :math:`\\sigma^2(x_0)` of :mod:`.spread`. This is the single
    place where the spread enters a prediction.
    """
    out = np.full(len(frame), np.nan)
    if fit.spread is None:
        out[ok] = fit.sigma**2
        return out, []
    var, problems = fit.spread.variance(fitted, frame)
    out[ok] = var[ok]
    return out, problems


__all__ = ["Prediction", "check_level", "predict"]
