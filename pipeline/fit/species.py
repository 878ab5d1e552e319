"""Fitting stage: multi-range constrained least squares of Cp (and H, S columns).

For one species: choose the breakpoints (optimised by default and kept steady, see
breakpoints.py and breakchoice.py),
extend ideal-gas Cp past the data when the range of use asks for it (extrapolate.py,
beyond.py),
solve the exactly constrained weighted least-squares problem in τ = T/1000 K (lsq.py:
continuity of Cp and its derivatives at every breakpoint; optionally minimax), convert to
the published coefficients of the chosen form (forms.py), choose the integration constants
range by range — H(298.15) = ΔfH° and S(298.15) = S° exactly in the range holding
298.15 K, continuity of H and S at every breakpoint — and judge the result against the
acceptance rule (acceptance.py).

Weights: σ(Cp) = u(Cp) when the table states it, else the inferred relative uncertainty
times Cp; σ(H) and σ(S) from the settings. The covariance of the scaled coefficients
(projected onto the constraints, scaled by the convention of uncertainty.py) and the model
error of the form, range by range, are kept for the stated uncertainties.
"""

from dataclasses import dataclass

import numpy as np

from ..core import gridcache
from ..core.constants import GAS_CONSTANT as R
from ..core.constants import REFERENCE_TEMPERATURE
from ..core.errors import FitError, FitRejected
from ..core.records import CpData, FitRange, FitResult, SpeciesIdentity
from ..core.settings import FitSettings
from ..physics import basis, forms
from . import acceptance, beyond, breakchoice, extrapolate, lsq, uncertainty


def integration_constants(form, cp_coeffs, edges, h298, s298, tref=REFERENCE_TEMPERATURE):
    """h0 [J/mol], s0 [J/(mol K)] per range: H = ``h298`` and S = ``s298`` at ``tref`` [K]
    (298.15 K, or the transition a phase is anchored at), continuous at breakpoints."""
    nr = len(cp_coeffs)
    j0 = min(max(int(np.asarray(edges[1:-1]).searchsorted(tref, side="left")), 0), nr - 1)
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


def _column_observations(data: CpData, who: SpeciesIdentity, bps, edges, form, settings):
    """Rows, targets and σ of the H−H298 and S columns (empty when not fitted together).

    The rows integrate Cp from the anchor temperature; H − H298 counts from ``who``'s
    reference enthalpy, so the target of a row is H − H298 less (H_anchor − H_reference)."""
    t, dh, s, u_dh, u_s = data.t, data.dh, data.s, data.u_dh, data.u_s
    tref, h_anchor, s298 = who.anchor
    offset = h_anchor - who.reference_h
    rows, y, sig = [], [], []
    if settings.simultaneous and dh is not None:
        m = np.isfinite(dh)
        if m.sum():
            given = u_dh is not None and np.all(np.isfinite(u_dh[m]))
            uh = u_dh[m] if given else np.maximum(
                settings.h_uncertainty_rel * np.abs(dh[m]), settings.h_uncertainty_abs)
            rows.append(basis.integral_rows(form.powers, t[m], bps, edges, "H", tref))
            y.append((dh[m] - offset) / R)
            sig.append(uh / R)
    if settings.simultaneous and s is not None and s298 is not None:
        m = np.isfinite(s)
        if m.sum():
            given = u_s is not None and np.all(np.isfinite(u_s[m]))
            us = u_s[m] if given else np.full(m.sum(), settings.s_uncertainty_abs)
            rows.append(basis.integral_rows(form.powers, t[m], bps, edges, "S", tref))
            y.append((s[m] - s298) / R)
            sig.append(us / R)
    return rows, y, sig


