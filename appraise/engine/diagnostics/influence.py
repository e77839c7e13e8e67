"""Per-sale influence measures from one QR decomposition, and the flags built on them.

With :math:`e_i` the residual, :math:`h_i` the leverage, :math:`s^2 = e'e/(n-p)`:

* internally studentized residual :math:`r_i = e_i / (s\\sqrt{1-h_i})`;
* leave-one-out residual variance (no refit needed)
  :math:`s_{(i)}^2 = \\big(e'e - e_i^2/(1-h_i)\\big)/(n-p-1)`;
* externally studentized residual :math:`t_i = e_i / (s_{(i)}\\sqrt{1-h_i})`,
  distributed t(n-p-1) under the model;
* Cook's distance :math:`D_i = r_i^2 h_i / (p(1-h_i))`;
* DFFITS :math:`t_i\\sqrt{h_i/(1-h_i)}`;
* leave-one-out residual :math:`y_i - \\hat y_{(i)} = e_i/(1-h_i)`, hence the
  leave-one-out prediction :math:`\\hat y_{(i)} = y_i - e_i/(1-h_i)` and
  PRESS :math:`= \\sum_i (e_i/(1-h_i))^2`.

A sale with :math:`h_i = 1` alone determines a coefficient (typically the only sale
in a category level); it has no leave-one-out prediction and its measures are NaN.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import asdict, dataclass

import numpy as np

from ..modelspec import toml_string
from ..sales import Exclusion
from .decomposition import QRDecomposition, decompose
from .plain import plain
from .settings import DiagnosticSettings

LEVERAGE_ONE_TOL = 1e-10
"""A sale with 1 - h_i below this is treated as fixing its own fitted value."""


@dataclass(frozen=True, eq=False)
class Influence:
    """Per-sale measures on the response scale, in the order of the design's rows."""

    leverage: np.ndarray
    resid: np.ndarray
    student_internal: np.ndarray
    student_external: np.ndarray
    cooks_distance: np.ndarray
    dffits: np.ndarray
    loo_prediction: np.ndarray
    loo_error: np.ndarray
    """:math:`y_i - \\hat y_{(i)}`."""
    loo_sigma: np.ndarray
    """:math:`s_{(i)}`, the residual standard deviation without sale i."""
    sigma: float
    n: int
    p: int

    @property
    def df_resid(self) -> int:
        return self.n - self.p

    @property
    def has_loo(self) -> np.ndarray:
        """Sales with a leave-one-out prediction (leverage below 1)."""
        return np.isfinite(self.loo_error)

    def press(self) -> float:
        """Predicted residual sum of squares over the sales that have a LOO prediction."""
        return float(np.sum(self.loo_error[self.has_loo] ** 2))


