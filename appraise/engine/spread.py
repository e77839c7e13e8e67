"""A model of the error spread, so a single sale's interval is as wide as its segment needs.

Ordinary least squares gives every sale the same error variance :math:`s^2`. House prices
rarely behave so: the cheapest and the oldest houses scatter more (in log terms) than the
rest, and an interval of even width is then right on average and wrong in every segment.
With ``spread = "modelled"`` in the model file the variance of one sale's error is

.. math:: \\sigma^2(x) = c\\,\\exp(z(x)'\\gamma),

the multiplicative heteroskedasticity model of Harvey (1976, *Econometrica* 44, 461-465;
recalled from memory). :math:`z(x)` holds an intercept, the model's fitted value
:math:`\\hat y` (standardised) and its square, and any ``spread_terms`` of the model file
(expressions of the feature language, e.g. ``"age"`` or ``"onehot(region)"``).

Estimation, in two least-squares steps on the sales of the fit:

1. :math:`\\gamma` regresses :math:`r_i = \\log\\big(e_i^2/(1-h_i)\\big)` on :math:`z_i`,
   where :math:`e_i` is the OLS residual and :math:`h_i` its leverage (dividing by
   :math:`1-h_i` makes each squared residual an unbiased estimate of its variance under
   the model);
2. :math:`c` is the mean of :math:`(e_i^2/(1-h_i))/\\exp(z_i'\\gamma)`, so the standardised
   squared residuals average one. This replaces Harvey's normal-theory constant
   :math:`E\\log\\chi^2_1 = -1.2704` and does not rely on normal errors.

The interval of one sale at :math:`x_0` is then
:math:`\\hat y_0 \\pm q_\\ell\\sqrt{\\sigma^2(x_0) + x_0'Vx_0}` (:mod:`.prediction`), where
the multiplier :math:`q_\\ell` is not the normal-theory t quantile but the empirical one:
the :math:`\\lceil(n+1)\\ell\\rceil`-th smallest of the sales' standardised leave-one-out
errors :math:`|y_i - \\hat y_{(i)}|/\\sqrt{\\sigma^2_{(i)}(x_i) + s_{(i)}^2 h_i/(1-h_i)}`. This
is the jackknife form of the locally weighted (normalised) conformal interval of Lei,
G'Sell, Rinaldo, Tibshirani and Wasserman (2018, *JASA* 113, 1094-1111; recalled from
memory): house-price errors are heavier-tailed than normal, and the t quantile then
over-covers the middle and under-covers the tails. Covariates beyond the sales' range are held at the nearest end of
that range, so the spread is never extrapolated from a quadratic.

Leave-one-out, for the coverage figures
---------------------------------------
Sale i's own residual must not widen its own interval. Its spread is taken from the
spread regression without sale i: with :math:`u_i` the residual and :math:`g_i` the
leverage of sale i in step 1, :math:`z_i'\\gamma_{(i)} = r_i - u_i/(1-g_i)` (the same
hat-matrix identity as for the price model), and :math:`c_{(i)}` is the mean of step 2
over the other sales. The other sales' residuals are those of the full price fit; their
dependence on sale i is of order :math:`1/n` and is not removed.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import cached_property

import numpy as np
import pandas as pd

from .design import INTERCEPT, DesignSpec, learn_design
from .errors import ModelFileError

SPREAD_METHODS: tuple[str, ...] = ("constant", "modelled")
"""``constant``: one :math:`s^2` for every sale (the OLS interval); ``modelled``: the
variance follows :math:`c\\exp(z'\\gamma)` (this module)."""

SPREAD_METHOD_TEXT = {
    "constant": "even spread: one error variance for every sale",
    "modelled": "modelled spread: error variance fitted on the predicted value and any "
    "spread terms",
}

LEVERAGE_ONE = 1 - 1e-8
"""Sales at or above this leverage (the only sale of a level) carry no residual
information and are left out of the spread regression."""


@dataclass(frozen=True, eq=False)
class SpreadModel:
    """A fitted spread model (see the module docstring).

    Attributes
    ----------
    terms:
        The model file's ``spread_terms`` (may be empty: the fitted value alone).
    names:
        Column names of :math:`z`: intercept, fitted, fitted², then the spread terms'.
    gamma:
        Coefficients of the log-variance regression.
    scale:
        :math:`c`.
    centre, width:
        Standardisation of the fitted value: :math:`(\\hat y - centre)/width`.
    z_low, z_high:
        Range of each :math:`z` column over the sales (covariates are clamped to it).
    loo_variance:
        Error variance of each sale of the fit with its own residual left out of the
        spread model (NaN for a sale of leverage 1).
    variance_in_fit:
        :math:`\\sigma^2(x_i)` of each sale of the fit (full spread model).
    """

    terms: tuple[str, ...]
    names: tuple[str, ...]
    gamma: np.ndarray
    scale: float
    centre: float
    width: float
    z_low: np.ndarray
    z_high: np.ndarray
    loo_variance: np.ndarray
    variance_in_fit: np.ndarray
    loo_scores: np.ndarray
    """Each sale's standardised leave-one-out error (NaN at leverage 1)."""
    design: DesignSpec | None = None

    @cached_property
    def sorted_scores(self) -> np.ndarray:
        """The finite leave-one-out scores in increasing order, sorted once per fit (every
        interval, of every subject and batch chunk, reads its multiplier from them)."""
        return np.sort(self.loo_scores[np.isfinite(self.loo_scores)])

    def multiplier(self, level: float) -> float:
        """:math:`q_\\ell`: the :math:`\\lceil(n+1)\\ell\\rceil`-th smallest score (the
        largest when that rank exceeds the number of sales)."""
        a = self.sorted_scores
        k = int(np.ceil((a.size + 1) * level))
        return float(a[min(k, a.size) - 1])

    def loo_multipliers(self, level: float) -> np.ndarray:
        """For each sale, :math:`q_\\ell` computed from the *other* sales' scores, so a
        sale's own error never widens its own leave-one-out interval."""
        sc = self.loo_scores
        fin = np.isfinite(sc)
        a = self.sorted_scores
        m = a.size - 1  # scores left when one sale is held out
        k = min(int(np.ceil((m + 1) * level)), m)  # rank among the others (1-based)
        rank = np.searchsorted(a, sc[fin], side="left")  # 0-based rank of the held-out sale
        out = np.full(sc.size, np.nan)
        # removing a score below the k-th moves the k-th smallest of the rest up by one
        out[fin] = np.where(rank < k, a[np.minimum(k, a.size - 1)], a[k - 1])
        return out

    def covariates(
        self, fitted: np.ndarray, frame: pd.DataFrame | None
    ) -> tuple[np.ndarray, np.ndarray, list[tuple[int, str, str | None]]]:
        """:math:`z` for rows with predictions ``fitted``, clamped to the sales' range.

        Returns ``(Z, ok, problems)``: rows whose spread terms cannot be evaluated are not
        ``ok`` and listed in ``problems`` as ``(position, reason, column)``.
        """
        Z, ok, problems = _covariates(fitted, frame, self.centre, self.width, self.design)
        Z = np.clip(Z, self.z_low, self.z_high)
        return Z, ok, problems

    def variance(
        self, fitted: np.ndarray, frame: pd.DataFrame | None
    ) -> tuple[np.ndarray, list[tuple[int, str, str | None]]]:
        """:math:`\\sigma^2` at each row (NaN where it cannot be computed), and problems."""
        fitted = np.asarray(fitted, dtype=float)
        out = np.full(len(fitted), np.nan)
        Z, ok, problems = self.covariates(fitted, frame)
        ok &= np.isfinite(fitted)
        out[ok] = self.scale * np.exp(Z[ok] @ self.gamma)
        return out, problems

    def to_dict(self) -> dict:
        return {
            "method": "modelled",
            "terms": list(self.terms),
            "covariates": list(self.names),
            "gamma": [float(g) for g in self.gamma],
            "scale": float(self.scale),
            "fitted_centre": float(self.centre),
            "fitted_width": float(self.width),
        }


