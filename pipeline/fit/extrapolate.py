"""Physically shaped extension of ideal-gas Cp beyond the data, before the polynomial fit.

Two families of models, each fitted in relative residuals:

* Wilhoit's form [1]: Cp = Cp(0) + [Cp(∞) − Cp(0)] y² [1 + (y − 1) Σ_{i<n} a_i y^i],
  y = T/(T + B), with Cp(0) and Cp(∞) fixed by geometry and atom count (bounds.py). For a
  fixed B the a_i enter linearly; B is searched on a grid (all B solved at once). n = 0..3
  free terms.
* effective oscillators: Cp = Cp(0) + R Σ_k g_k E(θ_k/T) (statmech.einstein) with
  degeneracies adding up to the vibrational mode count 3N − 5 or 3N − 6. An oscillator
  spectrum fixes the θ_k on a grid and is linear in g_k ≥ 0 (one non-negative least-squares
  solve); there are spectra of several resolutions (SPECTRUM_SIZES), the coarser ones
  with fewer free weights to carry the noise of the data beyond it. The non-linear models
  fit k = 1..3 free θ_k and g_k, with an anharmonic rise or a low-lying electronic state, by
  bounded non-linear least squares (scipy).

The linear models (Wilhoit's and the spectra) are tried first, and alone when the best of
them passes the hold-out test below within PASS_SIGMAS times the scatter of the data
(``pass_level``): about a millisecond per side. Only where they fail is the non-linear
search run, over Wilhoit's form and the non-linear oscillator models (some 25 ms).

The model is chosen per species by how well it predicts held-out data: each candidate is
fitted to the data without the outer quarter (on the side of the extension) and judged by
its largest relative error there. The best of each family (Wilhoit, oscillators) is kept;
when their hold-out errors are within a factor FAMILY_TIE the test cannot tell them apart,
and the extension is their mean. Guards reject a candidate whose extension is not finite,
not monotone rising (high side), below 5/2 R, or above Cp(∞) by more than the classical
margin (runaway). The chosen model is refitted to all data; its relative uncertainty is the
hold-out error, growing in proportion to ln T beyond the data (common practice: an
extrapolation is only as good as its hold-out test, and worse the farther it goes), plus
half the difference from the best model of the other family (how much the choice matters),
plus a quarter of the predicted change of Cp beyond the data edge (CHANGE_SHARE: what no
hold-out test can see). The extension joins the data: the model's miss at the edge is
taken out, fading over the hold-out reach.

Condensed phases are never extrapolated.

References
----------
[1] R. C. Wilhoit, Thermodynamics Research Center Current Data News 3 (2), 1975 (from
    memory); the limits Cp(0), Cp(∞) as in bounds.py.
"""

from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from ..checks.smooth_model import robust_sigma
from ..core import gridcache
from ..core.constants import GAS_CONSTANT as R
from ..core.gridcache import by_grid
from ..physics import bounds
from ..physics.statmech import einstein

