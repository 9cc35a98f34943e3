"""Least squares on accumulated normal equations: one fit per window of the estimation rows.

Internal to :mod:`sheetfns.valuemodel`. The estimation rows are fixed in time order and every fit
uses a *prefix* ``rows[:m]`` of them (an expanding window), so the cross products of window m are
those of the previous window plus the rows that enter: ``X'X``, ``X'y`` and ``y'y`` are accumulated
block by block, never recomputed. Each window is then solved in O(k^3) however long it is.

Numerical care (the normal equations square the condition number of X):

* columns and target are centred by their means over the *first* window used (the constant column
  is left as it is), which keeps ``y'y - b'X'y`` free of the cancellation a level far from zero
  would cause; the first window is observed before every later origin, so no later row steers the
  numbers (no look-ahead, not even in rounding);
* each window's ``X'X`` is Jacobi-scaled to unit diagonal and factorised by Cholesky, batched over
  many windows. The Cholesky pivots of that matrix are ``1 - R^2`` of each column regressed on the
  earlier ones (the "tolerance" of the regression literature); a window with a pivot below
  :data:`PIVOT_TOL` (a near-collinear design) is solved from its rows instead, by singular value
  decomposition with the minimum-norm solution and the rank statsmodels' OLS uses (singular values
  above 1e-15 of the largest).

With the Cholesky factor L of the scaled matrix ``C = D^-1 X'X D^-1`` and ``u = L^-1 D^-1 X'y``:
``b = D^-1 L^-T u``, the residual sum of squares ``y'y - u'u``, and the leverage of a new row x,
``x'(X'X)^-1 x = ||L^-1 D^-1 x||^2``. Both cases are kept as (b, M, s^2, dof) with
``leverage = ||M x||^2``.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from sheetfns._ols.tdist import t_sf

__all__ = ["OLSFit", "Accumulator", "Solved", "chunks", "predict", "to_fit", "plain_fit", "PIVOT_TOL",
           "RCOND"]

#: Smallest Cholesky pivot (1 - R^2 of a column on the earlier ones, after scaling) solved through
#: the normal equations; below it the window is solved by SVD from its rows.
PIVOT_TOL = 1e-7
#: Relative cut-off of singular values in the SVD fallback (numpy's pinv / statsmodels' OLS default).
RCOND = 1e-15
_CHUNK = 1024   # windows per batched solve (bounds memory at _CHUNK * k * k floats)
_DENSE = 4      # at most this many rows per window on average: cumulate row by row


@dataclass(frozen=True)
class OLSFit:
    """One least-squares fit in the original coordinates (constant first).

    ``scale`` is the residual standard error s = sqrt(SSR / dof); ``cov`` the covariance of the
    estimates s^2 (X'X)^-1 (a pseudo-inverse when the design is rank-deficient).
    """

    params: np.ndarray
    bse: np.ndarray
    scale: float
    dof: float
    nobs: int
    rank: int
    terms: tuple[str, ...]
    cov: np.ndarray

    @property
    def tvalues(self) -> np.ndarray:
        """t statistics ``params / bse``."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.params / self.bse

    @property
    def pvalues(self) -> np.ndarray:
        """Two-sided p-values of the t statistics under Student's t with ``dof`` degrees of freedom."""
        t = self.tvalues
        return np.where(np.isfinite(t), 2.0 * t_sf(np.abs(t), self.dof), np.nan)

    def table(self):
        """The coefficient table as a pandas DataFrame: term, estimate, std_error, t, p."""
        import pandas as pd

        table = pd.DataFrame({"term": list(self.terms), "estimate": self.params, "std_error": self.bse,
                              "t": self.tvalues, "p": self.pvalues})
        table.attrs["residual_scale"] = self.scale
        table.attrs["dof"] = self.dof
        table.attrs["nobs"] = self.nobs
        return table


@dataclass
class Solved:
    """Fits of a batch of windows in centred coordinates: mean(x) = (x - shift_x) b + shift_y,
    leverage(x) = ||M (x - shift_x)||^2."""

    b: np.ndarray       # (W, k)
    M: np.ndarray       # (W, k, k)
    s2: np.ndarray      # (W,)
    dof: np.ndarray     # (W,)
    rank: np.ndarray    # (W,)
    svd: np.ndarray     # (W,) bool: solved from the rows (near-collinear window)


class Accumulator:
    """Cross products of the centred estimation rows, advanced window by window."""

    def __init__(self, xe: np.ndarray, ye: np.ndarray, first: int):
        self.xe, self.ye = xe, ye
        k = xe.shape[1]
        self.shift_x = xe[:first].mean(axis=0) if first else np.zeros(k)
        self.shift_x[0] = 0.0                      # the constant column stays 1
        self.shift_y = float(ye[:first].mean()) if first else 0.0
        self.m = 0
        self.A = np.zeros((k, k))
        self.g = np.zeros(k)
        self.yy = 0.0

    def centred(self, m: int) -> tuple[np.ndarray, np.ndarray]:
        return self.xe[:m] - self.shift_x, self.ye[:m] - self.shift_y

    def advance(self, m: int) -> None:
        if m > self.m:
            xb = self.xe[self.m:m] - self.shift_x
            yb = self.ye[self.m:m] - self.shift_y
            self.A += xb.T @ xb
            self.g += xb.T @ yb
            self.yy += float(yb @ yb)
            self.m = m

    def solve(self, windows: np.ndarray) -> Solved:
        """Fits on the prefixes ``windows`` (non-decreasing, each > k) of the estimation rows."""
        w = windows.size
        k = self.A.shape[0]
        A = np.empty((w, k, k))
        g = np.empty((w, k))
        yy = np.empty(w)
        self.advance(int(windows[0]))
        lo, hi = self.m, int(windows[-1])
        if 0 < hi - lo <= _DENSE * w:
            # windows close together (a refit at every origin): the rows' own cross products,
            # cumulated, give every window at once
            xb = self.xe[lo:hi] - self.shift_x
            yb = self.ye[lo:hi] - self.shift_y
            cum_a = np.cumsum(xb[:, :, None] * xb[:, None, :], axis=0)
            cum_g = np.cumsum(xb * yb[:, None], axis=0)
            cum_y = np.cumsum(yb * yb)
            at = windows - lo - 1
            inside = at >= 0
            A[:] = self.A
            g[:] = self.g
            yy[:] = self.yy
            A[inside] += cum_a[at[inside]]
            g[inside] += cum_g[at[inside]]
            yy[inside] += cum_y[at[inside]]
            self.A, self.g, self.yy, self.m = A[-1].copy(), g[-1].copy(), float(yy[-1]), hi
        else:
            for i, m in enumerate(windows):
                self.advance(int(m))
                A[i], g[i], yy[i] = self.A, self.g, self.yy
        return _solve(A, g, yy, windows.astype(float), self)


def chunks(windows: np.ndarray):
    """Split the windows into batches for :meth:`Accumulator.solve` (slices of the index)."""
    for start in range(0, windows.size, _CHUNK):
        yield slice(start, min(start + _CHUNK, windows.size))


def _solve(A: np.ndarray, g: np.ndarray, yy: np.ndarray, m: np.ndarray, acc: Accumulator) -> Solved:
    w, k = g.shape
    d = np.sqrt(np.maximum(np.diagonal(A, axis1=1, axis2=2), 0.0))
    ok = (d > 0.0).all(axis=1)
    dd = np.where(d > 0.0, d, 1.0)
    C = A / dd[:, :, None] / dd[:, None, :]
    L = np.full_like(C, np.nan)
    if ok.any():
        try:
            L[ok] = np.linalg.cholesky(C[ok])
        except np.linalg.LinAlgError:       # one window is not positive definite: factor one by one
            for i in np.flatnonzero(ok):
                try:
                    L[i] = np.linalg.cholesky(C[i])
                except np.linalg.LinAlgError:
                    ok[i] = False
    with np.errstate(invalid="ignore"):
        pivots = np.diagonal(L, axis1=1, axis2=2) ** 2
        ok &= np.nan_to_num(pivots.min(axis=1), nan=0.0) >= PIVOT_TOL
    b = np.full((w, k), np.nan)
    M = np.full((w, k, k), np.nan)
    s2 = np.full(w, np.nan)
    rank = np.full(w, k, dtype=int)
    if ok.any():
        Linv = np.linalg.inv(L[ok])                       # lower triangular, k x k per window
        u = np.einsum("wij,wj->wi", Linv, g[ok] / dd[ok])
        b[ok] = np.einsum("wji,wj->wi", Linv, u) / dd[ok]
        M[ok] = Linv / dd[ok][:, None, :]
        s2[ok] = np.maximum(yy[ok] - np.einsum("wi,wi->w", u, u), 0.0)
    bad = np.flatnonzero(~ok)
    for i in bad:
        b[i], M[i], s2[i], rank[i] = _svd_fit(*acc.centred(int(m[i])))
    dof = m - rank
    with np.errstate(invalid="ignore", divide="ignore"):
        s2 = np.where(dof > 0, s2 / dof, np.nan)
    return Solved(b, M, s2, dof, rank, ~ok)


def _svd_fit(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray, float, int]:
    """Minimum-norm least squares from the rows: (b, M, SSR, rank)."""
    k = x.shape[1]
    u, sv, vt = np.linalg.svd(x, full_matrices=False)
    r = int(np.sum(sv > RCOND * sv[0])) if sv.size and sv[0] > 0 else 0
    b = vt[:r].T @ ((u[:, :r].T @ y) / sv[:r])
    M = np.zeros((k, k))
    M[:r] = vt[:r] / sv[:r, None]
    resid = y - x @ b
    return b, M, float(resid @ resid), r


def to_fit(sol: Solved, i: int, acc: Accumulator, terms: list[str], nobs: int) -> OLSFit:
    """Window i of ``sol`` in the original coordinates, with standard errors (the coefficient table).

    Centring is the reparametrisation x_c = x - shift_x (constant column unchanged), y_c = y - shift_y:
    the slopes are unchanged and the constant is b_0 = b_c0 + shift_y - sum_j shift_x[j] b_j, i.e.
    b = T b_c + shift_y e_0 with T the identity whose first row is (1, -shift_x[1:]); cov = T cov_c T'.
    """
    k = len(terms)
    T = np.eye(k)
    T[0, 1:] = -acc.shift_x[1:]
    params = T @ sol.b[i]
    params[0] += acc.shift_y
    cov = sol.s2[i] * (T @ (sol.M[i].T @ sol.M[i]) @ T.T)
    with np.errstate(invalid="ignore"):
        bse = np.sqrt(np.diag(cov))
    return OLSFit(params, bse, math.sqrt(sol.s2[i]) if np.isfinite(sol.s2[i]) else math.nan,
                  float(sol.dof[i]), nobs, int(sol.rank[i]), tuple(terms), cov)


def predict(sol: Solved, group: np.ndarray, xt: np.ndarray, acc: Accumulator
            ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(mean, scale, dof) for design rows ``xt``, row i from window ``group[i]`` of ``sol``.

    scale = s sqrt(1 + x'(X'X)^-1 x), the standard error of a new observation."""
    xc = xt - acc.shift_x
    mean = np.einsum("ij,ij->i", xc, sol.b[group]) + acc.shift_y
    z = np.einsum("ijk,ik->ij", sol.M[group], xc)
    lev = np.einsum("ij,ij->i", z, z)
    scale = np.sqrt(sol.s2[group] * (1.0 + lev))
    dof = sol.dof[group].astype(float)
    missing = ~np.isfinite(xt).all(axis=1)
    mean[missing] = scale[missing] = dof[missing] = np.nan
    return mean, scale, dof


def plain_fit(x: np.ndarray, y: np.ndarray, terms: list[str]) -> OLSFit:
    """One fit on complete rows ``x`` (constant column first) and ``y``."""
    acc = Accumulator(x, y, x.shape[0])
    sol = acc.solve(np.array([x.shape[0]]))
    return to_fit(sol, 0, acc, terms, x.shape[0])
