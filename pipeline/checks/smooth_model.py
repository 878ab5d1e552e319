"""Robust smooth model of Cp(T) for outlier and jitter detection.

Cp(T) of one phase without transitions is a superposition of smooth, physically
shaped contributions. The model here is

    Cp(T) ≈ c0 + Σ_j w_j E(θ_j / T) + Σ_k v_k S(θ_k / T),   c0, w_j, v_k ≥ 0

with E the Einstein function (vibrations, [1]) and S(x) = x² e^(−x)/(1 + e^(−x))²
the two-level (Schottky) function (electronic states, [1]) on fixed grids of
characteristic temperatures θ. It follows rigid-rotor/harmonic-oscillator
curves and genuine smooth maxima closely, but cannot follow a single-point slip.
It is fitted by non-negative least squares in relative residuals.

Each point is judged by its leave-one-out residual: for interior points from the
hat matrix of the active columns (exact for the unconstrained problem on the
active set), for the first and last point by refitting without them. An end
point is predicted by extrapolation, so its threshold also includes the
disagreement with a second, independent extrapolation (a local quadratic of
ln Cp in ln T): where the two disagree the data do not pin the end down and the
check is lenient rather than wrong. Flagged points are removed and the model
refitted, largest first, so that one slip does not mask or implicate its
neighbours.

References
----------
[1] D. A. McQuarrie, Statistical Mechanics, Harper & Row (1976), ch. 8 (Einstein
    function) and ch. 6 (two-level systems).
"""

import numpy as np

from ..core.gridcache import by_grid
from ..physics.statmech import einstein

RUN_ROWS, RUN_MIN = 8, 3  # three or more bad rows within eight make a run (jitter)
MAD_TO_SIGMA = 1.4826  # sigma of a normal distribution = 1.4826 MAD (common practice)
THETA_VIB = np.geomspace(60.0, 30000.0, 14)   # [K]
THETA_ELEC = np.geomspace(30.0, 30000.0, 7)   # [K]


@by_grid
def basis(t) -> np.ndarray:
    """Columns [1, E(θ_j/T)..., S(θ_k/T)...] at temperatures ``t`` [K] (read-only, made once
    per grid)."""
    t = np.asarray(t, dtype=float)[:, None]
    x = THETA_VIB[None, :] / t
    y = THETA_ELEC[None, :] / t
    ey = np.exp(-y)
    return np.hstack([np.ones((t.shape[0], 1)), einstein(x), y * y * ey / (1.0 + ey) ** 2])


def median(values) -> float:
    """``float(np.median(values))`` of a 1-d float array, to the last bit (the middle order
    statistic, or the mean of the middle two as numpy takes it: their sum halved), without
    numpy's general machinery; numpy's own for an empty array or one with NaN."""
    v = np.asarray(values, dtype=float)
    n = len(v)
    if not n or not np.isfinite(v).all():
        return float(np.median(v))
    h = n // 2
    if n % 2:
        return float(np.partition(v, h)[h])
    lo, hi = np.partition(v, (h - 1, h))[h - 1:h + 1]
    return float((lo + hi) / 2)


def robust_sigma(values) -> float:
    """Robust standard deviation of ``values`` (1.4826 × median absolute deviation), in the
    unit of ``values``; 0 for none."""
    v = np.asarray(values, dtype=float)
    if not len(v):
        return 0.0
    return MAD_TO_SIGMA * median(np.abs(v - median(v)))


def nnls(a, b, maxiter: int):
    """scipy.optimize.nnls, imported on first use (checking an empty folder loads no scipy)."""
    from scipy.optimize import nnls as solve

    return solve(a, b, maxiter=maxiter)


def _fit(b, cp):
    a = b / cp[:, None]
    return a, _solved(a)


