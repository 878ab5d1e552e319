"""Fitting stage: multi-range nasa7 fit of Cp/R by exactly constrained weighted least squares.

Problem: minimise Σ ((Cp_fit(T_i) − Cp_i)/σ_i)² over the Cp coefficients of all
ranges, subject to linear equality constraints at every breakpoint: Cp and
dCp/dT continuous. The constraints are homogeneous, so every admissible
coefficient vector is c = N z with N an orthonormal basis of the constraint
null space; the reduced problem min ||W (A N) z − W y|| is an ordinary least
squares problem solved by SVD (column-equilibrated). The fit is done in the
scaled variable τ = T/1000 K for conditioning and converted to kelvin
coefficients at the end.

The integration constants (a6, a7) are then chosen range by range: in the range
holding 298.15 K they make H(298.15) = ΔfH°(298.15) and S(298.15) = S°(298.15)
exactly; in every other range they make H and S continuous at the shared
breakpoint, chained outward from the anchor range.

σ_i is u(Cp)_i when the table gives it, otherwise Cp_i (relative weighting).
"""

import numpy as np
from scipy.linalg import null_space

from . import forms
from .constants import GAS_CONSTANT, REFERENCE_TEMPERATURE
from .errors import FitError
from .records import FitRange, FitResult
from .settings import FitSettings

N_CP = 5  # Cp coefficients per nasa7 range


def choose_breakpoints(t, settings: FitSettings) -> list[float]:
    """One breakpoint [K]: the conventional one when the data straddle it with enough points on
    each side, otherwise the middle of the data (between the two central points)."""
    t = np.sort(np.asarray(t, dtype=float))
    k = settings.min_points_per_range
    tb = settings.breakpoint
    if (t <= tb).sum() >= k and (t > tb).sum() >= k:
        return [float(tb)]
    mid = len(t) // 2
    return [float(round(np.sqrt(t[mid - 1] * t[mid]), 6))]


def breakpoint_note(t, breakpoints, settings: FitSettings):
    """(code, message) when the conventional breakpoint could not be used, else None."""
    if breakpoints == [float(settings.breakpoint)]:
        return None
    t = np.asarray(t, dtype=float)
    tb = settings.breakpoint
    return ("COV-RANGE-POINTS", f"{int((t <= tb).sum())} point(s) at or below and "
            f"{int((t > tb).sum())} above {tb:g} K (at least {settings.min_points_per_range} "
            f"needed on each side); breakpoint set to {breakpoints[0]:g} K")


def _powers(tau, deriv=0):
    """Rows of [1, τ, τ², τ³, τ⁴] (or their derivative) at ``tau``."""
    tau = np.atleast_1d(np.asarray(tau, dtype=float))
    k = np.arange(N_CP)
    if deriv == 0:
        return tau[:, None] ** k
    coef = k.astype(float)
    return coef * tau[:, None] ** np.maximum(k - 1, 0)


def solve_cp(t, y, sigma, breakpoints) -> np.ndarray:
    """Scaled Cp/R coefficients c[range, k] (τ = T/1000) of the constrained fit.

    Parameters
    ----------
    t : temperatures [K]; y : Cp/R [-]; sigma : standard deviations of y [-]
    breakpoints : ascending breakpoints [K]
    """
    t = np.asarray(t, dtype=float)
    tau = t / forms.T_SCALE
    nr = len(breakpoints) + 1
    idx = np.searchsorted(np.asarray(breakpoints, dtype=float), t, side="left")
    a = np.zeros((len(t), nr * N_CP))
    v = _powers(tau)
    for j in range(nr):
        m = idx == j
        a[m, j * N_CP:(j + 1) * N_CP] = v[m]
    rows = []
    for j, tb in enumerate(breakpoints):
        for d in (0, 1):  # continuity of Cp and dCp/dT
            row = np.zeros(nr * N_CP)
            p = _powers(tb / forms.T_SCALE, d)[0]
            row[j * N_CP:(j + 1) * N_CP] = p
            row[(j + 1) * N_CP:(j + 2) * N_CP] = -p
            rows.append(row)
    basis = null_space(np.array(rows)) if rows else np.eye(nr * N_CP)
    m = (a @ basis) / sigma[:, None]
    b = y / sigma
    norms = np.linalg.norm(m, axis=0)
    norms[norms == 0] = 1.0
    z, *_ = np.linalg.lstsq(m / norms, b, rcond=None)
    c = basis @ (z / norms)
    return c.reshape(nr, N_CP)


