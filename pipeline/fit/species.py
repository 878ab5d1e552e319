"""Fitting stage: multi-range constrained least squares of Cp (and H, S columns).

For one species: choose the breakpoints (optimised by default, see breakpoints.py),
extend ideal-gas Cp past the data when the range of use asks for it (extrapolate.py),
solve the exactly constrained weighted least-squares problem in τ = T/1000 K (lsq.py:
continuity of Cp and its derivatives at every breakpoint; optionally minimax), convert to
the published coefficients of the chosen form (forms.py), choose the integration constants
range by range — H(298.15) = ΔfH° and S(298.15) = S° exactly in the range holding
298.15 K, continuity of H and S at every breakpoint — and judge the result against the
acceptance thresholds.

Weights: σ(Cp) = u(Cp) when the table states it, else the inferred relative uncertainty
times Cp; σ(H) and σ(S) from the settings. The covariance of the scaled coefficients
(reduced-chi-square scaled, projected onto the constraints) is kept for uncertainty bands.
"""

from dataclasses import dataclass

import numpy as np

from ..core.constants import GAS_CONSTANT as R
from ..core.constants import REFERENCE_TEMPERATURE
from ..core.errors import FitError, FitRejected
from ..core.records import CpData, FitRange, FitResult, SpeciesIdentity
from ..core.settings import FitSettings
from ..physics import basis, forms
from . import breakpoints, extrapolate, lsq


def points_per_range(form, settings: FitSettings) -> int:
    """Fewest points a range may hold: the setting, and never fewer than the range's
    coefficients plus two (a range determined by as many points as it has free coefficients
    has wild, cancelling coefficients)."""
    return max(settings.min_points_per_range, len(form.powers) + 2)


