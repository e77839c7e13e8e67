"""The structured fit: one large ``onehot`` block absorbed through group sums.

Write the design as :math:`X = [Z, D]`: :math:`Z` (n x k) the numeric block (intercept,
plain and polynomial columns, small ``onehot`` terms) and :math:`D` (n x m) the 0/1
indicators of the non-reference levels of one category term. :math:`D` is never built;
each sale carries the code of its level instead. With :math:`c_g` the sales in level
:math:`g`, :math:`C = D'D = \\mathrm{diag}(c)` and :math:`M = C^{-1}D'Z` (the level means
of :math:`Z`, one row per non-reference level):

* **absorption** (Frisch-Waugh-Lovell): :math:`M_D = I - D C^{-1} D'` subtracts from every
  sale outside the reference level its level's mean and leaves the reference sales as they
  are. :math:`\\tilde Z = M_D Z`, :math:`\\tilde y = M_D y`, and
  :math:`\\hat\\beta = (\\tilde Z'\\tilde Z)^{-1}\\tilde Z'\\tilde y`; the residuals of the
  small regression are the residuals of the whole one;
* **level effects**: :math:`\\hat\\gamma_g = \\bar y_g - M_g\\hat\\beta`;
* **covariance** by the Schur complement :math:`S = Z'Z - Z'DC^{-1}D'Z = \\tilde Z'\\tilde Z`:

  .. math::
     (X'X)^{-1} = \\begin{pmatrix} S^{-1} & -S^{-1}M' \\\\
                  -MS^{-1} & C^{-1} + MS^{-1}M' \\end{pmatrix};

* **sandwich** (HC0-HC3, weights :math:`\\omega_i`): the row :math:`i` of
  :math:`(X'X)^{-1}X'` is :math:`[a_i;\\ e_{g_i}/c_{g_i} - Ma_i]` with
  :math:`a_i = S^{-1}\\tilde z_i`, so with :math:`Q = \\tilde Z'\\Omega\\tilde Z`,
  :math:`T_g = \\sum_{i\\in g}\\omega_i\\tilde z_i`, :math:`W_g = \\sum_{i\\in g}\\omega_i`,
  :math:`F = S^{-1}T'C^{-1}`:
  :math:`V_{ZZ} = S^{-1}QS^{-1}`, :math:`V_{ZD} = F - V_{ZZ}M'`,
  :math:`V_{DD} = \\mathrm{diag}(W/c^2) - F'M' - MF + MV_{ZZ}M'`;
* **leverage**: :math:`h_i = \\tilde z_i'S^{-1}\\tilde z_i + 1/c_{g_i}` (the last term only
  outside the reference level) -- the hat diagonal without any n x n object.

The small system is solved on :math:`\\tilde Z` with its columns scaled to the norms of
:math:`Z`'s columns: by Cholesky of the scaled Gram matrix when its condition number is at
most :data:`CHOLESKY_MAX_COND`, otherwise by a column-pivoted QR of :math:`\\tilde Z`, whose
diagonal also finds an exact dependence and whose triangle names the columns caught in it.
The work is :math:`O(nk^2)` time and :math:`O(nk)` memory; the covariance of all
:math:`p = k + m` coefficients is :math:`p \\times p`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING

import numpy as np

from .errors import CollinearityError, FitError
from .levels import LevelCount

if TYPE_CHECKING:  # pragma: no cover - typing only
    from .design import DesignSpec

ABSORB_MIN_COLUMNS = 40
"""Indicator columns of one ``onehot`` term from which :func:`fit_model` absorbs it."""

CHOLESKY_MAX_COND = 1e6
"""Largest condition number of the scaled Gram matrix solved by Cholesky (else QR)."""

DENSE_LIMIT_BYTES = 2.0 * 2**30
"""Largest dense design :meth:`AbsorbedFit.dense_design` builds for a consumer that asks."""

COV_TYPES = ("nonrobust", "HC0", "HC1", "HC2", "HC3")
"""Covariance types offered, named as statsmodels names them."""

_CHUNK = 65_536  # rows per block in row-wise passes (keeps temporaries at O(chunk * k))


def collinear_error(involved: Sequence[str], file: str | None = None) -> CollinearityError:
    """The error of a rank-deficient design, naming the columns involved."""
    return CollinearityError(
        "the terms are perfectly collinear (one is an exact combination of others): "
        + ", ".join(involved)
        + ". Remove one of them, or give onehot() a reference level when an intercept is used.",
        terms=tuple(involved),
        file=file,
    )


@dataclass(frozen=True, eq=False)
class AbsorbedFit:
    """OLS of :math:`y` on :math:`[Z, D]` with :math:`D` held as level codes.

    Arrays are in design order (``names``) where they have one entry per coefficient.

    Attributes
    ----------
    term:
        The expression of the absorbed ``onehot`` term.
    names:
        All design column names, in design order.
    z_pos, d_pos:
        Positions in ``names`` of the columns of :math:`Z` (k) and of the indicators (m,
        in the order of the non-reference levels).
    codes:
        (n,) level of each sale, an index into the term's levels (reference included).
    reference:
        Index of the reference level.
    counts:
        (G,) sales per level.
    Z:
        (n, k) the numeric block as built (not demeaned).
    params, resid, fitted:
        Coefficients (p,) and the residuals and fitted values (n,).
    xtx_inv:
        The classical :math:`(X'X)^{-1}` (p, p).
    method:
        ``"cholesky"`` or ``"qr"``: how the small system was solved.
    k_constant:
        1 when a constant lies in the column space (explicit or implied), as statsmodels
        decides it; it selects centred or uncentred :math:`R^2`.
    """

    term: str
    names: tuple[str, ...]
    z_pos: np.ndarray
    d_pos: np.ndarray
    codes: np.ndarray
    reference: int
    counts: np.ndarray
    Z: np.ndarray
    y: np.ndarray
    params: np.ndarray
    resid: np.ndarray
    fitted: np.ndarray
    xtx_inv: np.ndarray
    method: str
    k_constant: int
    _scale: np.ndarray  # (k,) column norms of Z
    _means: np.ndarray  # (G, k) level means of Z / scale; the reference row is zero
    _s_inv: np.ndarray  # (k, k) inverse of the scaled Schur complement

    # --- sizes and summary statistics ----------------------------------------------------
    @property
    def n(self) -> int:
        return int(self.Z.shape[0])

    @property
    def p(self) -> int:
        return len(self.names)

    @property
    def df_resid(self) -> int:
        return self.n - self.p

    @cached_property
    def ssr(self) -> float:
        return float(self.resid @ self.resid)

    @property
    def scale(self) -> float:
        """:math:`s^2 = e'e/(n-p)`."""
        return self.ssr / self.df_resid

    @cached_property
    def tss(self) -> float:
        """Centred total sum of squares with a constant, uncentred without (statsmodels)."""
        if self.k_constant:
            d = self.y - self.y.mean()
            return float(d @ d)
        return float(self.y @ self.y)

    @property
    def r2(self) -> float:
        return 1.0 - self.ssr / self.tss

    @property
    def adj_r2(self) -> float:
        return 1.0 - (self.n - self.k_constant) / self.df_resid * (1.0 - self.r2)

    @property
    def llf(self) -> float:
        """Gaussian log-likelihood at the estimates: :math:`-\\frac n2(\\log 2\\pi + \\log
        \\frac{e'e}{n} + 1)`."""
        n2 = self.n / 2.0
        return float(-n2 * np.log(2 * np.pi) - n2 * np.log(self.ssr / self.n) - n2)

    @property
    def aic(self) -> float:
        return -2.0 * self.llf + 2.0 * self.p

    @property
    def bic(self) -> float:
        return -2.0 * self.llf + np.log(self.n) * self.p

    @property
    def col_of_level(self) -> np.ndarray:
        """(G,) indicator column (0..m-1) of each level; -1 for the reference."""
        out = np.full(len(self.counts), -1, dtype=np.intp)
        others = np.flatnonzero(np.arange(len(self.counts)) != self.reference)
        out[others] = np.arange(len(others))
        return out

    # --- row-wise quantities ---------------------------------------------------------------
    def _within(self, lo: int, hi: int) -> np.ndarray:
        """Rows lo:hi of the scaled, absorbed numeric block."""
        return self.Z[lo:hi] / self._scale - self._means[self.codes[lo:hi]]

    def leverage(self) -> np.ndarray:
        """Hat diagonal :math:`h_i = \\tilde z_i'S^{-1}\\tilde z_i + [g_i \\ne r]/c_{g_i}`
        (computed once, read-only)."""
        return self._leverage

    @cached_property
    def _leverage(self) -> np.ndarray:
        h = np.empty(self.n)
        for lo, hi in _blocks(self.n):
            zt = self._within(lo, hi)
            h[lo:hi] = np.einsum("ij,ij->i", zt @ self._s_inv, zt)
        inv_c = 1.0 / self.counts
        inv_c[self.reference] = 0.0
        h += inv_c[self.codes]
        h.setflags(write=False)
        return h

    def cov(self, cov_type: str = "nonrobust") -> np.ndarray:
        """Coefficient covariance (p, p) of ``cov_type`` (one of :data:`COV_TYPES`).

        Weights :math:`\\omega_i`: nonrobust :math:`s^2`; HC0 :math:`e_i^2`; HC1
        :math:`e_i^2\\,n/(n-p)`; HC2 :math:`e_i^2/(1-h_i)`; HC3 :math:`e_i^2/(1-h_i)^2`
        (MacKinnon and White 1985), as statsmodels defines them.
        """
        if cov_type == "nonrobust":
            return self.scale * self.xtx_inv
        e2 = self.resid**2
        if cov_type == "HC0":
            w = e2
        elif cov_type == "HC1":
            w = e2 * (self.n / self.df_resid)
        elif cov_type == "HC2":
            w = e2 / (1.0 - self.leverage())
        elif cov_type == "HC3":
            w = e2 / (1.0 - self.leverage()) ** 2
        else:
            raise ValueError(f"cov_type must be one of {', '.join(COV_TYPES)}, not {cov_type!r}")
        return self._sandwich(w)

    def _sandwich(self, w: np.ndarray) -> np.ndarray:
        k, G = self.Z.shape[1], len(self.counts)
        wsum = np.bincount(self.codes, weights=w, minlength=G)
        # T_g = sum_{i in g} w_i z~_i = (sum_{i in g} w_i z_i) / scale - M_g W_g
        t = np.empty((G, k))
        for j in range(k):
            t[:, j] = np.bincount(self.codes, weights=w * self.Z[:, j], minlength=G)
        t = t / self._scale - self._means * wsum[:, None]
        q = np.zeros((k, k))
        for lo, hi in _blocks(self.n):
            zt = self._within(lo, hi)
            q += (zt * w[lo:hi, None]).T @ zt
        others = self.col_of_level >= 0
        c = self.counts[others].astype(float)
        m_s = self._means[others]  # (m, k)
        v_zz = self._s_inv @ q @ self._s_inv
        f = (self._s_inv @ t[others].T) / c  # (k, m)
        v_zd = f - v_zz @ m_s.T
        mf = m_s @ f
        v_dd = m_s @ v_zz @ m_s.T - mf - mf.T
        v_dd[np.diag_indices_from(v_dd)] += wsum[others] / c**2
        return self._assemble(v_zz, v_zd, v_dd)

    def _assemble(self, v_zz: np.ndarray, v_zd: np.ndarray, v_dd: np.ndarray) -> np.ndarray:
        """Blocks in scaled coordinates -> the (p, p) matrix in design order and units."""
        p = self.p
        out = np.empty((p, p))
        zp, dp = self.z_pos, self.d_pos
        out[np.ix_(zp, zp)] = v_zz
        out[np.ix_(zp, dp)] = v_zd
        out[np.ix_(dp, zp)] = v_zd.T
        out[np.ix_(dp, dp)] = v_dd
        u = np.ones(p)
        u[zp] = 1.0 / self._scale
        return out * np.outer(u, u)

    # --- new rows ----------------------------------------------------------------------------
    def predict_rows(
        self, Z0: np.ndarray, codes0: np.ndarray, cov: np.ndarray
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Fitted values, :math:`x_0'Vx_0` and leverage :math:`x_0'(X'X)^{-1}x_0` of rows
        given as their numeric block and level codes (all codes valid).

        With :math:`j_0` the indicator column of the row's level (none in the reference
        level): :math:`x_0'Vx_0 = z_0'V_{ZZ}z_0 + 2z_0'V_{Z,j_0} + V_{j_0j_0}`; no dense
        indicator row is built.
        """
        # Code -1 (the reference level: no indicator column) reads the padded last entry,
        # zero. With A = Z_0 V_ZZ (one BLAS product) plus twice the gathered cross rows
        # V_{j_0 Z}, x_0'Vx_0 is the row sum of A * Z_0 plus V_{j_0 j_0}. A classical V
        # is s^2 (X'X)^{-1}: then one product serves both.
        col = self.col_of_level[np.asarray(codes0, dtype=np.intp)]
        zp, dp = self.z_pos, self.d_pos
        fitted = Z0 @ self.params[zp]
        fitted += np.append(self.params[dp], 0.0)[col]
        lev = self._quadratic_form(self.xtx_inv, Z0, col)
        if np.array_equal(cov, self.scale * self.xtx_inv):
            return fitted, self.scale * lev, lev
        return fitted, self._quadratic_form(cov, Z0, col), lev

    def _quadratic_form(self, V: np.ndarray, Z0: np.ndarray, col: np.ndarray) -> np.ndarray:
        """:math:`x_0'Vx_0` of each row (``col``: its indicator column, -1 for none)."""
        zp, dp = self.z_pos, self.d_pos
        cross2 = np.zeros((len(dp) + 1, len(zp)))
        cross2[:-1] = 2.0 * V[np.ix_(dp, zp)]
        v_dd = np.append(np.diag(V)[dp], 0.0)
        a = Z0 @ V[np.ix_(zp, zp)]
        a += np.take(cross2, col, axis=0)
        q = np.einsum("ij,ij->i", a, Z0)
        q += v_dd[col]
        return q

    def dense_design(self, limit_bytes: float | None = None) -> np.ndarray:
        """The (n, p) dense design (only for consumers that need it; O(np) memory).

        Raises
        ------
        FitError
            It would take more than ``limit_bytes`` (default :data:`DENSE_LIMIT_BYTES`).
        """
        limit = DENSE_LIMIT_BYTES if limit_bytes is None else limit_bytes
        size = 8.0 * self.n * self.p
        if size > limit:
            raise FitError(
                f"this needs the whole design ({self.n:,} sales x {self.p:,} columns, "
                f"{size / 2**30:,.1f} GiB), more than the {limit / 2**30:,.1f} GiB allowed; "
                f"the fit itself absorbed {self.term} and never built it"
            )
        out = np.zeros((self.n, self.p))
        out[:, self.z_pos] = self.Z
        col = self.col_of_level[self.codes]
        on = np.flatnonzero(col >= 0)
        out[on, self.d_pos[col[on]]] = 1.0
        return out


