"""Transitions between the phases of a species: which are kept, how the phases chain, which
phase starts the chain, and what does not hold together.

For each species name with stated transitions:

1. Where sources state the same transition (same phases), the preferred source (highest
   priority, then source id) is kept; a lower one that differs by more than the stated
   uncertainties (or 1 K and 5 % of ΔH_trs when none is stated, common practice) gives
   TRS-DISAGREE.
2. Each transition must be endothermic on heating (ΔH_trs > 0, TRS-NOT-ENDOTHERMIC), name
   phases that have tables in the build (TRS-PHASE-MISSING), and lie inside, or at most
   ``max_anchor_extension`` beyond, the data of both phases (TRS-OUTSIDE-DATA).
3. The kept transitions, ordered by temperature, must form one chain of phases on heating,
   each phase entered once and left once (TRS-CHAIN); otherwise the species keeps no chain.
4. The chain starts from the phase stable at 298.15 K when it has its own ΔfH° and S°, else
   from the anchored phase nearest to it (ANCHOR-MISSING when no phase is anchored). A
   phase keeps its own anchors when its data reach 298.15 K; every other phase of the
   chain is reached through the transitions (``TableMeta.reached``), and a phase with
   neither anchors nor a chain to an anchored phase is held back (ANCHOR-MISSING).
"""

from dataclasses import replace

import numpy as np

from ..core.constants import REFERENCE_TEMPERATURE
from ..core.findings import finding
from ..core.records import Chain

#: two statements of a transition agree within these when no uncertainty is stated
#: (common practice): temperature [K] and relative enthalpy of transition
SAME_T = 1.0
SAME_H_REL = 0.05


def _span(tables):
    """(lowest, highest) T [K] of the rows of ``tables``, or None when they have none."""
    t = np.concatenate([np.asarray(tb.data["T"], dtype=float) for tb in tables] or [np.array([])])
    t = t[np.isfinite(t) & (t > 0)]
    return (float(t.min()), float(t.max())) if len(t) else None


def _preferred(stated):
    """(kept, findings): one transition per (species, lower, upper), by source priority."""
    groups, out = {}, []
    for x in stated:
        groups.setdefault((x.species, x.lower, x.upper), []).append(x)
    kept = []
    for key in sorted(groups):
        ranked = sorted(groups[key], key=lambda x: (-x.source.priority, x.source.id, x.index))
        best = ranked[0]
        kept.append(best)
        for other in ranked[1:]:
            u_t = SAME_T
            u_h = max(2 * np.hypot(best.u_enthalpy or 0.0, other.u_enthalpy or 0.0),
                      SAME_H_REL * abs(best.enthalpy))
            if abs(other.temperature - best.temperature) > u_t or \
                    abs(other.enthalpy - best.enthalpy) > u_h:
                out.append(finding(
                    "TRS-DISAGREE", f"{best.lower_id} -> {best.upper_id}: "
                    f"{other.temperature:.6g} K, {other.enthalpy / 1000:.6g} kJ/mol here but "
                    f"{best.temperature:.6g} K, {best.enthalpy / 1000:.6g} kJ/mol in "
                    f"{best.source.id} (preferred, used)", seen=f"{other.temperature:.6g} K, "
                    f"{other.enthalpy / 1000:.6g} kJ/mol", expected=f"{best.temperature:.6g} "
                    f"± {u_t:g} K, {best.enthalpy / 1000:.6g} ± {u_h / 1000:.3g} kJ/mol",
                    **other.where))
    return kept, out


def _usable(x, by_id, reach):
    """Findings that rule transition ``x`` out (empty when it can be used)."""
    if x.enthalpy <= 0:
        return [finding("TRS-NOT-ENDOTHERMIC", f"{x.lower_id} -> {x.upper_id} at "
                        f"{x.temperature:.6g} K: ΔH_trs = {x.enthalpy / 1000:.6g} kJ/mol; on "
                        "heating a transition takes up heat", seen=f"{x.enthalpy / 1000:.6g} "
                        "kJ/mol", expected="> 0 (from the phase stable below to the one stable "
                        "above)", **x.where)]
    missing = [sid for sid in (x.lower_id, x.upper_id) if sid not in by_id]
    if missing:
        return [finding("TRS-PHASE-MISSING", f"{x.lower_id} -> {x.upper_id}: no table of "
                        f"{' or '.join(missing)} is in the build; the transition is not used",
                        seen=", ".join(missing), expected="a table of each phase", **x.where)]
    out = []
    for sid in (x.lower_id, x.upper_id):
        span = _span(by_id[sid])
        if span is None:
            continue
        lo, hi = span
        if x.temperature < lo - reach or x.temperature > hi + reach:
            out.append(finding("TRS-OUTSIDE-DATA", f"{x.lower_id} -> {x.upper_id} at "
                               f"{x.temperature:.6g} K lies outside the data of {sid} "
                               f"({lo:.6g}-{hi:.6g} K) by more than {reach:g} K",
                               seen=f"{x.temperature:.6g} K",
                               expected=f"{lo - reach:.6g}-{hi + reach:.6g} K", **x.where))
    return out


