"""Published forms of Cp(T), H(T), S(T): evaluation and exact conversion from fitted
(scaled) coefficients. One registry, FORMS, serves dispatch, CLI choices and messages.

Every form here is a power series in a variable x = T/s (s = 1 K for the NASA forms,
s = 1000 K for Shomate) times a multiplier m (R for the NASA forms, 1 J/(mol K) for
Shomate):

    Cp = m Σ_p a_p x^p,   H = m s Σ_p a_p I1(p, x) + h0,   S = m Σ_p a_p I0(p, x) + s0

with I1(p, x) = x^(p+1)/(p+1) (ln x for p = −1) and I0(p, x) = x^p/p (ln x for p = 0).
H is on the assigned-enthalpy scale, H(298.15 K) = ΔfH°(298.15 K); S at 1 bar; G = H − TS.

* ``nasa7`` [1] Eqs. 1-3: coefficients a1..a5 (powers 0..4 of T), a6 = h0/R, a7 = s0/R.
* ``nasa9`` [2] Eqs. 2-4: a1..a7 (powers −2..4 of T), b1 = h0/R, b2 = s0/R.
* ``shomate`` [3], t = T/1000: A, B, C, D, E (powers 0, 1, 2, 3, −2 of t, J/(mol K)),
  F = h0 [kJ/mol], G = s0 [J/(mol K)], H = ΔfH°(298.15) [kJ/mol], so that
  H(T) − H(298.15) = A t + B t²/2 + C t³/3 + D t⁴/4 − E/t + F − H [kJ/mol].

Fits are made in the scaled variable τ = T/1000 K for every form (Cp/R = Σ c_p τ^p);
``published`` converts c to the form's own coefficients exactly (a power of 1000 or R per
coefficient), ``scaled`` converts back.

References
----------
[1] B. J. McBride, S. Gordon, M. A. Reno, NASA TM-4513 (1993).
[2] B. J. McBride, M. J. Zehe, S. Gordon, NASA/TP-2002-211556 (2002).
[3] C. H. Shomate, J. Phys. Chem. 58, 368 (1954).
"""

from dataclasses import dataclass

import numpy as np

from ..core.constants import GAS_CONSTANT as R

T_SCALE = 1000.0  # [K], the scaled fitting variable tau = T / T_SCALE


def i1(p, x):
    """∫ x^p dx without constant."""
    return np.log(x) if p == -1 else x ** (p + 1) / (p + 1)


def i0(p, x):
    """∫ x^(p-1) dx without constant."""
    return np.log(x) if p == 0 else x ** p / p


@dataclass(frozen=True)
class Form:
    """A published coefficient form: the powers of its variable, the variable's scale, the
    multiplier of the series and how the integration constants are packed."""

    name: str
    powers: tuple          # powers of the variable in the Cp series, in coefficient order
    x_scale: float         # [K]
    multiplier: float      # [J/(mol K)]
    n_coefficients: int
    reference: str

    # --- conversion -------------------------------------------------------------------
    def cp_coefficients(self, c):
        """Scaled Cp/R coefficients c (τ powers, same order) -> published Cp coefficients."""
        return [float(ck) * (T_SCALE / self.x_scale) ** (-p) * R / self.multiplier
                for ck, p in zip(c, self.powers)]

    def scaled(self, a):
        """Published Cp coefficients -> scaled Cp/R coefficients (inverse of cp_coefficients)."""
        return [float(ak) * (T_SCALE / self.x_scale) ** p * self.multiplier / R
                for ak, p in zip(a, self.powers)]

    def pack(self, a, h0, s0, h298):
        """Published coefficient list from Cp coefficients and constants h0 [J/mol], s0."""
        m = self.multiplier
        if self.name == "shomate":
            return list(a) + [h0 / 1000.0, s0, h298 / 1000.0]
        return list(a) + [h0 / m, s0 / m]

    def unpack(self, coeffs):
        """(Cp coefficients, h0 [J/mol], s0 [J/(mol K)]) from a published coefficient list."""
        n = len(self.powers)
        a = list(coeffs[:n])
        if self.name == "shomate":
            return a, 1000.0 * coeffs[n], coeffs[n + 1]
        return a, self.multiplier * coeffs[n], self.multiplier * coeffs[n + 1]

    # --- evaluation (published Cp coefficients) ---------------------------------------
    def cp(self, a, t):
        """Cp [J/(mol K)] of coefficients ``a`` at T [K]."""
        x = np.asarray(t, dtype=float) / self.x_scale
        return self.multiplier * sum(ak * x ** p for ak, p in zip(a, self.powers))

    def dcp(self, a, t):
        """dCp/dT [J/(mol K^2)]."""
        x = np.asarray(t, dtype=float) / self.x_scale
        return self.multiplier / self.x_scale * sum(ak * p * x ** (p - 1)
                                                    for ak, p in zip(a, self.powers))

    def d2cp(self, a, t):
        """d²Cp/dT² [J/(mol K³)] of coefficients ``a`` at T [K]."""
        x = np.asarray(t, dtype=float) / self.x_scale
        return self.multiplier / self.x_scale ** 2 * sum(ak * p * (p - 1) * x ** (p - 2)
                                                         for ak, p in zip(a, self.powers))

    def h_integral(self, a, t):
        """H without its constant [J/mol]."""
        x = np.asarray(t, dtype=float) / self.x_scale
        return self.multiplier * self.x_scale * sum(ak * i1(p, x) for ak, p in zip(a, self.powers))

    def s_integral(self, a, t):
        """S without its constant [J/(mol K)]."""
        x = np.asarray(t, dtype=float) / self.x_scale
        return self.multiplier * sum(ak * i0(p, x) for ak, p in zip(a, self.powers))


