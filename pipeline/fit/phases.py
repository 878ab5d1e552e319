"""The phases of a species fitted one after the other along their chain of transitions.

The chain (checks/transitions.py) starts from a phase anchored at 298.15 K by its ΔfH° and
S°. Every other phase is fitted over its own range with H and S fixed at the transition
that joins it to the phase fitted before it (H jumps by ΔH_trs and S by ΔH_trs / T_trs on
heating), so G is continuous there; a phase with its own anchors and data down to 298.15 K
keeps them. Inside a phase Cp, H and S are continuous as for any species; at a transition
they are discontinuous by design.

Afterwards every transition that did not fix a phase's anchors is checked: the Gibbs
energies of both phases must be equal at T_trs, and the enthalpy jump must match ΔH_trs
(TRS-GIBBS-MISMATCH); a phase's own anchors that the chain did not use are checked the
same way, with its Cp carried down to 298.15 K by its polynomial. Across the chain, no
phase may have a lower Gibbs energy than the phase stable at that temperature (TRS-ORDER).
"""

from dataclasses import replace

import numpy as np

from ..core.constants import REFERENCE_TEMPERATURE
from ..core.errors import FitError
from ..core.findings import finding
from ..core.limits import DEFAULT_U_ANCHOR_H, DEFAULT_U_ANCHOR_S, DEFAULT_U_TRANSITION_REL
from ..core.records import SpeciesIdentity
from ..physics import forms

#: default standard uncertainties of anchors [J/mol], [J/(mol K)] and the relative one of an
#: enthalpy of transition when none is stated (common practice)
U_ANCHOR_H, U_ANCHOR_S = DEFAULT_U_ANCHOR_H, DEFAULT_U_ANCHOR_S
U_TRANSITION_REL = DEFAULT_U_TRANSITION_REL


def fitting_order(selections, chains) -> list:
    """``selections`` in the order they can be fitted: every chain from its root outward
    (up, then down), every other species in its own order."""
    place = {}
    for c in chains:
        r = c.phases.index(c.root)
        seq = list(c.phases[r:]) + list(reversed(c.phases[:r]))
        for k, p in enumerate(seq):
            place[c.id_of(p)] = (c.species, k)
    return sorted(selections, key=lambda s: place.get(s.species_id, (s.species_id, 0)))


def chains_by_id(chains) -> dict:
    """{species id: the Chain that holds it} of every phase in ``chains``."""
    return {sid: c for c in chains for sid in c.ids()}


def _values(fit, t):
    """Cp, H, S, G of a FitResult at T [K], a number or an array (its polynomial, also
    outside its range)."""
    got = forms.evaluate_ranges(fit.ranges, t, fit.form)
    return got if np.ndim(t) else {k: float(v[0]) for k, v in got.items()}


def identity(meta, chain, done: dict) -> tuple:
    """(SpeciesIdentity, anchor record) of the phase of ``meta`` in ``chain``; ``done`` maps
    species ids to (FitResult, anchor record) of the phases fitted before. FitError when the
    phase it is reached from was not fitted."""
    p = meta.phase
    span = tuple(x.temperature for x in chain.transitions if p in (x.lower, x.upper))
    root_id = chain.id_of(chain.root)
    if p in chain.own:
        who = replace(SpeciesIdentity.of_table(meta), span=span)
        return who, {"basis": "own", "temperature": REFERENCE_TEMPERATURE,
                     "enthalpy": meta.enthalpy_of_formation_298, "entropy": meta.entropy_298,
                     "enthalpy_zero": meta.enthalpy_of_formation_298, "via": None}
    k, r = chain.phases.index(p), chain.phases.index(chain.root)
    x = chain.transitions[k - 1] if k > r else chain.transitions[k]
    nb = x.lower_id if k > r else x.upper_id
    if nb not in done or root_id not in done:
        raise FitError(meta.species_id, f"H and S reach this phase from {nb} through the "
                       f"transition at {x.temperature:.6g} K, but {nb} was not fitted (see its "
                       "findings)")
    got = _values(done[nb][0], x.temperature)
    sign = 1.0 if k > r else -1.0
    h = got["H"] + sign * x.enthalpy
    s = got["S"] + sign * x.entropy
    zero = done[root_id][1]["enthalpy_zero"]
    u_trs = x.u_enthalpy or 0.0
    u_h = float(np.hypot(done[nb][1].get("u_enthalpy", 0.0), u_trs))
    u_s = float(np.hypot(done[nb][1].get("u_entropy", 0.0), u_trs / x.temperature))
    who = SpeciesIdentity(meta.species_id, None, None, p, meta.geometry, meta.atoms,
                          anchor_t=x.temperature, anchor_h=h, anchor_s=s, h_reference=zero,
                          span=span)
    return who, {"basis": "transition", "temperature": x.temperature, "enthalpy": h,
                 "entropy": s, "enthalpy_zero": zero, "via": nb, "u_enthalpy": u_h,
                 "u_entropy": u_s,
                 "transition": {"source": x.source.id, "index": x.index}}