B_GRID = np.geomspace(30.0, 20000.0, 80)  # [K]
#: Wilhoit's form is tried with 0 .. WILHOIT_TERMS free terms
WILHOIT_TERMS = 3
#: the oscillator spectra: the span [K] of the characteristic temperatures of their fixed
#: Einstein functions (from the lowest bending modes to well above any fundamental), how
#: many each spectrum spreads over it geometrically (a ladder of resolutions, each about 1.5
#: times the one before: a coarse spectrum has fewer free weights and carries less of the
#: noise beyond the data, a fine one follows a rich spectrum; the hold-out test chooses), and
#: the weight of the row that holds the sum of their degeneracies at the mode count
SPECTRUM_SPAN = (50.0, 2.0e4)
SPECTRUM_SIZES = (8, 12, 18, 27, 40)
SPECTRUM_SUM_WEIGHT = 1.0e3
#: the fast models are used alone when their best hold-out error is at most PASS_SIGMAS
#: times the scatter of the data, and never asked for better than PASS_FLOOR (our rule: the
#: largest of some 25 held-out normal errors is about 2.5-3 sigma; coverage measured by
#: benchmarks/coverage.py)
PASS_SIGMAS, PASS_FLOOR = 5.0, 5.0e-4
#: hold-out errors within this factor of each other do not tell two model families apart
FAMILY_TIE = 2.0
#: oscillator models: first guesses and bounds of the characteristic temperatures [K]
THETA_START = (500.0, 4000.0)
THETA_BOUNDS = (20.0, 2.0e4)
#: the two-level term: (degeneracy ratio, θe [K]) start, low and high bounds
ELECTRONIC_START, ELECTRONIC_LOW, ELECTRONIC_HIGH = (1.0, 8000.0), (0.0, 100.0), (10.0, 1.0e5)
#: the shared anharmonic coefficient β [-]: start and bounds
ANHARMONIC_START, ANHARMONIC_BOUNDS = 0.01, (0.0, 0.2)
#: the share of the change of Cp beyond the data edge that counts as uncertain: no hold-out
#: test sees contributions that only switch on beyond the data (anharmonicity, electronic
#: states), so a quarter of a predicted change counts as its standard uncertainty (our rule,
#: whose coverage benchmarks/coverage.py measures against reference equations of state)
CHANGE_SHARE = 0.25
#: guards of an extension: it joins the data within this fraction, never falls (on the high
#: side) by more than this fraction per step, and stays above 5/2 R less this fraction
JOIN_TOLERANCE, FALL_TOLERANCE, TRANSLATION_FLOOR = 0.05, 1e-4, 1e-3


@dataclass(frozen=True)
class Extension:
    """Cp [J/(mol K)] generated past the data by a model, with the model's name, hold-out
    error and relative uncertainty at the far end."""

    side: str              # "high" or "low"
    t_from: float          # [K], last data temperature
    t_to: float            # [K], end of the range of use
    model: str             # e.g. "wilhoit-2", "oscillators-spectrum-18", "oscillators-3"
    holdout_error: float   # [-], largest relative error on the held-out data
    u_rel_end: float       # [-], relative standard uncertainty at t_to
    t: tuple               # [K], generated temperatures
    cp: tuple              # [J/(mol K)], generated Cp
    u_rel: tuple           # [-], relative uncertainty at each generated temperature
    searched: bool = False  # the linear models failed their test: the non-linear search ran


def _wilhoit_terms(t, b, n, c0, cinf):
    y = t / (t + b)
    base = c0 + (cinf - c0) * y * y
    cols = [(cinf - c0) * y * y * (y - 1.0) * y ** i for i in range(n)]
    return base, (np.stack(cols, axis=1) if cols else np.zeros((len(t), 0)))


def fit_wilhoit(t, cp, c0, cinf, terms: int = WILHOIT_TERMS) -> list:
    """Wilhoit's form with n = 0 .. terms free terms, one model each (None where its columns
    are dependent): for every B of B_GRID at once the a_i by relative least squares, and the
    B of the smallest sum of squares (the first on a tie). The columns are made orthonormal
    one after the other for all B at once (Gram-Schmidt, each column twice against those
    before it: twice is enough for orthogonality to working precision), so that the fit
    of n terms takes its first n columns: its residual is that of n − 1 terms less one
    projection, and its coefficients are solved for the chosen B only."""
    y, yy, y_less_1 = _wilhoit_grid(t)                       # (B, rows) each
    miss = (cp - (c0 + (cinf - c0) * yy)) / cp               # the residual of no free term
    col = (cinf - c0) * yy * y_less_1 / cp
    q, r, qb = [], np.zeros((len(B_GRID), terms, terms)), np.zeros((len(B_GRID), terms))
    out = [_wilhoit_model(B_GRID[int(np.argmin(np.sum(miss ** 2, axis=1)))], np.zeros(0),
                          c0, cinf)]
    for n in range(terms):
        if n >= len(t):                    # more terms than rows: no more models
            return out + [None] * (terms - n)
        v = col.copy()
        for _ in range(2):
            for i, qi in enumerate(q):
                d = np.einsum("bk,bk->b", qi, v)
                r[:, i, n] += d
                v -= d[:, None] * qi
        norm = np.sqrt(np.einsum("bk,bk->b", v, v))
        if not np.all(norm > 0):           # columns dependent at some B: no more models
            return out + [None] * (terms - n)
        r[:, n, n] = norm
        q.append(v / norm[:, None])
        qb[:, n] = np.einsum("bk,bk->b", q[n], miss)
        miss = miss - qb[:, n, None] * q[n]
        j = int(np.argmin(np.einsum("bk,bk->b", miss, miss)))
        out.append(_wilhoit_model(B_GRID[j], _back_substitution(r[j, :n + 1, :n + 1],
                                                                qb[j, :n + 1]), c0, cinf))
        col = col * y
    return out