def absorb_fit(
    Z: np.ndarray,
    y: np.ndarray,
    codes: np.ndarray,
    n_levels: int,
    reference: int,
    *,
    names: Sequence[str],
    z_pos: Sequence[int],
    d_pos: Sequence[int],
    term: str = "",
    method: str = "auto",
    file: str | None = None,
) -> AbsorbedFit:
    """Least squares of ``y`` on ``Z`` and the indicators of ``codes`` (see the module text).

    Parameters
    ----------
    Z:
        (n, k) numeric block.
    y:
        (n,) response.
    codes:
        (n,) integer level of each row, ``0 <= code < n_levels``.
    reference:
        The level without an indicator column.
    names, z_pos, d_pos:
        Design column names and the positions in them of ``Z``'s columns and of the
        indicators of the non-reference levels (in level order).
    method:
        ``"auto"`` (Cholesky when well conditioned, else QR), ``"cholesky"`` or ``"qr"``.

    Raises
    ------
    CollinearityError
        The design is rank deficient (a column of zeros, an empty level, or an exact
        dependence found by the pivoted QR); it names the columns involved.
    """
    Z = np.asarray(Z, dtype=float)
    y = np.asarray(y, dtype=float)
    codes = np.asarray(codes, dtype=np.intp)
    names = tuple(names)
    z_pos = np.asarray(z_pos, dtype=np.intp)
    d_pos = np.asarray(d_pos, dtype=np.intp)
    n, k = Z.shape
    p = len(names)
    if len(z_pos) != k or len(d_pos) != n_levels - 1 or k + len(d_pos) != p:
        raise ValueError("names, z_pos and d_pos do not describe Z and the levels")
    if codes.shape != (n,) or (n and (codes.min() < 0 or codes.max() >= n_levels)):
        raise ValueError("codes must give every row a level in 0..n_levels-1")
    counts = np.bincount(codes, minlength=n_levels)
    others = np.flatnonzero(np.arange(n_levels) != reference)

    scale = np.sqrt(np.einsum("ij,ij->j", Z, Z))
    zero = [names[z_pos[j]] for j in np.flatnonzero(scale == 0)]
    zero += [names[d_pos[i]] for i, g in enumerate(others) if counts[g] == 0]
    if zero:
        raise collinear_error(zero, file)

    # Level means of the scaled columns and of y; the reference level is left as it is.
    safe = np.maximum(counts, 1)
    means = np.empty((n_levels, k))
    for j in range(k):
        means[:, j] = np.bincount(codes, weights=Z[:, j], minlength=n_levels)
    means /= safe[:, None] * scale
    means[reference] = 0.0
    y_means = np.bincount(codes, weights=y, minlength=n_levels) / safe
    y_means[reference] = 0.0

    # The small system, one block of rows at a time: no n x k copy of the design.
    gram = np.zeros((k, k))
    rhs = np.zeros(k)
    for lo, hi in _blocks(n):
        zt = Z[lo:hi] / scale - means[codes[lo:hi]]
        gram += zt.T @ zt
        rhs += zt.T @ (y[lo:hi] - y_means[codes[lo:hi]])

    from scipy import linalg  # here, not at import: commands that never fit skip it

    use_cholesky = method == "cholesky"
    if method == "auto":
        ev = np.linalg.eigvalsh(gram)
        use_cholesky = ev[0] > ev[-1] / CHOLESKY_MAX_COND
    elif method not in ("cholesky", "qr"):
        raise ValueError(f"method must be auto, cholesky or qr, not {method!r}")
    if use_cholesky:
        factor = linalg.cho_factor(gram, lower=False)
        beta_s = linalg.cho_solve(factor, rhs)
        s_inv = linalg.cho_solve(factor, np.eye(k))
        used = "cholesky"
    else:
        zt = Z / scale - means[codes]  # the ill-conditioned (or deficient) case only
        yt = y - y_means[codes]
        beta_s, s_inv = _qr_solve(zt, yt, names, z_pos, d_pos, means, counts, others, n, p, file)
        del zt, yt
        used = "qr"
    s_inv = (s_inv + s_inv.T) / 2.0
    # Residuals and the numeric part of the hat diagonal in one more pass.
    resid = np.empty(n)
    h = np.empty(n)
    for lo, hi in _blocks(n):
        zt = Z[lo:hi] / scale - means[codes[lo:hi]]
        resid[lo:hi] = y[lo:hi] - y_means[codes[lo:hi]] - zt @ beta_s
        h[lo:hi] = np.einsum("ij,ij->i", zt @ s_inv, zt)
    inv_c = 1.0 / np.maximum(counts, 1)
    inv_c[reference] = 0.0
    h += inv_c[codes]
    h.setflags(write=False)

    m_s = means[others]  # (m, k)
    params = np.empty(p)
    params[z_pos] = beta_s / scale
    params[d_pos] = y_means[others] - m_s @ beta_s

    v_zd = -s_inv @ m_s.T
    v_dd = m_s @ s_inv @ m_s.T
    v_dd[np.diag_indices_from(v_dd)] += 1.0 / counts[others]

    fit = AbsorbedFit(
        term=term,
        names=names,
        z_pos=z_pos,
        d_pos=d_pos,
        codes=codes,
        reference=int(reference),
        counts=counts,
        Z=Z,
        y=y,
        params=params,
        resid=resid,
        fitted=y - resid,
        xtx_inv=np.empty((0, 0)),
        method=used,
        k_constant=0,
        _scale=scale,
        _means=means,
        _s_inv=s_inv,
    )
    object.__setattr__(fit, "xtx_inv", fit._assemble(s_inv, v_zd, v_dd))
    object.__setattr__(fit, "k_constant", _k_constant(fit))
    fit.__dict__["_leverage"] = h  # the cached hat diagonal, from the pass above
    return fit


