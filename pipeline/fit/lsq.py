"""Exactly constrained weighted linear least squares, single and batched.

Problem: minimise ||(A c − y)/σ||² subject to C c = 0 (homogeneous equality constraints,
here continuity at the breakpoints). Null-space method: with N an orthonormal basis of
ker C (from the SVD of C), every admissible c is N z, and z solves the ordinary problem
min ||M z − b|| with M = (A N)/σ, b = y/σ — solved by SVD after column equilibration.
The constraints therefore hold to rounding error, not approximately as with penalties.

The covariance of the solution is N (MᵀM)⁻¹ Nᵀ, the covariance of the unconstrained
problem projected onto the constraint set: the σ given are propagated as they are. How it
is then scaled by the reduced chi-square χ²/(n − q) (the Birge ratio squared) is the
caller's convention (see fit/uncertainty.py).

Inequality constraints G x ≥ h (``at_least``) are solved exactly by the reduction of least
squares with inequalities to a least-distance problem and that to non-negative least
squares: C. L. Lawson & R. J. Hanson, Solving Least Squares Problems, Prentice-Hall (1974),
ch. 23 (scipy.optimize.nnls).

Lawson's iteratively reweighted scheme turns the same solver into a minimax (Chebyshev)
fit: C. L. Lawson, PhD thesis, UCLA (1961); see also Rice & Usow, Math. Comp. 22, 118 (1968).
"""

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.linalg.lapack import dgeqrf, dorgqr, dtrtri
from scipy.optimize import nnls


def null_basis(c: np.ndarray, k: int) -> np.ndarray:
    """Orthonormal basis (k, q) of ker C (complete QR of Cᵀ); the identity without constraints."""
    if c is None or len(c) == 0:
        return np.eye(k)
    ct = np.asarray(c, dtype=float).T                       # (k, r)
    r = ct.shape[1]
    fact, tau, _, _ = dgeqrf(np.concatenate((ct, np.zeros((k, k - r))), axis=1))
    d = np.abs(fact.diagonal()[:r])
    rank = int((d > d.max() * 1e-12).sum()) if r else 0
    q, _, _ = dorgqr(fact, tau)                             # the complete Q (k, k)
    return q[:, rank:]


@lru_cache(maxsize=64)
def _upper(q: int) -> np.ndarray:
    """Mask of the upper triangle (LAPACK leaves the other triangle untouched)."""
    return np.triu(np.ones((q, q)))


@dataclass(frozen=True)
class Solution:
    """A least-squares solution: coefficients, their covariance and the residual statistics."""

    c: np.ndarray          # coefficients (k,)
    residual: np.ndarray   # weighted residuals (n,)
    cov: np.ndarray        # covariance of c (k, k) propagated from σ (not rescaled)
    chi2: float
    dof: int


def solve(a, y, sigma, c=None, weights=None) -> Solution:
    """Constrained weighted least squares; ``weights`` multiply 1/σ² (for Lawson's scheme).

    The reduced problem is solved by Householder QR of the column-equilibrated matrix (never
    through the normal equations, whose condition number is the square); a rank-deficient
    problem falls back to the SVD.
    """

    a = np.asarray(a, dtype=float)
    n, k = a.shape
    basis = null_basis(c, k)
    sig = np.asarray(sigma, dtype=float)
    w = 1.0 / sig
    if weights is not None:
        w = w * np.sqrt(weights)
    m = (a @ basis) * w[:, None]
    b = np.asarray(y, dtype=float) * w
    norms = np.sqrt(np.einsum("nq,nq->q", m, m))
    norms[norms == 0] = 1.0
    me = m / norms
    # one Householder QR of [M | b] gives R and Qᵀb together (LAPACK dgeqrf)
    qcols = me.shape[1]
    fact, _, _, info = dgeqrf(np.concatenate((me, b[:, None]), axis=1))
    d = np.abs(fact.diagonal()[:qcols])
    if info == 0 and d.min() > d.max() * 1e-12:
        rinv, _ = dtrtri(fact[:qcols, :qcols], lower=0)   # reads the upper triangle only
        rinv *= _upper(qcols)
        z = rinv @ fact[:qcols, qcols]
        ginv = rinv @ rinv.T
        q = qcols
    else:
        u, sv, vt = np.linalg.svd(me, full_matrices=False)
        keep = sv > sv.max() * 1e-13
        z = vt[keep].T @ ((u[:, keep].T @ b) / sv[keep])
        ginv = (vt[keep].T / sv[keep] ** 2) @ vt[keep]
        q = int(keep.sum())
    coef = basis @ (z / norms)
    res = (a @ coef - y) / sig
    dof = max(n - q, 1)
    chi2 = float(res @ res)
    cov_z = ginv / (norms[:, None] * norms[None, :])
    return Solution(c=coef, residual=res, cov=basis @ cov_z @ basis.T, chi2=chi2, dof=dof)


