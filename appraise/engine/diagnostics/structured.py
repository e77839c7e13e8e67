"""The check-up of a structured fit (one ``onehot`` block absorbed) without the dense design.

The design is :math:`X = [Z, D]` (:mod:`..absorb`): :math:`Z` (n x k) the numeric block,
:math:`D` (n x m) the indicators of the non-reference levels, held as one level code per
sale; :math:`c_g` sales in level g, :math:`\\bar z_g` the level means of Z. Every piece of
:func:`.checkup.diagnose_arrays` is rebuilt from O(nk) passes and p x p matrices:

* **one QR of the design, by blocks.** The indicators are orthogonal, so with the columns
  ordered :math:`[D, Z]`, :math:`Q_1 = DC^{-1/2}` and

  .. math::
     R = \\begin{pmatrix} C^{1/2} & C^{1/2}\\bar Z_D \\\\ 0 & R_{22} \\end{pmatrix},
     \\qquad \\tilde Z = M_D Z = Q_2R_{22},

  :math:`\\bar Z_D` the level means (one row per non-reference level) and
  :math:`R_{22}` the triangle of the absorbed block (a QR over blocks of rows, never the
  whole block at once). :math:`R` gives what the dense path reads from its pivoted QR: the
  singular values of :math:`XL^{-1}` (L the column lengths) for the condition number and
  the variance-decomposition proportions, as :math:`X'X = R'R`;
* **projections** of any vector v on the columns of X (Breusch-Pagan's auxiliary
  regression): :math:`\\hat v = v - (\\tilde v - \\tilde Z b)` with :math:`\\tilde v = M_Dv`
  and :math:`R_{22}'R_{22}b = \\tilde Z'\\tilde v` (Frisch-Waugh-Lovell);
* **influence and leave-one-out** from the fit's hat diagonal
  (:meth:`..absorb.AbsorbedFit.leverage`) and the residuals, by the same formulas
  (:func:`.influence.influence` is called on this module's projection);
* **VIF and GVIF** from :math:`(X'X)^{-1}` (the fit's, by the Schur complement) and the
  centred cross-products of the term's columns: :math:`Z_c'Z_c` directly,
  :math:`Z_c'D_c` column g :math:`= c_g(\\bar z_g - \\bar z)`,
  :math:`D_c'D_c = C - cc'/n`;
* **k-fold cross-validation**: each fold's training fit is the absorbed fit on the other
  folds, solved from sums the data give once. With :math:`d_i` a sale's deviation from its
  level's mean over all sales (:math:`[z_i, y_i]`, the reference level not demeaned),
  :math:`\\delta_g` the mean of :math:`d_i` over level g's training sales and
  :math:`n_{gT}` their number, the training block's cross-product is

  .. math:: S_T = \\textstyle\\sum_i d_id_i' - \\sum_{i\\in H} d_id_i' - \\sum_g n_{gT}
     \\delta_g\\delta_g' \\quad (H\\ \\text{the held-out fold}),

  solved in the coordinates of :math:`R_{22}` (eigenvalues in [0, 1], as the dense path's
  :math:`Q_{train}'Q_{train}`), directions below :data:`.crossval.RANK_TOL` dropped. A
  held-out sale in a level no training sale has, or with a part outside the training
  rows' span, gets no prediction -- the rule of the dense path.

Nothing here is n x p; the largest objects are p x p (the covariance the fit already
holds). The singular value decomposition behind the condition number is O(p^3): beyond
:data:`CONDITION_MAX_COLUMNS` columns it is not run and the result says so.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np
import scipy.linalg

from ..errors import CollinearityError
from .checkup import Diagnostics, assemble_diagnostics, term_groups
from .collinearity import (
    VARIANCE_SHARE_LIMIT,
    Collinearity,
    ConditionNumber,
    NearDependence,
    TermGroupRef,
    collinearity_words,
)
from .crossval import ESTIMABLE_TOL, RANK_TOL, KFold, assign_folds, mdape, rmse, to_price
from .influence import Influence, influence
from .residual_tests import BreuschPagan, ResidualTests, _stats, jarque_bera, residual_words
from .settings import DEFAULT_SETTINGS, DiagnosticSettings

if TYPE_CHECKING:  # pragma: no cover
    from ..absorb import AbsorbedFit
    from ..fitting import FitResult

CONDITION_MAX_COLUMNS = 3000
"""Most design columns for which the condition number's p x p SVD is run (O(p^3): about
0.3 s at 1,000 columns and 10 s at 3,000 on one core of the development machine)."""

_CHUNK = 65_536  # rows per block in row-wise passes


def _blocks(n: int):
    for lo in range(0, n, _CHUNK):
        yield lo, min(lo + _CHUNK, n)


def _tsqr(r: np.ndarray | None, block: np.ndarray) -> np.ndarray:
    """The triangle of the rows of ``r`` stacked on ``block`` (QR over blocks of rows)."""
    stacked = block if r is None else np.vstack([r, block])
    return np.linalg.qr(stacked, mode="r")


class WithinBlock:
    """A numeric block :math:`Z` and level codes: the absorbed regression on :math:`[Z, D]`.

    Parameters
    ----------
    Z:
        (n, k) numeric block, or a sequence of (n, k_i) and (n,) arrays whose columns side
        by side make it (never copied whole: rows are put together a block at a time).
    codes, reference, counts:
        Level of each row, the level without an indicator, rows per level.
    names:
        Labels of Z's columns, for the error of a rank-deficient block.
    check:
        Refuse a rank-deficient block (off for the k-fold's ``[Z, y]``, whose last column
        is the response).

    :attr:`r22` is the k x k triangle of :math:`\\tilde Z` (:math:`\\tilde Z'\\tilde Z =
    R_{22}'R_{22}`), found by a QR over blocks of rows.
    """

    def __init__(
        self,
        Z: np.ndarray | Sequence[np.ndarray],
        codes: np.ndarray,
        reference: int,
        counts: np.ndarray,
        names: Sequence[str] = (),
        *,
        check: bool = True,
    ) -> None:
        parts = [Z] if isinstance(Z, np.ndarray) else list(Z)
        self._parts = [p[:, None] if p.ndim == 1 else p for p in parts]
        self.codes = codes
        self.reference = int(reference)
        self.counts = np.asarray(counts)
        n = self._parts[0].shape[0]
        k = sum(p.shape[1] for p in self._parts)
        self._n = int(n)
        G = len(self.counts)
        columns = [p[:, j] for p in self._parts for j in range(p.shape[1])]
        sums = np.empty((G, k))
        for j, col in enumerate(columns):
            sums[:, j] = np.bincount(codes, weights=col, minlength=G)
        self.sums = sums
        means = sums / np.maximum(self.counts, 1)[:, None]
        means[self.reference] = 0.0
        self.means = means
        r = None
        for lo, hi in _blocks(n):
            r = _tsqr(r, self.within(lo, hi))
        self.r22 = np.zeros((k, k)) if r is None else r
        d = np.abs(np.diag(self.r22))
        norms = np.array([np.sqrt(col @ col) for col in columns])
        rel = d / np.where(norms > 0, norms, 1.0)
        if check and k and rel.min() <= max(n, k) * np.finfo(float).eps:
            labels = list(names) or [f"column {j + 1}" for j in range(k)]
            involved = tuple(labels[j] for j in np.flatnonzero(rel <= max(n, k) * 1e-15))
            raise CollinearityError(
                "the design is rank deficient; these columns repeat what others already say: "
                + ", ".join(involved),
                terms=involved,
            )

    @property
    def n(self) -> int:
        return self._n

    def rows(self, lo: int, hi: int) -> np.ndarray:
        """Rows lo:hi of :math:`Z`."""
        if len(self._parts) == 1:
            return self._parts[0][lo:hi]
        return np.hstack([p[lo:hi] for p in self._parts])

    def within(self, lo: int, hi: int) -> np.ndarray:
        """Rows lo:hi of :math:`\\tilde Z = M_DZ` (level means off, reference rows as they are)."""
        return self.rows(lo, hi) - self.means[self.codes[lo:hi]]

    def level_means(self, v: np.ndarray) -> np.ndarray:
        """(G,) level means of ``v``, zero for the reference level."""
        out = np.bincount(self.codes, weights=v, minlength=len(self.counts))
        out /= np.maximum(self.counts, 1)
        out[self.reference] = 0.0
        return out

    def project(self, v: np.ndarray) -> np.ndarray:
        """Fitted values of ``v`` regressed by least squares on :math:`[Z, D]`."""
        v = np.asarray(v, dtype=float)
        vt = v - self.level_means(v)[self.codes]
        g = np.zeros(self.sums.shape[1])
        for lo, hi in _blocks(self.n):
            g += self.within(lo, hi).T @ vt[lo:hi]
        b = scipy.linalg.cho_solve((self.r22, False), g)
        out = np.empty_like(v)
        for lo, hi in _blocks(self.n):
            out[lo:hi] = v[lo:hi] - (vt[lo:hi] - self.within(lo, hi) @ b)
        return out


class _Projection:
    """What :func:`.influence.influence` reads of a decomposition (sizes, hat diagonal,
    projection), for the absorbed design."""

    def __init__(self, fit: AbsorbedFit, block: WithinBlock) -> None:
        self.n, self.p = fit.n, fit.p
        self._fit, self._block = fit, block

    def hat_diagonal(self) -> np.ndarray:
        return np.array(self._fit.leverage())  # a copy: the fit's own is read-only

    def project(self, v: np.ndarray) -> np.ndarray:
        return self._block.project(v)


# --- the whole design's cross-products, from blocks -------------------------------------------
class BlockDesign:
    """Cross-products of :math:`X = [Z, D]` in design column order, none of them n x p."""

    def __init__(self, fit: AbsorbedFit, block: WithinBlock) -> None:
        self.fit, self.block = fit, block
        a = fit
        n, p = a.n, a.p
        self.others = np.flatnonzero(np.arange(len(a.counts)) != a.reference)
        self.c = a.counts[self.others].astype(float)  # sales of each indicator column
        Z = a.Z
        const_z = np.flatnonzero((np.ptp(Z, axis=0) == 0) & (Z[0] != 0))
        self.const = np.sort(a.z_pos[const_z])
        self.z_mean = Z.mean(axis=0)
        lengths = np.empty(p)
        lengths[a.z_pos] = np.linalg.norm(Z, axis=0)
        lengths[a.d_pos] = np.sqrt(self.c)
        self.lengths = lengths
        self.centred = self.const.size > 0
        ss = np.empty(p)
        if self.centred:
            zss = np.zeros(Z.shape[1])
            for lo, hi in _blocks(n):
                dz = Z[lo:hi] - self.z_mean
                zss += np.einsum("ij,ij->j", dz, dz)
            ss[a.z_pos] = zss
            ss[a.d_pos] = self.c - self.c**2 / n
        else:
            ss[a.z_pos] = np.einsum("ij,ij->j", Z, Z)
            ss[a.d_pos] = self.c
        self.sum_squares = ss
        # design position -> ("z", column of Z) or ("d", indicator column)
        self._where = {int(j): ("z", i) for i, j in enumerate(a.z_pos)}
        self._where.update({int(j): ("d", i) for i, j in enumerate(a.d_pos)})

    def r_factor(self) -> np.ndarray:
        """A p x p triangle-by-blocks ``R`` with :math:`X'X = R'R`, columns in design order."""
        a, b = self.fit, self.block
        m, k = len(a.d_pos), len(a.z_pos)
        sq = np.sqrt(self.c)
        r = np.zeros((m + k, a.p))
        r[np.arange(m), a.d_pos] = sq
        r[:m, a.z_pos] = sq[:, None] * b.means[self.others]
        r[m:, a.z_pos] = b.r22
        return r

    def cross_product(self, cols: Sequence[int]) -> np.ndarray:
        """:math:`X_G'X_G` of the design columns ``cols``, centred when the design has a
        constant (as :func:`.collinearity.group_gvif` builds it)."""
        a, b = self.fit, self.block
        n = a.n
        kinds = [self._where[int(j)] for j in cols]
        zi = np.array([i for kind, i in kinds if kind == "z"], dtype=np.intp)
        di = np.array([i for kind, i in kinds if kind == "d"], dtype=np.intp)
        zloc = np.array([t for t, (kind, _) in enumerate(kinds) if kind == "z"], dtype=np.intp)
        dloc = np.array([t for t, (kind, _) in enumerate(kinds) if kind == "d"], dtype=np.intp)
        out = np.empty((len(cols), len(cols)))
        Zg = a.Z[:, zi]
        lv = self.others[di]
        c = self.c[di]
        if self.centred:
            Zg = Zg - self.z_mean[zi]
            zd = b.sums[np.ix_(lv, zi)].T - np.outer(self.z_mean[zi], c)
            dd = np.diag(c) - np.outer(c, c) / n
        else:
            zd = b.sums[np.ix_(lv, zi)].T
            dd = np.diag(c)
        out[np.ix_(zloc, zloc)] = Zg.T @ Zg
        out[np.ix_(zloc, dloc)] = zd
        out[np.ix_(dloc, zloc)] = zd.T
        out[np.ix_(dloc, dloc)] = dd
        return out


def _group_gvif(design: BlockDesign, cols: Sequence[int], xtx_inv: np.ndarray) -> float:
    idx = np.asarray(cols)
    s_sign, s_log = np.linalg.slogdet(design.cross_product(idx))
    v_sign, v_log = np.linalg.slogdet(xtx_inv[np.ix_(idx, idx)])
    if s_sign <= 0 or v_sign <= 0:
        return float("nan")
    return float(np.exp(s_log + v_log))


def _condition_number(
    design: BlockDesign, names: Sequence[str], threshold: float
) -> tuple[ConditionNumber, str | None]:
    """Belsley's scaled condition number from the blocked R (see
    :func:`.collinearity.condition_number`: the singular values of :math:`XL^{-1}` are those
    of :math:`RL^{-1}`)."""
    p = len(names)
    if p > CONDITION_MAX_COLUMNS:
        nan = float("nan")
        return ConditionNumber(nan, float(threshold), (), ()), (
            f"condition number not computed: {p:,} design columns (its decomposition grows "
            f"with the cube of the columns; computed up to {CONDITION_MAX_COLUMNS:,})"
        )
    _, s, vt = np.linalg.svd(design.r_factor() / design.lengths)
    indices = s[0] / s
    phi = (vt.T / s) ** 2
    share = phi / phi.sum(axis=1, keepdims=True)
    deps = []
    for k in np.flatnonzero(indices > threshold)[::-1]:
        involved = tuple(names[j] for j in np.flatnonzero(share[:, k] > VARIANCE_SHARE_LIMIT))
        deps.append(NearDependence(float(indices[k]), involved))
    cond = ConditionNumber(
        number=float(indices[-1]),
        threshold=float(threshold),
        indices=tuple(float(v) for v in indices),
        dependences=tuple(deps),
    )
    return cond, None


def structured_collinearity(
    design: BlockDesign,
    names: Sequence[str],
    groups: Sequence[TermGroupRef],
    *,
    vif_limit: float,
    gvif_root_limit: float,
    condition_threshold: float,
) -> Collinearity:
    """:func:`.collinearity.collinearity` (the same numbers and words) from the blocks."""
    xtx_inv = design.fit.xtx_inv
    col_vif = design.sum_squares * np.diag(xtx_inv)
    col_vif[design.const] = np.nan
    cond, skipped = _condition_number(design, names, condition_threshold)
    return collinearity_words(
        names,
        groups,
        col_vif,
        set(design.const.tolist()),
        lambda cols: _group_gvif(design, cols, xtx_inv),
        cond,
        vif_limit=vif_limit,
        gvif_root_limit=gvif_root_limit,
        condition_threshold=condition_threshold,
        notes=(skipped,) if skipped else (),
    )


# --- residual tests ----------------------------------------------------------------------------
def structured_residual_tests(
    resid: np.ndarray,
    design: BlockDesign,
    *,
    alpha: float,
    response: str,
    cov_type: str,
) -> ResidualTests:
    """:func:`.residual_tests.residual_tests` with Breusch-Pagan's auxiliary regression of
    :math:`\\hat e^2` on the design solved by absorption (an intercept joins Z when the
    design has no constant column, as the dense path adds one)."""
    a = design.fit
    e = np.asarray(resid, dtype=float)
    n = e.size
    if design.const.size == 0:
        block = WithinBlock([np.ones(n), a.Z], a.codes, a.reference, a.counts)
        df = a.p
    else:
        block = design.block
        df = a.p - 1
    u = e**2
    fitted = block.project(u)
    tss = float(np.sum((u - u.mean()) ** 2))
    ess = float(np.sum((fitted - u.mean()) ** 2))
    r2 = ess / tss if tss > 0 else 0.0
    lm = n * r2
    f = (r2 / df) / ((1 - r2) / (n - df - 1)) if r2 < 1 else float("inf")
    stats = _stats()
    f_p = float(stats.f.sf(f, df, n - df - 1))
    koenker = BreuschPagan("koenker", lm, df, float(stats.chi2.sf(lm, df)), f, f_p)
    sigma2_ml = float(e @ e) / n
    lm_orig = ess / sigma2_ml**2 / 2.0
    original = BreuschPagan("original", lm_orig, df, float(stats.chi2.sf(lm_orig, df)), f, f_p)
    return residual_words(koenker, original, jarque_bera(e), alpha, response, cov_type)


# --- k-fold cross-validation -------------------------------------------------------------------
def structured_kfold(
    fit: AbsorbedFit,
    y: np.ndarray,
    price: np.ndarray,
    *,
    response: str,
    folds: int = 10,
    seed: int = 0,
) -> KFold:
    """:func:`.crossval.kfold` for the absorbed design: the same folds, the same training
    fits (least squares on the other folds) and the same rule for sales that cannot be
    predicted; see the module text for the sums each fold is solved from."""
    Z, codes = fit.Z, fit.codes
    y = np.asarray(y, dtype=float)
    price = np.asarray(price, dtype=float)
    n, k = Z.shape
    G = len(fit.counts)
    ref = fit.reference
    K = int(min(folds, n))
    fold = assign_folds(n, K, seed)
    W = WithinBlock([Z, y], codes, ref, fit.counts, check=False)  # [Z, y], level means
    # The triangle of [Z~, y~] and, per fold, sums over its held-out rows.
    fl = fold * G + codes
    n_h = np.bincount(fl, minlength=K * G).reshape(K, G)  # held-out sales per level
    sums_h = np.zeros((K * G, k + 1))
    gram_h = np.zeros((K, k + 1, k + 1))
    for lo, hi in _blocks(n):
        d = W.within(lo, hi)
        f_blk = fold[lo:hi]
        for f in range(K):
            rows = d[f_blk == f]
            gram_h[f] += rows.T @ rows
        for j in range(k + 1):
            sums_h[:, j] += np.bincount(fl[lo:hi], weights=d[:, j], minlength=K * G)
    sums_h = sums_h.reshape(K, G, k + 1)
    total = W.sums - W.counts[:, None] * W.means  # sum of d over each level (about zero)
    gram_all = W.r22.T @ W.r22
    r22 = W.r22[:k, :k]
    pred = np.full(n, np.nan)
    for f in range(K):
        n_t = fit.counts - n_h[f]  # training sales per level
        present = n_t > 0
        delta = np.zeros((G, k + 1))
        t_sums = total - sums_h[f]
        delta[present] = t_sums[present] / n_t[present][:, None]
        delta[ref] = 0.0
        s_t = gram_all - gram_h[f] - (delta * n_t[:, None]).T @ delta
        # In the coordinates of R22 (eigenvalues in [0, 1], like Q_train'Q_train).
        a_zz = scipy.linalg.solve_triangular(r22, s_t[:k, :k], trans="T")
        a_zz = scipy.linalg.solve_triangular(r22, a_zz.T, trans="T").T
        lam, vec = np.linalg.eigh((a_zz + a_zz.T) / 2.0)
        keep = lam > RANK_TOL
        g = scipy.linalg.solve_triangular(r22, s_t[:k, k], trans="T")
        c = vec[:, keep] @ ((vec[:, keep].T @ g) / lam[keep])
        beta = scipy.linalg.solve_triangular(r22, c)  # the training fit's Z coefficients
        # fitted value of a sale of level g: mean_g + delta_g,y + (z - mean_g - delta_g,z)'beta
        offset = W.means[:, k] + delta[:, k] - (W.means[:, :k] + delta[:, :k]) @ beta
        zb = Z @ beta
        held = np.flatnonzero(fold == f)
        guess = zb[held] + offset[codes[held]]
        lv = codes[held]
        bad = ~present[lv] & (lv != ref)
        if not keep.all():
            dev = Z[held] - (W.means[lv, :k] + delta[lv, :k])
            u = scipy.linalg.solve_triangular(r22, dev.T, trans="T").T
            outside = np.linalg.norm(u @ vec[:, ~keep], axis=1)
            bad |= outside > ESTIMABLE_TOL * np.linalg.norm(u, axis=1)
        guess[bad] = np.nan
        smear = 1.0
        if response == "log":
            train = fold != f
            e = np.exp(y[train] - zb[train] - offset[codes[train]])
            smear = float(e.sum() / train.sum())
        pred[held] = to_price(guess, response, smear)
    return KFold(
        folds=K,
        seed=int(seed),
        fold=fold,
        price_prediction=pred,
        rmse_price=rmse(pred, price),
        mdape=mdape(pred, price),
    )


# --- the whole check-up ------------------------------------------------------------------------
def diagnose_structured(
    fit: FitResult, settings: DiagnosticSettings = DEFAULT_SETTINGS
) -> Diagnostics:
    """:func:`.checkup.diagnose_arrays` for a fit with ``fit.structure`` (an absorbed
    ``onehot`` block), without the dense design; the coverage by segment is added by
    :func:`.checkup.diagnose` as on the dense path."""
    a = fit.structure
    if a is None:
        raise ValueError("diagnose_structured needs a structured fit (fit.structure)")
    names = tuple(fit.design.names)
    groups = term_groups(names, fit.design.groups)
    if not groups:
        groups = tuple(
            TermGroupRef(names[int(j)], "plain", (int(j),))
            for i, j in enumerate(a.z_pos)
            if np.ptp(a.Z[:, i]) != 0
        ) + tuple(TermGroupRef(names[int(j)], "plain", (int(j),)) for j in a.d_pos)
        groups = tuple(sorted(groups, key=lambda g: g.columns[0]))
    level = float(settings.level if settings.level is not None else fit.spec.level)
    y = np.asarray(fit.y, dtype=float)
    price = np.asarray(fit.price, dtype=float)
    block = WithinBlock(a.Z, a.codes, a.reference, a.counts, [names[j] for j in a.z_pos])
    infl: Influence = influence(None, y, _Projection(a, block))  # type: ignore[arg-type]
    design = BlockDesign(a, block)
    coll = structured_collinearity(
        design,
        names,
        groups,
        vif_limit=settings.vif_limit,
        gvif_root_limit=settings.gvif_root_limit,
        condition_threshold=settings.condition_threshold,
    )
    tests = structured_residual_tests(
        infl.resid, design, alpha=settings.alpha, response=fit.spec.response,
        cov_type=fit.cov_type,
    )  # fmt: skip
    folds = structured_kfold(
        a, y, price, response=fit.spec.response, folds=settings.folds, seed=settings.seed
    )
    return assemble_diagnostics(
        infl,
        coll,
        tests,
        folds,
        price,
        names=names,
        response=fit.spec.response,
        level=level,
        rows=np.asarray(fit.rows, dtype=int),
        sale_ids=tuple(fit.sale_ids),
        settings=settings,
        spread=fit.spread,
    )


__all__ = [
    "CONDITION_MAX_COLUMNS",
    "BlockDesign",
    "WithinBlock",
    "diagnose_structured",
    "structured_collinearity",
    "structured_kfold",
    "structured_residual_tests",
]
