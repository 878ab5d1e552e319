"""Ideal-gas heat capacity from the rigid-rotor / harmonic-oscillator model.

Used to compute the demo tables and, in tests, reference tables from published
vibrational wavenumbers and electronic levels.

    Cp/R = 5/2 (translation, with the pV term) + rotation (0, 1 or 3/2 for
           monatomic, linear, nonlinear) + Σ_i g_i E(θ_i/T) + electronic

    E(x) = x² eˣ / (eˣ − 1)²   (Einstein function),  θ_i = c2 ν̃_i

    electronic: Cp,el/R = <x²> − <x>², x_j = c2 ε_j / T, weights g_j e^(−x_j)

References
----------
[1] D. A. McQuarrie, Statistical Mechanics, Harper & Row (1976), chapters 5-8
    (translational, rotational, vibrational and electronic contributions).
[2] M. W. Chase Jr., NIST-JANAF Thermochemical Tables, 4th ed., J. Phys. Chem.
    Ref. Data Monograph 9 (1998), introduction (the same partition-function method).
"""

import math

import numpy as np

from ..core.constants import (
    ATMOSPHERE,
    ENTROPY_ATM_TO_BAR,
    GAS_CONSTANT,
    SECOND_RADIATION_CM_K,
    STANDARD_PRESSURE,
)

#: Cp/R of translation, the pV term included [1]
TRANSLATION = 2.5
#: Cp/R of a fully excited rigid rotor by geometry [1]
ROTATION = {"monatomic": 0.0, "linear": 1.0, "nonlinear": 1.5}


def entropy_shift_to_standard(pressure: float) -> float:
    """S°(1 bar) − S(p) [J/(mol K)] of an ideal gas whose entropy is tabulated at ``pressure``
    [Pa]: R ln(p / 1 bar) [1]; at 1 atm it is ENTROPY_ATM_TO_BAR (+0.1094 J/(mol K))."""
    if pressure == ATMOSPHERE:
        return ENTROPY_ATM_TO_BAR
    return GAS_CONSTANT * math.log(pressure / STANDARD_PRESSURE)


def einstein(x):
    """E(x) = x² eˣ/(eˣ−1)² [-], evaluated stably for large x."""
    x = np.asarray(x, dtype=float)
    em = np.exp(-x)
    return x * x * em / (1.0 - em) ** 2


def vibrational_cp_over_r(t, wavenumbers, degeneracies=None):
    """Σ g_i E(c2 ν̃_i / T) [-]; ``wavenumbers`` in [1/cm], ``t`` in [K]."""
    t = np.atleast_1d(np.asarray(t, dtype=float))
    nu = np.asarray(wavenumbers, dtype=float)
    g = np.ones_like(nu) if degeneracies is None else np.asarray(degeneracies, dtype=float)
    x = SECOND_RADIATION_CM_K * nu[None, :] / t[:, None]
    return (g[None, :] * einstein(x)).sum(axis=1)


def electronic_cp_over_r(t, levels):
    """Cp,el/R [-] from electronic ``levels`` = [(degeneracy, energy [1/cm]), ...]."""
    t = np.atleast_1d(np.asarray(t, dtype=float))
    if not levels:
        return np.zeros_like(t)
    g = np.array([lv[0] for lv in levels], dtype=float)
    e = np.array([lv[1] for lv in levels], dtype=float)
    x = SECOND_RADIATION_CM_K * e[None, :] / t[:, None]
    w = g[None, :] * np.exp(-(x - x.min(axis=1, keepdims=True)))
    z = w.sum(axis=1)
    m1 = (w * x).sum(axis=1) / z
    m2 = (w * x * x).sum(axis=1) / z
    return m2 - m1 * m1


def rrho_cp_over_r(t, geometry, wavenumbers=(), degeneracies=None, levels=()):
    """Ideal-gas Cp/R [-] in the rigid-rotor / harmonic-oscillator model at ``t`` [K]."""
    t = np.atleast_1d(np.asarray(t, dtype=float))
    cp = TRANSLATION + ROTATION[geometry] + np.zeros_like(t)
    if len(wavenumbers):
        cp = cp + vibrational_cp_over_r(t, wavenumbers, degeneracies)
    return cp + electronic_cp_over_r(t, list(levels))