#: a row of G whose norm is below this fraction of the largest is no constraint on x: what
#: it asks holds or fails whatever x is (a row fixed by equalities before, zero to rounding)
NO_CONSTRAINT = 1e-12


def at_least(a, y, sigma, g, h) -> Solution:
    """min ||(A x − y)/σ|| subject to G x ≥ h (A of full column rank), by Lawson & Hanson's
    reduction to a least-distance problem solved with NNLS. Rows of G that are zero to
    rounding (NO_CONSTRAINT) are left out: with an h above zero by rounding they would ask
    for an x without bound. The covariance is that of the unconstrained problem (active
    constraints only narrow it)."""
    free = solve(a, y, sigma)
    g, h = np.asarray(g, dtype=float), np.asarray(h, dtype=float)
    if len(h):
        norms = np.linalg.norm(g, axis=1)
        real = norms > NO_CONSTRAINT * norms.max()
        if not real.all():
            g, h = g[real], h[real]
    if not len(h) or np.all(g @ free.c >= h):
        return free
    w = 1.0 / np.asarray(sigma, dtype=float)
    e, f = np.asarray(a, dtype=float) * w[:, None], np.asarray(y, dtype=float) * w
    # one Householder QR of [E | f] gives R and Qᵀf together (as in ``solve``); A has full
    # column rank, so R is invertible
    k = e.shape[1]
    fact, _, _, _ = dgeqrf(np.concatenate((e, f[:, None]), axis=1))
    rinv, _ = dtrtri(fact[:k, :k], lower=0)          # reads the upper triangle only
    rinv *= _upper(k)
    qtf = fact[:k, k]
    # x = R⁻¹ (z + Qᵀf): min ||z|| subject to (G R⁻¹) z ≥ h − G R⁻¹ Qᵀ f
    gz = g @ rinv
    hz = h - gz @ qtf
    scale = max(np.abs(gz).max(), np.abs(hz).max(), 1e-300)
    gz, hz = gz / scale, hz / scale
    big = np.vstack([gz.T, hz[None, :]])
    target = np.zeros(big.shape[0])
    target[-1] = 1.0
    u, _ = nnls(big, target, maxiter=50 * big.shape[1])
    resid = big @ u - target
    if abs(resid[-1]) < 1e-12:           # no feasible point: keep the unconstrained one
        return free
    z = -resid[:-1] / resid[-1]
    x = rinv @ (z + qtf)
    res = (np.asarray(a, dtype=float) @ x - np.asarray(y, dtype=float)) * w
    return Solution(c=x, residual=res, cov=free.cov, chi2=float(res @ res), dof=free.dof)


def minimax(a, y, sigma, c=None, iterations=200, tol=1e-9) -> Solution:
    """Minimise max |(A c − y)/σ| subject to C c = 0 by Lawson's reweighting."""
    n = len(y)
    w = np.full(n, 1.0 / n)
    best = solve(a, y, sigma, c)
    best_max = np.max(np.abs(best.residual))
    for _ in range(iterations):
        sol = solve(a, y, sigma, c, weights=w)
        r = np.abs(sol.residual)
        if r.max() < best_max:
            best, best_max = sol, r.max()
        new = w * r
        total = new.sum()
        if total <= 0:
            break
        new /= total
        if np.max(np.abs(new - w)) < tol:
            break
        w = np.maximum(new, 1e-300)
    return best


def batch_objective(v, y, sigma, starts, c, norm="max"):
    """Objective of many candidate problems of one table at once (``batch_objectives`` of a
    single table): ``y``, ``sigma`` (n,), ``starts`` (K, nr + 1), ``c`` (K, r, nr*m) ->
    (K,)."""
    return batch_objectives(v, np.asarray(y, dtype=float)[None], np.asarray(
        sigma, dtype=float)[None], np.asarray(starts)[None], np.asarray(c)[None], norm)[0]


@dataclass(frozen=True)
class Prefixed:
    """What ``batch_objectives`` makes of S tables before it looks at any candidate: each
    table's basis orthonormalised over all its points ``vw`` (S, n, m) with ``scale`` (S, m,
    m) back to the old coefficients, its weighted observations ``b`` (S, n), and the prefix
    sums of the normal matrix ``pg`` (S, n + 1, m, m) and right-hand side ``pq`` (S, n + 1,
    m). Made once, it serves every set of candidates of the same tables."""

    vw: np.ndarray
    scale: np.ndarray
    b: np.ndarray
    pg: np.ndarray
    pq: np.ndarray

    def rows(self, tables) -> "Prefixed":
        """The same of the tables ``tables`` (indices) only: copies of their rows."""
        return Prefixed(*(a[tables] for a in (self.vw, self.scale, self.b, self.pg, self.pq)))