@by_grid
def _wilhoit_grid(t) -> tuple:
    """(y, y², y − 1) [-] of Wilhoit's form at temperatures ``t`` [K] (columns) for each B of
    B_GRID (rows), made once for each grid."""
    y = t[None, :] / (t[None, :] + B_GRID[:, None])
    return y, y * y, y - 1.0


def _back_substitution(r, b) -> np.ndarray:
    """x of r x = b, r upper triangular with a non-zero diagonal (a few unknowns: in Python
    floats, some 60 % of the time of numpy's products of a few elements)."""
    r, b = r.tolist(), b.tolist()
    x = [0.0] * len(b)
    for i in range(len(b) - 1, -1, -1):
        x[i] = (b[i] - sum(r[i][j] * x[j] for j in range(i + 1, len(b)))) / r[i][i]
    return np.array(x)


def _wilhoit_model(b, a, c0, cinf):
    def model(x):
        base, cols = _wilhoit_terms(np.asarray(x, float), b, len(a), c0, cinf)
        return base + (cols @ a if len(a) else 0.0)

    return model


def _degeneracies(p, k, modes):
    """k degeneracies from k − 1 free ones, for each row of ``p`` (parameter vectors): the
    last makes them add up to ``modes``."""
    free = p[:, k:2 * k - 1]
    return np.concatenate([free, modes - np.sum(free, axis=1)[:, None]], axis=1) if k > 1 \
        else np.full((len(p), 1), float(modes))


def forward_steps(p, lo, hi) -> np.ndarray:
    """The steps [same units as ``p``] of the forward differences that scipy's least_squares
    takes for its default Jacobian (``jac='2-point'``, scipy.optimize._numdiff): √ε·max(1,
    |p|) signed as p (+ at 0), reversed where it would leave the bounds ``lo``, ``hi`` but
    fits on the other side, else the distance to the farther bound."""
    h = np.finfo(float).eps ** 0.5 * ((p >= 0).astype(float) * 2 - 1) * np.maximum(1.0, np.abs(p))
    if np.all((lo == -np.inf) & (hi == np.inf)):
        return h
    out = h.copy()
    below, above = p - lo, hi - p
    x = p + h
    fitting = np.abs(h) <= np.maximum(below, above)
    out[((x < lo) | (x > hi)) & fitting] *= -1
    forward = (above >= below) & ~fitting
    out[forward] = above[forward]
    backward = (above < below) & ~fitting
    out[backward] = -below[backward]
    return out


