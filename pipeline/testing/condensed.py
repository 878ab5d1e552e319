"""Condensed phases for the tests: published reference values and raw sources written from
them.

Every value here is recalled from memory of the named handbook, not looked up, and marked
so. Heat-capacity tables are computed from models (an Einstein solid at 3R per atom, a
constant liquid Cp, the Shomate coefficients of aluminium) and are test inputs; the check
values are the published transition temperatures, enthalpies and the aluminium functions.
"""

import json
from pathlib import Path

import numpy as np

from ..core.constants import GAS_CONSTANT as R
from ..physics.statmech import einstein

#: aluminium, Shomate coefficients A, B, C, D, E, F, G, H (t = T/1000 K) of the NIST
#: Chemistry WebBook (after the NIST-JANAF tables, Chase 1998) — from memory. The crystal's
#: S coefficient G reproduces S°(298.15) = 28.27 J/(mol K); the liquid's G is not recalled
#: reliably and is never used.
AL_CRYSTAL = (28.08920, -5.414849, 8.560423, 3.427370, -0.277375, -9.147187, 61.90981, 0.0)
AL_LIQUID = (31.75104, 3.935826e-8, -1.786515e-8, 2.694171e-9, 5.480037e-9, -0.945684,
             None, 10.56201)

#: melting of common metals and oxides at 1 bar: formula, T_fus [K], ΔH_fus [kJ/mol], Cp of
#: the liquid [J/(mol K)] (CRC Handbook of Chemistry and Physics, and NIST-JANAF for the
#: oxides — from memory), ΔfH° [kJ/mol] and S° [J/(mol K)] at 298.15 K (CODATA Key Values,
#: Cox, Wagman & Medvedev 1989 — from memory) and an Einstein temperature [K] for the
#: crystal's model Cp (about 0.8 of the Debye temperature — from memory, a test input)
MELTING = {
    "Al": ("Al", 933.47, 10.71, 31.75, 0.0, 28.30, 340.0),
    "Cu": ("Cu", 1357.77, 13.26, 32.8, 0.0, 33.15, 275.0),
    "Ag": ("Ag", 1234.93, 11.28, 30.5, 0.0, 42.55, 180.0),
    "Ni": ("Ni", 1728.0, 17.48, 38.9, 0.0, 29.87, 360.0),
    "NaCl": ("NaCl", 1073.8, 28.16, 66.9, -411.12, 72.11, 257.0),
    "MgO": ("MgO", 3098.0, 77.0, 66.9, -601.6, 26.95, 750.0),
    "Al2O3": ("Al2O3", 2327.0, 111.1, 192.5, -1675.7, 50.92, 800.0),
}

#: aluminium vapour: ΔfH° = 330.0 kJ/mol and S° = 164.554 J/(mol K) at 298.15 K (CODATA
#: Key Values — from memory); normal boiling point 2792 K and ΔH_vap = 294 kJ/mol (CRC
#: Handbook — from memory); the ²P ground doublet split by 112.061 cm⁻¹ (NIST Atomic
#: Spectra Database — from memory)
AL_GAS = (330.0, 164.554)
AL_BOILING = (2792.0, 294.0)
AL_DOUBLET = 112.061


def shomate(c, t):
    """Cp [J/(mol K)], H [J/mol] on the assigned scale, S [J/(mol K)] of Shomate
    coefficients ``c`` at T [K] (S None when G is not known)."""
    a, b, cc, d, e, f, g, _ = c
    x = np.asarray(t, dtype=float) / 1000.0
    cp = a + b * x + cc * x ** 2 + d * x ** 3 + e / x ** 2
    h = 1000.0 * (a * x + b * x ** 2 / 2 + cc * x ** 3 / 3 + d * x ** 4 / 4 - e / x + f)
    s = None if g is None else (a * np.log(x) + b * x + cc * x ** 2 / 2 + d * x ** 3 / 3
                                - e / (2 * x ** 2) + g)
    return cp, h, s


def al_gas_cp(t):
    """Cp [J/(mol K)] of Al vapour: translation and the ²P ground doublet (computed)."""
    t = np.asarray(t, dtype=float)
    x = AL_DOUBLET * 1.438776877 / t          # second radiation constant [cm K]
    q, q1, q2 = 2 + 4 * np.exp(-x), 4 * x * np.exp(-x), 4 * x ** 2 * np.exp(-x)
    return 2.5 * R + R * (q2 / q - (q1 / q) ** 2)


def einstein_cp(atoms, theta, t):
    """Cp [J/(mol K)] of an Einstein solid of ``atoms`` atoms: 3R per atom times E(θ/T)."""
    return 3 * atoms * R * einstein(theta / np.asarray(t, dtype=float))


def write_csv(path: Path, header, rows) -> None:
    path.write_text(",".join(header) + "\n" + "".join(",".join(map(str, r)) + "\n"
                                                      for r in rows), encoding="utf-8")


def source_doc(source_id, tables, transitions=(), priority=10) -> dict:
    """A source.json document."""
    return {"source": source_id, "title": "test source", "citation": "computed for the tests",
            "method": "compilation", "standard_pressure": "1 bar", "priority": priority,
            "license": "CC0-1.0", "tables": list(tables), "transitions": list(transitions)}