def _range_of_use(who: SpeciesIdentity, t, cp, settings: FitSettings):
    """(lo, hi [K], extensions, notes): the fitted range, which always holds the anchor
    temperature (298.15 K, or the transition a phase is anchored at) and the phase's other
    transitions, and the model extensions that fill it beyond the data.

    The anchor is reached inside the data, by stretching the end ranges at most
    ``max_anchor_extension`` beyond them (marked extrapolated), or, above the data of an
    ideal gas, by its extrapolation model; FitError otherwise (never an anchor placed on an
    unguided polynomial). A condensed phase is never extrapolated further.
    """
    tref, t0, tn = who.anchor_t, float(t[0]), float(t[-1])
    reach = [tref, *who.span]
    lo, hi = _wanted(who, t, settings)
    if t0 - min(reach) > settings.max_anchor_extension:
        raise FitError(who.species_id, f"the data start at {t0:.6g} K, more than "
                       f"{settings.max_anchor_extension:g} K above {min(reach):.6g} K where H "
                       f"and S are anchored; add data down to {min(reach):.6g} K")
    notes, extensions = [], []
    if who.phase != "g":
        if max(reach) - tn > settings.max_anchor_extension:
            raise FitError(who.species_id, f"the data end at {tn:.6g} K, more than "
                           f"{settings.max_anchor_extension:g} K below {max(reach):.6g} K, "
                           "which the phase must reach (its anchor or a transition); a "
                           "condensed phase that exists only below 298.15 K is anchored "
                           "through its transitions")
        lo_c, hi_c = min(t0, *reach), max(tn, *reach)
        if lo_c < t0 or hi_c > tn:
            notes.append(("COV-EXTRAPOLATED", f"condensed phase: Cp is stretched from its data "
                          f"({t0:.6g}-{tn:.6g} K) to {lo_c:.6g}-{hi_c:.6g} K to reach its "
                          "anchor and transitions"))
        if hi > hi_c or lo < lo_c:
            notes.append(("COV-EXTRAPOLATED", "condensed phase: the range of use is limited to "
                          f"{lo_c:.6g}-{hi_c:.6g} K (never extrapolated further)"))
        return lo_c, hi_c, extensions, notes
    guided = _guided(who, settings)
    for side, target in _beyond(who, t, lo, hi):
        ext = extrapolate.extend(t, cp, who.geometry, who.atoms, target,
                                 side=side) if guided else None
        if ext is None and side == "high" and tn < tref:
            raise FitError(who.species_id, f"the data end at {tn:.6g} K, below 298.15 K where "
                           "H and S are anchored, and no extrapolation model passed its "
                           "guards to carry Cp there; add data up to 298.15 K")
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
    return lo, hi, extensions, notes


def _wanted(who: SpeciesIdentity, t, settings: FitSettings):
    """(lo, hi) [K]: the range of use asked for, widened to the data, the anchor temperature
    and the phase's transitions."""
    reach = [who.anchor_t, *who.span]
    lo = min(float(t[0]), *reach, settings.use_t_min if settings.use_t_min is not None
             else np.inf)
    hi = max(float(t[-1]), *reach, settings.use_t_max if settings.use_t_max is not None
             else -np.inf)
    return lo, hi


def _guided(who: SpeciesIdentity, settings: FitSettings) -> bool:
    """Whether an ideal gas beyond its data is carried by an extrapolation model."""
    return bool(settings.extrapolate and who.geometry and who.atoms)


def _beyond(who: SpeciesIdentity, t, lo, hi) -> list:
    """(side, target [K]) of each side where the range of use (lo, hi) [K] reaches past the
    data of an ideal gas far enough to be extrapolated (a short stretch down to 298.15 K is
    left to the polynomial)."""
    t0, tn = float(t[0]), float(t[-1])
    out = []
    if hi > tn * 1.0001:
        out.append(("high", hi))
    if lo < t0 * 0.9999 and lo < who.anchor_t - 1e-9:
        out.append(("low", lo))
    return out