def choose_breakpoints(t, y, sigma, form, settings: FitSettings):
    """Breakpoints [K] and an optional (code, message) note."""
    need = points_per_range(form, settings)
    nr = settings.ranges
    if settings.breakpoint_mode == "fixed":
        return sorted(float(b) for b in settings.fixed_breakpoints), None
    note = None
    span, ratio = float(t[-1] / t[0]), settings.min_range_ratio
    if nr > 1 and len(t) < nr * need:
        fewer = max(1, len(t) // need)
        note = ("COV-RANGE-POINTS", f"{len(t)} points cannot fill {nr} ranges of at least "
                f"{need}; fitted with {fewer} range(s)")
        nr = fewer
    if nr > 1 and span < ratio ** nr:
        fewer = max(1, int(np.floor(np.log(span) / np.log(ratio))))
        note = ("COV-RANGE-POINTS", f"the data span {t[0]:.6g}-{t[-1]:.6g} K, too narrow for "
                f"{nr} ranges each at least {ratio:g} times wider at the top than at the "
                f"bottom; fitted with {fewer} range(s)")
        nr = fewer
    if note is None and settings.breakpoint_mode == "conventional" and nr == 2:
        conv = breakpoints.conventional(t, nr, settings.breakpoint, need)
        if conv:
            return conv, None
        note = ("COV-RANGE-POINTS", f"{int((t <= settings.breakpoint).sum())} point(s) at or "
                f"below and {int((t > settings.breakpoint).sum())} above {settings.breakpoint:g} "
                f"K (at least {need} needed on each side); breakpoint optimised instead")
    elif note is None and settings.breakpoint_mode == "conventional" and nr > 2:
        note = ("COV-RANGE-POINTS", f"the conventional breakpoint serves two ranges; the "
                f"breakpoints of {nr} ranges were optimised")
    if nr == 1:
        return [], note
    rules = breakpoints.SearchRules(order=settings.continuity, norm=settings.breakpoint_norm,
                                    need=need, bounds=(settings.breakpoint_min,
                                                       settings.breakpoint_max),
                                    max_candidates=settings.max_candidates,
                                    ratio=settings.min_range_ratio)
    bps = breakpoints.optimise(breakpoints.Observations(t, y, sigma), form.powers, nr, rules)
    return bps, note


def integration_constants(form, cp_coeffs, edges, h298, s298):
    """h0 [J/mol], s0 [J/(mol K)] per range: anchored at 298.15 K, continuous at breakpoints."""
    nr = len(cp_coeffs)
    tref = REFERENCE_TEMPERATURE
    j0 = int(np.clip(np.searchsorted(np.asarray(edges[1:-1]), tref, side="left"), 0, nr - 1))
    h0, s0 = [0.0] * nr, [0.0] * nr
    a = cp_coeffs
    h0[j0] = h298 - float(form.h_integral(a[j0], tref))
    s0[j0] = s298 - float(form.s_integral(a[j0], tref))
    for j in list(range(j0 + 1, nr)) + list(range(j0 - 1, -1, -1)):
        k = j - 1 if j > j0 else j + 1          # the neighbour already fixed
        tb = edges[j] if j > j0 else edges[j + 1]
        h0[j] = float(form.h_integral(a[k], tb)) + h0[k] - float(form.h_integral(a[j], tb))
        s0[j] = float(form.s_integral(a[k], tb)) + s0[k] - float(form.s_integral(a[j], tb))
    return h0, s0


def _column_observations(data: CpData, s298, bps, edges, form, settings):
    """Rows, targets and σ of the H−H298 and S columns (empty when not fitted together)."""
    t, dh, s, u_dh, u_s = data.t, data.dh, data.s, data.u_dh, data.u_s
    rows, y, sig = [], [], []
    if settings.simultaneous and dh is not None:
        m = np.isfinite(dh)
        if m.sum():
            given = u_dh is not None and np.all(np.isfinite(u_dh[m]))
            uh = u_dh[m] if given else np.maximum(
                settings.h_uncertainty_rel * np.abs(dh[m]), settings.h_uncertainty_abs)
            rows.append(basis.integral_rows(form.powers, t[m], bps, edges, "H"))
            y.append(dh[m] / R)
            sig.append(uh / R)
    if settings.simultaneous and s is not None and s298 is not None:
        m = np.isfinite(s)
        if m.sum():
            given = u_s is not None and np.all(np.isfinite(u_s[m]))
            us = u_s[m] if given else np.full(m.sum(), settings.s_uncertainty_abs)
            rows.append(basis.integral_rows(form.powers, t[m], bps, edges, "S"))
            y.append((s[m] - s298) / R)
            sig.append(us / R)
    return rows, y, sig


def fit_species(who: SpeciesIdentity, data: CpData,
                settings: FitSettings = FitSettings()) -> FitResult:
    """Fit one species.

    Parameters
    ----------
    who : the species' id, anchors ΔfH°(298.15 K) [J/mol] and S°(298.15 K) [J/(mol K)] at
        1 bar, phase, and geometry and atoms (for extrapolation of ideal gases)
    data : T [K], Cp [J/(mol K)], u(Cp) [J/(mol K)] or None, and the optional H − H298
        [J/mol] and S [J/(mol K)] columns with their uncertainties, sorted by T
    settings : the fit settings with the table's own overrides applied

    Returns
    -------
    FitResult, whose ranges hold the coefficients of ``settings.form`` for T in kelvin.
    Raises FitError when the fit cannot be made and FitRejected when it fails acceptance.
    """
    species_id, h298, s298 = who.species_id, who.enthalpy_of_formation_298, who.entropy_298
    form = forms.FORMS.get(settings.form)
    if form is None:
        raise FitError(species_id, f"form '{settings.form}' is not available; choose one of "
                       + ", ".join(forms.FORMS))
    if not 1 <= settings.ranges <= 4:
        raise FitError(species_id, f"{settings.ranges} ranges requested; 1 to 4 are supported")
    t, cp, u = data.t, data.cp, data.u_cp
    if len(t) < settings.min_points:
        raise FitError(species_id, f"{len(t)} points, at least {settings.min_points} needed")
    weighting = "u(Cp)" if u is not None else "relative"
    sigma = u if u is not None else settings.inferred_cp_uncertainty * cp
    notes = []
    # --- extension past the data (ideal gases only) --------------------------------------
    lo = min(float(t[0]), REFERENCE_TEMPERATURE,
             settings.use_t_min if settings.use_t_min is not None else np.inf)
    hi = max(float(t[-1]), settings.use_t_max if settings.use_t_max is not None else -np.inf)
    extensions = []
    if who.phase != "g" and (hi > t[-1] or lo < min(t[0], REFERENCE_TEMPERATURE)):
        notes.append(("COV-EXTRAPOLATED", "condensed phase: the range of use is limited to the "
                      f"data, {t[0]:.6g}-{t[-1]:.6g} K (never extrapolated)"))
        hi = float(t[-1])
        lo = min(float(t[0]), REFERENCE_TEMPERATURE)
    elif settings.extrapolate and who.geometry and who.atoms:
        for side, target in (("high", hi), ("low", lo)):
            beyond = target > t[-1] * 1.0001 if side == "high" else target < t[0] * 0.9999
            if not beyond or (side == "low" and target >= REFERENCE_TEMPERATURE - 1e-9
                              and t[0] - REFERENCE_TEMPERATURE <= settings.max_anchor_extension):
                continue
            ext = extrapolate.extend(t, cp, who.geometry, who.atoms, target, side=side)
            if ext is None:
                notes.append(("COV-EXTRAPOLATED", f"no extrapolation model passed its guards "
                              f"on the {side} side; the polynomial is extrapolated to "
                              f"{target:g} K unguided"))
                continue
            extensions.append(ext)
            notes.append(("FIT-EXTRAPOLATED", f"{min(ext.t_from, ext.t_to):.6g}-"
                          f"{max(ext.t_from, ext.t_to):.6g} K extrapolated with {ext.model} "
                          f"(hold-out error {100 * ext.holdout_error:.2g} %, uncertainty "
                          f"{100 * ext.u_rel_end:.2g} % at {ext.t_to:g} K)"))
    ext_t = np.array([x for e in extensions for x in e.t])
    ext_cp = np.array([x for e in extensions for x in e.cp])
    all_t, all_cp = np.concatenate([t, ext_t]), np.concatenate([cp, ext_cp])
    # the polynomial follows the extension as closely as the data; the extension's own
    # uncertainty is reported separately (library.uncertainty adds it)
    all_sig = np.concatenate([sigma, settings.inferred_cp_uncertainty * ext_cp])
    srt = np.argsort(all_t, kind="stable")
    all_t, all_cp, all_sig = all_t[srt], all_cp[srt], all_sig[srt]
    # --- breakpoints and the constrained solution ---------------------------------------
    try:
        bps, note = choose_breakpoints(all_t, all_cp / R, all_sig / R, form, settings)
    except ValueError as exc:
        raise FitError(species_id, str(exc)) from None
    if note:
        notes.append(note)
    edges = [lo] + list(bps) + [hi]
    if any(b <= lo or b >= hi for b in bps) or list(bps) != sorted(bps):
        raise FitError(species_id, f"breakpoints {bps} do not lie inside {lo:g}-{hi:g} K")
    col_rows, col_y, col_sig = _column_observations(data, s298, bps, edges, form, settings)
    rows = np.vstack([basis.cp_rows(form.powers, all_t, bps)] + col_rows)
    y = np.concatenate([all_cp / R] + col_y)
    sig = np.concatenate([all_sig / R] + col_sig)
    cons = basis.continuity_rows(form.powers, bps, settings.continuity) if bps else None
    sol = lsq.minimax(rows, y, sig, cons) if settings.minimax else lsq.solve(rows, y, sig, cons)
    if not np.all(np.isfinite(sol.c)):
        raise FitError(species_id, "the least-squares solution is not finite")
    m = len(form.powers)
    scaled = sol.c.reshape(len(bps) + 1, m)
    cp_coeffs = [form.cp_coefficients(row) for row in scaled]
    h0, s0 = integration_constants(form, cp_coeffs, edges, h298, s298)
    ranges = tuple(FitRange(t_min=float(edges[j]), t_max=float(edges[j + 1]),
                            coefficients=tuple(float(x) for x in form.pack(cp_coeffs[j], h0[j],
                                                                           s0[j], h298)))
                   for j in range(len(cp_coeffs)))
    solved = Solved(form=form, ranges=ranges, breakpoints=tuple(bps), solution=sol,
                    extensions=tuple(extensions), notes=tuple(notes), weighting=weighting,
                    sigma=sigma)
    return _judge(species_id, solved, data, settings)


@dataclass(frozen=True)
class Solved:
    """A constrained solution before it is judged."""

    form: forms.Form
    ranges: tuple            # FitRange
    breakpoints: tuple       # [K]
    solution: lsq.Solution
    extensions: tuple        # extrapolate.Extension
    notes: tuple             # (code, message)
    weighting: str           # "u(Cp)" or "relative"
    sigma: np.ndarray        # σ(Cp) of the data rows [J/(mol K)]


def _judge(species_id: str, solved: Solved, data: CpData, settings: FitSettings) -> FitResult:
    """The FitResult of ``solved`` with its quality against ``data``; FitRejected when it
    fails the acceptance thresholds of ``settings``."""

    form, ranges, sol, extensions = solved.form, solved.ranges, solved.solution, solved.extensions
    t, cp, dh, s, sigma = data.t, data.cp, data.dh, data.s, solved.sigma
    rr = [(r.t_min, r.t_max, r.coefficients) for r in ranges]
    ev = forms.evaluate_ranges(rr, t, form)
    rel = (ev["Cp"] - cp) / cp
    worst = int(np.argmax(np.abs(rel)))
    h_dev = s_dev = None
    ref = forms.evaluate_ranges(rr, [REFERENCE_TEMPERATURE], form)
    if dh is not None and np.isfinite(dh).any():
        m = np.isfinite(dh)
        h_dev = float(np.max(np.abs(ev["H"][m] - ref["H"][0] - dh[m])))
    if s is not None and np.isfinite(s).any():
        m = np.isfinite(s)
        s_dev = float(np.max(np.abs(ev["S"][m] - s[m])))
    dense = np.unique(np.concatenate([np.geomspace(ranges[0].t_min, ranges[-1].t_max, 400),
                                      [r.t_min for r in ranges], [ranges[-1].t_max]]))
    cp_dense = forms.evaluate_ranges(rr, dense, form)["Cp"]
    extrap = tuple({"t_min": min(e.t_from, e.t_to), "t_max": max(e.t_from, e.t_to),
                    "model": e.model, "holdout_error": e.holdout_error,
                    "u_rel_end": e.u_rel_end} for e in sorted(extensions, key=lambda e: e.t_to))
    result = FitResult(form=form.name, ranges=ranges, breakpoints=solved.breakpoints,
                       data_t_min=float(t[0]), data_t_max=float(t[-1]), points=len(t),
                       cp_max_rel_dev=float(np.abs(rel).max()),
                       cp_rms_rel_dev=float(np.sqrt(np.mean(rel ** 2))),
                       worst_t=float(t[worst]), weighting=solved.weighting, h_max_dev=h_dev,
                       s_max_dev=s_dev, covariance=tuple(tuple(float(x) for x in row)
                                                         for row in sol.cov),
                       powers=tuple(form.powers), extrapolated=extrap,
                       settings=settings.to_dict(), notes=solved.notes)
    if np.any(cp_dense <= 0) or not np.all(np.isfinite(cp_dense)):
        bad = dense[np.argmax(~(cp_dense > 0))]
        raise FitRejected(species_id, f"fitted Cp is not positive at {bad:.6g} K inside the "
                          "range of use")
    fails = []
    # a point fails acceptance when it is off by more than the threshold and by more than
    # three of its own standard uncertainties (a point stated as uncertain may scatter)
    off = np.abs(rel) > settings.accept_cp_max_rel
    if solved.weighting == "u(Cp)":
        off &= np.abs(ev["Cp"] - cp) > 3 * sigma
    if off.any():
        k = int(np.argmax(np.where(off, np.abs(rel), 0.0)))
        fails.append(f"|dCp/Cp| {100 * abs(rel[k]):.3g} % at {t[k]:.6g} K > "
                     f"{100 * settings.accept_cp_max_rel:g} %")
    if h_dev is not None and h_dev > settings.accept_h_max:
        fails.append(f"max |dH| {h_dev:.4g} J/mol > {settings.accept_h_max:g}")
    if s_dev is not None and s_dev > settings.accept_s_max:
        fails.append(f"max |dS| {s_dev:.4g} J/(mol*K) > {settings.accept_s_max:g}")
    if fails:
        raise FitRejected(species_id, "; ".join(fails))
    return result
