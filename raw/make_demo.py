"""Regenerate the demo sources in raw/ (run from the project root: python raw/make_demo.py).

Scenario (our own, invented for the demo): the gas-handling loop of a Mars
in-situ resource utilisation test stand — CO2 intake, electrolysis to CO and O2,
a Sabatier branch to CH4, buffer gases N2 and Ar, and trace NO, N2O, SO2 and NH3
monitored by the analysers. Two sources feed its property library:

* ``isru-rrho-2026`` — COMPUTED: ideal-gas heat capacities in the rigid-rotor /
  harmonic-oscillator model (thermoledger.physics.statmech) from vibrational wavenumbers
  and low electronic levels. Wavenumbers are recalled from memory of
  T. Shimanouchi, Tables of Molecular Vibrational Frequencies Consolidated
  Vol. I, NSRDS-NBS 39 (1972), and K. P. Huber & G. Herzberg, Constants of
  Diatomic Molecules (1979); they are demo inputs, not check values.
* ``isru-benchlog-2026`` — SYNTHETIC: the same model with seeded Gaussian noise
  of 0.15 % added, written in the unit conventions of an imagined bench log
  (degC with cal/(mol*K); K with J/(g*K); degF with kJ/(kmol*K)) and entropies
  at 1 atm. It contains deliberate defects for the validation stage to catch:
  nh3.csv (a cell 'n/a'), co-cal.csv (calories labelled as joules), a digit
  swap in one row of n2o.csv, and a CO2 table that drifts from the computed one.

* ``isru-furnace-2026`` — SYNTHETIC: the condensed phases of the stand's regolith
  reduction furnace — wüstite FeO (crystal and melt, one table with a phase column) and
  titanium from ilmenite reduction (alpha and beta crystals, melt). Heat capacities come
  from smooth Maier–Kelley-type models, Cp = a + b T − c/T², whose coefficients were chosen
  to behave like handbook data (they are not fitted to or copied from any table), with
  seeded 0.1 % Gaussian noise; the Ti melt is an enthalpy-increment table (T and H − H298
  only, as drop calorimetry gives) and the alpha-Ti table carries S and −(G − H298)/T.
  Transition temperatures and enthalpies are recalled from memory of handbook values.
  Graphite (electrodes and crucible; carbon's reference state) is a table of handbook Cp
  values recalled from memory of NIST-JANAF with the same noise. H2 (for the Sabatier
  branch and methane pyrolysis) joins the computed source, so that formation properties
  of every species made of C, H, N, O, Ti and Ar appear; S and Fe have no reference
  species in the demo, and SO2 and FeO show the finding that says so.

* ``isru-plantsets-2026`` — COMPUTED: the coefficient sets of the stand's plant-simulation
  mechanism file, as that team exported them (7-coefficient form, one CSV row per range):
  NO(g), fitted to the computed source's model with thermoledger's constrained fitter, and
  ethylene C2H4(g) (a product of the CO2 electrolyser's side reaction), whose two ranges
  were fitted apart to the same model without continuity
  (thermoledger.testing.coefsets.unconstrained_nasa7) — the defect for the audit to catch:
  H and S step at 1000 K. Its source.json asks for the set to be repaired, so the report
  shows the published set and its repair side by side. C2H4 wavenumbers are recalled from
  memory of Shimanouchi (1972).

Enthalpies of formation and entropies at 298.15 K are recalled from memory of
the CODATA Key Values (Cox, Wagman & Medvedev, 1989) and the NIST-JANAF tables
(Chase, 1998); demo metadata only.
"""

import json
from pathlib import Path

import numpy as np
from scipy.integrate import quad
from thermoledger.core.constants import ENTROPY_ATM_TO_BAR, GAS_CONSTANT
from thermoledger.core.settings import FitSettings
from thermoledger.physics.statmech import rrho_cp_over_r
from thermoledger.testing import fit_arrays
from thermoledger.testing.coefsets import HEADER, set_rows, unconstrained_nasa7
from thermoledger.testing.formation import GRAPHITE_CP, GRAPHITE_S298

ROOT = Path(__file__).resolve().parent