def _fit_oscillator_model(t, cp, k, modes, shape, extra0=(), extra_lo=(), extra_hi=()):
    """Bounded least squares of Cp(0) + R Σ g_j shape(θ_j, x, extra) over k oscillators.

    ``shape(theta, x, extra)`` returns, for b parameter vectors at once (theta (b, k), extra
    (b, e)), the (b, n, k) contributions per unit degeneracy and the (b, n) further terms;
    θ_j in [20, 2·10⁴] K, g_j ≥ 0 with Σ g_j = modes. The Jacobian is scipy's forward
    differences (``forward_steps``), its columns evaluated in one batch: the same numbers as
    ``jac='2-point'``, one model call instead of one per parameter. Returns the model
    function of the fitted parameters.
    """
    def many(p, x):
        g = _degeneracies(p, k, modes)
        per_unit, added = shape(p[:, :k], x, p[:, 2 * k - 1:])
        return (np.sum(g[:, None, :] * per_unit, axis=2) if modes else 0.0) + added

    p0 = np.concatenate([np.geomspace(*THETA_START, k), np.full(k - 1, modes / k), extra0])
    lo = np.concatenate([np.full(k, THETA_BOUNDS[0]), np.zeros(k - 1), extra_lo])
    hi = np.concatenate([np.full(k, THETA_BOUNDS[1]), np.full(k - 1, float(max(modes, 1))),
                         extra_hi])

    def resid_many(p):
        r = (many(p, t) - cp) / cp
        if k > 1:  # keep the last degeneracy non-negative
            short = modes - np.sum(p[:, k:2 * k - 1], axis=1)
            r = np.concatenate([r, 10.0 * np.where(short < 0.0, short, 0.0)[:, None]], axis=1)
        return r

    def jac(p):
        h = forward_steps(p, lo, hi)
        trial = np.repeat(p[None, :], len(p) + 1, axis=0)
        trial[1:][np.diag_indices(len(p))] = p + h
        f = resid_many(trial)
        return ((f[1:] - f[0]) / ((p + h) - p)[:, None]).T

    sol = least_squares(lambda p: resid_many(p[None, :])[0], p0, jac=jac, bounds=(lo, hi),
                        method="trf", x_scale="jac", max_nfev=300)
    best = sol.x[None, :]
    return lambda x: many(best, np.atleast_1d(np.asarray(x, float)))[0]


def fit_oscillators(t, cp, k, c0, modes):
    """k Einstein functions with degeneracies summing to ``modes`` (relative least squares)."""
    if modes <= 0:
        return lambda x: np.full(np.shape(np.atleast_1d(x)), c0)

    def shape(th, x, extra):
        return R * einstein(th[:, None, :] / x[None, :, None]), c0

    return _fit_oscillator_model(t, cp, k, modes, shape)


def fit_oscillators_electronic(t, cp, k, c0, modes):
    """k Einstein functions (degeneracies summing to ``modes``) plus one two-level term
    R r x² eˣ/(1 + r eˣ)², x = θe/T, for a low-lying electronic state of degeneracy ratio r."""
    modes = max(modes, 0)

    def shape(th, x, extra):
        ratio, theta_e = extra[:, :1], extra[:, 1:2]
        xe = theta_e / x[None, :]
        el = ratio * xe * xe * np.exp(-xe) / (1.0 + ratio * np.exp(-xe)) ** 2
        return R * einstein(th[:, None, :] / x[None, :, None]), c0 + R * el

    return _fit_oscillator_model(t, cp, k, modes, shape, ELECTRONIC_START, ELECTRONIC_LOW,
                                 ELECTRONIC_HIGH)


def fit_oscillators_anharmonic(t, cp, k, c0, modes):
    """k Einstein functions with a first-order anharmonic rise, g E(θ/T) (1 + β T/θ), β ≥ 0
    shared (a Morse-like oscillator's heat capacity grows about linearly in T/θ at high T)."""
    if modes <= 0:
        return lambda x: np.full(np.shape(np.atleast_1d(x)), c0)

    def shape(th, x, extra):
        beta = extra[:, :1, None]
        ratio = x[None, :, None] / th[:, None, :]
        return R * einstein(th[:, None, :] / x[None, :, None]) * (1.0 + beta * ratio), c0

    return _fit_oscillator_model(t, cp, k, modes, shape, [ANHARMONIC_START],
                                 [ANHARMONIC_BOUNDS[0]], [ANHARMONIC_BOUNDS[1]])


