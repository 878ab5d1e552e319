"""Molar masses and atom counts from chemical formulas (molmass parses them).

Molar masses [g/mol] add up the IUPAC abridged standard atomic weights of
atomic_weights.py; only an element without a standard atomic weight (no stable isotope)
or a named isotope ('2H', written D) takes the mass tabulated by the molmass package
(C. Gohlke), and ``Composition.nonstandard`` names it.
"""

from dataclasses import dataclass
from functools import lru_cache

from .atomic_weights import STANDARD_ATOMIC_WEIGHTS
from .errors import InputError


@dataclass(frozen=True)
class Composition:
    """Elements, molar mass [g/mol] and atom count of a formula."""

    formula: str          # as written in source.json
    hill: str             # Hill-order formula from molmass
    molar_mass: float     # [g/mol]
    atoms: int            # number of atoms in one molecule
    elements: tuple       # ((symbol, count), ...) sorted by symbol
    nonstandard: tuple = ()  # isotopes and elements without a standard atomic weight


@lru_cache(maxsize=4096)
def composition(formula: str) -> Composition:
    """Parse ``formula`` into its composition; raise InputError if it cannot be read."""

    import molmass

    if not isinstance(formula, str) or not formula.strip():
        raise InputError("empty formula", expected="a formula such as CO2")
    try:
        f = molmass.Formula(formula)
        parts = f.composition()
        counts = {sym: int(item.count) for sym, item in parts.items()}
        hill = f.formula
        # an isotope ('2H') has its own mass, and an element without a standard weight molmass's
        other = tuple(sorted(sym for sym in counts if sym not in STANDARD_ATOMIC_WEIGHTS))
        mass = sum(n * STANDARD_ATOMIC_WEIGHTS[sym] if sym in STANDARD_ATOMIC_WEIGHTS
                   else float(parts[sym].mass) for sym, n in counts.items())
    except Exception as exc:
        reason = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise InputError(f"formula '{formula}' cannot be read ({reason})",
                         expected="a formula such as CO2, CH4, N2O") from None
    atoms = sum(n for sym, n in counts.items() if sym != "e-")   # electrons of an ion left out
    if atoms < 1 or mass <= 0:
        raise InputError(f"formula '{formula}' has no atoms", expected="a formula such as CO2")
    return Composition(formula=formula, hill=hill, molar_mass=mass, atoms=atoms,
                       elements=tuple(sorted(counts.items())), nonstandard=other)