def _solved(a):
    """The non-negative coefficients of the relative fit whose rows are ``a`` (the basis
    over Cp): rows of ``_fit``'s matrix may be left out by slicing it, the same numbers as
    made anew from the rows kept."""
    try:
        c, _ = nnls(a, np.ones(len(a)), maxiter=50 * a.shape[1])
    except RuntimeError:  # no convergence: fall back to the unconstrained solution
        c = np.linalg.lstsq(a, np.ones(len(a)), rcond=None)[0]
    return c


def _inside(n, j, k):
    """The k rows nearest to end row ``j`` (0 or n − 1) on the inside of n rows."""
    idx = np.arange(1, k + 1) if j == 0 else np.arange(n - 1 - k, n - 1)
    return idx[(idx >= 0) & (idx < n)]


@by_grid
def _end_weights(x, j, k):
    """Weights w of the rows ``_inside(len(x), j, k)``: w @ y there is the value at x[j] of
    the least-squares quadratic in x − x[j] through them (np.polyfit's, with its column
    scaling and rcond: its pseudo-inverse's row of the constant term), made once per grid."""
    idx = _inside(len(x), j, k)
    lhs = np.vander(x[idx] - x[j] + 0.0, min(2, len(idx) - 1) + 1)
    scale = np.sqrt((lhs * lhs).sum(axis=0))
    return np.linalg.pinv(lhs / scale, rcond=len(idx) * np.finfo(float).eps)[-1] / scale[-1]


def _quadratic_extrapolation(x, y, j, k=5):
    """ln Cp at x[j] from a quadratic through the k nearest points on the inside: the value
    at x[j] of ``np.polyfit(x[idx] − x[j], y[idx], 2)`` (to rounding: one dot product with
    weights made once per grid)."""
    return float(_end_weights(x, j, k) @ y[_inside(len(x), j, k)])


def _economic_q(m):
    """Q of the economic QR decomposition of the tall matrix ``m`` (LAPACK dgeqrf and dorgqr
    called directly, as np.linalg.qr calls them: numpy's general wrapper costs twice the
    work on a table's few columns)."""
    from scipy.linalg.lapack import dgeqrf, dorgqr

    fact, tau, _, _ = dgeqrf(m)
    return dorgqr(fact, tau)[0]


def loo_residuals(t, cp):
    """Leave-one-out relative residuals and thresholds' noise scale for one pass.

    Returns (loo [-], leverage h [-], end_spread [-] per point (0 inside)).
    """
    b = basis(t)
    a, c = _fit(b, cp)
    e = 1.0 - a @ c
    active = a[:, c > 0]
    if active.shape[1]:
        q = _economic_q(active)
        h = np.minimum((q * q).sum(axis=1), 0.99)
    else:
        h = np.zeros(len(t))
    loo = e / (1.0 - h)
    spread = np.zeros(len(t))
    x, y = np.log(t), np.log(cp)
    for j in (0, len(t) - 1):
        cj = _solved(a[1:] if j == 0 else a[:-1])     # refitted without the end row
        pred_a = float(b[j] @ cj)
        pred_b = float(np.exp(_quadratic_extrapolation(x, y, j)))
        loo[j] = cp[j] / pred_a - 1.0
        spread[j] = abs(np.log(pred_a / pred_b))
    return loo, h, spread, e


def _robust_weights(t, cp, floor, iterations=5):
    """Tukey bisquare weights of an iteratively reweighted fit of the smooth model."""
    b = basis(t)
    w = np.ones(len(t))
    for _ in range(iterations):
        sw = np.sqrt(w)
        a = b / cp[:, None]
        try:
            c, _ = nnls(a * sw[:, None], sw, maxiter=50 * b.shape[1])
        except RuntimeError:
            break
        e = 1.0 - a @ c
        scale = max(robust_sigma(e[w > 0]), floor / 6.0)
        u = e / (4.685 * scale)  # 4.685: the usual bisquare tuning constant (common practice)
        new = np.where(np.abs(u) < 1.0, (1.0 - u * u) ** 2, 0.0)
        if np.allclose(new, w, atol=1e-3):
            break
        w = new
    return w


