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
is a plausibility scale, not a bound. Near room temperature a solid's Cp is close to the sum
of atomic contributions (Neumann–Kopp's rule with Kopp's atomic heats [4]: light atoms give
less than 3 R because their vibrations are partly frozen); liquids and hot solids lie above
it, rarely beyond twice. Carried to other temperatures as Einstein oscillators, the atomic
heats rise towards 3R each; ``condensed_band`` turns that into a plausibility band wide
enough for real materials near melting, yet far narrower than a factor 4.184, 1000 or a
molar mass.

References
----------
[1] D. A. McQuarrie, Statistical Mechanics, Harper & Row (1976), ch. 5 and 8.
[2] R. C. Wilhoit, Thermodynamics Research Center Current Data News 3 (2), 1975 (Wilhoit's
    extrapolation; its limiting values Cp(0) and Cp(inf)) — citation from memory.
[3] K. S. Pitzer, Quantum Chemistry, Prentice-Hall (1953), on the anharmonic oscillator's
    thermodynamic functions — from memory.
[4] H. Kopp, Ann. Chem. Pharm. Suppl. 3, 1 and 289 (1864-1865): atomic heat capacities of
    solids; the values below as tabulated in chemical-engineering handbooks (e.g. Perry's
    Chemical Engineers' Handbook) — from memory, common practice.
"""

import functools

import numpy as np

from ..core.constants import GAS_CONSTANT as R
from .statmech import ROTATION, TRANSLATION

TRANSLATION_CP = TRANSLATION * R  # [J/(mol K)], Cp of translation incl. pV term
ROTATION_CP = {g: x * R for g, x in ROTATION.items()}  # [J/(mol K)], rotor fully excited
DULONG_PETIT_PER_ATOM = 3.0 * R  # [J/(mol K)], common practice

#: Kopp's atomic heat capacities of solids near 298 K [J/(mol K)] [4]; every other element
#: KOPP_OTHER (about 3 R)
KOPP_ATOMIC_CP = {"C": 7.5, "H": 9.6, "B": 11.3, "Si": 15.9, "O": 16.7, "F": 20.9, "P": 22.6,
                  "S": 22.6}
KOPP_OTHER = 26.0
#: the band of condensed-phase Cp at and above CONDENSED_BAND_FROM [K]: LOW to HIGH times
#: the Neumann–Kopp sum at that temperature (common practice: real solids and liquids,
#: from diamond to molten oxides and liquid water, stay inside); the tight band, used to
#: tell unit factors apart, is TIGHT_LOW to TIGHT_HIGH times it
CONDENSED_BAND_FROM = 250.0
CONDENSED_LOW, CONDENSED_HIGH = 0.5, 2.5
CONDENSED_TIGHT_LOW, CONDENSED_TIGHT_HIGH = 0.7, 1.6


@functools.lru_cache(maxsize=None)
def kopp_temperature(kopp: float) -> float:
    """The Einstein temperature [K] of an atom whose Cp at 298.15 K is ``kopp`` [J/(mol K)]
    (below 3R: its vibrations are partly frozen there); 0 for 3R and above."""
    from scipy.optimize import brentq

    from .statmech import einstein

    if kopp >= DULONG_PETIT_PER_ATOM:
        return 0.0
    return float(brentq(lambda th: DULONG_PETIT_PER_ATOM * einstein(th / 298.15) - kopp,
                        1e-6, 1e5))


def neumann_kopp(elements, t=298.15):
    """Cp [J/(mol K)] of a solid at T [K] by Neumann–Kopp's rule from ``elements``
    ((symbol, count), ...) [4]: each atom's Kopp value at 298.15 K, carried to other
    temperatures as an Einstein oscillator through it (3R at high temperature), never below
    its Kopp value."""
    from .statmech import einstein

    t = np.asarray(t, dtype=float)
    out = np.zeros_like(t)
    for sym, n in elements:
        kopp = KOPP_ATOMIC_CP.get(sym, KOPP_OTHER)
        theta = kopp_temperature(kopp)
        warm = DULONG_PETIT_PER_ATOM * einstein(theta / t) if theta else 0.0
        out = out + n * np.maximum(kopp, warm)
    return out


def condensed_band(elements, t, tight: bool = False) -> tuple:
    """(low, high) plausible Cp [J/(mol K)] of a condensed phase of ``elements`` at T [K] at
    or above CONDENSED_BAND_FROM (see the module notes)."""
    nk = neumann_kopp(elements, t)
    if tight:
        return CONDENSED_TIGHT_LOW * nk, CONDENSED_TIGHT_HIGH * nk
    return CONDENSED_LOW * nk, CONDENSED_HIGH * nk


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