def _blocks(n: int):
    """(lo, hi) bounds of consecutive blocks of :data:`_CHUNK` rows."""
    for lo in range(0, n, _CHUNK):
        yield lo, min(lo + _CHUNK, n)


def _qr_solve(zt, yt, names, z_pos, d_pos, means, counts, others, n, p, file):
    """Column-pivoted QR of the absorbed block: the solution and :math:`S^{-1}`, or the
    error naming the columns of an exact dependence.

    With :math:`\\tilde Z P = QR` and rank r < k, the null space of :math:`\\tilde Z` is
    spanned by :math:`P[-R_{11}^{-1}R_{12};\\ I]`; a null vector :math:`b` of the numeric
    block extends to the whole design as :math:`[b;\\ -Mb]` (the level effects that undo
    it), scaled like the columns (indicator g by :math:`\\sqrt{c_g}`).
    """
    from scipy import linalg

    q, r, perm = linalg.qr(zt, mode="economic", pivoting=True)
    k = r.shape[1]
    d = np.abs(np.diag(r))
    tol = (d[0] if k else 0.0) * max(n, p) * np.finfo(float).eps * 10
    rank = int(np.sum(d > tol))
    if rank < k:
        top = r[:rank, :rank]
        null_p = np.vstack([-linalg.solve_triangular(top, r[:rank, rank:]), np.eye(k - rank)])
        null = np.empty_like(null_p)
        null[perm] = null_p
        gamma = -(means[others] @ null) * np.sqrt(counts[others])[:, None]
        full = np.zeros((p, k - rank))
        full[z_pos] = null
        full[d_pos] = gamma
        full /= np.linalg.norm(full, axis=0)
        load = np.abs(full).max(axis=1)
        raise collinear_error([names[j] for j in np.flatnonzero(load > 1e-6)], file)
    r_inv = linalg.solve_triangular(r, np.eye(k))
    beta_p = r_inv @ (q.T @ yt)
    beta = np.empty(k)
    beta[perm] = beta_p
    s_inv_p = r_inv @ r_inv.T
    s_inv = np.empty((k, k))
    s_inv[np.ix_(perm, perm)] = s_inv_p
    return beta, s_inv


