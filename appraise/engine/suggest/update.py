"""Cross-validated errors of "the model plus one more block of columns", without refitting.

The search scores hundreds of candidate changes per step. Refitting every candidate on
every training fold would cost ``folds x candidates`` least-squares fits per step; here
each training fold is decomposed once and a candidate block ``Z`` (one or more design
columns) is scored by a block update of that decomposition.

For one training fold with rows ``t`` and held-out rows ``h``: the cross-product of the
current design's training rows is decomposed, :math:`X_t'X_t = V \\Lambda V'` (rank r, from
the full cross-product minus the held-out rows'), giving the basis
:math:`T = X V_r \\Lambda_r^{-1/2}` (orthonormal on the training rows, the ``U_r`` of the
thin SVD of :math:`X_t`; on the held-out rows ``T_h`` carries the prediction), the training
residual ``r_t`` and the held-out residual ``e_h`` of the current model. Adding ``Z`` (partitioned regression):

.. math::

    B = T_t' Z_t, \\qquad S = Z_t'Z_t - B'B = \\tilde Z_t'\\tilde Z_t, \\qquad
    \\gamma = S^{+} Z_t' r_t, \\qquad
    e^{new}_h = e_h - (Z_h - T_h B)\\,\\gamma

where :math:`\\tilde Z_t = Z_t - T_t B` is Z with the current model's training span
removed and :math:`S^{+}` the pseudo-inverse (a direction Z does not add on these
training rows, such as a category level absent from them, gets no coefficient, as a
minimum-norm least-squares refit would give it). The cost is ``n p q`` per candidate
instead of ``n (p+q)^2`` per fold.

Leave-one-out is the special case ``folds = n``; it is exact from one decomposition of
all rows: with ``U`` the basis of X, ``h_i`` the leverage and ``r`` the residual,
adding Z gives :math:`r^{new} = r - \\tilde Z \\gamma` and
:math:`h^{new}_i = h_i + \\tilde z_i' S^{+} \\tilde z_i`, and the held-out residual is
:math:`r^{new}_i / (1 - h^{new}_i)`.

Columns are standardised (centred when the design has an intercept, scaled to unit
spread) before any of this: the model's span, and so every prediction, is unchanged,
and the decompositions stay well conditioned. Dropping a block J is scored from
:math:`C = (X_t'X_t)^{-1}` and the coefficients (:meth:`CVState.score_drop`); replacing
one block by another as drop-then-add in closed form (:meth:`CVState.score_swaps`).
Agreement with a refit of every fold by statsmodels is a test (1e-10 relative).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import cached_property

import numpy as np

RANK_TOL = 1e-10
"""An eigenvalue of a Schur complement below ``RANK_TOL`` times the largest is zero."""

EIGEN_TOL = 1e-12
"""An eigenvalue of a training fold's cross-product below ``EIGEN_TOL`` times the largest
(a singular value below a millionth of the largest) is treated as zero."""

LEVERAGE_ONE = 1 - 1e-8
"""Leverage at or above this has no leave-one-out residual."""


def standardise(block: np.ndarray, centre: bool) -> np.ndarray:
    """Columns centred (when ``centre``) and divided by their root mean square.

    A column that is constant (or zero) after centring comes back as zeros: it adds
    nothing to a model with an intercept.
    """
    z = np.asarray(block, dtype=float)
    if z.ndim == 1:
        z = z[:, None]
    if centre:
        z = z - z.mean(axis=0)
    scale = np.sqrt(np.mean(z * z, axis=0)) if z.shape[0] else np.zeros(z.shape[1])
    size = np.max(np.abs(z), axis=0) if z.shape[0] else np.zeros(z.shape[1])
    ok = scale > 1e-12 * np.maximum(size, 1e-300)
    out = np.zeros_like(z)
    out[:, ok] = z[:, ok] / scale[ok]
    return out


def _basis(gram: np.ndarray, X: np.ndarray) -> tuple[np.ndarray, np.ndarray, int]:
    """``T = X W`` with ``W = V_r \\Lambda_r^{-1/2}`` (zero-padded to p columns), the rank r.

    ``gram = X_t'X_t = V \\Lambda V'`` of the training rows (standardised columns keep it
    well conditioned); ``T`` restricted to the training rows is then orthonormal, the
    ``U_r`` of the thin SVD :math:`X_t = U_r S_r V_r'` with :math:`S_r^2 = \\Lambda_r`.
    """
    p = X.shape[1]
    if p == 0:
        return np.zeros((X.shape[0], 0)), np.zeros((0, 0)), 0
    lam, vec = np.linalg.eigh(gram)
    top = float(lam[-1])
    keep = lam > EIGEN_TOL * top if top > 0 else np.zeros(p, dtype=bool)
    w = np.zeros((p, p))
    w[:, : int(keep.sum())] = vec[:, keep] / np.sqrt(lam[keep])
    return X @ w, w, int(keep.sum())


def _pinv_solve(
    S: np.ndarray, c: np.ndarray, scale: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Batched ``S^+ c``, ``S^+`` and whether S is of full rank, for symmetric PSD S (..., q, q).

    An eigenvalue below ``RANK_TOL * scale`` counts as zero; ``scale`` (...,) is the size
    of the block before the current span was taken out (the largest diagonal of
    :math:`Z_t'Z_t`), so a block lying in that span is seen as adding nothing.
    """
    lam, vec = np.linalg.eigh(S)
    keep = lam > RANK_TOL * np.maximum(np.asarray(scale)[..., None], 1e-300)
    inv = np.where(keep, 1.0 / np.where(keep, lam, 1.0), 0.0)
    s_plus = np.einsum("...ij,...j,...kj->...ik", vec, inv, vec)
    return np.einsum("...ij,...j->...i", s_plus, c), s_plus, np.all(keep, axis=-1)


