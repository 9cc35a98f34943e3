"""Numerical core of the logistic model: maximum likelihood by Newton-Raphson (IRLS) in numpy.

Internal to :mod:`sheetfns.logistic`. Every function here works on *complete* rows (no NaN): the
callers drop incomplete rows first. The design matrix ``X`` already holds the constant column when
the model has one.

The iteration (common practice; e.g. McCullagh & Nelder, *Generalized Linear Models*, 1989, §4.4):
with ``eta = X b``, ``p = 1 / (1 + exp(-eta))`` and ``w = p (1 - p)``, the Newton step solves
``(X' W X + P) d = X' (y - p) - P b`` where ``P`` is an optional diagonal ridge penalty. The step is
halved while the (penalised) log-likelihood would fall. The solve uses a Jacobi-scaled Cholesky
factorisation, so columns of very different scale (a trend in the thousands beside a sine) do not
cost accuracy; a matrix that is not positive definite falls back to least squares.

Convergence: the largest change of any fitted linear predictor ``|x_i' d|`` in the last step is below
``tol``. Newton converges quadratically, so the error left after that step is of order ``tol**2``.
Unlike a test on the log-likelihood, this test does not mistake the slow flattening of a separated
likelihood for convergence: there the linear predictors keep growing by O(1) per step.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: |linear predictor| beyond which a fitted probability is 0 or 1 to about 1e-11.
SATURATED_ETA = 25.0
#: Relative residual sum of squares under which a column counts as a combination of earlier ones.
COLLINEAR_TOL = 1e-10


@dataclass
class NewtonResult:
    """Outcome of :func:`newton`: the estimate and how it was reached."""

    params: np.ndarray
    llf: float                    # unpenalised log-likelihood at params
    converged: bool
    iterations: int
    hessian: np.ndarray | None    # X'WX (+ penalty) at params, when asked for and converged
    diverging: bool               # separation: probabilities saturate while estimates keep growing


def expit(eta: np.ndarray) -> np.ndarray:
    """Logistic function; exp overflow for very negative ``eta`` gives exactly 0."""
    with np.errstate(over="ignore"):
        return 1.0 / (1.0 + np.exp(-eta))


def loglik(y: np.ndarray, eta: np.ndarray) -> float:
    """Bernoulli log-likelihood of 0/1 ``y`` under the logit link: sum(y eta - log(1 + e^eta))."""
    return float(y @ eta - np.logaddexp(0.0, eta).sum())


def solve_pd(h: np.ndarray, g: np.ndarray) -> np.ndarray:
    """Solve ``h d = g`` for a symmetric positive (semi-)definite ``h``.

    Jacobi scaling to a unit diagonal, then Cholesky; least squares if that fails.
    """
    diag = np.diag(h)
    if np.all(diag > 0.0):
        s = 1.0 / np.sqrt(diag)
        hs = h * s[:, None] * s[None, :]
        try:
            np.linalg.cholesky(hs)
            return s * np.linalg.solve(hs, g * s)
        except np.linalg.LinAlgError:
            pass
    return np.linalg.lstsq(h, g, rcond=None)[0]


def solve_spd(h: np.ndarray, g: np.ndarray) -> np.ndarray:
    """Solve ``h d = g`` for a matrix known to be positive definite (Jacobi-scaled LU, no checks).

    For the warm-started refits, whose windows are known to be of full rank; a non-finite result
    tells the caller to fall back to :func:`solve_pd`'s checks.
    """
    s = 1.0 / np.sqrt(np.diag(h))
    return s * np.linalg.solve(h * np.outer(s, s), g * s)


def inverse_pd(h: np.ndarray) -> np.ndarray:
    """Inverse of a positive definite ``h`` (Jacobi-scaled); NaN matrix if it is singular."""
    diag = np.diag(h)
    k = h.shape[0]
    if np.all(diag > 0.0):
        s = 1.0 / np.sqrt(diag)
        hs = h * s[:, None] * s[None, :]
        try:
            np.linalg.cholesky(hs)
            return np.linalg.inv(hs) * s[:, None] * s[None, :]
        except np.linalg.LinAlgError:
            pass
    return np.full((k, k), np.nan)


def hessian(x: np.ndarray, w: np.ndarray) -> np.ndarray:
    """X' diag(w) X, computed as (sqrt(w) X)' (sqrt(w) X) so BLAS can use the symmetric kernel."""
    xw = x * np.sqrt(w)[:, None]
    return xw.T @ xw


def saturated(y: np.ndarray, eta: np.ndarray) -> bool:
    """True when some rows are fitted perfectly: probability 0 or 1 (to ~1e-11) on the observed side."""
    return bool(np.any(np.where(y > 0.5, eta, -eta) > SATURATED_ETA))


def newton(x: np.ndarray, y: np.ndarray, start: np.ndarray, *, penalty: np.ndarray | None = None,
           tol: float = 1e-8, maxiter: int = 50, need_hessian: bool = True,
           watch_separation: bool = True) -> NewtonResult:
    """Maximise the (optionally ridge-penalised) logit log-likelihood from ``start``.

    Parameters
    ----------
    x : ndarray, shape (n, k)
        Complete design matrix (constant column included when wanted).
    y : ndarray, shape (n,)
        0/1 outcomes.
    start : ndarray, shape (k,)
        Initial estimate (a warm start from a neighbouring fit saves most iterations).
    penalty : ndarray, shape (k,), optional
        Diagonal of the ridge penalty ``P``: the objective is ``llf - b' P b / 2``.
    tol : float
        Convergence when the last step changed no fitted linear predictor by ``tol`` or more.
    maxiter : int
        Most Newton steps.
    need_hessian : bool
        Evaluate ``X'WX (+P)`` at the final estimate (for standard errors). Without it the loop ends
        right after the converging step, saving one pass over the data.
    watch_separation : bool
        Stop early, flagged ``diverging``, when after 8 steps some rows are fitted perfectly while the
        linear predictors still move by more than 1e-3 (the signature of separation).
    """
    b = np.array(start, dtype=float)
    eta = x @ b
    pen = penalty
    llf = loglik(y, eta)
    obj = llf if pen is None else llf - 0.5 * float(pen @ (b * b))
    converged = False
    diverging = False
    h = None
    it = 0
    for it in range(1, maxiter + 1):  # noqa: B007 - the count is reported
        p = expit(eta)
        h = hessian(x, p - p * p)
        g = x.T @ (y - p)
        if pen is not None:
            h[np.diag_indices_from(h)] += pen
            g -= pen * b
        d = solve_pd(h, g)
        if not np.all(np.isfinite(d)):
            break
        step = 1.0
        for _ in range(40):
            b_new = b + step * d
            eta_new = x @ b_new
            llf_new = loglik(y, eta_new)
            obj_new = llf_new if pen is None else llf_new - 0.5 * float(pen @ (b_new * b_new))
            if obj_new >= obj - 1e-12 * (1.0 + abs(obj)):
                break
            step *= 0.5
        else:
            # no step raises the objective: we sit at its numerical maximum
            converged = True
            break
        change = float(np.max(np.abs(eta_new - eta))) if eta.size else 0.0
        b, eta, llf, obj = b_new, eta_new, llf_new, obj_new
        h = None
        if change < tol:
            converged = True
            break
        if watch_separation and it >= 8 and change > 1e-3 and saturated(y, eta):
            diverging = True
            break
    if not converged and not diverging and watch_separation and saturated(y, eta):
        diverging = True
    if need_hessian and converged and h is None:
        p = expit(eta)
        h = hessian(x, p - p * p)
        if pen is not None:
            h[np.diag_indices_from(h)] += pen
    return NewtonResult(b, llf, converged, it, h if need_hessian else None, diverging)


def independent_columns(x: np.ndarray) -> np.ndarray:
    """Boolean mask of the columns kept when each column is tested against the columns kept before it.

    A column is dropped when its residual sum of squares after least-squares projection on the kept
    earlier columns is below ``COLLINEAR_TOL`` times its own sum of squares (an all-zero column
    included). Uses only the k x k cross-product matrix.
    """
    g = x.T @ x
    k = g.shape[0]
    keep = np.zeros(k, dtype=bool)
    for j in range(k):
        gjj = g[j, j]
        if not gjj > 0.0:
            continue
        idx = np.flatnonzero(keep)
        if idx.size:
            gk = g[np.ix_(idx, idx)]
            gkj = g[idx, j]
            coef = np.linalg.lstsq(gk, gkj, rcond=None)[0]
            resid = gjj - gkj @ coef
            if resid <= COLLINEAR_TOL * gjj:
                continue
        keep[j] = True
    return keep
