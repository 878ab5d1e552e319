"""The uncertainty convention of a fit: what the stated standard uncertainties of Cp, H and S
are made of.

Convention (JCGM 100:2008, the GUM, sections 4.2-4.3 and 5.1; Birge ratio: R. T. Birge,
Phys. Rev. 40, 207 (1932)):

* Parameter share. The covariance of the coefficients propagates the σ of the data rows.
  When the table states u(Cp), σ = u(Cp) and the covariance is multiplied by the squared
  Birge ratio χ²/ν only when that exceeds 1: scatter beyond the stated uncertainty widens
  the result, scatter below it never narrows it (a Type B input is not replaced by a Type A
  estimate from the same data). When the table states none, σ is an assumed relative
  uncertainty that only shapes the weights, and the scatter itself is the evaluation (Type
  A): the covariance is multiplied by χ²/ν whatever its value.
* Model share. A polynomial form with a given number of ranges cannot follow Cp exactly
  even when the data are exact. The misfit d(T) = P(T) − F(T) between the fitted polynomial
  P and a flexible smooth reference F of the same rows (``reference_values``: the weighted
  least-squares cubic spline in ln T, weights 1/σ, with an interior knot at every
  ROWS_PER_KNOT-th row; its B-spline basis from scipy.interpolate.BSpline) estimates it. Its
  standard uncertainty per range is half the 95th percentile of |d| over the rows of the
  range (so that the usual coverage factor k = 2 covers 95 % of the misfit, which is not
  normally distributed), after removing the share of d that is the noise of the data
  themselves (the parameter variance, which the reference also carries). For H − H298 and
  S the same is done with the running integrals of d and d/T from 298.15 K.
* Extrapolation share (library.document.uncertainty): inside an extrapolated interval the
  model's relative uncertainty of Cp; it is systematic, so its integral from the data edge
  is added to u(H) and its integral over T to u(S), at every temperature it reaches.

The three shares are independent and added in quadrature.
"""

import numpy as np
from scipy.linalg.lapack import dgeqrf, dtrtrs

from ..core.constants import REFERENCE_TEMPERATURE
from ..core.gridcache import by_grid
from .lsq import Solution

#: the misfit's coverage probability that k = 2 is taken to mean (GUM 6.2-6.3)
COVERAGE = 0.95
#: rows per knot interval of the reference spline
ROWS_PER_KNOT = 6


def covariance_scale(sol: Solution, stated: bool) -> float:
    """The factor the propagated covariance is multiplied by: max(1, χ²/ν) when u(Cp) is
    stated, χ²/ν otherwise (see the module's convention)."""
    reduced = sol.chi2 / sol.dof
    return max(1.0, reduced) if stated else reduced


def _half_quantile(values) -> float:
    v = np.abs(np.asarray(values, dtype=float))
    return quantile(v, COVERAGE) / 2.0 if len(v) else 0.0


def _half_quantiles(rows) -> list:
    """``_half_quantile`` of each row of the 2-d array ``rows``, the same numbers: the order
    statistics of all rows taken in one partition."""
    v = np.abs(rows)
    n = v.shape[1]
    at = (n - 1) * COVERAGE
    if not n:
        return [0.0] * len(v)
    if not np.isfinite(v).all() or not 0.0 <= at < n - 1:
        return [_half_quantile(row) for row in v]
    lo = int(np.floor(at))
    part = np.partition(v, (lo, lo + 1), axis=1)
    return [_between(a, b, at - lo) / 2.0 for a, b in part[:, lo:lo + 2].tolist()]


def quantile(v, q: float) -> float:
    """``float(np.quantile(v, q))`` of a non-empty 1-d array, to the last bit (its default
    'linear' method, Hyndman & Fan's definition 7, with numpy's own arithmetic: the index
    (n − 1) q, and the interpolation taken from the nearer neighbour), without numpy's
    general machinery: the model share takes six per fit."""
    n = len(v)
    at = (n - 1) * q
    if not np.all(np.isfinite(v)) or not 0.0 <= at < n - 1:
        return float(np.quantile(v, q))
    lo = int(np.floor(at))
    a, b = (float(x) for x in np.partition(v, (lo, lo + 1))[lo:lo + 2])
    return _between(a, b, at - lo)