# name: formula, geometry, wavenumbers [1/cm], degeneracies, levels [(g, 1/cm)],
#       dfH298 [kJ/mol], S298 at 1 bar [J/(mol K)]  -- all from memory, demo only
SPECIES = {
    "Ar": ("Ar", "monatomic", [], [], [], 0.0, 154.846),
    "N2": ("N2", "linear", [2358.57], [1], [], 0.0, 191.609),
    "H2": ("H2", "linear", [4401.2], [1], [], 0.0, 130.680),
    "O2": ("O2", "linear", [1580.19], [1], [(3, 0.0), (2, 7918.1), (1, 13195.1)], 0.0, 205.152),
    "CO": ("CO", "linear", [2169.81], [1], [], -110.53, 197.660),
    "NO": ("NO", "linear", [1904.2], [1], [(2, 0.0), (2, 121.1)], 90.29, 210.758),
    "CO2": ("CO2", "linear", [1333.0, 667.0, 2349.0], [1, 2, 1], [], -393.51, 213.785),
    "CH4": ("CH4", "nonlinear", [2917.0, 1534.0, 3019.0, 1306.0], [1, 2, 3, 3], [], -74.87, 186.25),
    "N2O": ("N2O", "linear", [1285.0, 589.0, 2224.0], [1, 2, 1], [], 82.05, 219.957),
    "SO2": ("SO2", "nonlinear", [1151.0, 518.0, 1362.0], [1, 1, 1], [], -296.81, 248.223),
    "NH3": ("NH3", "nonlinear", [3337.0, 950.0, 3444.0, 1627.0], [1, 1, 2, 2], [], -45.94, 192.77),
    "C2H4": ("C2H4", "nonlinear", [3026.0, 1623.0, 1342.0, 1023.0, 3103.0, 1236.0, 949.0, 943.0,
                                   3106.0, 826.0, 2989.0, 1444.0], [1] * 12, [], 52.4, 219.32),
}

#: u(ΔfH°), u(S°) of the anchors that state them (CODATA Key Values, from memory; demo only)
ANCHOR_U = {"CO": ("0.17 kJ/mol", "0.004 J/(mol*K)"), "CO2": ("0.13 kJ/mol", "0.010 J/(mol*K)")}

GRID = np.array([200.0, 250.0, 298.15, 300.0, 350.0] + list(np.arange(400.0, 3001.0, 100.0)))


def cp_molar(name, t):
    formula, geometry, nu, g, levels, _, _ = SPECIES[name]
    return GAS_CONSTANT * rrho_cp_over_r(t, geometry, nu, g or None, levels)


def write_csv(path: Path, header, rows):
    lines = [",".join(header)] + [",".join(r) for r in rows]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8", newline="\n")


def entry(name, file, *, atm=False, notes=None):
    formula, geometry, _, _, _, h, s = SPECIES[name]
    if atm:
        s -= ENTROPY_ATM_TO_BAR
    out = {"file": file, "species": name, "formula": formula, "phase": "g", "geometry": geometry,
           "enthalpy_of_formation_298": f"{h:.2f} kJ/mol",
           "entropy_298": f"{s:.3f} J/(mol*K)"}
    if notes:
        out["notes"] = notes
    return out


def integrals(name, t):
    """H(T) - H(298.15) [J/mol] and S(T) [J/(mol K)] of the model, by quadrature of its Cp."""
    s298 = SPECIES[name][6]
    dh, s = [], []
    for x in t:
        dh.append(quad(lambda y: cp_molar(name, [y])[0], 298.15, x, epsrel=1e-12)[0])
        s.append(s298 + quad(lambda y: cp_molar(name, [y])[0] / y, 298.15, x, epsrel=1e-12)[0])
    return np.array(dh), np.array(s)


