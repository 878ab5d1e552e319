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
    return np.asarray(breakpoints, dtype=float).searchsorted(np.asarray(t, dtype=float),
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
    return evaluate_many([(ranges, t)], form)[0]


def evaluate_many(items, form, columns=("Cp", "H", "S", "G")) -> list:
    """``evaluate_ranges(ranges, t, form)`` of every (ranges, t) of ``items`` (of one form),
    in one pass over all their temperatures: each temperature takes the coefficients of its
    own range, and every number is the one ``evaluate_ranges`` gives alone, to the last bit
    (the same operations on each element, in the same order). ``columns``: those wanted of
    Cp, H, S and G (H and S are made for G)."""
    f = FORMS[form] if isinstance(form, str) else form
    ts, idxs, packed = [], [], []
    for ranges, t in items:
        ranges = as_ranges(ranges)
        t = np.atleast_1d(np.asarray(t, dtype=float))
        ts.append(t)
        idxs.append(range_of(t, [r[1] for r in ranges[:-1]]) + len(packed)
                    if len(ranges) > 1 else np.full(len(t), len(packed)))
        packed += [f.unpack(r[2]) for r in ranges]
    one = len(ts) == 1
    t = ts[0] if one else np.concatenate(ts) if ts else np.zeros(0)
    idx = idxs[0] if one else np.concatenate(idxs) if ts else np.zeros(0, dtype=int)
    m = len(f.powers)
    table = np.array([list(a[:m]) + [h0, s0] for a, h0, s0 in packed], dtype=float)
    at = table.T[:, idx] if len(packed) > 1 else np.broadcast_to(table.T, (m + 2, len(t)))
    x = t / f.x_scale
    want, out = set(columns), {}
    if "Cp" in want:
        out["Cp"] = f.multiplier * _series(f, at, x, _power)
    if want & {"H", "G"}:
        out["H"] = f.multiplier * f.x_scale * _series(f, at, x, i1) + at[m]
    if want & {"S", "G"}:
        out["S"] = f.multiplier * _series(f, at, x, i0) + at[m + 1]
    if "G" in want:
        out["G"] = out["H"] - t * out["S"]
    if one:
        return [{k: out[k] for k in columns}]
    ends = np.cumsum([len(x) for x in ts])[:-1]
    split = {k: np.split(out[k], ends) for k in columns}
    return [{k: split[k][i] for k in columns} for i in range(len(ts))]


def evaluate_forms(items, columns=("Cp", "H", "S", "G")) -> list:
    """``evaluate_many`` of (form, ranges, t) ``items`` of any forms: those of one form in
    one pass, the results in the order of ``items``."""
    by_form, out = {}, [None] * len(items)
    for k, (form, _, _) in enumerate(items):
        by_form.setdefault(form, []).append(k)
    for form, ks in by_form.items():
        for k, ev in zip(ks, evaluate_many([items[k][1:] for k in ks], form, columns)):
            out[k] = ev
    return out


def _power(p, x):
    return x ** p


def _series(f, at, x, term):
    """Σ_p a_p term(p, x), element by element with its coefficients a column of ``at`` (one
    row per power), summed in the order of the form's powers (as the Form's own methods
    sum them)."""
    return sum(at[k] * term(p, x) for k, p in enumerate(f.powers))


def cp_of_ranges(ranges, t, form):
    """Cp [J/(mol K)] at ``t`` [K] of ``ranges`` alone: ``evaluate_ranges(...)["Cp"]``, the
    same numbers, without the integrals."""
    return evaluate_many([(ranges, t)], form, ("Cp",))[0]["Cp"]


def h_of_ranges(ranges, t, form):
    """H [J/mol] at ``t`` [K] of ``ranges`` alone: ``evaluate_ranges(...)["H"]``, the same
    numbers, without Cp and S."""
    return evaluate_many([(ranges, t)], form, ("H",))[0]["H"]


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