def _k_constant(fit: AbsorbedFit) -> int:
    """1 when a constant column lies in the span of the design, as statsmodels decides.

    An explicit constant: a column of ``Z`` with no spread and not zero. Else the
    implied one: the absorbed ones vector (1 on the reference sales, 0 elsewhere) is
    projected on the absorbed block; a residual below 1e-8 of its norm means the
    constant is implied by the columns (statsmodels compares matrix ranks).
    """
    Z = fit.Z
    if len(Z) and np.any((np.ptp(Z, axis=0) == 0) & (Z[0] != 0)):
        return 1
    u = (fit.codes == fit.reference).astype(float)
    zt_u = np.zeros(Z.shape[1])
    zt_rows = []
    for lo in range(0, fit.n, _CHUNK):
        hi = min(lo + _CHUNK, fit.n)
        zt = fit._within(lo, hi)
        zt_u += zt.T @ u[lo:hi]
        zt_rows.append((lo, hi))
    b = fit._s_inv @ zt_u
    res2 = 0.0
    for lo, hi in zt_rows:
        r = u[lo:hi] - fit._within(lo, hi) @ b
        res2 += float(r @ r)
    norm2 = float(u @ u)
    return int(norm2 > 0 and res2 <= 1e-16 * norm2)


@dataclass(frozen=True, eq=False)
class AbsorbedResults:
    """The statistics of an :class:`AbsorbedFit` under one covariance type, named as
    statsmodels' regression results name them (t distribution with :math:`n-p` degrees of
    freedom, as ``fit(use_t=True)``)."""

    fit: AbsorbedFit
    cov_type: str
    params: np.ndarray
    bse: np.ndarray
    tvalues: np.ndarray
    pvalues: np.ndarray
    resid: np.ndarray
    fittedvalues: np.ndarray
    df_resid: int
    rsquared: float
    rsquared_adj: float
    scale: float
    aic: float
    bic: float
    llf: float
    normalized_cov_params: np.ndarray
    _cov: np.ndarray

    @classmethod
    def of(cls, fit: AbsorbedFit, cov_type: str = "nonrobust") -> AbsorbedResults:
        # scipy.special's t distribution: the same functions scipy.stats.t calls, without
        # the second it takes to import scipy.stats
        from scipy.special import stdtr

        cov = fit.cov(cov_type)
        bse = np.sqrt(np.diag(cov))
        with np.errstate(divide="ignore", invalid="ignore"):
            tvalues = fit.params / bse
        return cls(
            fit=fit,
            cov_type=cov_type,
            params=fit.params,
            bse=bse,
            tvalues=tvalues,
            pvalues=2.0 * stdtr(fit.df_resid, -np.abs(tvalues)),
            resid=fit.resid,
            fittedvalues=fit.fitted,
            df_resid=fit.df_resid,
            rsquared=fit.r2,
            rsquared_adj=fit.adj_r2,
            scale=fit.scale,
            aic=fit.aic,
            bic=fit.bic,
            llf=fit.llf,
            normalized_cov_params=fit.xtx_inv,
            _cov=cov,
        )

    def cov_params(self) -> np.ndarray:
        return self._cov

    def conf_int(self, alpha: float = 0.05) -> np.ndarray:
        """(p, 2) bounds :math:`\\hat\\beta_j \\pm t_{1-\\alpha/2,\\,n-p}\\,se_j`."""
        from scipy.special import stdtrit

        q = stdtrit(self.df_resid, 1 - alpha / 2)
        return np.column_stack([self.params - q * self.bse, self.params + q * self.bse])