def integration_constants(cp_coeffs, edges, h298, s298):
    """a6, a7 for every range: anchored at 298.15 K, continuous at breakpoints.

    Parameters
    ----------
    cp_coeffs : list of a1..a5 (kelvin) per range
    edges : [t_min, b1, ..., t_max] [K]
    h298 : ΔfH°(298.15) [J/mol]; s298 : S°(298.15) [J/(mol K)]
    """
    nr = len(cp_coeffs)
    tref = REFERENCE_TEMPERATURE
    j0 = int(np.clip(np.searchsorted(np.asarray(edges[1:-1]), tref, side="left"), 0, nr - 1))
    a6 = [0.0] * nr
    a7 = [0.0] * nr
    a = cp_coeffs
    a6[j0] = h298 / GAS_CONSTANT - float(forms.h_over_r_integral(a[j0], tref))
    a7[j0] = s298 / GAS_CONSTANT - float(forms.s_over_r_integral(a[j0], tref))
    for j in range(j0 + 1, nr):  # upward: match the lower neighbour at edges[j]
        tb = edges[j]
        a6[j] = float(forms.h_over_r_integral(a[j - 1], tb)) + a6[j - 1] \
            - float(forms.h_over_r_integral(a[j], tb))
        a7[j] = float(forms.s_over_r_integral(a[j - 1], tb)) + a7[j - 1] \
            - float(forms.s_over_r_integral(a[j], tb))
    for j in range(j0 - 1, -1, -1):  # downward: match the upper neighbour at edges[j+1]
        tb = edges[j + 1]
        a6[j] = float(forms.h_over_r_integral(a[j + 1], tb)) + a6[j + 1] \
            - float(forms.h_over_r_integral(a[j], tb))
        a7[j] = float(forms.s_over_r_integral(a[j + 1], tb)) + a7[j + 1] \
            - float(forms.s_over_r_integral(a[j], tb))
    return a6, a7


def fit_species(species_id: str, t, cp, u, h298: float, s298: float,
                settings: FitSettings = FitSettings()) -> FitResult:
    """Fit one species' table.

    Parameters
    ----------
    t : [K]; cp : [J/(mol K)]; u : standard uncertainty of cp [J/(mol K)] or None
    h298 : ΔfH°(298.15 K) [J/mol]; s298 : S°(298.15 K) at 1 bar [J/(mol K)]

    Returns
    -------
    FitResult with nasa7 ranges in kelvin and the fit quality.
    """
    if settings.form not in forms.FORMS:
        raise FitError(species_id, f"form '{settings.form}' is not available; "
                       f"choose one of {', '.join(forms.FORMS)}")
    t = np.asarray(t, dtype=float)
    cp = np.asarray(cp, dtype=float)
    order = np.argsort(t, kind="stable")
    t, cp = t[order], cp[order]
    if len(t) < settings.min_points:
        raise FitError(species_id, f"{len(t)} points, at least {settings.min_points} needed")
    y = cp / GAS_CONSTANT
    if u is not None:
        sigma = np.asarray(u, dtype=float)[order] / GAS_CONSTANT
        weighting = "u(Cp)"
    else:
        sigma = y.copy()
        weighting = "relative"
    breakpoints = choose_breakpoints(t, settings)
    c = solve_cp(t, y, sigma, breakpoints)
    if not np.all(np.isfinite(c)):
        raise FitError(species_id, "the least-squares solution is not finite")
    kelvin = [forms.kelvin_from_scaled(row) for row in c]
    lo = min(float(t[0]), REFERENCE_TEMPERATURE,
             settings.use_t_min if settings.use_t_min is not None else np.inf)
    hi = max(float(t[-1]), settings.use_t_max if settings.use_t_max is not None else -np.inf)
    edges = [lo] + list(breakpoints) + [hi]
    a6, a7 = integration_constants(kelvin, edges, h298, s298)
    ranges = tuple(FitRange(t_min=float(edges[j]), t_max=float(edges[j + 1]),
                            coefficients=tuple(kelvin[j]) + (float(a6[j]), float(a7[j])))
                   for j in range(len(kelvin)))
    fitted = forms.evaluate([(r.t_min, r.t_max, r.coefficients) for r in ranges], t)["Cp"]
    rel = (fitted - cp) / cp
    worst = int(np.argmax(np.abs(rel)))
    return FitResult(form=settings.form, ranges=ranges, data_t_min=float(t[0]),
                     data_t_max=float(t[-1]), points=int(len(t)),
                     cp_max_rel_dev=float(np.abs(rel).max()),
                     cp_rms_rel_dev=float(np.sqrt(np.mean(rel**2))),
                     worst_t=float(t[worst]), weighting=weighting,
                     settings=settings.to_dict(),
                     notes=tuple(n for n in [breakpoint_note(t, breakpoints, settings)] if n))