def find_outliers(t, cp, *, sigmas=6.0, floor=0.004, end_floor=0.02, max_fraction=0.2):
    """Single-point outliers of a smooth Cp(T).

    A robust (bisquare) fit first sets aside points that would bend the model, so that
    a run of bad rows cannot mask itself; the remaining points are then judged one at a
    time by leave-one-out residuals, and every set-aside point is judged against the fit
    of the others — flagged if beyond the threshold, re-admitted otherwise.

    Parameters
    ----------
    t : [K], ascending, no repeats; cp : [J/(mol K)], > 0
    sigmas : threshold in robust standard deviations of the residuals [-]
    floor : smallest relative deviation flagged inside the table [-]
    end_floor : smallest relative deviation flagged at the first or last point [-]

    Returns
    -------
    (outliers, sigma): list of (index, expected cp [J/(mol K)], relative deviation [-]);
    and the robust relative scatter of the remaining points [-].
    """
    t = np.asarray(t, dtype=float)
    cp = np.asarray(cp, dtype=float)
    n = len(t)
    if n < 8:
        return [], 0.0
    limit = max(1, int(max_fraction * n))

    def judge(act):
        loo, h, spread, e = loo_residuals(t[act], cp[act])
        sig = robust_sigma((e / np.sqrt(1.0 - h))[1:-1])
        thresh = np.maximum(sigmas * sig / np.sqrt(1.0 - h), floor)
        for j in (0, len(act) - 1):
            thresh[j] = max(2 * sigmas * sig, end_floor, 3.0 * spread[j])
        return np.abs(loo) / thresh, loo, sig

    first = judge(np.arange(n))
    if np.max(first[0]) <= 1.0:  # nothing stands out: the common case, done
        return [], first[2]
    w = _robust_weights(t, cp, floor)
    set_aside = np.nonzero(w == 0.0)[0]
    set_aside = set_aside[(set_aside > 0) & (set_aside < n - 1)]  # the ends: judged below
    # set points aside beforehand only for a run of bad rows, which would mask itself in
    # one-at-a-time removal; single slips are found more sharply one at a time
    clustered = any(np.sum((set_aside >= i) & (set_aside < i + RUN_ROWS)) >= RUN_MIN
                    for i in set_aside)
    if not clustered or len(set_aside) > limit or n - len(set_aside) < 8:
        set_aside = np.array([], dtype=int)
    active = np.setdiff1d(np.arange(n), set_aside)

    found = []
    sigma = 0.0
    while len(active) >= 8 and len(found) + len(set_aside) < limit:
        excess, loo, sigma = judge(active)
        worst = int(np.argmax(excess))
        if excess[worst] <= 1.0:
            break
        # a slip also disturbs its neighbours' residuals: blame the one whose removal
        # leaves the rest most consistent
        best, best_left = worst, None
        for cand in (worst - 1, worst, worst + 1):
            if 0 <= cand < len(active) and len(active) > 8:
                left = float(np.max(judge(np.delete(active, cand))[0]))
                if best_left is None or left < best_left - 1e-12:
                    best, best_left = cand, left
        i = int(active[best])
        found.append((i, float(cp[i] / (1.0 + loo[best])), float(loo[best])))
        active = np.delete(active, best)
    # judge each set-aside point against the fit of the points kept
    if len(set_aside):
        if not sigma:
            sigma = judge(active)[2]
        b = basis(t)
        _, c = _fit(b[active], cp[active])
        pred = b @ c
        for i in set_aside:
            rel = float(cp[i] / pred[i] - 1.0)
            at_end = i < active[0] or i > active[-1]
            thresh = max(2 * sigmas * sigma, end_floor) if at_end else max(sigmas * sigma, floor)
            if abs(rel) > thresh:
                found.append((int(i), float(pred[i]), rel))
    found.sort(key=lambda x: x[0])
    return found, sigma