def absorbed_level_counts(design: DesignSpec, fit: AbsorbedFit) -> tuple[LevelCount, ...]:
    """Sales per level of every ``onehot`` term, as :func:`.levels.level_counts` gives them
    from a dense design: the absorbed term from its codes, the others from their columns."""
    names = list(design.names)
    z_of = {int(pos): j for j, pos in enumerate(fit.z_pos)}
    out = []
    for g in design.groups:
        if g.kind != "onehot":
            continue
        if g.expression == fit.term:
            column_of = dict(
                zip([lv for lv in g.levels if lv != g.reference], g.columns, strict=True)
            )
            for lv, count in zip(g.levels, fit.counts, strict=True):
                out.append(LevelCount(g.expression, lv, int(count), column_of.get(lv)))
            continue
        sums = {c: float(fit.Z[:, z_of[names.index(c)]].sum()) for c in g.columns}
        for lv in g.levels:
            if lv == g.reference:
                out.append(
                    LevelCount(g.expression, lv, int(round(fit.n - sum(sums.values()))), None)
                )
            else:
                col = next(c for c in g.columns if c.endswith(f"[{lv}]"))
                out.append(LevelCount(g.expression, lv, int(round(sums[col])), col))
    return tuple(out)


__all__ = [
    "ABSORB_MIN_COLUMNS",
    "AbsorbedResults",
    "absorbed_level_counts",
    "CHOLESKY_MAX_COND",
    "COV_TYPES",
    "DENSE_LIMIT_BYTES",
    "AbsorbedFit",
    "absorb_fit",
    "collinear_error",
]
