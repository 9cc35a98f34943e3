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
``tol``. Newton converges quadratically (measured here: a change of 6.6e-4 is followed by one of
4.3e-8), so the error left after that step is of order ``0.1 tol**2``; a final Newton correction from
the gradient and Hessian already computed at that point squares it again at no cost.
Unlike a test on the log-likelihood, this test does not mistake the slow flattening of a separated
likelihood for convergence: there the linear predictors keep growing by O(1) per step.

Separation (Albert & Anderson, 1984, "On the existence of maximum likelihood estimates in logistic
regression models", *Biometrika* 71(1), 1-10): the maximum-likelihood estimate fails to exist exactly
when some direction ``d != 0`` has ``(2 y_i - 1) x_i' d >= 0`` for every row (complete separation when
all are > 0, quasi-complete when some are 0); along such a direction every fitted probability moves
towards its outcome or stays, so the likelihood keeps rising as ``||b||`` grows. Rows fitted with
probability 0 or 1 to ~1e-11 (|eta| > :data:`SATURATED_ETA` on the side of their outcome) only raise the
question: a large sample fitted to a finite estimate has such rows too (an extreme predictor value), so
:func:`newton` flags separation only with a certificate, a direction passing the test above on every
row (:func:`separating_direction`). The candidates are the direction the estimates keep growing in (the
last Newton step) and the flattest directions of the Hessian, in which the saturated rows no longer
weigh.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: |linear predictor| beyond which a fitted probability is 0 or 1 to about 1e-11.
SATURATED_ETA = 25.0
#: Relative residual sum of squares under which a column counts as a combination of earlier ones.
COLLINEAR_TOL = 1e-10
#: A direction separates when no row's signed margin (2 y - 1) x' d falls below -SEPARATION_TOL times
#: the largest |margin|: rows on the separating hyperplane have margin 0 up to the rounding of ``d``.
SEPARATION_TOL = 1e-6


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
    diag = np.diag(h)
    if not np.all(diag > 0.0):
        return np.full(g.shape, np.nan)
    s = 1.0 / np.sqrt(diag)
    try:
        return s * np.linalg.solve(h * np.outer(s, s), g * s)
    except np.linalg.LinAlgError:
        return np.full(g.shape, np.nan)


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


#: Rows per block of a pass over the data. Blocks of 8192 x k doubles stay in cache and keep BLAS
#: on one thread, which on a busy two-core machine measured 3-4x faster than whole-array operations
#: for a million rows.
CHUNK = 8192


def hessian(x: np.ndarray, w: np.ndarray) -> np.ndarray:
    """X' diag(w) X, computed as (sqrt(w) X)' (sqrt(w) X) so BLAS can use the symmetric kernel."""
    xw = x * np.sqrt(w)[:, None]
    return xw.T @ xw


def crossprod(x: np.ndarray) -> np.ndarray:
    """X' X, block by block."""
    k = x.shape[1]
    out = np.zeros((k, k))
    for s in range(0, x.shape[0], CHUNK):
        xc = x[s:s + CHUNK]
        out += xc.T @ xc
    return out


def evaluate(x: np.ndarray, y: np.ndarray, b: np.ndarray, *, need_llf: bool = True
             ) -> tuple[float, np.ndarray, np.ndarray, np.ndarray]:
    """One pass over the data at ``b``: log-likelihood, gradient X'(y - p), X'WX and ``eta = X b``.

    With ``e = exp(-|eta|)``: ``p = 1 / (1 + e)`` or ``e / (1 + e)`` by the sign of eta,
    ``w = p (1 - p) = e / (1 + e)**2`` and ``log(1 + exp(eta)) = max(eta, 0) + log1p(e)``, all free
    of overflow and of cancellation for large |eta|.
    """
    n, k = x.shape
    g = np.zeros(k)
    h = np.zeros((k, k))
    eta = np.empty(n)
    llf = 0.0
    for s in range(0, n, CHUNK):
        xc, yc = x[s:s + CHUNK], y[s:s + CHUNK]
        ec = xc @ b
        eta[s:s + CHUNK] = ec
        e = np.exp(-np.abs(ec))
        inv = 1.0 / (1.0 + e)
        p = np.where(ec >= 0.0, inv, e * inv)
        if need_llf:
            llf += float(yc @ ec) - float(np.maximum(ec, 0.0).sum()) - float(np.log1p(e).sum())
        g += xc.T @ (yc - p)
        xw = xc * (np.sqrt(e) * inv)[:, None]
        h += xw.T @ xw
    return llf, g, h, eta


