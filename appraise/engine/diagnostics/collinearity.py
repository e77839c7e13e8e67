"""Redundant terms: variance inflation factors, generalized VIFs, condition number.

All three come from the QR decomposition of the design already made for the
influence measures, plus cross-products of a few columns; no regression per column.

VIF of column j (regressing it on all the other columns, as statsmodels'
``variance_inflation_factor`` does):
:math:`\\mathrm{VIF}_j = 1/(1-R_j^2) = S_{jj}\\,[(X'X)^{-1}]_{jj}`, where
:math:`S_{jj} = \\sum_i (x_{ij} - \\bar x_j)^2` when the design has an intercept
(R² centred) and :math:`\\sum_i x_{ij}^2` when it has none (R² uncentred).

Generalized VIF of a group G of columns (Fox and Monette 1992, JASA 87:178-183),
with R the correlation matrix of the non-intercept columns:
:math:`\\mathrm{GVIF}_G = \\det R_{GG}\\,\\det R_{\\bar G\\bar G} / \\det R`.
By the partitioned inverse this equals :math:`\\det S_{GG}\\,\\det[(X'X)^{-1}]_{GG}`
(S the centred cross-product), which is what is computed; for one column it is the
VIF. :math:`\\mathrm{GVIF}^{1/(2\\,df)}` makes groups of different sizes comparable
(it is on the scale of :math:`\\sqrt{\\mathrm{VIF}}`).

Condition number (Belsley, Kuh and Welsch 1980; Belsley 1991): every column of X,
the intercept included, scaled to unit length and *not* centred; the ratio of the
largest to the smallest singular value. Variance-decomposition proportions name the
columns caught in each near-dependence (share > 0.5 of a coefficient's variance tied
to a condition index above the threshold).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass

import numpy as np

from .decomposition import QRDecomposition, decompose
from .plain import plain

VARIANCE_SHARE_LIMIT = 0.5
"""Belsley's rule of thumb (memory): a column is involved in a near-dependence when
more than half of its coefficient's variance is tied to that condition index."""


@dataclass(frozen=True)
class TermGroupRef:
    """A term of the model and the positions of its design columns."""

    expression: str
    kind: str
    columns: tuple[int, ...]
    inputs: tuple[str, ...] = ()
    """Raw columns the term reads; terms sharing one are collinear by construction."""


@dataclass(frozen=True)
class ColumnVIF:
    name: str
    vif: float

    def to_dict(self) -> dict:
        return plain(asdict(self))


@dataclass(frozen=True)
class TermCollinearity:
    """A term's (generalized) VIF; ``df`` is its number of columns."""

    expression: str
    kind: str
    columns: tuple[str, ...]
    df: int
    gvif: float
    gvif_root: float
    """:math:`\\mathrm{GVIF}^{1/(2 df)}`."""
    flagged: bool
    rule: str

    def to_dict(self) -> dict:
        return plain(
            {
                "term": self.expression,
                "kind": self.kind,
                "columns": list(self.columns),
                "df": self.df,
                "gvif": self.gvif,
                "gvif_root": self.gvif_root,
                "flagged": self.flagged,
                "rule": self.rule,
            }
        )


@dataclass(frozen=True)
class NearDependence:
    """One condition index above the threshold and the columns it involves."""

    index: float
    columns: tuple[str, ...]

    def to_dict(self) -> dict:
        return plain({"condition_index": self.index, "columns": list(self.columns)})


@dataclass(frozen=True)
class ConditionNumber:
    number: float
    threshold: float
    indices: tuple[float, ...]
    dependences: tuple[NearDependence, ...]
    scaling: str = "columns (intercept included) scaled to unit length, not centred (Belsley)"

    @property
    def exceeds(self) -> bool:
        return self.number > self.threshold

    def to_dict(self) -> dict:
        return plain(
            {
                "number": self.number,
                "threshold": self.threshold,
                "exceeds": self.exceeds,
                "scaling": self.scaling,
                "indices": list(self.indices),
                "near_dependences": [d.to_dict() for d in self.dependences],
            }
        )


@dataclass(frozen=True)
class Collinearity:
    columns: tuple[ColumnVIF, ...]
    terms: tuple[TermCollinearity, ...]
    condition: ConditionNumber
    warnings: tuple[str, ...]

    def to_dict(self) -> dict:
        return plain(
            {
                "columns": [c.to_dict() for c in self.columns],
                "terms": [t.to_dict() for t in self.terms],
                "condition": self.condition.to_dict(),
                "warnings": list(self.warnings),
            }
        )


def constant_columns(X: np.ndarray) -> np.ndarray:
    """Positions of columns that hold one non-zero value throughout (an intercept)."""
    X = np.asarray(X, dtype=float)
    return np.flatnonzero((np.ptp(X, axis=0) == 0) & (X[0] != 0))


def _cross_product(X: np.ndarray, cols: Sequence[int], centred: bool) -> np.ndarray:
    block = X[:, list(cols)]
    if centred:
        block = block - block.mean(axis=0)
    return block.T @ block


def group_gvif(X: np.ndarray, cols: Sequence[int], xtx_inv: np.ndarray, centred: bool) -> float:
    """:math:`\\det S_{GG}\\,\\det[(X'X)^{-1}]_{GG}` for the columns ``cols`` of X."""
    idx = np.asarray(cols)
    s_sign, s_log = np.linalg.slogdet(_cross_product(X, idx, centred))
    v_sign, v_log = np.linalg.slogdet(xtx_inv[np.ix_(idx, idx)])
    if s_sign <= 0 or v_sign <= 0:
        return float("nan")
    return float(np.exp(s_log + v_log))