def influence(X: np.ndarray, y: np.ndarray, qr: QRDecomposition | None = None) -> Influence:
    """Leverage, studentized residuals, Cook's distance, DFFITS and LOO predictions.

    Parameters
    ----------
    X:
        Design (n, p), full column rank.
    y:
        Response (n,), on the scale the model is fitted (log price for a log response).
    qr:
        The decomposition of ``X`` when the caller already has it.
    """
    y = np.asarray(y, dtype=float)
    qr = decompose(X) if qr is None else qr
    n, p = qr.n, qr.p
    h = qr.hat_diagonal()
    e = y - qr.project(y)
    sse = float(e @ e)
    sigma = np.sqrt(sse / (n - p))
    one_minus_h = 1.0 - h
    ok = one_minus_h > LEVERAGE_ONE_TOL
    safe = np.where(ok, one_minus_h, np.nan)
    r_int = e / (sigma * np.sqrt(safe))
    loo_err = e / safe
    if n - p - 1 > 0:
        s2_loo = (sse - e * loo_err) / (n - p - 1)
        s_loo = np.sqrt(np.clip(s2_loo, 0.0, None))
    else:
        s_loo = np.full(n, np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        t_ext = e / (s_loo * np.sqrt(safe))
    ratio = h / safe
    return Influence(
        leverage=h,
        resid=e,
        student_internal=r_int,
        student_external=t_ext,
        cooks_distance=r_int**2 * ratio / p,
        dffits=t_ext * np.sqrt(ratio),
        loo_prediction=y - loo_err,
        loo_error=loo_err,
        loo_sigma=s_loo,
        sigma=float(sigma),
        n=n,
        p=p,
    )


# --- flags -------------------------------------------------------------------------


@dataclass(frozen=True)
class Thresholds:
    """The cut-offs in force for one data set (n and p filled in)."""

    leverage: float
    student: float
    cooks: float
    dffits: float
    """NaN when DFFITS is not used for flags."""
    leverage_rule: str
    student_rule: str
    cooks_rule: str
    dffits_rule: str

    def to_dict(self) -> dict:
        return plain(
            {
                "leverage": {"limit": self.leverage, "rule": self.leverage_rule},
                "student_external": {"limit": self.student, "rule": self.student_rule},
                "cooks_distance": {"limit": self.cooks, "rule": self.cooks_rule},
                "dffits": {"limit": self.dffits, "rule": self.dffits_rule},
            }
        )


def thresholds(n: int, p: int, settings: DiagnosticSettings) -> Thresholds:
    """Cut-offs of :class:`DiagnosticSettings` for ``n`` sales and ``p`` columns."""
    return Thresholds(
        leverage=settings.leverage_multiple * p / n,
        student=settings.student_limit,
        cooks=settings.cooks_multiple / n,
        dffits=(
            settings.dffits_multiple * float(np.sqrt(p / n))
            if settings.dffits_multiple is not None
            else float("nan")
        ),
        leverage_rule=f"leverage > {settings.leverage_multiple:g}p/n",
        student_rule=f"|externally studentized residual| > {settings.student_limit:g}",
        cooks_rule=f"Cook's distance > {settings.cooks_multiple:g}/n",
        dffits_rule=(
            f"|DFFITS| > {settings.dffits_multiple:g}*sqrt(p/n)"
            if settings.dffits_multiple is not None
            else "not used for flags (it tracks Cook's distance)"
        ),
    )


@dataclass(frozen=True)
class Finding:
    """One reason a sale is flagged. ``code`` is stable for programs."""

    code: str
    value: float
    limit: float
    text: str

    def to_dict(self) -> dict:
        return plain(asdict(self))


@dataclass(frozen=True)
class SaleFlag:
    """A flagged sale with its findings and the ready-made way to exclude it."""

    position: int
    """Index into the design's rows."""
    row: int
    """1-based file row."""
    sale_id: str | None
    findings: tuple[Finding, ...]

    @property
    def codes(self) -> tuple[str, ...]:
        return tuple(f.code for f in self.findings)

    @property
    def reason(self) -> str:
        """A reason text to keep with the exclusion (edit it once the cause is known)."""
        return "model check: " + "; ".join(f.text for f in self.findings)

    def exclusion(self) -> Exclusion:
        """The exclusion the workbench applies with one click."""
        return Exclusion(self.row, self.sale_id, self.reason, None, "user")

    def model_file_line(self) -> str:
        """The ``[[exclude]]`` block to paste into the model file.

        Without a sale id there is nothing for the model file to name: the text says
        so (as a TOML comment) instead.
        """
        if self.sale_id is None:
            return (
                f"# row {self.row} has no sale id: map a sale-id column, or exclude the row "
                "in the workbench\n"
            )
        return (
            "# confirm the cause (data error, sale not at arm's length) before excluding\n"
            "[[exclude]]\n"
            f"id = {toml_string(self.sale_id)}\n"
            f"reason = {toml_string(self.reason)}\n"
        )

    def to_dict(self) -> dict:
        return plain(
            {
                "row": self.row,
                "sale_id": self.sale_id,
                "findings": [f.to_dict() for f in self.findings],
                "reason": self.reason,
                "model_file_line": self.model_file_line(),
            }
        )


OWN_FIT_TEXT = (
    "alone fixes a coefficient (leverage 1, e.g. the only sale of a category level): it "
    "cannot be checked against the others"
)


def _sig(v: float, digits: int = 3) -> str:
    """``v`` to ``digits`` significant digits, never in scientific notation (a county's
    Cook's distance limit is 4/n = 0.000004, which ``:.3g`` writes as 4e-06)."""
    if not np.isfinite(v):
        return str(v)
    return np.format_float_positional(
        float(v), precision=digits, unique=False, fractional=False, trim="-"
    )


def flag_sales(
    infl: Influence,
    limits: Thresholds,
    rows: Sequence[int] | np.ndarray,
    sale_ids: Sequence[str | None],
) -> tuple[SaleFlag, ...]:
    """Sales beyond any cut-off, most influential (largest Cook's distance) first.

    The comparisons are vectorised; only flagged sales are visited one by one.
    """
    h, t, d, f = infl.leverage, infl.student_external, infl.cooks_distance, infl.dffits
    own = ~infl.has_loo
    lev, stu, coo, dff = limits.leverage, limits.student, limits.cooks, limits.dffits
    with np.errstate(invalid="ignore"):
        # (sales hit, code, value per sale, limit, words)
        checks = (
            (own, "own_fit", h, 1.0, lambda v: OWN_FIT_TEXT),
            (~own & (h > lev), "leverage", h, lev,
             lambda v: f"unusual attributes (leverage {_sig(v)} > {_sig(lev)})"),
            (~own & (np.abs(t) > stu), "outlier", t, stu,
             lambda v: f"price far from the model (studentized residual {v:+.2f}, limit ±{stu:g})"),
            (~own & (d > coo), "cooks", d, coo,
             lambda v: f"moves the coefficients (Cook's distance {_sig(v)} > {_sig(coo)})"),
            (~own & np.isfinite(dff) & (np.abs(f) > dff), "dffits", f, dff,
             lambda v: f"moves its own fitted value (DFFITS {v:+.3f}, limit ±{dff:.3f})"),
        )  # fmt: skip
    ranked = np.flatnonzero(np.logical_or.reduce([c[0] for c in checks]))
    ranked = ranked[np.argsort(-np.nan_to_num(d[ranked], nan=np.inf), kind="stable")]
    return tuple(
        SaleFlag(
            int(i),
            int(rows[i]),
            sale_ids[i],
            tuple(
                Finding(code, float(vals[i]), float(limit), words(vals[i]))
                for hit, code, vals, limit, words in checks
                if hit[i]
            ),
        )
        for i in ranked
    )