def prefixed(v, y, sigma) -> Prefixed:
    """The Prefixed of S tables: ``v`` (n, m) basis rows, ``y``, ``sigma`` (S, n)."""
    v = np.asarray(v, dtype=float)
    m = v.shape[1]
    w = 1.0 / np.asarray(sigma, dtype=float)                       # (S, n)
    ss = w.shape[0]
    # a fixed change of basis spans the same functions on every subset of points: the
    # orthonormal columns of the weighted basis over all points condition every range's
    # normal equations far better than raw powers of tau
    vw, transform = np.linalg.qr(v[None, :, :] * w[:, :, None])    # (S, n, m), (S, m, m)
    scale = np.linalg.inv(transform)                     # old coefficients = scale @ new
    b = np.asarray(y, dtype=float) * w                             # (S, n)
    pg = np.concatenate([np.zeros((ss, 1, m, m)),
                         np.cumsum(vw[:, :, :, None] * vw[:, :, None, :], 1)], axis=1)
    pq = np.concatenate([np.zeros((ss, 1, m)), np.cumsum(vw * b[:, :, None], 1)], axis=1)
    return Prefixed(vw, scale, b, pg, pq)


def batch_objectives(v, y, sigma, starts, c, norm="max", made: Prefixed | None = None):
    """Objective of many candidate problems of many tables at once, from prefix sums of the
    normal equations.

    v : (n, m) basis rows of every point (one range's columns), points sorted by T, the
        same for every table (the tables share their temperatures)
    y, sigma : (S, n) the observations of each of S tables and their σ
    starts : (S, K, nr + 1) indices into the points where each range begins (last = n)
    c : (S, K, r, nr*m) continuity constraints of each candidate
    made : ``prefixed(v, y, sigma)`` when made already (``v``, ``y`` and ``sigma`` are
        then not read): the same objectives
    Returns (S, K) — the largest |weighted residual| ('max') or the rms ('rms').

    Each candidate's block-diagonal normal matrix comes from differences of prefix sums, and
    its KKT system [[G, Cᵀ], [C, 0]] is solved for all candidates of all tables in one
    batched call, in a basis orthonormalised over all points of each table (the same
    functions, better conditioned). Every table's figures are computed by the same
    operations whatever else is in the batch (stacked LAPACK and matrix products act on
    each table alone), so a table gets the same objective alone or in a batch. The objective
    only ranks candidates; the chosen one is solved again by ``solve``.
    """
    made = made if made is not None else prefixed(v, y, sigma)
    vw, scale, b, pg, pq = made.vw, made.scale, made.b, made.pg, made.pq
    ss, n, m = vw.shape
    _, kk, nr1 = starts.shape
    nr = nr1 - 1
    r = c.shape[2]
    size = nr * m + r
    kkt = np.zeros((ss, kk, size, size))
    rhs = np.zeros((ss, kk, size))
    table = np.arange(ss)[:, None]
    for j in range(nr):
        lo, hi = starts[:, :, j], starts[:, :, j + 1]
        sl = slice(j * m, (j + 1) * m)
        np.subtract(pg[table, hi], pg[table, lo], out=kkt[:, :, sl, sl])
        np.subtract(pq[table, hi], pq[table, lo], out=rhs[:, :, sl])
    # each table's constraint rows of all its candidates in one product with its scale
    cs = np.concatenate([(c[:, :, :, j * m:(j + 1) * m].reshape(ss, kk * r, m) @ scale)
                         .reshape(ss, kk, r, m) for j in range(nr)], axis=3)
    kkt[:, :, nr * m:, :nr * m] = cs
    kkt[:, :, :nr * m, nr * m:] = np.swapaxes(cs, 2, 3)
    sol = np.linalg.solve(kkt, rhs[..., None])[..., 0][..., :nr * m].reshape(ss, kk, nr, m)
    pos = np.arange(n)[None, None, :]
    vt = np.swapaxes(vw, 1, 2)                                     # (S, m, n)
    fitted = sol[:, :, 0, :] @ vt                                  # each point: its range's
    for j in range(1, nr):
        np.copyto(fitted, sol[:, :, j, :] @ vt, where=pos >= starts[:, :, j:j + 1])
    res = np.subtract(fitted, b[:, None, :], out=fitted)
    if norm == "rms":
        return np.sqrt(np.mean(res ** 2, axis=2))
    return np.max(np.abs(res, out=res), axis=2)
