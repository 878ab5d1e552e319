"""Published coefficient sets and planted defects for the tests of the coefficient-set audit
(tests/test_coefsets.py), and a writer of coefficient-set sources.

The sets are recalled from memory, as the project's rules ask to say:

* ``NASA7``: 7-coefficient sets as distributed with the GRI-Mech 3.0 thermodynamic data file
  (G. P. Smith et al., 1999), in the form of McBride, Gordon & Reno, NASA TM-4513 (1993).
* ``NASA9``: 9-coefficient sets of McBride, Zehe & Gordon, NASA/TP-2002-211556 (2002).

Each entry: species -> (formula, geometry, ((T_min, T_max, coefficients), ...)).
"""

import json
from pathlib import Path

import numpy as np

NASA7 = {
    "N2": ("N2", "linear", (
        (300.0, 1000.0, (3.298677, 1.4082404e-3, -3.963222e-6, 5.641515e-9, -2.444854e-12,
                         -1020.8999, 3.950372)),
        (1000.0, 5000.0, (2.92664, 1.4879768e-3, -5.68476e-7, 1.0097038e-10, -6.753351e-15,
                          -922.7977, 5.980528)))),
    "O2": ("O2", "linear", (
        (200.0, 1000.0, (3.78245636, -2.99673416e-3, 9.84730201e-6, -9.68129509e-9,
                         3.24372837e-12, -1063.94356, 3.65767573)),
        (1000.0, 3500.0, (3.28253784, 1.48308754e-3, -7.57966669e-7, 2.09470555e-10,
                          -2.16717794e-14, -1088.45772, 5.45323129)))),
    "CO": ("CO", "linear", (
        (200.0, 1000.0, (3.57953347, -6.10353680e-4, 1.01681433e-6, 9.07005884e-10,
                         -9.04424499e-13, -14344.0860, 3.50840928)),
        (1000.0, 3500.0, (2.71518561, 2.06252743e-3, -9.98825771e-7, 2.30053008e-10,
                          -2.03647716e-14, -14151.8724, 7.81868772)))),
    "CO2": ("CO2", "linear", (
        (200.0, 1000.0, (2.35677352, 8.98459677e-3, -7.12356269e-6, 2.45919022e-9,
                         -1.43699548e-13, -48371.9697, 9.90105222)),
        (1000.0, 3500.0, (3.85746029, 4.41437026e-3, -2.21481404e-6, 5.23490188e-10,
                          -4.72084164e-14, -48759.1660, 2.27163806)))),
}

NASA9 = {
    "N2": ("N2", "linear", (
        (200.0, 1000.0, (2.210371497e4, -3.818461820e2, 6.082738360, -8.530914410e-3,
                         1.384646189e-5, -9.625793620e-9, 2.519705809e-12, 7.108460860e2,
                         -1.076003744e1)),
        (1000.0, 6000.0, (5.877124060e5, -2.239249073e3, 6.066949220, -6.139685500e-4,
                          1.491806679e-7, -1.923105485e-11, 1.061954386e-15, 1.283210415e4,
                          -1.586640027e1)),
        (6000.0, 20000.0, (8.310139160e8, -6.420733540e5, 2.020264635e2, -3.065092046e-2,
                           2.486903333e-6, -9.705954110e-11, 1.437538881e-15, 4.938707040e6,
                           -1.672099740e3)))),
    "O2": ("O2", "linear", (
        (200.0, 1000.0, (-3.425563420e4, 4.847000970e2, 1.119010961, 4.293889240e-3,
                         -6.836300520e-7, -2.023372700e-9, 1.039040018e-12, -3.391454870e3,
                         1.849699470e1)),
        (1000.0, 6000.0, (-1.037939022e6, 2.344830282e3, 1.819732036, 1.267847582e-3,
                          -2.188067988e-7, 2.053719572e-11, -8.193467050e-16, -1.689010929e4,
                          1.738716506e1)))),
    "CO": ("CO", "linear", (
        (200.0, 1000.0, (1.489045326e4, -2.922285939e2, 5.724527170, -8.176235030e-3,
                         1.456903469e-5, -1.087746302e-8, 3.027941827e-12, -1.303131878e4,
                         -7.859241350)),
        (1000.0, 6000.0, (4.619197250e5, -1.944704863e3, 5.916714180, -5.664282830e-4,
                          1.398814540e-7, -1.787680361e-11, 9.620935570e-16, -2.466261084e3,
                          -1.387413108e1)))),
    "CO2": ("CO2", "linear", (
        (200.0, 1000.0, (4.943650540e4, -6.264116010e2, 5.301725240, 2.503813816e-3,
                         -2.127308728e-7, -7.689988780e-10, 2.849677801e-13, -4.528198460e4,
                         -7.048279440)),
        (1000.0, 6000.0, (1.176962419e5, -1.788791477e3, 8.291523190, -9.223156780e-5,
                          4.863676880e-9, -1.891053312e-12, 6.330036590e-16, -3.908350590e4,
                          -2.652669281e1)))),
}

