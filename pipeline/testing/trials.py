"""Clean reference tables and defect injectors, shared by the validation tests and
benchmarks/detection_rates.py (which prints the measured detection rates).

Clean references (external, named):
* CoolProp ideal-gas Cp ("Cp0molar", density -> 0) of reference equations of state:
  nitrogen — Span et al., J. Phys. Chem. Ref. Data 29, 1361 (2000);
  oxygen — Schmidt & Wagner, Fluid Phase Equilib. 19, 175 (1985);
  carbon dioxide — Span & Wagner, J. Phys. Chem. Ref. Data 25, 1509 (1996);
  argon — Tegeler, Span & Wagner, J. Phys. Chem. Ref. Data 28, 779 (1999);
  carbon monoxide — Lemmon & Span, J. Chem. Eng. Data 51, 785 (2006);
  methane — Setzmann & Wagner, J. Phys. Chem. Ref. Data 20, 1061 (1991);
  ethane — Bücker & Wagner, J. Phys. Chem. Ref. Data 35, 205 (2006);
  propane — Lemmon, McLinden & Wagner, J. Chem. Eng. Data 54, 3141 (2009).
* Atomic oxygen, a genuine smooth maximum in Cp: translational 5/2 R plus the electronic
  contribution of its levels 3P2 0, 3P1 158.265, 3P0 226.977, 1D2 15867.862, 1S0 33792.583
  cm^-1 (NIST Atomic Spectra Database; values from memory).
* Rigid-rotor/harmonic-oscillator CH4 and N2O to 3000 K from Shimanouchi's fundamentals
  (NSRDS-NBS 39, 1972; from memory).

Realistic noise: 0.1 % relative, Gaussian (the issue's specification).
"""

from dataclasses import replace

import numpy as np

from ..checks import registry as validate
from ..core import chemistry
from ..core.constants import GAS_CONSTANT as R
from ..core.constants import REFERENCE_TEMPERATURE
from ..core.records import SourceMeta, Table, TableMeta
from ..core.rows import Rows
from ..core.settings import Settings
from ..physics import statmech

COOLPROP = {  # name: (CoolProp fluid, formula, geometry)
    "N2": ("Nitrogen", "N2", "linear"),
    "O2": ("Oxygen", "O2", "linear"),
    "CO2": ("CarbonDioxide", "CO2", "linear"),
    "Ar": ("Argon", "Ar", "monatomic"),
    "CO": ("CarbonMonoxide", "CO", "linear"),
    "CH4": ("Methane", "CH4", "nonlinear"),
    "C2H6": ("Ethane", "C2H6", "nonlinear"),
    "C3H8": ("Propane", "C3H8", "nonlinear"),
}
O_LEVELS = [(5, 0.0), (3, 158.265), (1, 226.977), (5, 15867.862), (1, 33792.583)]
RRHO = {
    "CH4": ("CH4", "nonlinear", [2917.0, 1534.0, 3019.0, 1306.0], [1, 2, 3, 3]),
    "N2O": ("N2O", "linear", [1285.0, 589.0, 2224.0], [1, 2, 1]),
}

_SRC = SourceMeta(id="ref", folder="ref", title="reference", citation="see tests/trials.py",
                  method="compilation", license="-", priority=10, standard_pressure=1e5,
                  sha256="0" * 64)


def make_table(t, cp, formula, geometry, *, phase="g", u=None, dh=None, s=None, name=None,
               file="ref/table.csv", source=_SRC, s298=None, h298=0.0, gef=None):
    """An in-memory Table as ingest would produce it (lines start at 2)."""
    t = np.asarray(t, float)
    n = len(t)
    comp = chemistry.composition(formula)

    def col(v):
        return np.full(n, np.nan) if v is None else np.asarray(v, float)

    data = Rows({"line": np.arange(2, n + 2), "T": t, "Cp": np.asarray(cp, float),
                 "u_Cp": col(u), "dH": col(dh), "S": col(s), "u_dH": col(None),
                 "u_S": col(None), "gef": col(gef)})
    meta = TableMeta(source=source, file=file, species=name or formula, formula=formula,
                     phase=phase, geometry=geometry, molar_mass=comp.molar_mass,
                     atoms=comp.atoms, enthalpy_of_formation_298=h298,
                     entropy_298=s298, sha256="0" * 64, size=0,
                     columns=("T [K]", "Cp [J/(mol*K)]"))
    return Table(meta=meta, data=data)


