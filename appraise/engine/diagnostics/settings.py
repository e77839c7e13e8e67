"""Thresholds and options of the model check-up, passed in (no global state).

Every threshold is a rule of thumb, not a test with a known error rate; the
source of each is named beside it so a reviewer can weigh it.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, fields

from ..errors import AppraiseError
from .plain import plain


@dataclass(frozen=True)
class DiagnosticSettings:
    """How to check a fitted model.

    Attributes
    ----------
    leverage_multiple:
        Flag a sale whose leverage exceeds ``leverage_multiple * p / n``. 2p/n is
        Hoaglin and Welsch (1978); 3p/n, the default, is the laxer cut-off Velleman
        and Welsch (1981) suggest so that moderate designs do not flag every tenth sale
        (both recalled from memory).
    student_limit:
        Flag a sale whose externally studentized residual exceeds this in absolute
        value (3: common practice; under the model it follows t(n-p-1)).
    cooks_multiple:
        Flag a sale whose Cook's distance exceeds ``cooks_multiple / n`` (4/n: common
        practice, e.g. Bollen and Jackman 1990 - memory).
    dffits_multiple:
        When set, flag a sale whose |DFFITS| exceeds ``dffits_multiple * sqrt(p / n)``
        (2 sqrt(p/n): Belsley, Kuh and Welsch 1980 - memory). Off by default: since
        :math:`DFFITS_i^2 = p D_i s^2/s_{(i)}^2`, the 2 sqrt(p/n) cut-off flags nearly the
        same sales as Cook's 4/n, and a second flag on the same sale adds nothing.
    vif_limit:
        Flag a single-column term whose variance inflation factor exceeds this
        (10: common practice).
    gvif_root_limit:
        Flag a term of several columns whose GVIF^(1/(2 df)) exceeds this; sqrt(10)
        puts it on the same footing as ``vif_limit`` for one column (Fox and
        Monette 1992 compare GVIF^(1/(2 df)) with sqrt(VIF)).
    condition_threshold:
        Warn when the condition number of the design, columns scaled to unit length
        (Belsley 1991), exceeds this (30: common practice, Belsley - memory).
    alpha:
        Significance level of the residual tests (Breusch-Pagan, Jarque-Bera).
    folds, seed:
        k-fold cross-validation: number of folds and the seed of the shuffle.
    trim:
        Ratio study: drop ratios outside Q1 - 3 IQR and Q3 + 3 IQR first (IAAO 2013).
    level:
        Level of the leave-one-out prediction intervals whose coverage is measured;
        ``None`` uses the model file's level.
    coverage_term:
        A column or role by which to split the coverage of the leave-one-out intervals
        besides the fifths of predicted price and the regions (fifths when numeric,
        levels otherwise); ``None``: none.
    """

    leverage_multiple: float = 3.0
    student_limit: float = 3.0
    cooks_multiple: float = 4.0
    dffits_multiple: float | None = None
    vif_limit: float = 10.0
    gvif_root_limit: float = math.sqrt(10.0)
    condition_threshold: float = 30.0
    alpha: float = 0.05
    folds: int = 10
    seed: int = 0
    trim: bool = False
    level: float | None = None
    coverage_term: str | None = None

    def __post_init__(self) -> None:
        if self.folds < 2:
            raise AppraiseError(f"folds must be at least 2, not {self.folds}")
        if not 0 < self.alpha < 1:
            raise AppraiseError(f"alpha must lie strictly between 0 and 1, not {self.alpha}")
        if self.level is not None and not 0 < self.level < 1:
            raise AppraiseError(f"level must lie strictly between 0 and 1, not {self.level}")

    def to_dict(self) -> dict:
        return plain(asdict(self))

    @classmethod
    def from_dict(cls, data: dict) -> DiagnosticSettings:
        """The settings :meth:`to_dict` wrote (a workfile's); unknown keys are an error."""
        known = {f.name for f in fields(cls)}
        unknown = sorted(set(data) - known)
        if unknown:
            raise AppraiseError(f"unknown check setting(s): {', '.join(unknown)}")
        try:
            return cls(**data)
        except TypeError as exc:
            raise AppraiseError(f"check settings not understood: {exc}") from None


DEFAULT_SETTINGS = DiagnosticSettings()
"""The defaults, as one immutable value usable as a parameter default."""