def write_source(folder: Path, doc: dict) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "source.json").write_text(json.dumps(doc, indent=1, ensure_ascii=False),
                                        encoding="utf-8")
    return folder


def transition(species, lower, upper, t, dh_kj, u_kj=None) -> dict:
    out = {"species": species, "from": lower, "to": upper, "temperature": f"{t!r} K",
           "enthalpy": f"{dh_kj!r} kJ/mol"}
    if u_kj is not None:
        out["u_enthalpy"] = f"{u_kj!r} kJ/mol"
    return out


def write_aluminium(root: Path, *, gas=True, liquid_as_increments=False) -> Path:
    """raw/al: Al(cr) from the WebBook crystal coefficients 298.15-933.47 K, Al(l) at its
    constant Cp 933.47-2900 K (or as an enthalpy-increment table from the liquid
    coefficients), Al(g) computed, with the melting and boiling transitions."""
    folder = Path(root) / "al"
    folder.mkdir(parents=True, exist_ok=True)
    t = np.linspace(298.15, 933.47, 30)
    write_csv(folder / "al-cr.csv", ["T [K]", "Cp [J/(mol*K)]"],
              [[f"{x:.2f}", f"{c:.5f}"] for x, c in zip(t, shomate(AL_CRYSTAL, t)[0])])
    t = np.linspace(933.47, 2900.0, 25)
    if liquid_as_increments:
        h = shomate(AL_LIQUID, t)[1] - shomate(AL_CRYSTAL, 298.15)[1]
        write_csv(folder / "al-l.csv", ["T [K]", "H-H298 [kJ/mol]"],
                  [[f"{x:.2f}", f"{v / 1000:.5f}"] for x, v in zip(t, h)])
    else:
        write_csv(folder / "al-l.csv", ["T [K]", "Cp [J/(mol*K)]"],
                  [[f"{x:.2f}", f"{c:.5f}"] for x, c in zip(t, shomate(AL_LIQUID, t)[0])])
    tables = [{"file": "al-cr.csv", "species": "Al", "formula": "Al", "phase": "cr",
               "enthalpy_of_formation_298": "0 kJ/mol",
               "entropy_298": f"{MELTING['Al'][5]} J/(mol*K)"},
              {"file": "al-l.csv", "species": "Al", "formula": "Al", "phase": "l"}]
    trs = [transition("Al", "cr", "l", MELTING["Al"][1], MELTING["Al"][2], 0.2)]
    if gas:
        t = np.linspace(298.15, 3500.0, 40)
        write_csv(folder / "al-g.csv", ["T [K]", "Cp [J/(mol*K)]"],
                  [[f"{x:.2f}", f"{c:.5f}"] for x, c in zip(t, al_gas_cp(t))])
        tables.append({"file": "al-g.csv", "species": "Al", "formula": "Al", "phase": "g",
                       "geometry": "monatomic",
                       "enthalpy_of_formation_298": f"{AL_GAS[0]} kJ/mol",
                       "entropy_298": f"{AL_GAS[1]} J/(mol*K)"})
        trs.append(transition("Al", "l", "g", AL_BOILING[0], AL_BOILING[1], 5.0))
    return write_source(folder, source_doc("al-test", tables, trs))


def write_melting(root: Path, names=tuple(MELTING)) -> Path:
    """raw/melting: for each name of MELTING, an Einstein crystal 298.15 K-T_fus and a
    constant-Cp liquid T_fus-1.4 T_fus, with the published melting transition."""
    folder = Path(root) / "melting"
    folder.mkdir(parents=True, exist_ok=True)
    tables, trs = [], []
    for name in names:
        formula, t_fus, dh, cp_l, h298, s298, theta = MELTING[name]
        atoms = {"Al2O3": 5, "MgO": 2, "NaCl": 2}.get(name, 1)
        t = np.linspace(298.15, t_fus, 25)
        write_csv(folder / f"{name.lower()}-cr.csv", ["T [K]", "Cp [J/(mol*K)]"],
                  [[f"{x:.3f}", f"{c:.5f}"] for x, c in zip(t, einstein_cp(atoms, theta, t))])
        t = np.linspace(t_fus, 1.4 * t_fus, 15)
        write_csv(folder / f"{name.lower()}-l.csv", ["T [K]", "Cp [J/(mol*K)]"],
                  [[f"{x:.3f}", f"{cp_l:.4f}"] for x in t])
        tables += [{"file": f"{name.lower()}-cr.csv", "species": name, "formula": formula,
                    "phase": "cr", "enthalpy_of_formation_298": f"{h298} kJ/mol",
                    "entropy_298": f"{s298} J/(mol*K)"},
                   {"file": f"{name.lower()}-l.csv", "species": name, "formula": formula,
                    "phase": "l", "fit": {"ranges": 1}}]
        trs.append(transition(name, "cr", "l", t_fus, dh))
    return write_source(folder, source_doc("melting-test", tables, trs))