_SPECTRUM_THETA = {n: np.geomspace(*SPECTRUM_SPAN, n) for n in SPECTRUM_SIZES}


def spectrum_theta(size: int) -> np.ndarray:
    """The ``size`` characteristic temperatures [K] of a spectrum (made once for each of
    SPECTRUM_SIZES)."""
    theta = _SPECTRUM_THETA.get(size)
    return np.geomspace(*SPECTRUM_SPAN, size) if theta is None else theta


def fit_spectrum(t, cp, c0, modes, size: int = SPECTRUM_SIZES[-1]):
    """Cp(0) + R Σ_j g_j E(θ_j/T) over the ``size`` fixed θ_j of ``spectrum_theta``, g_j ≥ 0
    with Σ g_j = ``modes`` (held by a heavily weighted row): non-negative least squares in
    relative residuals, linear in the g_j, so one solve instead of a non-linear search."""
    from scipy.optimize import nnls

    if modes <= 0:
        return lambda x: np.full(np.shape(np.atleast_1d(x)), c0)
    a = R * spectrum_columns(t, size) / cp[:, None]
    rows = np.vstack([a, SPECTRUM_SUM_WEIGHT * np.ones((1, size))])
    rhs = np.append((cp - c0) / cp, SPECTRUM_SUM_WEIGHT * modes)
    g, _ = nnls(rows, rhs, maxiter=50 * size)
    return lambda x: c0 + R * spectrum_columns(np.atleast_1d(np.asarray(x, float)), size) @ g


@by_grid(size=32)
def spectrum_columns(t, size: int) -> np.ndarray:
    """E(θ_j/T) [-] at temperatures ``t`` [K] (rows) for the ``size`` θ_j of
    ``spectrum_theta`` (columns), made once for each grid: the species of a catalogue share
    their temperatures, hold-out rows and extension grids."""
    return einstein(spectrum_theta(size)[None, :] / t[:, None])


def _wilhoit_group(geometry, atoms) -> tuple:
    c0, cinf = bounds.cp_zero(geometry), bounds.cp_infinity(geometry, atoms)
    return (tuple(f"wilhoit-{n}" for n in range(WILHOIT_TERMS + 1)),
            lambda t, cp: fit_wilhoit(t, cp, c0, cinf))


def _one(name, fitter) -> tuple:
    return (name,), lambda t, cp: [fitter(t, cp)]


def fast_candidates(geometry, atoms) -> list:
    """The models linear in their free parameters (Wilhoit's form for each B of a grid, the
    oscillator spectra), tried first: (names, fitting function) groups, the function of
    (T, Cp) giving one model per name."""
    c0, modes = bounds.cp_zero(geometry), bounds.vibrational_modes(geometry, atoms)
    if modes <= 0:       # no vibrations: the spectra are all the constant Cp(0)
        return [_wilhoit_group(geometry, atoms),
                _one("oscillators-spectrum", lambda t, cp: fit_spectrum(t, cp, c0, modes))]
    # each spectrum a group of its own: only those that may win are fitted to all data
    return [_wilhoit_group(geometry, atoms)] + [
        _one(f"oscillators-spectrum-{n}", lambda t, cp, n=n: fit_spectrum(t, cp, c0, modes, n))
        for n in SPECTRUM_SIZES]


def candidates(geometry, atoms) -> list:
    """The extrapolation models of the full search for a gas of ``geometry`` and ``atoms``
    (Wilhoit's form and the non-linear oscillator models), as ``fast_candidates``."""
    c0 = bounds.cp_zero(geometry)
    modes = bounds.vibrational_modes(geometry, atoms)
    out = [_wilhoit_group(geometry, atoms)]
    for k in range(1, min(3, max(modes, 1)) + 1):
        out.append(_one(f"oscillators-{k}", lambda t, cp, k=k: fit_oscillators(t, cp, k, c0,
                                                                               modes)))
    for k in range(1, min(2, max(modes, 1)) + 1):
        out.append(_one(f"oscillators-{k}+anharmonic",
                        lambda t, cp, k=k: fit_oscillators_anharmonic(t, cp, k, c0, modes)))
        out.append(_one(f"oscillators-{k}+electronic",
                        lambda t, cp, k=k: fit_oscillators_electronic(t, cp, k, c0, modes)))
    return out