def computed_source(folder: Path):
    folder.mkdir(exist_ok=True)
    tables = []
    for name in ("Ar", "N2", "O2", "H2", "CO", "NO", "CO2", "CH4"):
        cp = cp_molar(name, GRID)
        file = f"{name.lower()}.csv"
        extra = {}
        if name == "CO2":  # this table states a standard uncertainty of 0.1 %
            rows = [[f"{t:g}", f"{c:.4f}", f"{1e-3 * c:.4f}"] for t, c in zip(GRID, cp)]
            write_csv(folder / file, ["T [K]", "Cp [J/(mol*K)]", "u(Cp) [J/(mol*K)]"], rows)
        elif name in ("N2", "CH4"):  # these carry H-H298 and S columns as well
            dh, s = integrals(name, GRID)
            rows = [[f"{t:g}", f"{c:.4f}", f"{h / 1000:.5f}", f"{e:.4f}"]
                    for t, c, h, e in zip(GRID, cp, dh, s)]
            write_csv(folder / file, ["T [K]", "Cp [J/(mol*K)]", "H-H298 [kJ/mol]",
                                      "S [J/(mol*K)]"], rows)
        elif name == "Ar":  # an extra Cv column the pipeline does not use, acknowledged below
            rows = [[f"{t:g}", f"{c:.4f}", f"{c - GAS_CONSTANT:.4f}"] for t, c in zip(GRID, cp)]
            write_csv(folder / file, ["T [K]", "Cp [J/(mol*K)]", "Cv [J/(mol*K)]"], rows)
            extra = {"acknowledge": [{"code": "COL-UNKNOWN", "line": 1,
                                      "reason": "Cv kept for the analyser team; not a fitted "
                                                "quantity"}]}
        else:
            rows = [[f"{t:g}", f"{c:.4f}"] for t, c in zip(GRID, cp)]
            write_csv(folder / file, ["T [K]", "Cp [J/(mol*K)]"], rows)
        if name == "N2":   # the loop's hot section needs N2 to 6000 K: extrapolated
            extra = {"fit": {"use_t_max": 6000}}
        if name == "CH4":  # published with the 9-coefficient form in three ranges
            extra = {"fit": {"form": "nasa9", "ranges": 3}}
        if name in ANCHOR_U:  # the standard uncertainties the key values state
            extra["u_enthalpy_of_formation_298"], extra["u_entropy_298"] = ANCHOR_U[name]
        tables.append({**entry(name, file), **extra})
    meta = {
        "source": "isru-rrho-2026",
        "title": "Rigid-rotor/harmonic-oscillator heat capacities for the ISRU demo loop",
        "citation": "Computed with thermoledger raw/make_demo.py (thermoledger.physics.statmech); "
                    "wavenumbers from memory of Shimanouchi, NSRDS-NBS 39 (1972) and "
                    "Huber & Herzberg (1979)",
        "method": "statistical-mechanics",
        "standard_pressure": "1 bar",
        "priority": 20,
        "license": "CC0-1.0",
        "notes": "COMPUTED demo data, not measurements; see raw/make_demo.py.",
        "tables": tables,
    }
    (folder / "source.json").write_text(json.dumps(meta, indent=2) + "\n", encoding="utf-8")