def coolprop_cp(fluid, t):
    import CoolProp.CoolProp as CP

    return np.array([CP.PropsSI("Cp0molar", "T", float(x), "Dmolar", 1e-6, fluid) for x in t])


def grid(lo, hi, step):
    return np.unique(np.append(np.arange(lo, hi + 1e-9, step), REFERENCE_TEMPERATURE))


def references():
    """[(label, t [K], cp [J/(mol K)], formula, geometry)] — every clean reference table."""
    import CoolProp.CoolProp as CP

    out = []
    for name, (fluid, formula, geometry) in COOLPROP.items():
        lo = max(200.0, np.ceil(CP.PropsSI("Tmin", fluid) / 10.0) * 10.0)
        for step in (25.0, 50.0):
            t = grid(lo, 2000.0, step)
            out.append((f"{name} CoolProp {step:g} K", t, coolprop_cp(fluid, t), formula,
                        geometry))
    t = grid(100.0, 6000.0, 100.0)
    out.append(("O atom (electronic levels)", t, R * statmech.rrho_cp_over_r(
        t, "monatomic", levels=O_LEVELS), "O", "monatomic"))
    for name, (formula, geometry, nu, g) in RRHO.items():
        t = grid(200.0, 3000.0, 50.0)
        out.append((f"{name} RRHO", t, R * statmech.rrho_cp_over_r(t, geometry, nu, g),
                    formula, geometry))
    return out


# --- defects: each returns (defective cp, the line(s) a finding must name) -----------------

def slip(rng, cp):
    i = int(rng.integers(len(cp)))
    out = cp.copy()
    out[i] *= 1 + rng.uniform(0.02, 0.06) * rng.choice([-1.0, 1.0])
    return out, (i + 2,)


def factor(f):
    def inject(rng, cp):
        return cp / f, None
    return inject


def run_checks(table, ctx=Settings()):
    return validate.validate_table(table, ctx)


def noisy(rng, cp, level=1e-3):
    return cp * (1 + level * rng.standard_normal(len(cp)))


def detection_rates(trials=200, seed=2026, ctx=Settings()):
    """Measured rates over seeded trials; returns {defect: (caught, trials)} and false counts."""
    rng = np.random.default_rng(seed)
    refs = references()
    defects = {
        "slip >= 2 %": (slip, ("SMOOTH-OUTLIER", "SMOOTH-JITTER", "CP-BELOW-EQUIPARTITION")),
        "cal taken as J (x 1/4.184)": (factor(4.184), ("UNIT-FACTOR",)),
        "Cp/R taken as Cp (x 1/R)": (factor(R), ("UNIT-FACTOR",)),
        "per gram taken as per mole (x 1/M)": (None, ("UNIT-FACTOR",)),
        "J taken as kJ (x 1000)": (factor(1e-3), ("UNIT-FACTOR",)),
    }
    rates = {}
    for label, (inject, codes) in defects.items():
        caught = 0
        for _ in range(trials):
            name, t, cp, formula, geometry = refs[int(rng.integers(len(refs)))]
            base = noisy(rng, cp)
            if inject is None:  # molar mass depends on the species
                bad, lines = base / chemistry.composition(formula).molar_mass, None
            else:
                bad, lines = inject(rng, base)
            found = run_checks(make_table(t, bad, formula, geometry))
            hit = [f for f in found if f.code in codes
                   and (lines is None or set(lines) & set(f.lines or (f.line,)))]
            caught += bool(hit)
        rates[label] = (caught, trials)
    false_errors = false_warnings = 0
    for _ in range(trials):
        name, t, cp, formula, geometry = refs[int(rng.integers(len(refs)))]
        found = run_checks(make_table(t, noisy(rng, cp), formula, geometry))
        false_errors += any(f.severity == "error" for f in found)
        false_warnings += any(f.severity == "warning" for f in found)
    return rates, (false_errors, false_warnings, trials)


def with_source(table, source_id, priority, file):
    src = replace(table.meta.source, id=source_id, folder=source_id, priority=priority)
    return Table(meta=replace(table.meta, source=src, file=file), data=table.data)