def _tolerance(x, t):
    """Twice the standard uncertainty [J/mol] of a Gibbs-energy difference at ``t`` [K]
    between two phases joined by ``x``: its ΔH_trs and both phases' anchors."""
    u_trs = x.u_enthalpy if x.u_enthalpy is not None else U_TRANSITION_REL * abs(x.enthalpy)
    return 2.0 * np.sqrt(u_trs ** 2 + 2 * U_ANCHOR_H ** 2 + 2 * (t * U_ANCHOR_S) ** 2)


def _used(x, anchor) -> bool:
    t = anchor.get("transition") or {}
    return (t.get("source"), t.get("index")) == (x.source.id, x.index)


def check_chain(chain, done: dict, metas: dict) -> list:
    """TRS-GIBBS-MISMATCH and TRS-ORDER warnings of one chain; ``done`` maps species ids to
    (FitResult, anchor record), ``metas`` to the TableMeta whose findings they travel with."""
    out = []
    for x in chain.transitions:
        a, b = x.lower_id, x.upper_id
        if a not in done or b not in done:
            continue
        t = x.temperature
        if _used(x, done[a][1]) or _used(x, done[b][1]):
            continue
        va, vb = _values(done[a][0], t), _values(done[b][0], t)
        dg, dh = vb["G"] - va["G"], vb["H"] - va["H"]
        tol = _tolerance(x, t)
        if abs(dg) > tol:
            out.append(finding(
                "TRS-GIBBS-MISMATCH", f"{a} -> {b} at {t:.6g} K: the phases' own anchors give "
                f"G({b}) - G({a}) = {dg / 1000:.4g} kJ/mol and an enthalpy jump of "
                f"{dh / 1000:.4g} kJ/mol; the transition states ΔH_trs = "
                f"{x.enthalpy / 1000:.4g} kJ/mol, where G must be equal",
                seen=f"ΔG = {dg / 1000:.4g} kJ/mol", expected=f"0 ± {tol / 1000:.3g} kJ/mol",
                **metas[b].where))
    for sid in chain.ids():
        meta, got = metas.get(sid), done.get(sid)
        if got is None or not meta.anchored or got[1]["basis"] == "own":
            continue
        x = next(x for x in chain.transitions if _used(x, got[1]))
        ref = _values(got[0], REFERENCE_TEMPERATURE)
        dg = (meta.enthalpy_of_formation_298 - ref["H"]) - x.temperature * (
            meta.entropy_298 - ref["S"])
        tol = _tolerance(x, x.temperature)
        if abs(dg) > tol:
            out.append(finding(
                "TRS-GIBBS-MISMATCH", f"{sid}: its own ΔfH° and S° at 298.15 K, carried to "
                f"{x.temperature:.6g} K by its Cp (extrapolated below its data), give a Gibbs "
                f"energy {dg / 1000:+.4g} kJ/mol away from {got[1]['via']}'s at the transition; "
                "the chain of transitions is used", seen=f"ΔG = {dg / 1000:.4g} kJ/mol",
                expected=f"0 ± {tol / 1000:.3g} kJ/mol", **meta.where))
    return out + _order(chain, done, metas)


def _order(chain, done, metas) -> list:
    """TRS-ORDER: a phase whose Gibbs energy lies below the stable phase's, on a grid over
    the stable ranges (each phase evaluated inside its own range only)."""
    fitted = {p: done[chain.id_of(p)][0] for p in chain.phases if chain.id_of(p) in done}
    if len(fitted) < 2:
        return []
    lo = min(f.ranges[0].t_min for f in fitted.values())
    hi = max(f.ranges[-1].t_max for f in fitted.values())
    out = []
    for p, (a, b) in chain.stable_ranges(lo, hi).items():
        if p not in fitted or b <= a:
            continue
        grid = np.linspace(a, b, 25)[1:-1]
        # the uncertainty budget of the transition out of p (the last one for the top phase)
        x = chain.transitions[min(chain.phases.index(p), len(chain.transitions) - 1)]
        for q, fq in fitted.items():
            inside = grid[(grid >= fq.ranges[0].t_min) & (grid <= fq.ranges[-1].t_max)]
            if q == p or not len(inside):
                continue
            gap = _values(fitted[p], inside)["G"] - _values(fq, inside)["G"]
            below = np.flatnonzero(gap > _tolerance(x, inside))
            if not len(below):
                continue
            k = below[0]
            sid, stable = chain.id_of(q), chain.id_of(p)
            out.append(finding(
                "TRS-ORDER", f"{sid} has a Gibbs energy {gap[k] / 1000:.4g} kJ/mol below "
                f"{stable} at {inside[k]:.6g} K, where the transitions make {stable} the "
                "stable phase", seen=f"{inside[k]:.6g} K", expected=f"{stable} lowest in G",
                **metas[sid].where))
    return out
