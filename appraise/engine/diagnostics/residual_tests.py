"""Tests on the residuals: uneven spread (Breusch-Pagan) and normality (Jarque-Bera).

Breusch-Pagan, auxiliary regression of the squared residuals on the model's own
columns (with an intercept), df = number of non-constant columns:

* **studentized (Koenker 1981) form**, :math:`LM = n R^2` of the regression of
  :math:`\\hat e^2` on X. This is the LM statistic Wooldridge (Introductory
  Econometrics, sec. 8.3) presents, and what ``statsmodels.stats.diagnostic.
  het_breuschpagan`` computes by default (``robust=True``). It does not assume normal
  errors, so the verdict uses it. Its F form,
  :math:`F = (R^2/df) / ((1-R^2)/(n-df-1))`, is given too.
* **original (Breusch and Pagan 1979) form**, :math:`LM = ESS/2` of the regression of
  :math:`\\hat e^2/\\tilde\\sigma^2` (:math:`\\tilde\\sigma^2 = e'e/n`) on X;
  ``het_breuschpagan(..., robust=False)``. It assumes normal errors.

Jarque-Bera: :math:`JB = \\frac n6 \\big(S^2 + (K-3)^2/4\\big)` with S and K the sample
skewness and kurtosis (moments about the mean, divided by n); chi-squared(2).
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

from .collinearity import constant_columns
from .decomposition import QRDecomposition, decompose
from .plain import plain


def _stats():
    """scipy.stats, imported on first use: it takes about a second to import, and commands
    that never run the checks (appraise fit, value) should not pay for it."""
    from scipy import stats

    return stats


@dataclass(frozen=True)
class BreuschPagan:
    form: str
    """"koenker" (n R², studentized) or "original" (ESS/2)."""
    statistic: float
    df: int
    p_value: float
    f_statistic: float
    f_p_value: float

    def to_dict(self) -> dict:
        return plain(asdict(self))


@dataclass(frozen=True)
class JarqueBera:
    statistic: float
    p_value: float
    skewness: float
    kurtosis: float

    def to_dict(self) -> dict:
        return plain(asdict(self))


@dataclass(frozen=True)
class ResidualTests:
    koenker: BreuschPagan
    original: BreuschPagan
    jarque_bera: JarqueBera
    alpha: float
    suggestions: tuple[str, ...]

    @property
    def heteroskedastic(self) -> bool:
        """Uneven spread found (studentized Breusch-Pagan p below alpha)."""
        return self.koenker.p_value < self.alpha

    @property
    def non_normal(self) -> bool:
        return self.jarque_bera.p_value < self.alpha

    def to_dict(self) -> dict:
        return plain(
            {
                "alpha": self.alpha,
                "breusch_pagan": self.koenker.to_dict(),
                "breusch_pagan_original": self.original.to_dict(),
                "jarque_bera": self.jarque_bera.to_dict(),
                "heteroskedastic": self.heteroskedastic,
                "non_normal": self.non_normal,
                "suggestions": list(self.suggestions),
            }
        )


def breusch_pagan(
    resid: np.ndarray, X: np.ndarray, qr: QRDecomposition | None = None
) -> tuple[BreuschPagan, BreuschPagan]:
    """Both Breusch-Pagan forms, on the columns of X (an intercept is added if absent).

    ``qr`` is reused when X already holds an intercept column.
    """
    e = np.asarray(resid, dtype=float)
    X = np.asarray(X, dtype=float)
    n = e.size
    if constant_columns(X).size == 0:
        X = np.column_stack([np.ones(n), X])
        qr = None
    qr = decompose(X) if qr is None else qr
    df = qr.p - 1
    u = e**2
    fitted = qr.project(u)
    tss = float(np.sum((u - u.mean()) ** 2))
    ess = float(np.sum((fitted - u.mean()) ** 2))
    r2 = ess / tss if tss > 0 else 0.0
    lm = n * r2
    f = (r2 / df) / ((1 - r2) / (n - df - 1)) if r2 < 1 else float("inf")
    f_p = float(_stats().f.sf(f, df, n - df - 1))
    koenker = BreuschPagan("koenker", lm, df, float(_stats().chi2.sf(lm, df)), f, f_p)
    sigma2_ml = float(e @ e) / n
    lm_orig = ess / sigma2_ml**2 / 2.0
    original = BreuschPagan("original", lm_orig, df, float(_stats().chi2.sf(lm_orig, df)), f, f_p)
    return koenker, original


def jarque_bera(resid: np.ndarray) -> JarqueBera:
    """Jarque-Bera normality test of the residuals."""
    e = np.asarray(resid, dtype=float)
    d = e - e.mean()
    m2 = float(np.mean(d**2))
    skew = float(np.mean(d**3)) / m2**1.5
    kurt = float(np.mean(d**4)) / m2**2
    jb = e.size / 6.0 * (skew**2 + (kurt - 3.0) ** 2 / 4.0)
    return JarqueBera(jb, float(_stats().chi2.sf(jb, 2)), skew, kurt)


def residual_tests(
    resid: np.ndarray,
    X: np.ndarray,
    *,
    alpha: float = 0.05,
    response: str = "linear",
    cov_type: str = "classical",
    qr: QRDecomposition | None = None,
) -> ResidualTests:
    """Run both tests and say in words what to do about what they find."""
    koenker, original = breusch_pagan(resid, X, qr)
    return residual_words(koenker, original, jarque_bera(resid), alpha, response, cov_type)


def residual_words(
    koenker: BreuschPagan,
    original: BreuschPagan,
    jb: JarqueBera,
    alpha: float,
    response: str,
    cov_type: str,
) -> ResidualTests:
    """The :class:`ResidualTests` of the three statistics, with what to do about what they
    find in words (shared by the dense check-up and :mod:`.structured`)."""
    tips: list[str] = []
    if koenker.p_value < alpha:
        tips.append(
            f"the spread of the residuals changes with the attributes (Breusch-Pagan p = "
            f"{koenker.p_value:.3g} < {alpha:g})"
        )
        if cov_type == "classical":
            tips.append(
                'use robust standard errors: cov_type = "HC3" in the model file '
                "(coefficients stay the same, their uncertainty is estimated honestly)"
            )
        if response == "linear":
            tips.append(
                'try response = "log": errors in price usually grow with price, and a log '
                "response often evens the spread"
            )
        tips.append(
            "prediction intervals assume an even spread: too narrow for some properties, "
            "too wide for others"
        )
    if jb.p_value < alpha:
        tips.append(
            f"residuals are not normal (Jarque-Bera p = {jb.p_value:.3g}; skewness "
            f"{jb.skewness:.2f}, kurtosis {jb.kurtosis:.2f}): intervals rely on normality; "
            "look at the flagged sales first"
        )
    return ResidualTests(koenker, original, jb, alpha, tuple(tips))
