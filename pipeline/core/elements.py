"""Reference states of the elements: which species a formation property counts from.

The usual convention of thermochemical tables (IUPAC Green Book, 3rd ed. (2007), section
2.11.1; the introduction of the NIST-JANAF Thermochemical Tables, 4th ed., M. W. Chase,
J. Phys. Chem. Ref. Data Monograph 9 (1998)): an element's reference state is its form
stable at the standard pressure at each temperature, with its transitions (so the reference
of titanium is alpha-Ti up to 1155 K, then beta-Ti, then the liquid), except that hydrogen,
nitrogen, oxygen, fluorine and chlorine are the ideal diatomic gases at every temperature,
and the noble gases the ideal monatomic gases. Formation properties of a species are its
properties minus those of the elements it is made of, each in its reference state.

A default names the reference species by its formula: the diatomic gases below, and the
element's own symbol for every other element (C, S, Ti, Fe, Ar ...), whose phases the build
links by transitions. Sources (source.json "reference_states") and the build settings may
name another species or one phase of it (for example "C(cr)").
"""

import re

#: elements whose reference state is a diatomic ideal gas at every temperature (the
#: convention above); bromine and iodine are not among them: their references are the
#: liquid and the crystal up to their boiling points at 1 bar, then the diatomic gas
DIATOMIC_GAS = {"H": "H2", "N": "N2", "O": "O2", "F": "F2", "Cl": "Cl2"}

#: heavier halogens: the diatomic species, in whatever phases the build links
DIATOMIC = {"Br": "Br2", "I": "I2"}

#: an element symbol as a reference-state key
SYMBOL = re.compile(r"^[A-Z][a-z]?$")


def default_reference(element: str) -> str:
    """The species name that is ``element``'s reference state by default: 'O2' for O, 'Br2'
    for Br, the symbol itself ('C', 'Ti', 'Ar') for every other element."""
    return DIATOMIC_GAS.get(element) or DIATOMIC.get(element) or element
