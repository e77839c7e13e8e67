"""One pivoted QR decomposition of the design, shared by every check.

With :math:`X P = Q R` (``Q`` n x p with orthonormal columns, ``R`` p x p upper
triangular, ``P`` a column permutation), everything the check-up needs follows
without an n x n matrix:

* hat diagonal :math:`h_i = \\sum_k Q_{ik}^2`;
* fitted values of any vector v regressed on X: :math:`Q(Q'v)`;
* :math:`(X'X)^{-1} = W W'` with :math:`W = P R^{-1}`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ..errors import CollinearityError


@dataclass(frozen=True, eq=False)
class QRDecomposition:
    """Thin pivoted QR of a full-rank design ``X``: ``X[:, perm] == q @ r``."""

    q: np.ndarray
    r: np.ndarray
    perm: np.ndarray

    @property
    def n(self) -> int:
        return int(self.q.shape[0])

    @property
    def p(self) -> int:
        return int(self.q.shape[1])

    def hat_diagonal(self) -> np.ndarray:
        """Leverages :math:`h_i = x_i'(X'X)^{-1}x_i`, the row sums of :math:`Q^2`."""
        return np.einsum("ij,ij->i", self.q, self.q)

    def project(self, v: np.ndarray) -> np.ndarray:
        """Fitted values of ``v`` regressed on X by least squares: :math:`Q Q' v`."""
        return self.q @ (self.q.T @ v)

    def inverse_factor(self) -> np.ndarray:
        """``W`` (p x p) with :math:`(X'X)^{-1} = W W'`, rows in X's column order."""
        r_inv = scipy.linalg.solve_triangular(self.r, np.eye(self.p))
        w = np.empty_like(r_inv)
        w[self.perm] = r_inv
        return w

    def r_unpivoted(self) -> np.ndarray:
        """``R`` with its columns put back in X's order, so that :math:`X = Q R_u`."""
        out = np.empty_like(self.r)
        out[:, self.perm] = self.r
        return out


def decompose(X: np.ndarray, names: Sequence[str] | None = None) -> QRDecomposition:
    """Pivoted QR of ``X`` (LAPACK ``geqp3``); refuse a rank-deficient design.

    The rank is the number of diagonal entries of R with
    :math:`|R_{kk}| > |R_{11}| \\max(n, p)\\, \\varepsilon`.

    Raises
    ------
    CollinearityError
        When X has fewer sales than columns or is rank deficient; ``terms`` names the
        columns the pivoting left for last (those that add nothing new).
    """
    X = np.asarray(X, dtype=float)
    n, p = X.shape
    if n <= p:
        raise CollinearityError(f"{n} sales for {p} columns: the design cannot have full rank")
    q, r, perm = scipy.linalg.qr(X, mode="economic", pivoting=True)
    diag = np.abs(np.diag(r))
    tol = diag[0] * max(n, p) * np.finfo(float).eps if p else 0.0
    rank = int(np.sum(diag > tol))
    if rank < p:
        labels = list(names) if names is not None else [f"column {j + 1}" for j in range(p)]
        involved = tuple(labels[j] for j in perm[rank:])
        raise CollinearityError(
            "the design is rank deficient; these columns repeat what others already say: "
            + ", ".join(involved),
            terms=involved,
        )
    return QRDecomposition(q=q, r=r, perm=np.asarray(perm))
