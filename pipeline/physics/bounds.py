"""Physical bounds on heat capacities used by validation (and later by extrapolation).

Ideal gas, equipartition (classical statistical mechanics, e.g. McQuarrie,
Statistical Mechanics, 1976, ch. 8):

* translation with the pV term gives Cp ≥ 5/2 R for every ideal gas [1];
* a rigid rotor adds R (linear) or 3/2 R (nonlinear), so Cp(T → 0 of the
  vibrations) = 7/2 R or 4 R — Wilhoit's Cp(0) [2];
* with all 3N − 5 (linear) or 3N − 6 (nonlinear) vibrations classical, the
  rigid-rotor/harmonic-oscillator limit is Cp(∞) = (3N − 3/2) R (linear) or
  (3N − 2) R (nonlinear) [2]. Anharmonicity and electronic states can exceed it
  somewhat, so exceeding it is a warning, not an error.
* a monatomic gas stays at 5/2 R unless electronic states are excited (which
  only raise Cp).

Condensed phases: the Dulong–Petit value of about 3 R per atom (common practice)
is a plausibility scale, not a bound.

References
----------
[1] D. A. McQuarrie, Statistical Mechanics, Harper & Row (1976), ch. 5 and 8.
[2] R. C. Wilhoit, Thermodynamics Research Center Current Data News 3 (2), 1975 (Wilhoit's
    extrapolation; its limiting values Cp(0) and Cp(inf)) — citation from memory.
"""

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


def vibrational_modes(geometry: str, atoms: int) -> int:
    """3N − 5 (linear) or 3N − 6 (nonlinear) vibrations; none for an atom."""
    if geometry == "monatomic":
        return 0
    return 3 * atoms - (5 if geometry == "linear" else 6)