def _guards(pred, side, geometry, atoms, margin, cp_edge):
    if not np.all(np.isfinite(pred)):
        return False
    if np.any(pred < bounds.TRANSLATION_CP * (1 - TRANSLATION_FLOOR)):
        return False
    if np.any(pred > bounds.cp_infinity(geometry, atoms) * (1 + margin)):
        return False
    if side == "high" and np.any(np.diff(pred) < -FALL_TOLERANCE * pred[:-1]):
        return False
    return abs(pred[0] / cp_edge - 1) < JOIN_TOLERANCE  # must join the data


def scatter(t, cp) -> float:
    """Relative standard deviation [-] of the noise of Cp, without a model: each interior
    point's miss of the straight line through its neighbours in ln Cp against ln T (for a
    smooth table a second difference, far below the noise), its robust spread divided by
    the spread that independent noise of unit variance gives it."""
    x, y = np.log(t), np.log(cp)
    left, right = x[1:-1] - x[:-2], x[2:] - x[1:-1]
    if len(x) < 3 or np.any(left <= 0) or np.any(right <= 0):
        return 0.0
    w_lo, w_hi = right / (left + right), left / (left + right)
    miss = y[1:-1] - w_lo * y[:-2] - w_hi * y[2:]
    return robust_sigma(miss / np.sqrt(1.0 + w_lo ** 2 + w_hi ** 2))


def pass_level(t, cp, geometry, atoms):
    """The hold-out error [-] the fast models must reach to be used without the non-linear
    search: PASS_SIGMAS times the ``scatter`` of the data, at least PASS_FLOOR; None for a
    gas without vibrations, whose only fast models are constants."""
    if bounds.vibrational_modes(geometry, atoms) <= 0:
        return None
    return max(PASS_FLOOR, PASS_SIGMAS * scatter(t, cp))