def synthetic_source(folder: Path):
    folder.mkdir(exist_ok=True)
    rng = np.random.default_rng(20260301)
    noisy = {n: cp_molar(n, GRID) * (1 + 0.0015 * rng.standard_normal(len(GRID)))
             for n in ("N2O", "SO2", "CO2", "NH3", "CO")}
    cal = 4.184
    rows = [[f"{t - 273.15:.2f}", f"{c / cal:.5f}"] for t, c in zip(GRID, noisy["N2O"])]
    rows[12][1] = rows[12][1][:3] + rows[12][1][4] + rows[12][1][3] + rows[12][1][5:]
    # ^ a transcription slip: two digits of line 14 swapped
    write_csv(folder / "n2o.csv", ["T [degC]", "Cp [cal/(mol*K)]"], rows)
    rows = [[f"{t:g}", f"{c / cal:.4f}"] for t, c in zip(GRID, noisy["CO"])]
    write_csv(folder / "co-cal.csv", ["T [K]", "Cp [J/(mol*K)]"], rows)
    # ^ the values are in cal/(mol*K) but the header says J/(mol*K)
    m_so2 = 64.064  # g/mol, only to write the per-gram column; the pipeline recomputes it
    rows = [[f"{t:g}", f"{c / m_so2:.6f}"] for t, c in zip(GRID, noisy["SO2"])]
    write_csv(folder / "so2.csv", ["T [K]", "Cp [J/(g*K)]"], rows)
    # an older compilation of CO2: drifts up to +1.2 % at 3000 K and extends to 4000 K
    grid = np.append(GRID, np.arange(3200.0, 4001.0, 200.0))
    cp = cp_molar("CO2", grid) * (1 + 0.0015 * rng.standard_normal(len(grid)))
    cp *= 1 + 0.012 * np.clip((grid - 1000.0) / 2000.0, 0.0, None)
    rows = [[f"{(t - 273.15) * 1.8 + 32:.3f}", f"{c:.3f}"] for t, c in zip(grid, cp)]
    write_csv(folder / "co2-benchlog.csv", ["T [degF]", "Cp [kJ/(kmol*K)]"], rows)
    rows = [[f"{t:g}", f"{c:.4f}"] for t, c in zip(GRID, noisy["NH3"])]
    rows[7][1] = "n/a"  # the deliberate defect: a missing value typed as text
    write_csv(folder / "nh3.csv", ["T [K]", "Cp [J/(mol*K)]"], rows)
    meta = {
        "source": "isru-benchlog-2026",
        "title": "Bench-log heat capacities of trace gases (synthetic)",
        "citation": "Synthetic demo data generated by thermoledger raw/make_demo.py",
        "method": "compilation",
        "standard_pressure": "1 atm",
        "priority": 10,
        "license": "CC0-1.0",
        "notes": "SYNTHETIC demo data: rigid-rotor/harmonic-oscillator values with seeded "
                 "0.15 % Gaussian noise, in mixed units, entropies at 1 atm. Deliberate "
                 "defects: nh3.csv line 9 reads n/a; co-cal.csv holds calories labelled as "
                 "joules; n2o.csv line 14 has two digits swapped; co2-benchlog.csv drifts "
                 "up to +1.2 % from the computed source above 1000 K. The CO2 entry states "
                 "formation properties copied from memory of NIST-JANAF, log10 Kf(1500 K) "
                 "with two digits swapped (31.8 for 13.8).",
        "tables": [entry("N2O", "n2o.csv", atm=True), entry("SO2", "so2.csv", atm=True),
                   {**entry("CO2", "co2-benchlog.csv", atm=True),
                    # copied from a handbook into the log, one value with a slipped digit
                    "stated_formation": [
                        {"temperature": "1000 K", "gibbs_energy": "-395.886 kJ/mol"},
                        {"temperature": "1500 K", "log10_kf": 31.8}]},
                   entry("CO", "co-cal.csv", atm=True,
                         notes="deliberately defective: calories labelled as joules"),
                   entry("NH3", "nh3.csv", atm=True, notes="deliberately defective (line 9)")],
    }
    (folder / "source.json").write_text(json.dumps(meta, indent=2) + "\n", encoding="utf-8")


#: condensed phases of the furnace: Maier–Kelley-type models (a [J/(mol K)], b [J/(mol K²)],
#: c [J K/mol]) chosen for the demo, and (from memory, handbook values) the transitions
#: (T [K], ΔH [kJ/mol], u(ΔH) [kJ/mol]) and anchors (ΔfH° [kJ/mol], S° [J/(mol K)])
FURNACE = {
    ("Ti", "cr-alpha"): (22.2, 9.8e-3, 1.0e4),
    ("Ti", "cr-beta"): (21.0, 7.0e-3, 0.0),
    ("Ti", "l"): (47.2, 0.0, 0.0),
    ("FeO", "cr"): (50.8, 8.6e-3, 3.3e5),
    ("FeO", "l"): (68.2, 0.0, 0.0),
}
FURNACE_TRANSITIONS = [("Ti", "cr-alpha", "cr-beta", 1155.0, 4.17, 0.2),
                       ("Ti", "cr-beta", "l", 1941.0, 14.15, 0.5),
                       ("FeO", "cr", "l", 1650.0, 24.06, 1.0)]
FURNACE_ANCHORS = {"Ti": (0.0, 30.72), "FeO": (-272.04, 60.75)}


def furnace_cp(name, phase, t):
    a, b, c = FURNACE[(name, phase)]
    t = np.asarray(t, dtype=float)
    return a + b * t - c / t ** 2