def _between(a: float, b: float, gamma: float) -> float:
    """The point ``gamma`` of the way from ``a`` to ``b``, as np.quantile takes it: from the
    nearer of the two."""
    step = b - a
    return a + step * gamma if gamma < 0.5 else b - step * (1.0 - gamma)


def _cumulative(t, f):
    """∫ f dT from 298.15 K to each t (trapezoids; t sorted)."""
    steps = np.concatenate([[0.0], ((t[1:] - t[:-1]) * (f[1:] + f[:-1]) / 2.0).cumsum()])
    return steps - np.interp(REFERENCE_TEMPERATURE, t, steps)


def spline_knots(x) -> np.ndarray:
    """The knots of the reference spline at ascending ``x``: each end four times, an
    interior knot at every ROWS_PER_KNOT-th row (Schoenberg-Whitney holds by
    construction)."""
    inner = x[ROWS_PER_KNOT:-ROWS_PER_KNOT + 1:ROWS_PER_KNOT] if len(x) > 2 * ROWS_PER_KNOT \
        else x[:0]
    inner = inner[(inner > x[0]) & (inner < x[-1])]
    return np.concatenate([[x[0]] * 4, inner, [x[-1]] * 4])


@by_grid
def _spline_basis(x) -> np.ndarray:
    """The cubic B-spline basis (rows: ``x``; columns: the splines of ``spline_knots``),
    made once for each grid (scipy.interpolate.BSpline.design_matrix)."""
    from scipy.interpolate import BSpline

    return BSpline.design_matrix(x, spline_knots(x), 3).toarray()


def reference_values(x, y, sigma) -> np.ndarray:
    """The weighted least-squares cubic spline of ``y`` ± ``sigma`` at ascending ``x``
    (knots: ``spline_knots``), at ``x``: one Householder QR of the weighted basis with the
    weighted ``y`` beside it (LAPACK dgeqrf) and a triangular solve; the basis has full
    column rank (Schoenberg-Whitney)."""
    b = _spline_basis(x)
    w = 1.0 / np.asarray(sigma, dtype=float)
    k = b.shape[1]
    fact, _, _, _ = dgeqrf(np.concatenate((b * w[:, None], (y * w)[:, None]), axis=1))
    c, info = dtrtrs(fact[:k, :k], fact[:k, k])          # reads the upper triangle only
    if info != 0 or not np.isfinite(c).all():
        c = np.linalg.lstsq(b * w[:, None], y * w, rcond=None)[0]
    return b @ c


def model_error(t, cp, sigma, fitted, u_param, edges) -> tuple:
    """Per range: {"cp": [J/(mol K)], "h": [J/mol], "s": [J/(mol K)]}, the standard
    uncertainties of the polynomial form itself.

    t, cp, sigma : the fitted rows (data and extension) [K], [J/(mol K)], sorted by T
    fitted : the polynomial's Cp at t; u_param : its parameter standard uncertainty at t
    edges : the range limits [K]
    """
    t, cp, sigma = (np.asarray(a, dtype=float) for a in (t, cp, sigma))
    keep = np.concatenate([[True], t[1:] - t[:-1] > 0])
    x = np.log(t[keep])
    if len(x) < 2 * ROWS_PER_KNOT:
        return tuple({"cp": 0.0, "h": 0.0, "s": 0.0} for _ in range(len(edges) - 1))
    d = np.asarray(fitted, dtype=float)[keep] - reference_values(x, cp[keep], sigma[keep])
    noise = np.asarray(u_param, dtype=float)[keep]
    tk = t[keep]
    e_h, e_s = _cumulative(tk, d), _cumulative(tk, d / tk)
    out = []
    for j in range(len(edges) - 1):
        inside = (tk >= edges[j]) & (tk <= edges[j + 1])
        near = noise[inside]
        share = float((near ** 2).sum() / len(near)) if len(near) else 0.0
        q_cp, q_h, q_s = _half_quantiles(np.array((d[inside], e_h[inside], e_s[inside])))
        u_cp = np.sqrt(max(0.0, q_cp ** 2 - share))
        out.append({"cp": float(u_cp), "h": q_h, "s": q_s})
    return tuple(out)
