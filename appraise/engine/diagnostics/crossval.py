"""Out-of-sample accuracy: leave-one-out from the hat diagonal, and seeded k-fold.

Leave-one-out prediction interval
---------------------------------
Without sale i the coefficients are :math:`b_{(i)}` and the prediction
:math:`\\hat y_{(i)} = x_i' b_{(i)}`. Its error :math:`y_i - \\hat y_{(i)} = e_i/(1-h_i)`
has variance :math:`\\sigma^2\\big(1 + x_i'(X_{(i)}'X_{(i)})^{-1}x_i\\big)`, and by the
Sherman-Morrison formula :math:`x_i'(X_{(i)}'X_{(i)})^{-1}x_i = h_i/(1-h_i)`, so the
variance is :math:`\\sigma^2/(1-h_i)`. With :math:`\\sigma` estimated from the other
n-1 sales (:math:`s_{(i)}`, df n-p-1) the interval is

.. math:: \\hat y_{(i)} \\pm t_{1-\\alpha/2,\\,n-p-1}\\; s_{(i)} \\sqrt{1 + h_i/(1-h_i)},

the ordinary prediction interval of the model fitted without sale i (classical
variance, whatever ``cov_type`` says). Sale i lies inside it exactly when its
externally studentized residual satisfies :math:`|t_i| \\le t_{1-\\alpha/2,n-p-1}`.

Price units
-----------
For a log response the leave-one-out prediction in price is the mean estimate,
:math:`e^{\\hat y_{(i)}}` times Duan's smearing factor of the full fit (the same
retransformation as the valuation's point estimate; the factor without sale i differs
by O(1/n)), and the interval is :math:`[e^{L}, e^{U}]` of the log-scale bounds. In
k-fold cross-validation each fold's smearing factor comes from its training sales.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .decomposition import QRDecomposition, decompose
from .influence import Influence
from .plain import plain


def _stats():
    """scipy.stats, imported on first use: it takes about a second to import, and commands
    that never run the checks (appraise fit, value) should not pay for it."""
    from scipy import stats

    return stats


RANK_TOL = 1e-9
"""Eigenvalue of :math:`Q_{train}'Q_{train}` below which the training folds are taken
to have lost that direction of the design (the eigenvalues lie between 0 and 1)."""

ESTIMABLE_TOL = 1e-8
"""Relative size of a held-out row's component outside the training rows' span above
which it cannot be predicted (e.g. a category level absent from the training folds)."""


def to_price(pred: np.ndarray, response: str, smearing: float) -> np.ndarray:
    """Response-scale predictions in price units (smearing-corrected mean for a log response)."""
    return np.exp(pred) * smearing if response == "log" else np.asarray(pred, dtype=float)


def mdape(pred: np.ndarray, price: np.ndarray) -> float:
    """Median absolute percentage error, in percent: :math:`100\\,\\mathrm{median}|A-S|/S`."""
    ok = np.isfinite(pred)
    if not ok.any():
        return float("nan")
    return float(100.0 * np.median(np.abs(pred[ok] - price[ok]) / price[ok]))


def rmse(pred: np.ndarray, actual: np.ndarray) -> float:
    ok = np.isfinite(pred)
    if not ok.any():
        return float("nan")
    return float(np.sqrt(np.mean((pred[ok] - actual[ok]) ** 2)))


@dataclass(frozen=True, eq=False)
class LeaveOneOut:
    """Leave-one-out predictions, intervals and their summaries."""

    price_prediction: np.ndarray
    low: np.ndarray
    high: np.ndarray
    inside: np.ndarray
    """Sale price inside its own leave-one-out interval (False where there is none)."""
    press: float
    """On the response scale (log price for a log response)."""
    rmse: float
    """Response scale: :math:`\\sqrt{PRESS/n}`."""
    rmse_price: float
    mdape: float
    coverage: float
    level: float
    t_crit: float
    n_used: int
    n_without: int
    """Sales with leverage 1, which have no leave-one-out prediction."""

    @property
    def coverage_short(self) -> bool:
        """Coverage below the nominal level by more than two binomial standard errors,
        :math:`\\sqrt{\\ell(1-\\ell)/n}` for level :math:`\\ell` and n sales used."""
        if not self.n_used:
            return False
        se = np.sqrt(self.level * (1 - self.level) / self.n_used)
        return bool(self.coverage < self.level - 2 * se)

    def to_dict(self) -> dict:
        return plain(
            {
                "press": self.press,
                "rmse": self.rmse,
                "rmse_price": self.rmse_price,
                "mdape": self.mdape,
                "coverage": {"nominal": self.level, "empirical": self.coverage, "n": self.n_used},
                "n_used": self.n_used,
                "n_without_prediction": self.n_without,
            }
        )


def leave_one_out(
    infl: Influence,
    price: np.ndarray,
    *,
    response: str,
    smearing: float,
    level: float,
    spread=None,
) -> LeaveOneOut:
    """Leave-one-out accuracy and interval coverage from the influence measures.

    ``spread`` is the fit's :class:`~appraise.engine.spread.SpreadModel` (None: the
    even-spread interval). With it, sale i's half-width is
    :math:`q_{(i)}\\sqrt{\\sigma^2_{(i)}(x_i) + s_{(i)}^2 h_i/(1-h_i)}` in place of
    :math:`t\\,s_{(i)}/\\sqrt{1-h_i}`: the spread and the multiplier both computed without
    sale i's own error (:meth:`~appraise.engine.spread.SpreadModel.loo_multipliers`).
    """
    price = np.asarray(price, dtype=float)
    ok = infl.has_loo
    t_crit = float(_stats().t.ppf(0.5 + level / 2, infl.n - infl.p - 1))
    if spread is None:
        half = t_crit * infl.loo_sigma / np.sqrt(1.0 - infl.leverage)
    else:
        ok = ok & np.isfinite(spread.loo_variance)
        h = infl.leverage
        mean_var = infl.loo_sigma**2 * h / np.where(ok, 1.0 - h, 1.0)
        half = spread.loo_multipliers(level) * np.sqrt(spread.loo_variance + mean_var)
    half = np.where(ok, half, np.nan)
    lo = infl.loo_prediction - half
    hi = infl.loo_prediction + half
    if response == "log":
        lo, hi = np.exp(lo), np.exp(hi)
    pred = to_price(infl.loo_prediction, response, smearing)
    if spread is None:
        inside = ok & (np.abs(infl.student_external) <= t_crit)
    else:
        inside = ok & (np.abs(np.where(ok, infl.loo_error, np.inf)) <= half)
    n_used = int(ok.sum())
    press = infl.press()
    return LeaveOneOut(
        price_prediction=pred,
        low=lo,
        high=hi,
        inside=inside,
        press=press,
        rmse=float(np.sqrt(press / n_used)) if n_used else float("nan"),
        rmse_price=rmse(pred, price),
        mdape=mdape(pred, price),
        coverage=float(inside[ok].mean()) if n_used else float("nan"),
        level=float(level),
        t_crit=t_crit,
        n_used=n_used,
        n_without=int(infl.n - n_used),
    )


@dataclass(frozen=True, eq=False)
class KFold:
    """k-fold cross-validation in price units."""

    folds: int
    seed: int
    fold: np.ndarray
    """Fold number (0-based) of each sale."""
    price_prediction: np.ndarray
    """NaN where a sale could not be predicted from the other folds."""
    rmse_price: float
    mdape: float

    @property
    def n_predicted(self) -> int:
        return int(np.isfinite(self.price_prediction).sum())

    @property
    def n_unpredictable(self) -> int:
        return int(self.price_prediction.size - self.n_predicted)

    def to_dict(self) -> dict:
        return plain(
            {
                "folds": self.folds,
                "seed": self.seed,
                "rmse_price": self.rmse_price,
                "mdape": self.mdape,
                "n_predicted": self.n_predicted,
                "n_unpredictable": self.n_unpredictable,
            }
        )


def assign_folds(n: int, folds: int, seed: int) -> np.ndarray:
    """Shuffle with ``numpy.random.default_rng(seed)`` and deal the sales into folds."""
    order = np.random.default_rng(seed).permutation(n)
    fold = np.empty(n, dtype=int)
    fold[order] = np.arange(n) % folds
    return fold


def kfold(
    X: np.ndarray,
    y: np.ndarray,
    price: np.ndarray,
    *,
    response: str,
    folds: int = 10,
    seed: int = 0,
    qr: QRDecomposition | None = None,
) -> KFold:
    """Fit on k-1 folds by least squares, predict the held-out fold in price units.

    Each fold is solved from the full decomposition :math:`X = QR` without touching
    X again: with :math:`Q_T` the held-out rows of Q and
    :math:`M = I - Q_T'Q_T = Q_{train}'Q_{train}` (p x p), the training fit's fitted
    values are :math:`Q c` with :math:`c = M^{-1}(Q'y - Q_T'y_T)`. M is inverted
    through its eigen-decomposition; an eigenvalue below ``RANK_TOL`` means the
    training rows lost a direction of the design.

    A held-out sale whose row is not a combination of the training rows (its category
    level, say, is missing from the other folds) gets no prediction rather than a
    silent guess, and is counted in ``n_unpredictable``.
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    price = np.asarray(price, dtype=float)
    qr = decompose(X) if qr is None else qr
    q = qr.q
    n = q.shape[0]
    k = int(min(folds, n))
    fold = assign_folds(n, k, seed)
    qty = q.T @ y
    # Visit the sales fold by fold as contiguous slices of a sorted copy.
    order = np.argsort(fold, kind="stable")
    qs, ys = q[order], y[order]
    bounds = np.concatenate([[0], np.cumsum(np.bincount(fold, minlength=k))])
    guess_sorted = np.full(n, np.nan)
    eye = np.eye(q.shape[1])
    for f in range(k):
        blk = slice(bounds[f], bounds[f + 1])
        qt, yt = qs[blk], ys[blk]
        lam, vec = np.linalg.eigh(eye - qt.T @ qt)
        keep = lam > RANK_TOL
        g = vec.T @ (qty - qt.T @ yt)
        c = vec[:, keep] @ (g[keep] / lam[keep])
        guess = qt @ c
        if not keep.all():
            outside = np.linalg.norm(qt @ vec[:, ~keep], axis=1)
            guess[outside > ESTIMABLE_TOL * np.linalg.norm(qt, axis=1)] = np.nan
        smear = 1.0
        if response == "log":
            e = np.exp(ys - qs @ c)
            smear = float((e.sum() - e[blk].sum()) / (n - (bounds[f + 1] - bounds[f])))
        guess_sorted[blk] = to_price(guess, response, smear)
    pred = np.empty(n)
    pred[order] = guess_sorted
    return KFold(
        folds=k,
        seed=int(seed),
        fold=fold,
        price_prediction=pred,
        rmse_price=rmse(pred, price),
        mdape=mdape(pred, price),
    )