def _solve(who, form, rows, data: CpData, span, settings: FitSettings, fixed=None, pins=(),
           previous=None, chosen=None) -> beyond.Fitted:
    """The Fitted solution of the Cp rows (t, cp, σ) [K, J/(mol K)] and the table's H and S
    columns over ``span`` (lo, hi) [K]: breakpoints chosen (breakchoice.py; ``previous``
    the previous release's breakpoints on offer; ``chosen`` what breakchoice.choose_many
    chose for these rows), or ``fixed``; dCp/dT = 0 at the ``pins`` [K]."""
    all_t, all_cp, all_sig = rows
    lo, hi = span
    notes, choice = [], None
    if fixed is None and chosen is not None:
        bps, notes, choice = list(chosen[0]), list(chosen[1]), chosen[2]
    elif fixed is None:
        try:
            bps, notes, choice = breakchoice.choose(all_t, all_cp / R, all_sig / R, form,
                                                    settings, previous)
        except ValueError as exc:
            raise FitError(who.species_id, str(exc)) from None
    else:
        bps = list(fixed)
    edges = [lo] + list(bps) + [hi]
    if any(b <= lo or b >= hi for b in bps) or list(bps) != sorted(bps):
        raise FitError(who.species_id, f"breakpoints {bps} do not lie inside {lo:g}-{hi:g} K")
    col_rows, col_y, col_sig = _column_observations(data, who, bps, edges, form, settings)
    a = np.vstack([basis.cp_rows(form.powers, all_t, bps)] + col_rows)
    y = np.concatenate([all_cp / R] + col_y)
    sig = np.concatenate([all_sig / R] + col_sig)
    cons = [basis.continuity_rows(form.powers, bps, settings.continuity)] if bps else []
    if len(pins):
        cons.append(basis.slope_rows(form.powers, pins, bps))
    cons = np.vstack(cons) if cons else None
    sol = lsq.minimax(a, y, sig, cons) if settings.minimax else lsq.solve(a, y, sig, cons)
    if not np.isfinite(sol.c).all():
        raise FitError(who.species_id, "the least-squares solution is not finite")
    return beyond.Fitted(list(bps), edges, sol, list(notes), choice)


@dataclass(frozen=True)
class Prepared:
    """A fit before its breakpoints are chosen: the form, the range of use (lo, hi) [K], the
    extension models beyond the data and their notes, and the rows (T [K], Cp [J/(mol K)],
    σ [J/(mol K)]) of the data and the extensions, ascending in T."""

    form: forms.Form
    span: tuple          # (lo, hi) [K]
    extensions: tuple    # extrapolate.Extension
    notes: tuple         # (code, message)
    rows: tuple          # (T, Cp, σ) arrays
    weighting: str       # "u(Cp)" or "relative"

    @property
    def protected(self) -> bool:
        """Whether a high-side extension must leave the fit inside the data alone
        (beyond.protect_data)."""
        return any(e.side == "high" for e in self.extensions)

    def searches(self, data: CpData) -> dict:
        """{role: (T [K], Cp/R, σ/R)} of each breakpoint search the fit makes: "all" on
        every row, and, when a high-side extension must leave the data alone
        (beyond.protect_data), "data" on the rows up to the last data point."""
        t, cp, sig = self.rows
        out = {"all": (t, cp / R, sig / R)}
        if self.protected:
            inside = t <= data.t[-1]
            out["data"] = (t[inside], cp[inside] / R, sig[inside] / R)
        return out


def prepare(who: SpeciesIdentity, data: CpData, settings: FitSettings) -> Prepared:
    """The Prepared fit of ``data`` for ``who`` under ``settings`` (the extension models run
    here); FitError when the fit cannot be made."""
    species_id = who.species_id
    _, h_anchor, s_anchor = who.anchor
    if h_anchor is None or s_anchor is None:
        raise FitError(species_id, "no ΔfH° and S° to anchor H and S: the table that states "
                       "them was held back, or none does and no transition reaches this phase")
    form = forms.FORMS.get(settings.form)
    if form is None:
        raise FitError(species_id, f"form '{settings.form}' is not available; choose one of "
                       + ", ".join(forms.FORMS))
    if not 1 <= settings.ranges <= 4:
        raise FitError(species_id, f"{settings.ranges} ranges requested; 1 to 4 are supported")
    t, cp, u = data.t, data.cp, data.u_cp
    if len(t) < settings.min_points:
        raise FitError(species_id, f"{len(t)} points, at least {settings.min_points} needed")
    sigma = u if u is not None else settings.inferred_cp_uncertainty * cp
    lo, hi, extensions, ext_notes = _range_of_use(who, t, cp, settings)
    ext_t = np.array([x for e in extensions for x in e.t])
    ext_cp = np.array([x for e in extensions for x in e.cp])
    all_t, all_cp = np.concatenate([t, ext_t]), np.concatenate([cp, ext_cp])
    # the polynomial follows the extension within the extension's own uncertainty (never
    # tighter than data without a stated u), so that the data, not the model, set the join
    ext_u = np.array([x for e in extensions for x in e.u_rel])
    all_sig = np.concatenate([sigma, np.maximum(settings.inferred_cp_uncertainty, ext_u)
                              * ext_cp])
    srt = all_t.argsort(kind="stable")
    return Prepared(form=form, span=(lo, hi), extensions=tuple(extensions),
                    notes=tuple(ext_notes), rows=(all_t[srt], all_cp[srt], all_sig[srt]),
                    weighting="u(Cp)" if u is not None else "relative")