def evaluate3(x: np.ndarray, y: np.ndarray, b: np.ndarray, *, third: bool = True
              ) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """One pass at ``b``: the gradient ``X'(y - p)``, ``H = X'WX`` and, when ``third``, the third
    derivatives ``T[j, k, l] = sum_i w_i (1 - 2 p_i) x_ij x_ik x_il`` (the gradient at ``b + d`` is
    ``g - H d - T[d, d] / 2 + O(|d|^3)``); else None for T."""
    n, k = x.shape
    g = np.zeros(k)
    h = np.zeros((k, k))
    t = np.zeros((k, k, k)) if third else None
    for s in range(0, n, CHUNK):
        gc, hc, tc = row_terms(x[s:s + CHUNK], y[s:s + CHUNK], b, third=third)
        g += gc
        h += hc
        if t is not None:
            t += tc
    return g, h, t


def row_terms(x: np.ndarray, y: np.ndarray, b: np.ndarray, *, third: bool = True
              ) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """The rows' shares of :func:`evaluate3`'s gradient, Hessian and third derivatives at ``b``."""
    ec = x @ b
    e = np.exp(-np.abs(ec))
    inv = 1.0 / (1.0 + e)
    p = np.where(ec >= 0.0, inv, e * inv)
    g = x.T @ (y - p)
    xw = x * (np.sqrt(e) * inv)[:, None]
    h = xw.T @ xw
    if not third:
        return g, h, None
    z = x * (e * inv * inv * (1.0 - 2.0 * p))[:, None]
    t = np.stack([(x * z[:, j:j + 1]).T @ x for j in range(x.shape[1])])
    return g, h, t


def saturated(y: np.ndarray, eta: np.ndarray) -> bool:
    """True when some rows are fitted perfectly: probability 0 or 1 (to ~1e-11) on the observed side."""
    return bool(np.any(np.where(y > 0.5, eta, -eta) > SATURATED_ETA))


def separates(x: np.ndarray, y: np.ndarray, d: np.ndarray) -> bool:
    """True when ``d`` certifies (quasi-)complete separation: every row's margin ``(2 y_i - 1) x_i' d``
    is >= 0 (to :data:`SEPARATION_TOL` of the largest) and some is > 0 (Albert & Anderson, 1984)."""
    if not np.all(np.isfinite(d)) or not np.any(d):
        return False
    lo = hi = 0.0
    for s in range(0, x.shape[0], CHUNK):
        m = x[s:s + CHUNK] @ d
        m = np.where(y[s:s + CHUNK] > 0.5, m, -m)
        lo, hi = min(lo, float(m.min())), max(hi, float(np.abs(m).max()))
    return hi > 0.0 and lo >= -SEPARATION_TOL * hi


def separating_direction(x: np.ndarray, y: np.ndarray, h: np.ndarray, step: np.ndarray | None
                         ) -> np.ndarray | None:
    """A direction certifying separation (:func:`separates`), or None when no candidate does.

    Candidates: ``step`` (the direction the estimates grew in last), then the eigenvectors of the
    Hessian ``h`` (= X'WX) for its smallest eigenvalues, in both signs, after scaling the columns of X
    to unit length: rows fitted perfectly have weight ~0, so the direction that separates them is one
    in which the likelihood is flat.
    """
    cands = [] if step is None else [step]
    norms = np.sqrt(np.maximum(np.diag(crossprod(x)), 0.0))
    if np.all(norms > 0.0) and np.all(np.isfinite(h)):
        sc = 1.0 / norms
        vals, vecs = np.linalg.eigh(h * np.outer(sc, sc))
        for j in np.argsort(vals)[:2]:
            v = vecs[:, j] * sc
            cands += [v, -v]
    for d in cands:
        if separates(x, y, d):
            return d
    return None


