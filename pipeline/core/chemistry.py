"""Molar masses and atom counts from chemical formulas (wraps molmass).

Molar masses use the IUPAC standard atomic weights as tabulated by the molmass
package (C. Gohlke), in [g/mol].
"""

from dataclasses import dataclass
from functools import lru_cache

from .errors import InputError


@dataclass(frozen=True)
class Composition:
    """Elements, molar mass [g/mol] and atom count of a formula."""

    formula: str          # as written in source.json
    hill: str             # Hill-order formula from molmass
    molar_mass: float     # [g/mol]
    atoms: int            # number of atoms in one molecule
    elements: tuple       # ((symbol, count), ...) sorted by symbol


@lru_cache(maxsize=4096)
def composition(formula: str) -> Composition:
    """Parse ``formula`` into its composition; raise InputError if it cannot be read."""

    import molmass

    if not isinstance(formula, str) or not formula.strip():
        raise InputError("empty formula", expected="a formula such as CO2")
    try:
        f = molmass.Formula(formula)
        counts = {sym: int(item.count) for sym, item in f.composition().items()}
        mass = float(f.mass)
        hill = f.formula
    except Exception as exc:
        reason = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise InputError(f"formula '{formula}' cannot be read ({reason})",
                         expected="a formula such as CO2, CH4, N2O") from None
    atoms = sum(counts.values())
    if atoms < 1 or mass <= 0:
        raise InputError(f"formula '{formula}' has no atoms", expected="a formula such as CO2")
    return Composition(formula=formula, hill=hill, molar_mass=mass, atoms=atoms,
                       elements=tuple(sorted(counts.items())))
