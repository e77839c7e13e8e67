"""Cross-validated errors of "the model plus one more block of columns", without refitting.

The search scores hundreds of candidate changes per step. Refitting every candidate on
every training fold would cost ``folds x candidates`` least-squares fits per step; here
each training fold is decomposed once and a candidate block ``Z`` (one or more design
columns) is scored by a block update of that decomposition.

For one training fold with rows ``t`` and held-out rows ``h``: the current design's
training rows are factorised by a thin SVD, :math:`X_t = U_r S_r V_r'` (rank r), giving
the orthonormal basis :math:`T = X V_r S_r^{-1}` (on the training rows ``T_t = U_r``; on
the held-out rows ``T_h`` carries the prediction), the training residual ``r_t`` and the
held-out residual ``e_h`` of the current model. Adding ``Z`` (partitioned regression):

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
and the decompositions stay well conditioned. Dropping a block is scored by
decomposing the smaller design again (a handful per step, against hundreds of adds).
Agreement with a refit of every fold by statsmodels is a test (1e-10 relative).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

RANK_TOL = 1e-10
"""A singular value below ``RANK_TOL`` times the largest is treated as zero."""

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


def _basis(Xt: np.ndarray, X: np.ndarray) -> tuple[np.ndarray, np.ndarray, int]:
    """``T = X W`` with ``W = V_r S_r^{-1}`` (zero-padded to p columns) and the rank r.

    ``X_t = Q R`` (Householder QR), then the SVD of the small ``R = U S V'``: so
    ``X_t = (Q U) S V'`` without an SVD of the tall matrix.
    """
    p = X.shape[1]
    if p == 0:
        return np.zeros((X.shape[0], 0)), np.zeros((0, 0)), 0
    R = np.linalg.qr(Xt, mode="r")
    _, s, vt = np.linalg.svd(R, full_matrices=False)
    r = int(np.sum(s > RANK_TOL * s[0])) if s.size and s[0] > 0 else 0
    w = np.zeros((p, p))
    w[:, :r] = vt[:r].T / s[:r]
    return X @ w, w, r


def _pinv_solve(S: np.ndarray, c: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Batched ``S^+ c``, ``S^+`` and whether S is of full rank, for symmetric PSD S (..., q, q)."""
    lam, vec = np.linalg.eigh(S)
    top = np.max(np.abs(lam), axis=-1, keepdims=True)
    keep = lam > RANK_TOL * np.maximum(top, 1e-300)
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
        beta = np.einsum("kij,kj->ki", self._W, self._coef)
        cov = np.einsum("kij,klj->kil", self._W, self._W)
        return beta, cov

    def _finish(self, r_or_e: np.ndarray, h: np.ndarray | None) -> np.ndarray:
        return _loo(r_or_e, h) if self.loo else r_or_e

    # -- adding blocks ---------------------------------------------------------
    def _add_parts(self, Z: np.ndarray):
        """What every added column needs: ``B_f = T_t'Z_t``, ``Z_t'r_t`` and ``Z_h - T_h B``."""
        T, train = self._T, self._train
        B = np.matmul(np.transpose(T * train[:, :, None], (0, 2, 1)), Z)  # (K, p, Q)
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
        for j in range(len(blocks)):
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
        if self.loo:
            S = (Zhj.T @ Zhj)[None]
        else:
            ZZ = np.einsum("kn,nq,nr->kqr", self._train, Zj, Zj)
            S = ZZ - np.einsum("kpq,kpr->kqr", Bj, Bj)
        return _pinv_solve(S, Cj)

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
        """Held-out residuals (n,) of the design without ``columns`` and with ``block``.

        Scored as "add the block, then drop the columns" on the augmented inverse
        :math:`\\begin{pmatrix} C + A S^{-1} A' & -A S^{-1} \\\\ -S^{-1} A' & S^{-1}
        \\end{pmatrix}` with :math:`A = C X_t'Z_t` and coefficients
        :math:`(\\beta - A\\gamma, \\gamma)`. When the block does not add a full-rank
        set of directions (it overlaps the dropped columns' span, as a pooled category
        does its own levels), the design is decomposed again without the columns.
        """
        J = np.asarray(columns, dtype=int)
        Z = np.asarray(block, dtype=float)
        B, C, Zh = self._add_parts(Z)
        gamma, s_plus, full = self._gamma(Z, B, C, Zh)
        if not (self._full_rank and np.all(full)):
            return self.without(J).score_add([Z])[:, 0]
        fi = self._fold_index
        e_aug = self._base() - np.einsum("nq,nq->n", Zh, gamma[fi])
        h_aug = None
        if self.loo:
            h_aug = self._leverage + np.einsum("nq,qr,nr->n", Zh, s_plus[0], Zh)
        beta, cov = self._beta_cov()
        A = np.einsum("kij,kjq->kiq", self._W, B)  # C X_t'Z_t = W (T_t'Z_t)
        AS = np.einsum("kiq,kqr->kir", A, s_plus)
        top = np.concatenate([cov + np.einsum("kir,kjr->kij", AS, A), -AS], axis=2)
        bottom = np.concatenate([-np.transpose(AS, (0, 2, 1)), s_plus], axis=2)
        cov_aug = np.concatenate([top, bottom], axis=1)
        beta_aug = np.concatenate([beta - np.einsum("kiq,kq->ki", A, gamma), gamma], axis=1)
        return self._drop(np.hstack([self.X, Z]), beta_aug, cov_aug, J, e_aug, h_aug)

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
    if folds is None:
        T, w, r = _basis(X, X)
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
        T[f], W[f], r = _basis(X[t], X)
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