def newton(x: np.ndarray, y: np.ndarray, start: np.ndarray, *, penalty: np.ndarray | None = None,
           tol: float = 1e-6, maxiter: int = 50, need_hessian: bool = True,
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
        Convergence when the last step changed no fitted linear predictor by ``tol`` or more; a final
        correction step (no extra pass) follows.
    maxiter : int
        Most Newton steps.
    need_hessian : bool
        Return ``X'WX (+P)`` at the final estimate (for standard errors). Each pass computes it
        anyway, so the estimate it belongs to needs no further pass.
    watch_separation : bool
        Flag ``diverging`` (separation) when some row is fitted perfectly (|eta| > SATURATED_ETA on
        the side of its outcome) and a direction certifies separation (:func:`separating_direction`):
        at the end, or early (every 4th step after the 8th) while the linear predictors still move by
        more than 1e-3 (then the last step is the first candidate).
    """
    b = np.array(start, dtype=float)
    pen = penalty

    def objective(llf: float, bb: np.ndarray) -> float:
        return llf if pen is None else llf - 0.5 * float(pen @ (bb * bb))

    llf, g, h, eta = evaluate(x, y, b)
    obj = objective(llf, b)
    converged = diverging = False
    it = 0
    while it < maxiter:
        d = solve_pd(h, g) if pen is None else solve_pd(h + np.diag(pen), g - pen * b)
        if not np.all(np.isfinite(d)):
            break
        step = 1.0
        for _ in range(40):
            b_new = b + step * d
            llf_n, g_n, h_n, eta_n = evaluate(x, y, b_new)
            obj_n = objective(llf_n, b_new)
            if obj_n >= obj - 1e-12 * (1.0 + abs(obj)):
                break
            step *= 0.5
        else:
            converged = True  # no step raises the objective: we sit at its numerical maximum
            break
        change = float(np.max(np.abs(eta_n - eta))) if eta.size else 0.0
        b, llf, g, h, eta, obj = b_new, llf_n, g_n, h_n, eta_n, obj_n
        it += 1
        if change < tol:
            converged = True
            # One more Newton step from the gradient and Hessian this pass already computed: it
            # costs no pass and leaves an error of order (C tol**2)**2. llf and the Hessian stay
            # those of b, which differ from the final point's by second-order amounts.
            dd = solve_pd(h, g) if pen is None else solve_pd(h + np.diag(pen), g - pen * b)
            if np.all(np.isfinite(dd)):
                b = b + dd
            break
        if watch_separation and it >= 8 and change > 1e-3 and it % 4 == 0 and saturated(y, eta) \
                and separating_direction(x, y, h, step * d) is not None:
            diverging = True  # still growing, along a direction that separates
            break
    if not diverging and watch_separation and saturated(y, eta):
        # Also after "convergence": a first step can throw a lone separated row far out, where its
        # weight underflows, the Hessian turns singular and the steps vanish. Rows fitted to within
        # 1e-11 of their outcome are separation only when a direction certifies it.
        diverging = separating_direction(x, y, h, None) is not None
    if pen is not None:
        h = h + np.diag(pen)
    return NewtonResult(b, llf, converged, it, h if need_hessian and converged else None, diverging)


def independent_columns(x: np.ndarray) -> np.ndarray:
    """Boolean mask of the columns kept when each column is tested against the columns kept before it.

    A column is dropped when its residual sum of squares after least-squares projection on the kept
    earlier columns is below ``COLLINEAR_TOL`` times its own sum of squares (an all-zero column
    included). Uses only the k x k cross-product matrix.
    """
    g = crossprod(x)
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