def extend(t, cp, geometry, atoms, t_to, *, side="high", holdout=0.25, margin=0.10,
           points=25):
    """Extension of (t, cp) to ``t_to`` [K], or None when no candidate passes the guards.
    The fast models are tried first; the non-linear search runs only when the best of them
    misses the held-out data by more than ``pass_level``."""
    t = np.asarray(t, dtype=float)
    cp = np.asarray(cp, dtype=float)
    if geometry is None or atoms is None:
        return None
    order = np.argsort(t)
    t, cp = t[order], cp[order]
    n = len(t)
    k = max(4, int(round(holdout * n)))
    if n - k < 6:
        return None
    if side == "high":
        fit_t, fit_cp, ho_t, ho_cp = t[:-k], cp[:-k], t[-k:], cp[-k:]
        edge, far = t[-1], t[-k]
        grid = gridcache.geomspace(float(t[-1]), float(t_to), points + 1)[1:]
    else:
        fit_t, fit_cp, ho_t, ho_cp = t[k:], cp[k:], t[:k], cp[:k]
        edge, far = t[0], t[k - 1]
        grid = gridcache.geomspace(float(t_to), float(t[0]), points + 1)[:-1]
    span = np.concatenate([[edge], grid]) if side == "high" else np.concatenate([grid, [edge]])
    cp_edge = cp[-1] if side == "high" else cp[0]
    # a candidate whose fit fails is left out (RuntimeError: scipy's nnls out of iterations)
    failed = (ValueError, np.linalg.LinAlgError, FloatingPointError, RuntimeError)
    trials, fulls = {}, {}   # hold-out error by name (None: failed); all-data models by group

    def holdout_error(trial):
        try:
            return float(np.max(np.abs(trial(ho_t) / ho_cp - 1)))
        except failed:
            return None

    def passes(full) -> bool:
        """The model fitted to all data can be evaluated over ``span`` and its extension
        passes the guards."""
        try:
            pred = full(span)
        except failed:
            return False
        ordered = pred if side == "high" else pred[::-1]
        return _guards(ordered, side, geometry, atoms, margin, cp_edge)

    def full_model(name, names, fitter):
        """The model ``name`` of group (``names``, ``fitter``) fitted to all data (the group
        fitted once), or None."""
        if names[0] not in fulls:
            try:
                fulls[names[0]] = dict(zip(names, fitter(t, cp)))
            except failed:
                fulls[names[0]] = {}
        return fulls[names[0]].get(name)

    def best_of(models) -> dict:
        """{family: (hold-out error, name, model fitted to all data)}: of each family among
        ``models`` (groups of names, fitter), the model of the smallest hold-out error (the
        first listed on a tie) whose fit to all data passes the guards. Each group is fitted
        once to the data without the hold-out; a fit to all data is made only for the
        models that may win, in order of hold-out error, until one passes."""
        ranked = []
        for order, (names, fitter) in enumerate(models):
            if names[0] not in trials:
                try:
                    got = fitter(fit_t, fit_cp)
                except failed:
                    got = [None] * len(names)
                for name, trial in zip(names, got):
                    trials[name] = None if trial is None else holdout_error(trial)
            ranked += [(trials[name], order, j, name, names, fitter)
                       for j, name in enumerate(names) if trials[name] is not None]
        best = {}
        for err, _, _, name, names, fitter in sorted(ranked, key=lambda r: r[:3]):
            family = name.split("-")[0]
            if family in best:
                continue
            full = full_model(name, names, fitter)
            if full is not None and passes(full):
                best[family] = (err, name, full)
        return best

    best = best_of(fast_candidates(geometry, atoms))
    level = pass_level(t, cp, geometry, atoms)
    searched = not best or level is None or min(b[0] for b in best.values()) > level
    if searched:                        # the fast models fail their own test
        best = best_of(candidates(geometry, atoms))
    if not best:
        return None
    ranked = sorted(best.values(), key=lambda b: b[0])
    err, name, full = ranked[0]
    cp_grid = full(grid)
    spread = np.zeros(len(grid))
    blended = False
    if len(ranked) > 1:
        # the other family's prediction measures how much the choice of model matters
        other = ranked[1][2](grid)
        spread = np.abs(cp_grid - other) / 2.0 / cp_grid
        if ranked[1][0] <= FAMILY_TIE * max(err, 1e-4):
            # the hold-out test cannot tell the two families apart: average them
            cp_grid = (cp_grid + other) / 2.0
            blended = True
            name = f"{name}|{ranked[1][1]}"
            err = max(err, ranked[1][0])
    base = max(err, 1e-3)
    reach = abs(np.log(edge / far)) or 1.0
    # the extension joins the data: the model's miss at the edge, fading over the hold-out
    # reach in ln T, is taken out (the data, not the model, are right at the edge)
    miss = cp_edge / float(np.mean([r[2](np.array([edge]))[0] for r in ranked[:1 + blended]]))
    cp_grid = cp_grid * (1.0 + (miss - 1.0) * np.exp(-np.abs(np.log(grid / edge)) / reach))
    change = np.abs(cp_grid - cp_edge) / cp_grid
    u = base * (1.0 + np.abs(np.log(grid / edge)) / reach) + spread + CHANGE_SHARE * change
    return Extension(side=side, t_from=float(edge), t_to=float(t_to), model=name,
                     holdout_error=float(err), u_rel_end=float(u[-1] if side == "high" else u[0]),
                     t=tuple(float(x) for x in grid), cp=tuple(float(x) for x in cp_grid),
                     u_rel=tuple(float(x) for x in u), searched=searched)
