"""Reaction properties from a library: ΔrH°, ΔrS°, ΔrG° and log10 K of a balanced equation.

An equation is written in plain formulas with stoichiometric numbers, sides joined by '=',
species by ' + ' (a plus with spaces around it, so that 'Na+' stays a charge):
``"2 CO + O2 = 2 CO2"``, ``"C(cr) + O2 = CO2"``, ``"1/2 N2 + 3/2 H2 = NH3"``. A species is a
library id or a name; a name whose phases the library links by transitions takes the phase
stable at each temperature. ΔrX = Σ ν_i X_i over the species (ν < 0 on the left), on the
assigned-enthalpy scale, so the elements' reference states cancel; log10 K = −ΔrG° / (R T
ln 10), K of the reaction at the standard pressure of 1 bar. The uncertainties follow
library/budget.py (species independent unless linked by transitions).
"""

import math
import re
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from ..core.constants import GAS_CONSTANT as R
from ..core.errors import InputError, SpeciesNotFound
from . import budget, document, references
from .entries import by_id as entries_by_id

#: longest equation [characters] and most species in one
MAX_EQUATION = 500
MAX_TERMS = 24

_NUMBER = r"(?:\d+(?:\.\d+)?(?:/\d+)?|\.\d+)"
_TERM = re.compile(rf"^(?:(?P<nu>{_NUMBER})(?:\s+|(?=[A-Z\[(])))?(?P<name>\S+)$")


@dataclass(frozen=True)
class Term:
    """One species of an equation: its stoichiometric number (negative on the left) and the
    name or id as written."""

    nu: float
    name: str


def parse(text: str) -> tuple:
    """The Terms of an equation, the same species on both sides netted; InputError naming
    the part that cannot be read."""
    expected = "an equation such as '2 CO + O2 = 2 CO2'"
    if not isinstance(text, str) or not text.strip():
        raise InputError("the equation is empty", expected=expected)
    if len(text) > MAX_EQUATION:
        raise InputError(f"the equation is {len(text)} characters long",
                         expected=f"at most {MAX_EQUATION}")
    sides = text.split("=")
    if len(sides) != 2:
        raise InputError(f"'{text[:80]}' has {len(sides) - 1} '=' signs", expected=expected)
    net: dict = {}
    for sign, side in ((-1, sides[0]), (1, sides[1])):
        if not side.strip():
            raise InputError(f"'{text[:80]}' has no species on the "
                             f"{'left' if sign < 0 else 'right'}", expected=expected)
        for part in re.split(r"\s+\+\s+", side.strip()):
            m = _TERM.match(part.strip())
            if not m:
                raise InputError(f"'{part.strip()[:40]}' is not a species with an optional "
                                 "stoichiometric number", expected="e.g. '2 CO2' or 'O2(g)'; "
                                 "species joined by ' + ' with spaces")
            nu = float(Fraction(m["nu"])) if m["nu"] else 1.0
            if not 0 < nu <= 1e6:
                raise InputError(f"the stoichiometric number of '{part.strip()[:40]}' is {nu:g}",
                                 expected="a number above 0 and at most 1e6")
            net[m["name"]] = net.get(m["name"], 0.0) + sign * nu
    terms = tuple(Term(nu, name) for name, nu in net.items() if nu != 0.0)
    if len(terms) > MAX_TERMS:
        raise InputError(f"the equation names {len(terms)} species", expected=f"at most {MAX_TERMS}")
    if not terms:
        raise InputError(f"'{text[:80]}' cancels out: the same species on both sides",
                         expected=expected)
    return terms


def written(terms) -> str:
    """The equation of ``terms`` as text, stoichiometric numbers of 1 left out."""
    def side(ts):
        return " + ".join(f"{_number(abs(x.nu))}{x.name}" for x in ts)
    return f"{side([x for x in terms if x.nu < 0])} = {side([x for x in terms if x.nu > 0])}"


def _number(nu: float) -> str:
    if nu == 1.0:
        return ""
    f = Fraction(nu).limit_denominator(1000)
    return f"{f} " if float(f) == nu else f"{nu:g} "


def check_balance(doc: dict, terms) -> None:
    """InputError unless every element, and the charge, balance: Σ ν_i n_i,e = 0."""
    by_id = entries_by_id(doc)
    left, right, charge = {}, {}, 0.0
    for x in terms:
        formula = by_id[_any_id(doc, x.name)]["formula"]
        for el, n in references.elements_of(formula):
            side = left if x.nu < 0 else right
            side[el] = side.get(el, 0.0) + abs(x.nu) * n
        charge += x.nu * references.charge_of(formula)
    off = [el for el in sorted(set(left) | set(right))
           if not math.isclose(left.get(el, 0.0), right.get(el, 0.0), rel_tol=1e-9, abs_tol=1e-9)]
    if off or abs(charge) > 1e-9:
        what = "; ".join(f"{el} {left.get(el, 0):g} on the left, {right.get(el, 0):g} on the "
                         "right" for el in off)
        if abs(charge) > 1e-9:
            what += ("; " if what else "") + f"charge {charge:+g} from left to right"
        raise InputError(f"'{written(terms)}' is not balanced: {what}",
                         expected="the same atoms of each element, and the same charge, on "
                                  "both sides")


def _any_id(doc: dict, name: str) -> str:
    """An id of species ``name`` (any phase: they share the formula)."""
    try:
        return document.resolve_id({s["id"] for s in doc["species"]}, name)
    except SpeciesNotFound as exc:
        ids = document.chain(doc.get("transitions", []), name)[1]
        if exc.ambiguous and ids:
            return ids[0]
        raise


def evaluate(doc: dict, equation: str, temperatures, budgets=None) -> dict:
    """ΔrH° [J/mol], ΔrS° [J/(mol K)], ΔrG° [J/mol], log10 K and their standard uncertainties
    (u_dH, u_dS, u_dG, u_log10K) of ``equation`` at ``temperatures`` [K]; 'ids' the species id
    used for each term at each temperature, 'extrapolated' where any species is outside its
    data. InputError for an equation that cannot be read or is not balanced, or a
    temperature outside a species' range of use; SpeciesNotFound for a missing species."""
    terms = parse(equation)
    t = np.atleast_1d(np.asarray(temperatures, dtype=float))
    if not np.all(np.isfinite(t) & (t > 0)):
        raise InputError("a temperature is not a positive number", expected="T > 0 K")
    check_balance(doc, terms)
    budgets = budgets or budget.Budgets(doc)
    total = {"h": np.zeros(len(t)), "s": np.zeros(len(t)), "parts": [],
             "extrapolated": np.zeros(len(t), dtype=bool)}
    ids = []
    for x in terms:
        at = document.phases_at(doc, x.name, t)
        for sid in dict.fromkeys(at):
            document.check_range(budgets.by_id[sid], t[np.array([i == sid for i in at])])
        ids.append(at)
        budgets.add(total, x.nu, at, t)
    h, s, extrapolated = total["h"], total["s"], total["extrapolated"]
    u = budget.spread(budget.combine(total["parts"]), t)
    g = h - t * s
    scale = R * t * math.log(10.0)
    return {"equation": written(terms), "terms": terms, "T": t, "dH": h, "u_dH": u["u_H"],
            "dS": s, "u_dS": u["u_S"], "dG": g, "u_dG": u["u_G"], "log10K": 0.0 - g / scale,
            "u_log10K": u["u_G"] / scale, "ids": ids, "extrapolated": extrapolated}
