"""Formation properties of library species: ΔfH°(T), ΔfG°(T) and log10 Kf(T), with standard
uncertainties.

ΔfX(T) = X(T) − Σ_e (n_e / a_e) X_ref,e(T) for the species' n_e atoms of each element e, whose
reference species (library/references.py) holds a_e atoms of it and is taken in the phase
stable at T; log10 Kf = −ΔfG° / (R T ln 10). H(298.15 K) of every species is its ΔfH° exactly
(the coefficients' round-off removed), so ΔfH°(298.15 K) is the anchor itself. The
uncertainties follow library/budget.py: the shares of the species and of its elements'
reference species, correlated where they share a name.
"""

import math

import numpy as np

from ..core.constants import GAS_CONSTANT as R
from . import budget, references
from .entries import formulas_of

#: the columns ``Formation.at`` returns: values and standard uncertainties
COLUMNS = ("dfH", "u_dfH", "dfG", "u_dfG", "log10Kf", "u_log10Kf")


class Formation:
    """Formation properties of the species of one library document, with the reference
    states it records (resolved with the defaults for a library that records none)."""

    def __init__(self, doc: dict, budgets: budget.Budgets | None = None):
        self.doc = doc
        self.budgets = budgets or budget.Budgets(doc)
        self.formulas = formulas_of(doc)
        states = doc.get("reference_states")
        if states is None:
            states = references.resolve(doc)
        self.states = {s["element"]: _present(s, self.budgets.by_id) for s in states}
        self._missing = {}

    def missing(self, sid: str) -> list:
        """The reasons species ``sid`` has no formation properties: each of its elements
        without a usable reference state, or its charge (empty when it has them); found
        once per formula (a build asks for every species, and species share formulas: the
        10 000 of the benchmark have 7)."""
        formula = self.formulas[sid]
        if formula not in self._missing:
            self._missing[formula] = self._missing_of(formula)
        return list(self._missing[formula])

    def _missing_of(self, formula: str) -> list:
        if references.charge_of(formula):
            return [f"{formula} is charged: formation properties of ions need a convention "
                    "for the electron that thermoledger does not assume"]
        out = []
        for el, _ in references.elements_of(formula):
            st = self.states.get(el)
            if st is None or not st["ids"]:
                why = st["problem"] if st else "not declared"
                out.append(f"{el}: {why}")
        return out

    def at_ids(self, ids, t) -> dict | None:
        """``at`` of species ``ids[i]`` at ``t[i]`` [K], row by row (the phase stable at each
        temperature); None when one of them has no formation properties."""
        t = np.asarray(t, dtype=float)
        out = {}
        for sid in dict.fromkeys(ids):
            rows = np.array([x == sid for x in ids])
            got = self.at(sid, t[rows])
            if got is None:
                return None
            for k, v in got.items():
                out.setdefault(k, np.zeros(len(t), dtype=v.dtype))[rows] = v
        return out

    def at(self, sid: str, t) -> dict | None:
        """{dfH, u_dfH [J/mol], dfG, u_dfG [J/mol], log10Kf, u_log10Kf, ref_extrapolated} of
        species ``sid`` at ``t`` [K] (inside its range of use), NaN where a reference
        species has no phase in range; None when it has no formation properties."""
        if self.missing(sid):
            return None
        t = np.atleast_1d(np.asarray(t, dtype=float))
        own = self.budgets.at(sid, t)
        total = {"h": own.h.copy(), "s": own.s.copy(), "parts": [(1.0, own.shares)],
                 "extrapolated": np.zeros(len(t), dtype=bool)}
        gone = np.zeros(len(t), dtype=bool)
        for el, n in references.elements_of(self.formulas[sid]):
            st = self.states[el]
            ids = references.stable_ids(self.doc, st, t)
            gone |= np.array([i is None for i in ids])
            self.budgets.add(total, -n / st["atoms"], ids, t)
        extrapolated = total["extrapolated"]
        h, s = total["h"], total["s"]
        u = budget.spread(budget.combine(total["parts"]), t)
        g = h - t * s
        scale = R * t * math.log(10.0)
        out = {"dfH": h, "u_dfH": u["u_H"], "dfG": g, "u_dfG": u["u_G"],
               "log10Kf": 0.0 - g / scale, "u_log10Kf": u["u_G"] / scale}
        for k in COLUMNS:
            out[k] = np.where(gone, np.nan, out[k])
        out["ref_extrapolated"] = extrapolated & ~gone
        return out


def _present(state: dict, by_id: dict) -> dict:
    """``state``, without ids when one of them is not an entry of the library (a library
    edited by hand): then the element has no reference state, and 'problem' says why."""
    gone = [i for i in state["ids"] if i not in by_id]
    if not gone:
        return state
    return {**state, "ids": [], "problem": f"reference species {gone[0]} is not in the library"}