def _covariates(
    fitted: np.ndarray, frame: pd.DataFrame | None, centre: float, width: float, design
) -> tuple[np.ndarray, np.ndarray, list[tuple[int, str, str | None]]]:
    f = (np.asarray(fitted, dtype=float) - centre) / width
    cols = [np.ones_like(f), f]
    ok = np.ones(len(f), dtype=bool)
    problems: list[tuple[int, str, str | None]] = []
    if design is not None:
        if frame is None:
            raise ModelFileError("the spread terms need the rows' inputs")
        built = design.build(frame, unseen="flag")
        M = np.asarray(built.matrix, dtype=float)
        keep = [j for j, name in enumerate(design.names) if name != INTERCEPT]
        cols.extend(M[:, j] for j in keep)
        ok &= np.asarray(built.row_ok, dtype=bool)
        problems = [(pos, f"spread term: {reason}", col) for pos, reason, col in built.problems]
    return np.column_stack(cols), ok, problems


def fit_spread(
    fitted: np.ndarray,
    resid: np.ndarray,
    leverage: np.ndarray,
    frame: pd.DataFrame,
    *,
    df_resid: int,
    terms: Sequence[str] = (),
    derived: Mapping[str, str] | None = None,
    roles=None,
) -> SpreadModel:
    """Fit the spread model to the sales of a price fit (module docstring, steps 1-2).

    Parameters
    ----------
    fitted, resid, leverage:
        The price fit's fitted values, residuals and hat diagonal, one per sale.
    frame:
        The sales the price fit used (for the spread terms), in the same order.
    terms:
        Extra covariates of the spread, as feature expressions.
    """
    fitted = np.asarray(fitted, dtype=float)
    e2 = np.asarray(resid, dtype=float) ** 2
    h = np.asarray(leverage, dtype=float)
    use = h < LEVERAGE_ONE
    centre = float(np.mean(fitted[use]))
    width = float(np.std(fitted[use])) or 1.0
    design = None
    if terms:
        design = learn_design(list(terms), frame, derived=derived, roles=roles, intercept=True)
    Z, ok, problems = _covariates(fitted, frame, centre, width, design)
    if problems:
        pos, reason, col = problems[0]
        raise ModelFileError(
            f"'spread_terms': {reason} (sale {pos + 1} of the fit"
            + (f", column {col!r}" if col else "")
            + ")"
        )
    names = ("intercept", "fitted")
    if design is not None:
        names += tuple(n for n in design.names if n != INTERCEPT)
    n_use = int(use.sum())
    if n_use <= Z.shape[1] + 1:
        raise ModelFileError(
            f"'spread': {n_use} sales are too few to model the spread with {Z.shape[1]} terms"
        )
    v = np.where(use, e2 / np.where(use, 1.0 - h, 1.0), np.nan)
    floor = 1e-6 * float(np.mean(v[use]))
    r = np.log(np.maximum(v, floor))
    Zu, ru = Z[use], r[use]
    gamma, *_ = np.linalg.lstsq(Zu, ru, rcond=None)
    u = ru - Zu @ gamma
    # leverage of each sale in the spread regression, from a QR of its design
    q, rr = np.linalg.qr(Zu)
    keep = np.abs(np.diag(rr)) > 1e-10 * np.abs(np.diag(rr)).max()
    g = np.einsum("ij,ij->i", q[:, keep], q[:, keep])
    lin = Zu @ gamma
    w = v[use] / np.exp(lin)
    scale = float(np.mean(w))
    lin_loo = lin - g * u / np.maximum(1.0 - g, 1e-12)
    w_loo = (w.sum() - w) / (n_use - 1)
    loo = np.full(len(fitted), np.nan)
    loo[use] = w_loo * np.exp(lin_loo)
    in_fit = np.full(len(fitted), np.nan)
    in_fit[use] = scale * np.exp(lin)
    # standardised leave-one-out errors: e/(1-h) over the leave-one-out predictive s.d.
    e = np.asarray(resid, dtype=float)
    hu, eu = h[use], e[use]
    s2_loo = (np.sum(e**2) - eu**2 / (1.0 - hu)) / max(df_resid - 1, 1)
    scores = np.full(len(fitted), np.nan)
    scores[use] = np.abs(eu / (1.0 - hu)) / np.sqrt(loo[use] + s2_loo * hu / (1.0 - hu))
    return SpreadModel(
        terms=tuple(terms),
        names=names,
        gamma=np.asarray(gamma, dtype=float),
        scale=scale,
        centre=centre,
        width=width,
        z_low=Zu.min(axis=0),
        z_high=Zu.max(axis=0),
        loo_variance=loo,
        variance_in_fit=in_fit,
        loo_scores=scores,
        design=design,
    )


__all__ = ["SPREAD_METHODS", "SPREAD_METHOD_TEXT", "SpreadModel", "fit_spread"]
