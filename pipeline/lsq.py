"""Exactly constrained weighted linear least squares, single and batched.

Problem: minimise ||(A c − y)/σ||² subject to C c = 0 (homogeneous equality constraints,
here continuity at the breakpoints). Null-space method: with N an orthonormal basis of
ker C (from the SVD of C), every admissible c is N z, and z solves the ordinary problem
min ||M z − b|| with M = (A N)/σ, b = y/σ — solved by SVD after column equilibration.
The constraints therefore hold to rounding error, not approximately as with penalties.

The covariance of the solution is s² N (MᵀM)⁻¹ Nᵀ with s² = χ²/(n − q) (the usual
scaling by the reduced chi-square, common practice), i.e. the covariance of the
unconstrained problem projected onto the constraint set.

Lawson's iteratively reweighted scheme turns the same solver into a minimax (Chebyshev)
fit: C. L. Lawson, PhD thesis, UCLA (1961); see also Rice & Usow, Math. Comp. 22, 118 (1968).
"""

from dataclasses import dataclass

import numpy as np


def null_basis(c: np.ndarray, k: int) -> np.ndarray:
    """Orthonormal basis (k, q) of ker C; the identity without constraints."""
    if c is None or len(c) == 0:
        return np.eye(k)
    _, s, vt = np.linalg.svd(c, full_matrices=True)
    rank = int((s > s.max() * 1e-12).sum()) if len(s) else 0
    return vt[rank:].T


@dataclass(frozen=True)
class Solution:
    c: np.ndarray          # coefficients (k,)
    residual: np.ndarray   # weighted residuals (n,)
    cov: np.ndarray        # covariance of c (k, k), scaled by the reduced chi-square
    chi2: float
    dof: int


def solve(a, y, sigma, c=None, weights=None) -> Solution:
    """Constrained weighted least squares; ``weights`` multiply 1/σ² (for Lawson's scheme)."""
    a = np.asarray(a, dtype=float)
    n, k = a.shape
    basis = null_basis(c, k)
    w = 1.0 / np.asarray(sigma, dtype=float)
    if weights is not None:
        w = w * np.sqrt(weights)
    m = (a @ basis) * w[:, None]
    b = np.asarray(y, dtype=float) * w
    norms = np.linalg.norm(m, axis=0)
    norms[norms == 0] = 1.0
    u, s, vt = np.linalg.svd(m / norms, full_matrices=False)
    keep = s > s.max() * 1e-13 if len(s) else s > 0
    z = (vt[keep].T @ ((u[:, keep].T @ b) / s[keep])) / norms
    coef = basis @ z
    res = (a @ coef - y) / np.asarray(sigma, dtype=float)
    q = int(keep.sum())
    dof = max(n - q, 1)
    chi2 = float(res @ res)
    inv = (vt[keep].T / s[keep] ** 2) @ vt[keep]          # (M'ᵀM')⁻¹ in equilibrated z
    cov_z = inv / np.outer(norms, norms) * (chi2 / dof)
    return Solution(c=coef, residual=res, cov=basis @ cov_z @ basis.T, chi2=chi2, dof=dof)


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


def batch_objective(a, y, sigma, c, norm="max"):
    """Objective of many candidate problems at once.

    a : (K, n, k) design matrices; c : (K, r, k) constraints; y, sigma : (n,)
    Returns (K,) — the largest |weighted residual| ('max') or the rms ('rms').
    """
    kk = a.shape[2]
    r = c.shape[1]
    _, _, vt = np.linalg.svd(c, full_matrices=True)            # (K, k, k)
    basis = np.swapaxes(vt[:, r:, :], 1, 2)                    # (K, k, k - r)
    w = 1.0 / np.asarray(sigma, dtype=float)
    m = np.einsum("Knk,Kkq->Knq", a, basis) * w[None, :, None]
    b = np.asarray(y, dtype=float) * w
    norms = np.linalg.norm(m, axis=1, keepdims=True)
    norms[norms == 0] = 1.0
    u, s, vt2 = np.linalg.svd(m / norms, full_matrices=False)   # batched
    cutoff = s.max(axis=1, keepdims=True) * 1e-13
    inv_s = np.where(s > cutoff, 1.0 / np.where(s > 0, s, 1.0), 0.0)
    ub = np.einsum("Knq,n->Kq", u, b)
    fitted = np.einsum("Knq,Kq->Kn", u, ub * (s * inv_s))
    res = fitted - b[None, :]
    del kk
    if norm == "rms":
        return np.sqrt(np.mean(res ** 2, axis=1))
    return np.max(np.abs(res), axis=1)
