"""Rows of the fitting problem in the scaled variable τ = T/1000 K.

The unknowns are the scaled Cp/R coefficients of every range, stacked range by range:
c = [c_(0,p1), c_(0,p2), ..., c_(1,p1), ...] with Cp/R = Σ_p c_(j,p) τ^p in range j.
Cp, its derivatives, and H(T) − H(298.15 K) and S(T) − S(298.15 K) are all linear in c,
so each observation or constraint is one row.
"""

from functools import lru_cache

import numpy as np

from ..core.constants import REFERENCE_TEMPERATURE
from ..core.gridcache import by_grid
from .forms import T_SCALE, i0, i1, range_of


def powers_row(powers, tau, deriv=0):
    """[τ^p] (or the deriv-th derivative with respect to τ) at each τ -> (n, m)."""
    tau = np.atleast_1d(np.asarray(tau, dtype=float))[:, None]
    p = np.asarray(powers, dtype=float)[None, :]
    coef = np.ones_like(p)
    for k in range(deriv):
        coef = coef * (p - k)
    return coef * tau ** (p - deriv)


@by_grid(size=16)
def powers_at(t, powers: tuple, deriv: int = 0):
    """``powers_row(powers, t / T_SCALE, deriv)`` at temperatures ``t`` [K] (1-d), the same
    numbers, made once for each grid: the species of a catalogue share their temperatures,
    their ranges of use and the grids their fits are checked on."""
    return powers_row(powers, t / T_SCALE, deriv)


def cp_rows(powers, t, breakpoints):
    """Rows of Cp/R at temperatures ``t`` [K] -> (n, nr*m), read-only: made once for each
    grid and breakpoints (a fit asks twice, and the species of a catalogue share their
    grid and often their breakpoints, chosen among the same candidates)."""
    return _cp_rows(np.asarray(t, dtype=float), tuple(powers),
                    tuple(float(b) for b in breakpoints))


@by_grid(size=16)
def _cp_rows(t, powers: tuple, breakpoints: tuple):
    m, nr = len(powers), len(breakpoints) + 1
    idx = range_of(t, breakpoints)
    v = powers_at(t, tuple(powers))
    a = np.zeros((len(t), nr * m))
    for j in range(nr):
        sel = idx == j
        a[sel, j * m:(j + 1) * m] = v[sel]
    return a


def values(powers, t, breakpoints, c, deriv: int = 0) -> np.ndarray:
    """Cp/R (or its ``deriv``-th derivative with respect to τ) at temperatures ``t`` [K] of
    the stacked coefficients ``c``: ``cp_rows(powers, t, breakpoints) @ c`` (or
    ``slope_rows``) without the rows of the other ranges' zeros (equal to rounding)."""
    t = np.asarray(t, dtype=float)
    m = len(powers)
    v = powers_at(t, tuple(powers), deriv)
    idx = range_of(t, breakpoints)
    lo, hi = (int(idx.min()), int(idx.max())) if len(t) else (0, -1)
    if lo == hi:
        return v @ c[lo * m:(lo + 1) * m]
    out = np.empty(len(t))
    for j in range(lo, hi + 1):
        sel = idx == j
        out[sel] = v[sel] @ c[j * m:(j + 1) * m]
    return out


def slope_rows(powers, t, breakpoints):
    """Rows of d(Cp/R)/dτ at temperatures ``t`` [K] -> (n, nr*m)."""
    t = np.atleast_1d(np.asarray(t, dtype=float))
    m, nr = len(powers), len(breakpoints) + 1
    idx = range_of(t, breakpoints)
    v = powers_at(t, tuple(powers), 1)
    a = np.zeros((len(t), nr * m))
    for j in range(nr):
        sel = idx == j
        a[sel, j * m:(j + 1) * m] = v[sel]
    return a


def standard_deviation(rows, cov) -> np.ndarray:
    """sqrt(diag(rows · cov · rowsᵀ)): the standard deviation of each row's value for
    coefficients of covariance ``cov`` (negative round-off clipped to zero)."""
    return np.sqrt(np.maximum(np.einsum("ni,ij,nj->n", rows, cov, rows), 0.0))


def continuity_rows(powers, breakpoints, order=1):
    """Equality constraints: Cp and its derivatives up to ``order`` equal on both sides of
    every breakpoint [K] -> (nb * (order + 1), nr * m), read-only (made once for each)."""
    return _continuity_rows(tuple(powers), tuple(float(b) for b in breakpoints), order)


@lru_cache(maxsize=256)
def _continuity_rows(powers: tuple, breakpoints: tuple, order: int) -> np.ndarray:
    rows = continuity_rows_of_sets(powers, [list(breakpoints)], order)[0]
    rows.flags.writeable = False
    return rows


def continuity_rows_of_sets(powers, sets, order=1):
    """``continuity_rows`` of many breakpoint sets at once: ``sets`` [K] of shape (K, nb) ->
    (K, nb * (order + 1), (nb + 1) * m)."""
    sets = np.asarray(sets, dtype=float).reshape(len(sets), -1)
    kk, nb = sets.shape
    m = len(powers)
    c = np.zeros((kk, nb * (order + 1), (nb + 1) * m))
    for j in range(nb):
        for d in range(order + 1):
            rows = powers_row(powers, sets[:, j] / T_SCALE, d)   # (K, m)
            c[:, j * (order + 1) + d, j * m:(j + 1) * m] = rows
            c[:, j * (order + 1) + d, (j + 1) * m:(j + 2) * m] = -rows
    return c


def _piece(powers, lo, hi, kind):
    """∫_lo^hi of Cp/R (kind 'H', [K]) or Cp/(R T) (kind 'S', [-]) for one range's basis."""
    tl, th = lo / T_SCALE, hi / T_SCALE
    if kind == "H":
        return T_SCALE * np.array([i1(p, th) - i1(p, tl) for p in powers]).T
    return np.array([i0(p, th) - i0(p, tl) for p in powers]).T


def integral_rows(powers, t, breakpoints, edges, kind, tref=REFERENCE_TEMPERATURE):
    """Rows of (H(T) − H(tref))/R [K] (kind 'H') or (S(T) − S(tref))/R [-] (kind 'S'),
    tref [K] 298.15 K unless a phase is anchored elsewhere (at a transition).

    The integral from tref to T runs through every range it crosses; ``edges`` are
    [t_min, b1, ..., t_max] [K] (the outer edges only bound the first and last range).
    """
    t = np.atleast_1d(np.asarray(t, dtype=float))
    m, nr = len(powers), len(breakpoints) + 1
    inner = [-np.inf] + list(breakpoints) + [np.inf]
    out = np.zeros((len(t), nr * m))
    lo_all = np.minimum(t, tref)
    hi_all = np.maximum(t, tref)
    sign = np.where(t >= tref, 1.0, -1.0)
    for j in range(nr):
        lo = np.maximum(lo_all, inner[j])
        hi = np.minimum(hi_all, inner[j + 1])
        ok = hi > lo
        if ok.any():
            out[ok, j * m:(j + 1) * m] = sign[ok, None] * _piece(powers, lo[ok], hi[ok], kind)
    return out