FORMS = {
    "nasa7": Form("nasa7", (0, 1, 2, 3, 4), 1.0, R, 7, "McBride, Gordon & Reno, NASA TM-4513 (1993)"),
    "nasa9": Form("nasa9", (-2, -1, 0, 1, 2, 3, 4), 1.0, R, 9,
                  "McBride, Zehe & Gordon, NASA/TP-2002-211556 (2002)"),
    "shomate": Form("shomate", (0, 1, 2, 3, -2), T_SCALE, 1.0, 8,
                    "Shomate, J. Phys. Chem. 58, 368 (1954)"),
}


def get(name: str) -> Form:
    """The Form named ``name``; InputError naming the known forms otherwise."""
    from ..core.errors import InputError

    if name not in FORMS:
        raise InputError(f"form '{name}' is not known", expected="one of " + ", ".join(FORMS))
    return FORMS[name]


def range_of(t, breakpoints):
    """Range index of each temperature [K] (a point at a breakpoint belongs to the lower
    range; temperatures outside all ranges get the nearest end range)."""
    return np.searchsorted(np.asarray(breakpoints, dtype=float), np.asarray(t, dtype=float),
                           side="left")


def as_ranges(ranges) -> list:
    """(t_min, t_max, coefficients) of each range, given as such tuples, as library entry
    ranges (dicts) or as FitRange records."""
    out = []
    for r in ranges:
        if isinstance(r, dict):
            out.append((r["t_min"], r["t_max"], r["coefficients"]))
        elif hasattr(r, "coefficients"):
            out.append((r.t_min, r.t_max, r.coefficients))
        else:
            out.append(tuple(r))
    return out


def range_index(ranges, t):
    """``range_of`` for a sequence of ranges (see ``as_ranges``)."""
    return range_of(t, [r[1] for r in as_ranges(ranges)[:-1]])


def evaluate_ranges(ranges, t, form):
    """Cp [J/(mol K)], H [J/mol], S [J/(mol K)] and G [J/mol] at ``t`` [K] of ``ranges``:
    (t_min, t_max, coefficients) tuples, library entry ranges or FitRange records."""
    f, ranges, t, idx = _placed(ranges, t, form)
    cp, h, s = (np.empty_like(t) for _ in range(3))
    for j, m in _by_range(idx):
        a, h0, s0 = f.unpack(ranges[j][2])
        tm = t[m]
        cp[m] = f.cp(a, tm)
        h[m] = f.h_integral(a, tm) + h0
        s[m] = f.s_integral(a, tm) + s0
    return {"Cp": cp, "H": h, "S": s, "G": h - t * s}


def cp_of_ranges(ranges, t, form):
    """Cp [J/(mol K)] at ``t`` [K] of ``ranges`` alone: ``evaluate_ranges(...)["Cp"]``, the
    same numbers, without the integrals."""
    f, ranges, t, idx = _placed(ranges, t, form)
    cp = np.empty_like(t)
    for j, m in _by_range(idx):
        cp[m] = f.cp(f.unpack(ranges[j][2])[0], t[m])
    return cp


def h_of_ranges(ranges, t, form):
    """H [J/mol] at ``t`` [K] of ``ranges`` alone: ``evaluate_ranges(...)["H"]``, the same
    numbers, without Cp and S."""
    f, ranges, t, idx = _placed(ranges, t, form)
    h = np.empty_like(t)
    for j, m in _by_range(idx):
        a, h0, _ = f.unpack(ranges[j][2])
        h[m] = f.h_integral(a, t[m]) + h0
    return h


def _by_range(idx):
    """(range index, selector of its temperatures) of each range that ``idx`` (the range of
    each temperature) holds, ascending; the selector is every temperature (a slice, no
    mask to build) when they all lie in one range."""
    if not len(idx):
        return []
    lo, hi = int(idx.min()), int(idx.max())
    if lo == hi:
        return [(lo, slice(None))]
    return [(j, m) for j in range(lo, hi + 1) for m in [idx == j] if m.any()]


def _placed(ranges, t, form) -> tuple:
    """(Form, ranges as tuples, t as a 1-d float array, range index of each t)."""
    f = FORMS[form] if isinstance(form, str) else form
    ranges = as_ranges(ranges)
    t = np.atleast_1d(np.asarray(t, dtype=float))
    return f, ranges, t, range_index(ranges, t)


# --- nasa7 helpers kept for callers that work in its published form ----------------------
_N7 = FORMS["nasa7"]


def cp_over_r(a, t):
    """Cp/R [-] of one nasa7 range."""
    return _N7.cp(a[:5], t) / R


def dcp_over_r(a, t):
    """d(Cp/R)/dT [1/K] of one nasa7 range."""
    return _N7.dcp(a[:5], t) / R


def h_over_rt(a, t):
    """H/(RT) [-] of one nasa7 range, [1] Eq. 2."""
    t = np.asarray(t, dtype=float)
    return (_N7.h_integral(a[:5], t) / R + a[5]) / t


def s_over_r(a, t):
    """S/R [-] of one nasa7 range, [1] Eq. 3."""
    return _N7.s_integral(a[:5], t) / R + a[6]


def kelvin_from_scaled(c):
    """nasa7 Cp coefficients in tau = T/1000 -> a1..a5 in kelvin: a_k = c_k / 1000^(k-1)."""
    return _N7.cp_coefficients(c)
