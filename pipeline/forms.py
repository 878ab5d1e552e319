"""Published polynomial forms: evaluate Cp, H, S and G from coefficients in kelvin.

``nasa7`` — the 7-coefficient form (coefficients a1..a7, T in [K]):

    Cp/R  = a1 + a2 T + a3 T^2 + a4 T^3 + a5 T^4                       [1], Eq. 1
    H/(RT) = a1 + a2 T/2 + a3 T^2/3 + a4 T^3/4 + a5 T^4/5 + a6/T         [1], Eq. 2
    S/R   = a1 ln T + a2 T + a3 T^2/2 + a4 T^3/3 + a5 T^4/4 + a7         [1], Eq. 3

H is on the "assigned enthalpy" scale, H(298.15 K) = ΔfH°(298.15 K); S is at
the standard pressure of 1 bar; G = H − T S.

References
----------
[1] B. J. McBride, S. Gordon and M. A. Reno, "Coefficients for Calculating
    Thermodynamic and Transport Properties of Individual Species", NASA TM-4513 (1993).
"""

import numpy as np

from .constants import GAS_CONSTANT

FORMS = {"nasa7": 7}
#: scale of the internal temperature variable tau = T / T_SCALE used while fitting [K]
T_SCALE = 1000.0


def cp_over_r(a, t):
    """Cp/R [-] of one nasa7 range at temperatures ``t`` [K]."""
    t = np.asarray(t, dtype=float)
    return a[0] + t * (a[1] + t * (a[2] + t * (a[3] + t * a[4])))  # [1], Eq. 1


def dcp_over_r(a, t):
    """d(Cp/R)/dT [1/K] of one nasa7 range."""
    t = np.asarray(t, dtype=float)
    return a[1] + t * (2 * a[2] + t * (3 * a[3] + t * 4 * a[4]))


def h_over_r_integral(a, t):
    """∫ Cp/R dT without the constant [K]: the part of H/R fixed by a1..a5."""
    t = np.asarray(t, dtype=float)
    return t * (a[0] + t * (a[1] / 2 + t * (a[2] / 3 + t * (a[3] / 4 + t * a[4] / 5))))


def s_over_r_integral(a, t):
    """∫ Cp/(R T) dT without the constant [-]: the part of S/R fixed by a1..a5."""
    t = np.asarray(t, dtype=float)
    return a[0] * np.log(t) + t * (a[1] + t * (a[2] / 2 + t * (a[3] / 3 + t * a[4] / 4)))


def h_over_rt(a, t):
    """H/(RT) [-], [1] Eq. 2."""
    t = np.asarray(t, dtype=float)
    return (h_over_r_integral(a, t) + a[5]) / t


def s_over_r(a, t):
    """S/R [-], [1] Eq. 3."""
    return s_over_r_integral(a, t) + a[6]


def kelvin_from_scaled(c):
    """nasa7 Cp coefficients in tau = T/1000 -> a1..a5 in kelvin: a_k = c_k / 1000^(k-1)."""
    return [float(c[k]) / T_SCALE**k for k in range(5)]


def range_index(ranges, t):
    """Index of the range that holds each temperature (the lower one at a shared breakpoint).

    ``ranges`` is a sequence of (t_min, t_max, coefficients); temperatures outside all ranges
    get the nearest end range (callers decide whether to allow that).
    """
    t = np.asarray(t, dtype=float)
    edges = np.array([r[1] for r in ranges[:-1]], dtype=float)
    return np.searchsorted(edges, t, side="left")


def evaluate(ranges, t):
    """Cp [J/(mol K)], H [J/mol], S [J/(mol K)] and G [J/mol] at ``t`` [K] from nasa7 ranges."""
    t = np.atleast_1d(np.asarray(t, dtype=float))
    idx = range_index(ranges, t)
    cp = np.empty_like(t)
    h = np.empty_like(t)
    s = np.empty_like(t)
    for j, r in enumerate(ranges):
        m = idx == j
        if not m.any():
            continue
        a = r[2]
        cp[m] = GAS_CONSTANT * cp_over_r(a, t[m])
        h[m] = GAS_CONSTANT * t[m] * h_over_rt(a, t[m])
        s[m] = GAS_CONSTANT * s_over_r(a, t[m])
    return {"Cp": cp, "H": h, "S": s, "G": h - t * s}