def fit_species(who: SpeciesIdentity, data: CpData, settings: FitSettings = FitSettings(),
                previous=None, chosen=None, prepared=None) -> FitResult:
    """Fit one species.

    Parameters
    ----------
    who : the species' id, anchors ΔfH°(298.15 K) [J/mol] and S°(298.15 K) [J/(mol K)] at
        1 bar, phase, and geometry and atoms (for extrapolation of ideal gases)
    data : T [K], Cp [J/(mol K)], u(Cp) [J/(mol K)] or None, and the optional H − H298
        [J/mol] and S [J/(mol K)] columns with their uncertainties, sorted by T
    settings : the fit settings with the table's own overrides applied
    previous : the breakpoints [K] of the species in the previous release, offered to an
        optimised search (breakchoice.py), or None
    chosen : {role: (breakpoints, notes, Choice)} that breakchoice.choose_many chose for the
        searches of ``prepared`` (Prepared.searches, with ``previous``); a search not
        given is made here
    prepared : ``prepare(who, data, settings)``, when it is already made

    Returns
    -------
    FitResult, whose ranges hold the coefficients of ``settings.form`` for T in kelvin.
    Raises FitError when the fit cannot be made and FitRejected when it fails acceptance.
    """
    species_id = who.species_id
    t_anchor, h_anchor, s_anchor = who.anchor
    prepared = prepared or prepare(who, data, settings)
    chosen = chosen or {}
    form, (lo, hi), extensions = prepared.form, prepared.span, prepared.extensions
    all_t, all_cp, all_sig = prepared.rows
    t, u, weighting = data.t, data.u_cp, prepared.weighting
    notes = list(prepared.notes)
    fitted = _solve(who, form, prepared.rows, data, (lo, hi), settings, previous=previous,
                    chosen=chosen.get("all"))
    if prepared.protected:
        def solve(rows, span, fixed=None, pins=()):
            # the one search of protect_data is the fit of the data alone
            return _solve(who, form, rows, data, span, settings, fixed, pins, previous,
                          chosen.get("data") if fixed is None else None)

        fitted = beyond.protect_data(species_id, form, prepared.rows, all_t <= t[-1], data,
                                     (lo, hi), settings, fitted, solve)
    bps, edges, sol = fitted.bps, fitted.edges, fitted.sol
    notes.extend(fitted.notes)
    m = len(form.powers)
    scaled = sol.c.reshape(len(bps) + 1, m)
    cp_coeffs = [form.cp_coefficients(row) for row in scaled]
    h0, s0 = integration_constants(form, cp_coeffs, edges, h_anchor, s_anchor, t_anchor)
    ranges = tuple(FitRange(t_min=float(edges[j]), t_max=float(edges[j + 1]),
                            coefficients=tuple(float(x) for x in form.pack(
                                cp_coeffs[j], h0[j], s0[j], who.reference_h)))
                   for j in range(len(cp_coeffs)))
    scale = uncertainty.covariance_scale(sol, stated=u is not None)
    cov = sol.cov * scale
    cp_rows = basis.cp_rows(form.powers, all_t, bps)
    u_param = R * basis.standard_deviation(cp_rows, cov)
    model = uncertainty.model_error(all_t, all_cp, all_sig, R * (cp_rows @ sol.c), u_param,
                                    edges)
    solved = Solved(form=form, ranges=ranges, breakpoints=tuple(bps), solution=sol,
                    extensions=tuple(extensions), notes=tuple(notes), weighting=weighting,
                    covariance=cov, model_error=model, covariance_scale=scale,
                    choice=fitted.choice)
    return _judge(who, solved, data, settings)


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
    covariance: np.ndarray   # of the scaled coefficients, by the uncertainty convention
    model_error: tuple       # per range: standard uncertainties of the form (uncertainty.py)
    covariance_scale: float  # the factor applied to the propagated covariance
    choice: object           # breakchoice.Choice of optimised breakpoints, or None