def vifs(X: np.ndarray, qr: QRDecomposition | None = None) -> np.ndarray:
    """VIF of every column; NaN for the intercept (constant) column.

    Matches ``statsmodels.stats.outliers_influence.variance_inflation_factor`` on a
    design with an intercept (centred R²); on one without, the R² is uncentred, as
    statsmodels computes it with ``standardize=False``.
    """
    X = np.asarray(X, dtype=float)
    qr = decompose(X) if qr is None else qr
    w = qr.inverse_factor()
    inv_diag = np.einsum("ij,ij->i", w, w)
    const = constant_columns(X)
    centred = const.size > 0
    base = X - X.mean(axis=0) if centred else X
    out = np.einsum("ij,ij->j", base, base) * inv_diag
    out[const] = np.nan
    return out


def condition_number(
    X: np.ndarray,
    names: Sequence[str],
    threshold: float,
    qr: QRDecomposition | None = None,
) -> ConditionNumber:
    """Belsley's scaled condition number and the near-dependences above ``threshold``.

    Singular values of :math:`X D^{-1}` (D the column lengths) equal those of
    :math:`R_u D^{-1}`, a p x p matrix, because Q has orthonormal columns.
    """
    X = np.asarray(X, dtype=float)
    qr = decompose(X) if qr is None else qr
    lengths = np.linalg.norm(X, axis=0)
    _, s, vt = np.linalg.svd(qr.r_unpivoted() / lengths)
    indices = s[0] / s
    phi = (vt.T / s) ** 2  # phi[j, k] = v_jk^2 / s_k^2
    share = phi / phi.sum(axis=1, keepdims=True)
    deps = []
    for k in np.flatnonzero(indices > threshold)[::-1]:
        involved = tuple(names[j] for j in np.flatnonzero(share[:, k] > VARIANCE_SHARE_LIMIT))
        deps.append(NearDependence(float(indices[k]), involved))
    return ConditionNumber(
        number=float(indices[-1]),
        threshold=float(threshold),
        indices=tuple(float(v) for v in indices),
        dependences=tuple(deps),
    )


def collinearity(
    X: np.ndarray,
    names: Sequence[str],
    groups: Sequence[TermGroupRef],
    *,
    vif_limit: float = 10.0,
    gvif_root_limit: float = float(np.sqrt(10.0)),
    condition_threshold: float = 30.0,
    qr: QRDecomposition | None = None,
) -> Collinearity:
    """VIF per column, (G)VIF per term, condition number, and warnings in words."""
    X = np.asarray(X, dtype=float)
    qr = decompose(X, names) if qr is None else qr
    col_vif = vifs(X, qr)
    const = set(constant_columns(X).tolist())
    centred = bool(const)
    w = qr.inverse_factor()
    xtx_inv = w @ w.T
    return collinearity_words(
        names,
        groups,
        col_vif,
        const,
        lambda cols: group_gvif(X, cols, xtx_inv, centred),
        condition_number(X, names, condition_threshold, qr),
        vif_limit=vif_limit,
        gvif_root_limit=gvif_root_limit,
        condition_threshold=condition_threshold,
    )


def collinearity_words(
    names: Sequence[str],
    groups: Sequence[TermGroupRef],
    col_vif: np.ndarray,
    const: set[int],
    gvif_of: Callable[[tuple[int, ...]], float],
    cond: ConditionNumber,
    *,
    vif_limit: float,
    gvif_root_limit: float,
    condition_threshold: float,
    notes: Sequence[str] = (),
) -> Collinearity:
    """The :class:`Collinearity` of a design from its column VIFs, its constant columns,
    a term's GVIF (``gvif_of(columns)``) and its condition number: the terms flagged and
    the warnings in words (``notes`` go before the condition number's). Shared by the
    dense check-up and the structured one (:mod:`.structured`)."""
    terms = []
    warnings = []
    for g in groups:
        cols = tuple(c for c in g.columns if c not in const)
        if not cols:
            continue
        df = len(cols)
        gvif = float(col_vif[cols[0]]) if df == 1 else gvif_of(cols)
        root = gvif ** (1.0 / (2 * df))
        if df == 1:
            flagged, rule = gvif > vif_limit, f"VIF > {vif_limit:g}"
        else:
            flagged = root > gvif_root_limit
            rule = f"GVIF^(1/(2 df)) > {gvif_root_limit:.3g}"
        terms.append(
            TermCollinearity(
                g.expression,
                g.kind,
                tuple(names[c] for c in cols),
                df,
                gvif,
                float(root),
                bool(flagged),
                rule,
            )
        )
        if flagged:
            shown = f"VIF {gvif:.1f}" if df == 1 else f"GVIF^(1/(2df)) {root:.2f}"
            kin = [o.expression for o in groups if o is not g and set(o.inputs) & set(g.inputs)]
            why = (
                f"; partly by construction, as it reads the same inputs as "
                f"{', '.join(repr(k) for k in kin)}: the joint effect of those terms is still "
                "estimated well"
                if kin
                else ""
            )
            warnings.append(
                f"'{g.expression}' is largely explained by the other terms ({shown}; "
                f"{rule}): its own coefficient is unstable{why}"
            )
    warnings.extend(notes)
    if cond.exceeds:
        worst = cond.dependences[0].columns if cond.dependences else ()
        warnings.append(
            f"condition number {cond.number:.0f} > {condition_threshold:g} (columns scaled to "
            "unit length): near-dependence among the columns"
            + (f" {', '.join(worst)}" if worst else "")
            + "; centring or rescaling inputs, or dropping a term, makes coefficients stabler"
        )
    columns = tuple(
        ColumnVIF(names[j], float(col_vif[j])) for j in range(len(names)) if j not in const
    )
    return Collinearity(columns, tuple(terms), cond, tuple(warnings))