def _chain(name, links):
    """(phases in order, transitions in order) of ``links`` ordered by temperature, or
    (None, reason) when they do not form one chain of phases."""
    links = sorted(links, key=lambda x: x.temperature)
    phases = [links[0].lower]
    for prev, x in zip([None] + links[:-1], links):
        if prev is not None and x.lower != prev.upper:
            return None, (f"{prev.lower_id} -> {prev.upper_id} at {prev.temperature:.6g} K is "
                          f"followed by {x.lower_id} -> {x.upper_id} at {x.temperature:.6g} K")
        if prev is not None and x.temperature <= prev.temperature:
            return None, f"two transitions of {name} at {x.temperature:.6g} K"
        if x.upper in phases:
            return None, f"{name}({x.upper}) would be entered twice on heating"
        phases.append(x.upper)
    return tuple(phases), tuple(links)


def _primary(tables):
    """The table reconciliation prefers (reconcile.py): its anchors are the phase's."""
    return sorted(tables, key=lambda t: (-t.meta.source.priority, t.meta.source.id,
                                         t.meta.file))[0]


def _reaches_298(tables, reach) -> bool:
    span = _span(tables)
    return span is not None and span[0] - reach <= REFERENCE_TEMPERATURE <= span[1] + reach


def link(tables, stated, ctx, prior=()):
    """Chains of the species with transitions.

    Parameters
    ----------
    tables : every Table read
    stated : every Transition the sources state
    ctx : settings.Settings (``fit.max_anchor_extension`` [K] is how far beyond its data a
        phase may be stretched to reach a transition)
    prior : the findings of reading (a table whose anchors could not be read already has
        its error)

    Returns (tables with ``reached`` set, chains, findings).
    """
    reach = ctx.fit.max_anchor_extension
    by_id = {}
    for tb in tables:
        by_id.setdefault(tb.meta.species_id, []).append(tb)
    kept, found = _preferred(stated)
    usable = []
    for x in kept:
        problems = _usable(x, by_id, reach)
        found += problems
        if not problems:
            usable.append(x)
    by_name = {}
    for x in usable:
        by_name.setdefault(x.species, []).append(x)
    chains, reached, explained = [], set(), set()
    for name in sorted(by_name):
        phases, links = _chain(name, by_name[name])
        if phases is None:
            found += [finding("TRS-CHAIN", f"the transitions of {name} do not form one chain "
                              f"of phases on heating: {links}", **x.where)
                      for x in by_name[name]]
            continue
        temps = [0.0] + [x.temperature for x in links] + [np.inf]
        stable = next(k for k, p in enumerate(phases)
                      if temps[k] <= REFERENCE_TEMPERATURE < temps[k + 1])
        anchored = [k for k, p in enumerate(phases)
                    if _primary(by_id[f"{name}({p})"]).meta.anchored]
        own = [k for k in anchored if _reaches_298(by_id[f"{name}({phases[k]})"], reach)]
        if not own:
            explained.update(f"{name}({p})" for p in phases)
            for p in phases:
                for tb in by_id[f"{name}({p})"]:
                    found.append(finding(
                        "ANCHOR-MISSING", f"no phase of {name} ({', '.join(phases)}) has "
                        "ΔfH° and S° at 298.15 K with data that reach 298.15 K; the chain of "
                        "transitions has nowhere to start", expected=f"enthalpy_of_formation"
                        f"_298 and entropy_298 for {name}({phases[stable]})", **tb.meta.where))
            continue
        root = min(own, key=lambda k: (abs(k - stable), k))
        chains.append(Chain(species=name, phases=phases, transitions=links, root=phases[root],
                            own=tuple(phases[k] for k in own)))
        reached.update(f"{name}({p})" for k, p in enumerate(phases) if k not in own)
    out = []
    unread = {f.extra.get("table") for f in prior if f.code == "SRC-QUANTITY"}
    for tb in tables:
        meta, sid = tb.meta, tb.meta.species_id
        if sid in reached:
            tb = replace(tb, meta=replace(meta, reached=True))
        elif sid not in explained and _primary(by_id[sid]) is tb and not meta.anchored \
                and meta.file not in unread:
            found.append(finding("ANCHOR-MISSING", f"{sid} has no ΔfH° and S° at 298.15 K and "
                                 "no transition links it to a phase that has",
                                 expected="enthalpy_of_formation_298 and entropy_298 in "
                                 "source.json, or a transition to an anchored phase",
                                 **meta.where))
        out.append(tb)
    return tuple(out), tuple(chains), found