def _judge(who: SpeciesIdentity, solved: Solved, data: CpData,
           settings: FitSettings) -> FitResult:
    """The FitResult of ``solved`` with its quality against ``data``; FitRejected when it
    fails the acceptance thresholds of ``settings``."""
    species_id = who.species_id

    form, ranges, sol, extensions = solved.form, solved.ranges, solved.solution, solved.extensions
    t, cp, dh, s = data.t, data.cp, data.dh, data.s
    columns = (dh is not None and np.isfinite(dh).any()) or (s is not None and np.isfinite(s).any())
    # H and S only where the table has their columns (the same Cp either way)
    ev = forms.evaluate_ranges(ranges, t, form) if columns else \
        {"Cp": forms.cp_of_ranges(ranges, t, form)}
    rel = (ev["Cp"] - cp) / cp
    worst = int(np.abs(rel).argmax())
    h_dev = s_dev = None
    if dh is not None and np.isfinite(dh).any():
        m = np.isfinite(dh)
        h_dev = float(np.max(np.abs(ev["H"][m] - who.reference_h - dh[m])))
    if s is not None and np.isfinite(s).any():
        m = np.isfinite(s)
        s_dev = float(np.max(np.abs(ev["S"][m] - s[m])))
    # Cp on a fine grid of the range of use and at every range's ends (the grid's powers made
    # once for a catalogue's species: basis.values of the solution, equal to rounding to Cp
    # of the published coefficients)
    dense = np.concatenate([gridcache.geomspace(ranges[0].t_min, ranges[-1].t_max, 400),
                            [r.t_min for r in ranges], [ranges[-1].t_max]])
    cp_dense = R * np.concatenate([basis.values(form.powers, dense[:400], solved.breakpoints,
                                                sol.c),
                                   basis.values(form.powers, dense[400:], solved.breakpoints,
                                                sol.c)])
    extrap = tuple({"t_min": min(e.t_from, e.t_to), "t_max": max(e.t_from, e.t_to),
                    "model": e.model, "holdout_error": e.holdout_error,
                    "u_rel_end": e.u_rel_end,
                    "u_rel_start": e.u_rel[0] if e.side == "high" else e.u_rel[-1]}
                   for e in sorted(extensions, key=lambda e: e.t_to))
    free = sol.residual.size - sol.dof            # coefficients free under the constraints
    record, verdict = acceptance.judge(t, cp, ev["Cp"], data.u_cp, free, settings)
    result = FitResult(form=form.name, ranges=ranges, breakpoints=solved.breakpoints,
                       data_t_min=float(t[0]), data_t_max=float(t[-1]), points=len(t),
                       cp_max_rel_dev=float(np.abs(rel).max()),
                       cp_rms_rel_dev=float(np.sqrt((rel ** 2).sum() / len(rel))),
                       worst_t=float(t[worst]), weighting=solved.weighting, h_max_dev=h_dev,
                       s_max_dev=s_dev, covariance=tuple(map(tuple, np.asarray(
                           solved.covariance, dtype=float).tolist())),
                       model_error=solved.model_error,
                       birge_ratio=float(np.sqrt(sol.chi2 / sol.dof)), acceptance=record,
                       covariance_scale=solved.covariance_scale,
                       breakpoint_choice=solved.choice.to_dict() if solved.choice else None,
                       powers=tuple(form.powers), extrapolated=extrap,
                       settings=settings.recorded(), notes=solved.notes)
    if (cp_dense <= 0).any() or not np.isfinite(cp_dense).all():
        bad = dense[~(cp_dense > 0)].min()
        raise FitRejected(species_id, f"fitted Cp is not positive at {bad:.6g} K inside the "
                          "range of use")
    fails = [verdict] if verdict else []
    if h_dev is not None and h_dev > settings.accept_h_max:
        fails.append(f"max |dH| {h_dev:.4g} J/mol > {settings.accept_h_max:g}")
    if s_dev is not None and s_dev > settings.accept_s_max:
        fails.append(f"max |dS| {s_dev:.4g} J/(mol*K) > {settings.accept_s_max:g}")
    if fails:
        raise FitRejected(species_id, "; ".join(fails))
    return result