def furnace_h_s(name, phase, t):
    """H(T) - H(298.15 K) of the phase stable at 298.15 K [J/mol] and S [J/(mol K)] of
    ``phase`` at ``t`` [K], through the transitions of the model."""
    h, s = 0.0, FURNACE_ANCHORS[name][1]
    lo, current = 298.15, None
    chain = [x for x in FURNACE_TRANSITIONS if x[0] == name]
    current = chain[0][1]
    for _, below, above, tt, dh, _ in chain:
        if current == phase:
            break
        h += quad(lambda y: furnace_cp(name, below, y), lo, tt)[0] + 1000 * dh
        s += quad(lambda y: furnace_cp(name, below, y) / y, lo, tt)[0] + 1000 * dh / tt
        lo, current = tt, above
    dh_out = [h + quad(lambda y: furnace_cp(name, phase, y), lo, x)[0] for x in t]
    s_out = [s + quad(lambda y: furnace_cp(name, phase, y) / y, lo, x)[0] for x in t]
    return np.array(dh_out), np.array(s_out)


def furnace_source(folder: Path):
    folder.mkdir(exist_ok=True)
    rng = np.random.default_rng(20261203)

    def noisy(x, rel=0.001):
        return x * (1 + rel * rng.standard_normal(len(x)))

    t = np.array([298.15] + list(np.arange(300.0, 1151.0, 50.0)) + [1155.0])
    cp = noisy(furnace_cp("Ti", "cr-alpha", t))
    dh, s = furnace_h_s("Ti", "cr-alpha", t)
    rows = [[f"{x:g}", f"{c:.4f}", f"{e:.4f}", f"{e - h / x:.4f}"]
            for x, c, h, e in zip(t, cp, dh, s)]
    write_csv(folder / "ti-alpha.csv", ["T [K]", "Cp [J/(mol*K)]", "S [J/(mol*K)]",
                                        "-(G-H298)/T [J/(mol*K)]"], rows)
    t = np.array([1155.0] + list(np.arange(1200.0, 1901.0, 50.0)) + [1941.0])
    rows = [[f"{x:g}", f"{c:.4f}"] for x, c in zip(t, noisy(furnace_cp("Ti", "cr-beta", t)))]
    write_csv(folder / "ti-beta.csv", ["T [K]", "Cp [J/(mol*K)]"], rows)
    t = np.array([1941.0] + list(np.arange(1975.0, 2501.0, 25.0)))
    dh, _ = furnace_h_s("Ti", "l", t)
    rows = [[f"{x:g}", f"{h / 1000:.4f}"] for x, h in zip(t, noisy(dh, 0.0003))]
    write_csv(folder / "ti-melt-drop.csv", ["T [K]", "H-H298 [kJ/mol]"], rows)
    t_cr = np.array([298.15] + list(np.arange(300.0, 1601.0, 50.0)) + [1650.0])
    t_l = np.array([1650.0] + list(np.arange(1700.0, 2301.0, 50.0)))
    rows = [["cr", f"{x:g}", f"{c:.4f}"] for x, c in zip(t_cr, noisy(furnace_cp("FeO", "cr",
                                                                                 t_cr)))]
    rows += [["l", f"{x:g}", f"{c:.4f}"] for x, c in zip(t_l, noisy(furnace_cp("FeO", "l",
                                                                               t_l)))]
    write_csv(folder / "feo.csv", ["phase", "T [K]", "Cp [J/(mol*K)]"], rows)
    t, cp = np.array(GRAPHITE_CP).T
    rows = [[f"{x:g}", f"{c:.4f}"] for x, c in zip(t, noisy(cp))]
    write_csv(folder / "graphite.csv", ["T [K]", "Cp [J/(mol*K)]"], rows)
    h_ti, s_ti = FURNACE_ANCHORS["Ti"]
    h_feo, s_feo = FURNACE_ANCHORS["FeO"]
    meta = {
        "source": "isru-furnace-2026",
        "title": "Condensed phases of the regolith reduction furnace (synthetic)",
        "citation": "Synthetic demo data generated by thermoledger raw/make_demo.py",
        "method": "compilation",
        "standard_pressure": "1 bar",
        "priority": 10,
        "license": "CC0-1.0",
        "notes": "SYNTHETIC demo data: Maier-Kelley-type Cp models chosen for the demo with "
                 "seeded 0.1 % Gaussian noise (0.03 % on the drop-calorimetry increments); "
                 "graphite from handbook Cp values recalled from memory of NIST-JANAF with "
                 "the same noise. "
                 "Transition temperatures and enthalpies, and the 298.15 K anchors, recalled "
                 "from memory of handbook values; demo metadata only.",
        "tables": [
            {"file": "ti-alpha.csv", "species": "Ti", "formula": "Ti", "phase": "cr-alpha",
             "enthalpy_of_formation_298": f"{h_ti:.2f} kJ/mol",
             "entropy_298": f"{s_ti:.2f} J/(mol*K)"},
            {"file": "ti-beta.csv", "species": "Ti", "formula": "Ti", "phase": "cr-beta",
             "fit": {"ranges": 1}},
            {"file": "ti-melt-drop.csv", "species": "Ti", "formula": "Ti", "phase": "l",
             "notes": "drop calorimetry: H(T) - H(298.15 K) of alpha-Ti, no Cp column",
             "fit": {"ranges": 1}},
            {"file": "feo.csv", "species": "FeO", "formula": "FeO", "anchor_phase": "cr",
             "enthalpy_of_formation_298": f"{h_feo:.2f} kJ/mol",
             "entropy_298": f"{s_feo:.2f} J/(mol*K)"},
            {"file": "graphite.csv", "species": "C", "formula": "C", "phase": "cr",
             "notes": "graphite electrodes and crucible; the reference state of carbon",
             "enthalpy_of_formation_298": "0 kJ/mol",
             "entropy_298": f"{GRAPHITE_S298[0]:.2f} J/(mol*K)",
             "u_entropy_298": f"{GRAPHITE_S298[1]:.2f} J/(mol*K)"},
        ],
        "transitions": [
            {"species": n, "from": a, "to": b, "temperature": f"{tt:g} K",
             "enthalpy": f"{dh:g} kJ/mol", "u_enthalpy": f"{u:g} kJ/mol"}
            for n, a, b, tt, dh, u in FURNACE_TRANSITIONS],
    }
    (folder / "source.json").write_text(json.dumps(meta, indent=2, ensure_ascii=False) + "\n",
                                        encoding="utf-8")