def _loo(r: np.ndarray, h: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(h < LEVERAGE_ONE, r / (1.0 - h), np.nan)


@dataclass(frozen=True, eq=False)
class CVState:
    """The cross-validated fit of one design, ready to score added and dropped blocks.

    ``heldout`` holds each sale's held-out residual (observed minus predicted by a fit
    that did not see it), on the response scale; NaN where a sale has none (leave-one-out
    at leverage 1). ``folds`` is the fold of each sale (``None`` for leave-one-out, which
    is held as a single "fold" of all rows whose residuals are turned into deleted
    residuals through the leverage). Build with :func:`cv_state`.
    """

    X: np.ndarray
    y: np.ndarray
    folds: np.ndarray | None
    heldout: np.ndarray
    centre: bool
    _T: np.ndarray  # (K, n, p) basis X W_f; for leave-one-out K = 1
    _W: np.ndarray  # (K, p, p)
    _coef: np.ndarray  # (K, p) coefficients on the basis
    _full_rank: bool  # every training fold of full rank p
    _resid: np.ndarray  # (K, n) training residuals, 0 on held-out rows
    _train: np.ndarray  # (K, n) 1.0 on training rows
    _fold_index: np.ndarray  # (n,) fold whose fit predicts each row (0 for leave-one-out)
    _leverage: np.ndarray | None  # leave-one-out only

    @property
    def n(self) -> int:
        return int(self.y.size)

    @property
    def p(self) -> int:
        return int(self.X.shape[1])

    @property
    def loo(self) -> bool:
        return self.folds is None

    @property
    def mse(self) -> float:
        """Mean squared held-out residual over the sales that have one."""
        e = self.heldout[np.isfinite(self.heldout)]
        return float(np.mean(e * e)) if e.size else float("nan")

    def _beta_cov(self) -> tuple[np.ndarray, np.ndarray]:
        """Per fold: coefficients (K, p) and :math:`(X_t'X_t)^{-1}` (K, p, p) of the design."""
        return self._coefficients

    @cached_property
    def _coefficients(self) -> tuple[np.ndarray, np.ndarray]:
        beta = np.einsum("kij,kj->ki", self._W, self._coef)
        cov = np.einsum("kij,klj->kil", self._W, self._W)
        return beta, cov

    @cached_property
    def _held_rows(self) -> tuple[np.ndarray, ...]:
        """Row numbers held out of each training fold (none for leave-one-out)."""
        if self.loo:
            return (np.empty(0, dtype=int),)
        return tuple(np.flatnonzero(self._fold_index == f) for f in range(self._T.shape[0]))

    def _fold_cross(self, A: np.ndarray, Bm: np.ndarray) -> np.ndarray:
        """:math:`A_t'B_t` for every training fold: (K, a, b)."""
        full = A.T @ Bm
        return np.stack([full - A[r].T @ Bm[r] if r.size else full for r in self._held_rows])

    def _finish(self, r_or_e: np.ndarray, h: np.ndarray | None) -> np.ndarray:
        return _loo(r_or_e, h) if self.loo else r_or_e

    # -- adding blocks ---------------------------------------------------------
    def _add_parts(self, Z: np.ndarray):
        """What every added column needs: ``B_f = T_t'Z_t``, ``Z_t'r_t`` and ``Z_h - T_h B``."""
        T = self._T
        # B_f = T_t'Z_t = W_f'(X'Z - X_h'Z_h): one pass over all rows, then a small product
        XZ = self.X.T @ Z
        B = np.empty((T.shape[0], self.p, Z.shape[1]))
        for f in range(T.shape[0]):
            rows = self._held_rows[f]
            B[f] = self._W[f].T @ (XZ - self.X[rows].T @ Z[rows] if rows.size else XZ)
        if self.loo:
            Zh = Z - T[0] @ B[0]
            Zh -= T[0] @ (T[0].T @ Zh)  # re-orthogonalise once (Gram-Schmidt twice)
        else:
            Zh = Z.copy()
            for f in range(T.shape[0]):
                rows = self._fold_index == f
                Zh[rows] -= T[f][rows] @ B[f]
        return B, self._resid @ Z, Zh

    def score_add(self, blocks: Sequence[np.ndarray]) -> np.ndarray:
        """Held-out residuals (n, m) of the current design plus each block in turn.

        Each block is (n, q), standardised like the design's columns
        (:func:`standardise`). A column in the current span (on a training fold)
        changes nothing there.
        """
        if not blocks:
            return np.empty((self.n, 0))
        Z = np.hstack(blocks)
        edges = np.concatenate([[0], np.cumsum([b.shape[1] for b in blocks])])
        B, C, Zh = self._add_parts(Z)
        out = np.empty((self.n, len(blocks)))
        fi = self._fold_index
        single = np.flatnonzero(np.diff(edges) == 1)
        if single.size:  # one-column blocks all at once: S and gamma are scalars per fold
            cols = edges[single]
            Zs, Zhs = Z[:, cols], Zh[:, cols]
            if self.loo:
                S = np.sum(Zhs * Zhs, axis=0)[None]
            else:
                S = self._train @ (Zs * Zs) - np.einsum("kpq,kpq->kq", B[:, :, cols], B[:, :, cols])
            ref = self._train @ (Zs * Zs)
            ok = S > RANK_TOL * np.maximum(ref, 1e-300)
            gamma = np.where(ok, C[:, cols] / np.where(ok, S, 1.0), 0.0)  # (K, m1)
            e = self._base()[:, None] - Zhs * gamma[fi]
            h = None
            if self.loo:
                h = self._leverage[:, None] + np.where(
                    ok[0], Zhs * Zhs / np.where(ok[0], S[0], 1.0), 0.0
                )
            out[:, single] = _loo(e, h) if self.loo else e
        for j in np.flatnonzero(np.diff(edges) != 1):
            sl = slice(edges[j], edges[j + 1])
            gamma, s_plus, _ = self._gamma(Z[:, sl], B[:, :, sl], C[:, sl], Zh[:, sl])
            e = self._base() - np.einsum("nq,nq->n", Zh[:, sl], gamma[fi])
            h = None
            if self.loo:
                h = self._leverage + np.einsum("nq,qr,nr->n", Zh[:, sl], s_plus[0], Zh[:, sl])
            out[:, j] = self._finish(e, h)
        return out

    def _base(self) -> np.ndarray:
        """Residuals the updates start from: held-out (k-fold) or ordinary (leave-one-out)."""
        return self._resid[0] if self.loo else self.heldout

    def _gamma(self, Zj, Bj, Cj, Zhj):
        ZZ = self._fold_cross(Zj, Zj)
        scale = np.max(np.diagonal(ZZ, axis1=1, axis2=2), axis=-1)
        if self.loo:
            S = (Zhj.T @ Zhj)[None]
        else:
            S = ZZ - np.einsum("kpq,kpr->kqr", Bj, Bj)
        return _pinv_solve(S, Cj, scale)

    # -- dropping blocks --------------------------------------------------------
    def score_drop(self, columns: Sequence[int]) -> np.ndarray:
        """Held-out residuals (n,) of the design without ``columns``.

        With :math:`C = (X_t'X_t)^{-1}` and :math:`\\beta` of a training fold and J the
        dropped columns, the reduced fit predicts
        :math:`\\hat y - X C_{\\cdot J} C_{JJ}^{-1} \\beta_J`; for leave-one-out the
        leverage falls by the diagonal of :math:`X C_{\\cdot J} C_{JJ}^{-1} C_{J\\cdot} X'`.
        A rank-deficient fold is decomposed again instead.
        """
        J = np.asarray(columns, dtype=int)
        if not self._full_rank:
            return self.without(J).heldout
        beta, cov = self._beta_cov()
        return self._drop(self.X, beta, cov, J, self._base(), self._leverage)

    def _drop(self, X, beta, cov, J, base, leverage) -> np.ndarray:
        cJ = cov[:, :, J]  # (K, P, |J|)
        cJJ = cov[:, J][:, :, J]
        m = np.linalg.solve(cJJ, beta[:, J][:, :, None])[:, :, 0]  # (K, |J|)
        v = np.einsum("kpj,kj->kp", cJ, m)
        e = base + np.einsum("np,np->n", X, v[self._fold_index])
        h = None
        if self.loo:
            xc = X @ cJ[0]
            h = leverage - np.einsum("nj,jl,nl->n", xc, np.linalg.inv(cJJ[0]), xc)
        return self._finish(e, h)

    def score_swap(self, columns: Sequence[int], block: np.ndarray) -> np.ndarray:
        """Held-out residuals (n,) of the design without ``columns`` and with ``block``."""
        return self.score_swaps(columns, [block])[:, 0]

    def score_swaps(self, columns: Sequence[int], blocks: Sequence[np.ndarray]) -> np.ndarray:
        """Held-out residuals (n, m) of the design without ``columns``, plus each block.

        Drop, then add, per training fold, from :math:`C = (X_t'X_t)^{-1}` and
        :math:`\\beta`: with k the kept and J the dropped columns,
        :math:`C_r = C_{kk} - C_{kJ} C_{JJ}^{-1} C_{Jk}`,
        :math:`\\beta_r = \\beta_k - C_{kJ} C_{JJ}^{-1} \\beta_J`; then for the block,
        :math:`G = X_{t,k}'Z_t`, :math:`A = C_r G`, :math:`S = Z_t'Z_t - G'A`,
        :math:`\\gamma = S^{+}(Z_t'y_t - G'\\beta_r)` and the held-out residual
        :math:`e_r - (Z_h - X_{h,k} A)\\gamma`. A fold of less than full rank is
        decomposed again without the columns instead.
        """
        J = np.asarray(columns, dtype=int)
        if not blocks:
            return np.empty((self.n, 0))
        if not self._full_rank:
            return self.without(J).score_add(blocks)
        keep = np.setdiff1d(np.arange(self.p), J)
        beta, cov = self._beta_cov()
        fi = self._fold_index
        inv_jj = np.linalg.inv(cov[:, J][:, :, J])
        D = cov[:, keep][:, :, J] @ inv_jj
        cov_r = cov[:, keep][:, :, keep] - D @ cov[:, J][:, :, keep]
        beta_r = beta[:, keep] - np.einsum("kij,kj->ki", D, beta[:, J])
        v = np.einsum("kpj,kj->kp", cov[:, :, J], np.einsum("kij,kj->ki", inv_jj, beta[:, J]))
        e_r = self._base() + np.einsum("np,np->n", self.X, v[fi])
        h_r = None
        if self.loo:
            xc = self.X @ cov[0][:, J]
            h_r = self._leverage - np.einsum("nj,jl,nl->n", xc, inv_jj[0], xc)
        Xk = self.X[:, keep]
        Z = np.hstack(blocks)
        edges = np.concatenate([[0], np.cumsum([b.shape[1] for b in blocks])])
        K = cov.shape[0]
        G = np.repeat((Xk.T @ Z)[None], K, axis=0)  # X_t'Z_t per fold
        Zy = np.repeat((Z.T @ self.y)[None], K, axis=0)
        held = [] if self.loo else [fi == f for f in range(K)]
        for f, rows in enumerate(held):
            G[f] -= Xk[rows].T @ Z[rows]
            Zy[f] -= Z[rows].T @ self.y[rows]
        A = cov_r @ G
        c = Zy - np.einsum("kiq,ki->kq", G, beta_r)
        Zh = Z - Xk @ A[0] if self.loo else Z.copy()
        for f, rows in enumerate(held):
            Zh[rows] -= Xk[rows] @ A[f]
        out = np.empty((self.n, len(blocks)))
        for j in range(len(blocks)):
            sl = slice(edges[j], edges[j + 1])
            Zj = Z[:, sl]
            ZZ = self._fold_cross(Zj, Zj)
            S = ZZ - np.einsum("kpq,kpr->kqr", G[:, :, sl], A[:, :, sl])
            scale = np.max(np.diagonal(ZZ, axis1=1, axis2=2), axis=-1)
            gamma, s_plus, full = _pinv_solve(S, c[:, sl], scale)
            if not np.all(full):  # the block repeats kept columns: decompose again
                out[:, j] = self.without(J).score_add([Zj])[:, 0]
                continue
            e = e_r - np.einsum("nq,nq->n", Zh[:, sl], gamma[fi])
            h = None
            if self.loo:
                h = h_r + np.einsum("nq,qr,nr->n", Zh[:, sl], s_plus[0], Zh[:, sl])
            out[:, j] = self._finish(e, h)
        return out

    # -- new states -------------------------------------------------------------
    def with_columns(self, block: np.ndarray) -> CVState:
        """The state of the design with ``block`` appended (decomposed afresh)."""
        return cv_state(np.hstack([self.X, block]), self.y, self.folds, centre=self.centre)

    def without(self, columns: Sequence[int]) -> CVState:
        """The state of the design without ``columns`` (decomposed afresh)."""
        keep = np.setdiff1d(np.arange(self.p), np.asarray(columns, dtype=int))
        return cv_state(self.X[:, keep], self.y, self.folds, centre=self.centre)


def cv_state(X: np.ndarray, y: np.ndarray, folds: np.ndarray | None, *, centre: bool) -> CVState:
    """Decompose ``X`` (already standardised) once per training fold.

    Parameters
    ----------
    X:
        (n, p) design, intercept column (ones) first when there is one.
    y:
        (n,) response (log price for a log response).
    folds:
        (n,) fold of each sale, 0..K-1; ``None`` for leave-one-out.
    centre:
        Whether the columns were centred (the design has an intercept); blocks scored
        later must be standardised the same way.
    """
    X = np.ascontiguousarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    n, p = X.shape
    gram = X.T @ X
    if folds is None:
        T, w, r = _basis(gram, X)
        coef = T.T @ y
        resid = y - T @ coef
        h = np.einsum("np,np->n", T, T)
        return CVState(
            X, y, None, _loo(resid, h), centre, T[None], w[None], coef[None], r == p,
            resid[None], np.ones((1, n)), np.zeros(n, dtype=int), h,
        )  # fmt: skip
    folds = np.asarray(folds, dtype=int)
    K = int(folds.max()) + 1
    T = np.zeros((K, n, p))
    W = np.zeros((K, p, p))
    coef = np.zeros((K, p))
    train = np.zeros((K, n))
    resid = np.zeros((K, n))
    heldout = np.empty(n)
    full = True
    for f in range(K):
        t = folds != f
        train[f, t] = 1.0
        held = X[~t]
        T[f], W[f], r = _basis(gram - held.T @ held, X)
        full = full and r == p
        coef[f] = T[f][t].T @ y[t]
        fitted = T[f] @ coef[f]
        resid[f, t] = y[t] - fitted[t]
        heldout[~t] = y[~t] - fitted[~t]
    return CVState(X, y, folds, heldout, centre, T, W, coef, full, resid, train, folds, None)


def refit_heldout(X: np.ndarray, y: np.ndarray, folds: np.ndarray | None) -> np.ndarray:
    """Held-out residuals by fitting every training fold from scratch (the slow path).

    Minimum-norm least squares (``numpy.linalg.lstsq``), as statsmodels' pinv fit gives.
    For leave-one-out, n fits. Used by the benchmark and to check the update.
    """
    n = y.size
    out = np.empty(n)
    groups = [np.array([i]) for i in range(n)] if folds is None else None
    if groups is None:
        groups = [np.flatnonzero(folds == f) for f in range(int(folds.max()) + 1)]
    for held in groups:
        t = np.ones(n, dtype=bool)
        t[held] = False
        coef, *_ = np.linalg.lstsq(X[t], y[t], rcond=None)
        out[held] = y[held] - X[held] @ coef
    return out
