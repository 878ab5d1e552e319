"""Translation and rotation of an ideal gas: when rotation is fully excited, and the
entropy that translation and rotation alone already give.

Both bound what a correctly labelled ideal-gas table can hold, whatever its vibrations and
electronic states (which only add heat capacity and entropy):

* Cp ≥ 5/2 R + R (linear) or 5/2 R + 3/2 R (nonlinear) wherever rotation is fully excited
  (``excited_from``: the high-temperature limit of the rotational partition function,
  McQuarrie [1] ch. 6);
* S°(T) ≥ S_trans(T) + S_rot,min(T): translation by the Sackur–Tetrode equation [1]
  (exact for the molar mass), rotation in its high-temperature form [1] with the largest
  rotational temperature and symmetry number the molecule can have.

Rotational temperatures θ = h c B / k are not known from a formula. ``rotational_temperature``
gives an upper bound: the species' own value where it is a light rotor listed in LIGHT_ROTORS,
else a bound for its kind (molecules without hydrogen rotate slowly: every one we know has
θ below 3 K; any other molecule with hydrogen stays below water's 40.1 K).

References
----------
[1] D. A. McQuarrie, Statistical Mechanics, Harper & Row (1976), ch. 5 (Sackur–Tetrode),
    ch. 6 and 8 (rotational partition functions, symmetry numbers).
[2] K. P. Huber & G. Herzberg, Constants of Diatomic Molecules, Van Nostrand (1979);
    G. Herzberg, Electronic Spectra of Polyatomic Molecules (1966): rotational constants
    of the light rotors below — values from memory, rounded up.
"""

import math

import numpy as np

from ..core.constants import AVOGADRO, BOLTZMANN, PLANCK, STANDARD_PRESSURE
from ..core.constants import GAS_CONSTANT as R

#: rotation counts as fully excited from this many (largest) rotational temperatures up: a
#: rigid rotor's heat capacity reaches its classical value from above, within 1 % at twice
#: θ_rot ([1] ch. 6, the high-temperature expansion 1 + (θ/T)²/45 + ...); H2, HD and D2,
#: whose ortho/para ratio stays frozen, get there from below and need five times θ_rot
#: (normal hydrogen is 0.5 % short at 5 θ_rot, common practice)
ROTATION_EXCITED = 2.5
ORTHO_PARA = {"H2", "HD", "D2"}
ORTHO_PARA_EXCITED = 5.0

#: θ_rot [K] of light rotors ([2], from memory, rounded up): linear molecules their one
#: value, nonlinear ones the geometric mean of their three (which sets the entropy) and, for
#: the heat-capacity floor, the largest
LIGHT_ROTORS = {
    # formula: (geometric mean θ, largest θ)
    "H2": (88.0, 88.0), "D2": (44.0, 44.0), "HD": (66.0, 66.0), "HF": (31.0, 31.0),
    "OH": (28.0, 28.0), "HCl": (16.0, 16.0), "HBr": (13.0, 13.0), "HI": (10.0, 10.0),
    "H2O": (23.0, 41.0), "H2S": (11.0, 15.0), "NH3": (12.0, 14.0), "CH4": (7.6, 7.6),
    "PH3": (6.5, 6.5), "SiH4": (4.2, 4.2), "C2H2": (1.8, 1.8), "HCN": (2.2, 2.2),
}
#: bounds (geometric mean, largest) [K] for molecules without hydrogen, and for molecules
#: with hydrogen other than H2, HD and D2: water's A constant, 27.9 cm⁻¹ (40.1 K), is the
#: largest of any such molecule we know, HF's 30.2 K the largest single constant of a linear
#: one ([2], from memory)
NO_HYDROGEN, HYDRIDE = (3.0, 3.0), (31.0, 41.0)
#: the largest symmetry number of a linear molecule, and of a nonlinear one we bound by
#: (σ = 12 for CH4 and C6H6; 24 for SF6, whose θ is far below the bound)
SIGMA_LINEAR, SIGMA_NONLINEAR = 2, 12


def rotational_temperature(formula: str, elements) -> tuple[float, float]:
    """(geometric-mean θ, largest θ) [K], upper bounds, for a molecule of ``elements``."""
    if formula in LIGHT_ROTORS:
        return LIGHT_ROTORS[formula]
    return HYDRIDE if {"H", "D", "T"} & set(elements) else NO_HYDROGEN


def excited_from(formula: str, elements) -> float:
    """The temperature [K] above which rotation is fully excited (a conservative bound)."""
    _, largest = rotational_temperature(formula, elements)
    return largest * (ORTHO_PARA_EXCITED if formula in ORTHO_PARA else ROTATION_EXCITED)


def translational_entropy(molar_mass: float, t, pressure: float = STANDARD_PRESSURE):
    """Sackur–Tetrode entropy [J/(mol K)] of an ideal gas of ``molar_mass`` [g/mol] at ``t``
    [K] and ``pressure`` [Pa] ([1] ch. 5)."""
    t = np.asarray(t, dtype=float)
    m = molar_mass * 1e-3 / AVOGADRO
    lam = (2.0 * math.pi * m * BOLTZMANN * t / PLANCK ** 2) ** 1.5
    return R * (np.log(lam * BOLTZMANN * t / pressure) + 2.5)


def rotational_entropy_floor(geometry: str, theta: float, t):
    """The least rotational entropy [J/(mol K)] at ``t`` [K] of a rigid rotor whose
    (geometric-mean) rotational temperature is at most ``theta`` ([1] ch. 6, high-T form)."""
    t = np.asarray(t, dtype=float)
    if geometry == "monatomic":
        return np.zeros_like(t)
    if geometry == "linear":
        return R * (np.log(t / (SIGMA_LINEAR * theta)) + 1.0)
    return R * (np.log(math.sqrt(math.pi) / SIGMA_NONLINEAR * (t / theta) ** 1.5) + 1.5)