HEADER = ["species", "formula", "phase", "form", "T_min [K]", "T_max [K]",
          *[f"c{k}" for k in range(1, 10)], "geometry"]


def set_rows(species, formula, form, ranges, geometry="", phase="g", digits=None) -> list:
    """CSV rows (lists of cells) of one set; coefficients written with repr (exact) or, as
    published files do, to ``digits`` significant digits."""
    rows = []
    for t_min, t_max, coefficients in ranges:
        cells = [repr(float(c)) if digits is None else f"{c:.{digits - 1}E}" for c in coefficients]
        rows.append([species, formula, phase, form, f"{t_min:g}", f"{t_max:g}",
                     *cells, *[""] * (9 - len(cells)), geometry or ""])
    return rows


def library_rows(library: dict, form: str, names=None) -> list:
    """CSV rows of every set of ``library`` (NASA7 or NASA9 above), or of ``names``."""
    rows = []
    for name in names or sorted(library):
        formula, geometry, ranges = library[name]
        rows += set_rows(name, formula, form, ranges, geometry)
    return rows


def write_sets(raw: Path, source_id: str, rows, *, priority=10, standard_pressure="1 bar",
               entry=None, tables=None, files=None):
    """Write raw/<source_id>/ with one coefficient-set file ``sets.csv`` of ``rows`` (or
    the text of each file in ``files``), its source.json entry extended by ``entry``
    (e.g. {"repair": True}) and optional table entries (written elsewhere)."""
    folder = Path(raw) / source_id
    folder.mkdir(parents=True, exist_ok=True)
    files = files or {"sets.csv": "\n".join(",".join(r) for r in [HEADER] + list(rows)) + "\n"}
    for name, text in files.items():
        (folder / name).write_text(text, encoding="utf-8")
    doc = {"source": source_id, "title": f"test coefficient sets {source_id}",
           "citation": "test", "method": "compilation", "standard_pressure": standard_pressure,
           "priority": priority, "license": "CC0-1.0",
           "coefficient_sets": [{"file": name, **(entry or {})} for name in files]}
    if tables:
        doc["tables"] = tables
    (folder / "source.json").write_text(json.dumps(doc, indent=1), encoding="utf-8")
    return folder


def planted(ranges, j: int, k: int, value: float) -> tuple:
    """``ranges`` with coefficient ``k`` of range ``j`` replaced by ``value`` (a slip)."""
    out = [list(r) for r in ranges]
    c = list(out[j][2])
    c[k] = value
    out[j][2] = tuple(c)
    return tuple(tuple(r) for r in out)


def swapped(ranges, j: int, a: int, b: int) -> tuple:
    """``ranges`` with coefficients ``a`` and ``b`` of range ``j`` swapped."""
    c = list(ranges[j][2])
    c[a], c[b] = c[b], c[a]
    return planted(planted(ranges, j, a, c[a]), j, b, c[b])


def unconstrained_nasa7(t, cp, h298: float, s298: float, breakpoint: float) -> tuple:
    """A two-range nasa7 set fitted to Cp [J/(mol K)] at ``t`` [K] (with H and S integrated
    from it by the trapezoid rule and anchored at t[0] = 298.15 K) range by range, without
    continuity: each range's seven coefficients from its own rows of Cp/R, H/R and S/R by
    ordinary least squares in T/1000 — the way a set comes out when its ranges are fitted
    apart."""
    from ..core.constants import GAS_CONSTANT as R

    t, cp = np.asarray(t, dtype=float), np.asarray(cp, dtype=float)
    h = h298 + np.concatenate([[0.0], np.cumsum(np.diff(t) * (cp[1:] + cp[:-1]) / 2)])
    g = cp / t
    s = s298 + np.concatenate([[0.0], np.cumsum(np.diff(t) * (g[1:] + g[:-1]) / 2)])
    out = []
    for lo, hi in ((t[0], breakpoint), (breakpoint, t[-1])):
        m = (t >= lo) & (t <= hi)
        x = t[m] / 1000.0
        zero, one = np.zeros_like(x), np.ones_like(x)
        cp_rows = np.column_stack([x ** p for p in range(5)] + [zero, zero])
        h_rows = np.column_stack([x ** (p + 1) / (p + 1) for p in range(5)] + [one, zero])
        s_rows = np.column_stack([np.log(x)] + [x ** p / p for p in range(1, 5)] + [zero, one])
        a = np.vstack([cp_rows, h_rows / 1.0, s_rows])
        y = np.concatenate([cp[m] / R, h[m] / (R * 1000.0), s[m] / R])
        c, *_ = np.linalg.lstsq(a, y, rcond=None)
        kelvin = [c[p] / 1000.0 ** p for p in range(5)] + [c[5] * 1000.0, c[6] - np.log(1000.0) * c[0]]
        out.append((float(lo), float(hi), tuple(float(v) for v in kelvin)))
    return tuple(out)