def plant_sets_source(folder: Path):
    """The plant-simulation team's coefficient sets (see the module docstring)."""
    folder.mkdir(exist_ok=True)
    t = np.concatenate([[298.15], np.arange(300.0, 3001.0, 50.0)])
    rows = []
    for name in ("C2H4", "NO"):
        formula, geometry, *_, h, s = SPECIES[name]
        cp = cp_molar(name, t)
        if name == "C2H4":     # the two ranges fitted apart: steps at 1000 K
            ranges = unconstrained_nasa7(t, cp, 1000.0 * h, s, 1000.0)
        else:
            fit = fit_arrays(f"{name}(g)", t, cp, None, 1000.0 * h, s,
                             FitSettings(breakpoint_mode="conventional", extrapolate=False))
            ranges = [(r.t_min, r.t_max, r.coefficients) for r in fit.ranges]
        rows += set_rows(name, formula, "nasa7", ranges, geometry, digits=9)
    write_csv(folder / "mechanism-thermo.csv", HEADER, rows)
    meta = {
        "source": "isru-plantsets-2026",
        "title": "Coefficient sets of the ISRU stand's plant-simulation mechanism file",
        "citation": "Computed with thermoledger raw/make_demo.py: 7-coefficient sets fitted to "
                    "the rigid-rotor/harmonic-oscillator model of isru-rrho-2026",
        "method": "compilation",
        "standard_pressure": "1 bar",
        "priority": 5,
        "license": "CC0-1.0",
        "notes": "COMPUTED demo data; the C2H4 set was fitted range by range without "
                 "continuity on purpose (the defect the audit catches); see raw/make_demo.py.",
        "coefficient_sets": [{"file": "mechanism-thermo.csv", "repair": ["C2H4"]}],
    }
    (folder / "source.json").write_text(json.dumps(meta, indent=2) + "\n", encoding="utf-8")


if __name__ == "__main__":
    computed_source(ROOT / "isru-rrho-2026")
    plant_sets_source(ROOT / "isru-plantsets-2026")
    synthetic_source(ROOT / "isru-benchlog-2026")
    furnace_source(ROOT / "isru-furnace-2026")
    print(f"demo sources written under {ROOT}; S(1 bar) - S(1 atm) = "
          f"{ENTROPY_ATM_TO_BAR:.4f} J/(mol*K)")
