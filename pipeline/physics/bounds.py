"""Physical bounds on heat capacities used by validation (and later by extrapolation).

Ideal gas, equipartition (classical statistical mechanics, e.g. McQuarrie,
Statistical Mechanics, 1976, ch. 8):

* translation with the pV term gives Cp ≥ 5/2 R for every ideal gas [1];
* a rigid rotor adds R (linear) or 3/2 R (nonlinear), so Cp(T → 0 of the
  vibrations) = 7/2 R or 4 R — Wilhoit's Cp(0) [2];
* with all 3N − 5 (linear) or 3N − 6 (nonlinear) vibrations classical, the
  rigid-rotor/harmonic-oscillator limit is Cp(∞) = (3N − 3/2) R (linear) or
  (3N − 2) R (nonlinear) [2]. Anharmonicity and electronic states exceed it at high
  temperature (``cp_ceiling`` allows for both); only beyond that is a value suspect, and
  then a warning, not an error.
* a monatomic gas stays at 5/2 R unless electronic states are excited (which
  only raise Cp).

Condensed phases: the Dulong–Petit value of about 3 R per atom (common practice)
is a plausibility scale, not a bound.

References
----------
[1] D. A. McQuarrie, Statistical Mechanics, Harper & Row (1976), ch. 5 and 8.
[2] R. C. Wilhoit, Thermodynamics Research Center Current Data News 3 (2), 1975 (Wilhoit's
    extrapolation; its limiting values Cp(0) and Cp(inf)) — citation from memory.
[3] K. S. Pitzer, Quantum Chemistry, Prentice-Hall (1953), on the anharmonic oscillator's
    thermodynamic functions — from memory.
"""

import numpy as np

from ..core.constants import GAS_CONSTANT as R
from .statmech import ROTATION, TRANSLATION

TRANSLATION_CP = TRANSLATION * R  # [J/(mol K)], Cp of translation incl. pV term
ROTATION_CP = {g: x * R for g, x in ROTATION.items()}  # [J/(mol K)], rotor fully excited
DULONG_PETIT_PER_ATOM = 3.0 * R  # [J/(mol K)], common practice


def cp_zero(geometry: str) -> float:
    """Cp at low temperature with rotation excited, vibrations frozen [J/(mol K)] ([2], Cp(0))."""
    return TRANSLATION_CP + ROTATION_CP[geometry]


def cp_infinity(geometry: str, atoms: int) -> float:
    """Classical rigid-rotor/harmonic-oscillator limit Cp(∞) [J/(mol K)] ([2])."""
    if geometry == "monatomic":
        return TRANSLATION_CP
    if geometry == "linear":
        return (3 * atoms - 1.5) * R
    return (3 * atoms - 2) * R


#: a low chemical bond dissociation energy D/k [K] (about 1.7 eV, the low end of chemical
#: bonds; common practice): a Morse oscillator's heat capacity rises above R by about
#: R kT/D in the classical limit [3]
LOW_DISSOCIATION_TEMPERATURE = 20000.0
#: the largest heat capacity of one excited electronic level [R units]: the peak of the
#: two-level (Schottky) function r x² e^-x / (1 + r e^-x)² for an excited level as
#: degenerate as the ground level (r = 1, peak 0.439 at x = 2.40) [1]; O2's a¹Δg level,
#: two-thirds as degenerate as its ground level, adds less
ELECTRONIC_PEAK = 0.44


def cp_ceiling(geometry: str, atoms: int, t):
    """Cp [J/(mol K)] at ``t`` [K] above which a polyatomic ideal gas is not explained by
    physics: the classical limit Cp(∞), plus a first-order anharmonic rise R T/D for each
    vibration (D = LOW_DISSOCIATION_TEMPERATURE), plus one excited electronic level at its
    peak (ELECTRONIC_PEAK R). Real O2 at 6000 K, for example, stays below it."""
    t = np.asarray(t, dtype=float)
    modes = vibrational_modes(geometry, atoms)
    return cp_infinity(geometry, atoms) + R * (modes * t / LOW_DISSOCIATION_TEMPERATURE
                                               + ELECTRONIC_PEAK)


def vibrational_modes(geometry: str, atoms: int) -> int:
    """3N − 5 (linear) or 3N − 6 (nonlinear) vibrations; none for an atom."""
    if geometry == "monatomic":
        return 0
    return 3 * atoms - (5 if geometry == "linear" else 6)
