"""Labelling-mistake trials over real gases: clean reference tables, the three mistakes that
one table's physics can reveal (Cv under a Cp label, degrees Celsius under a kelvin label,
a per-mass table with a lighter wrong formula), and the temperature-scale mix-ups that only a
second source reveals. Shared by tests/test_labelling.py and benchmarks/detection_rates.py.

Reference Cp: CoolProp's ideal-gas heat capacity (``Cp0molar``) of the 20 fluids of
``coverage.FLUIDS`` (reference equations of state; see coverage.py), on a 10 K grid and
interpolated (monotone cubic) onto each trial's temperatures. S°(298.15 K, 1 bar) of each gas
(the anchor a source would state): the CODATA Key Values for Thermodynamics (Cox, Wagman &
Medvedev, 1989) where they list the gas, else the NIST-JANAF tables (Chase, 4th ed., 1998)
or, for the organic molecules, the NIST Chemistry WebBook — all values from memory.

Trials: a random gas, a table from T_min ∈ [150, 300] K to T_max ∈ [1000, 2000] K in steps
of 25 or 50 K with 298.15 K, 0.1 % Gaussian noise. The Celsius trials are tables that start
between 0 and 50 °C written in degrees Celsius under a kelvin label; the wrong-formula trials
are per-mass tables given the formula of a lighter gas of the list.
"""

from dataclasses import replace
from functools import lru_cache

import numpy as np

from ..checks import reconcile
from ..core import chemistry
from ..core.constants import GAS_CONSTANT as R
from ..core.records import Table
from ..core.settings import Settings
from ..physics import bounds
from .coverage import FLUIDS, cp0
from .trials import make_table, run_checks, with_source

#: S°(298.15 K, 1 bar) [J/(mol K)] of the gases of coverage.FLUIDS (sources in the docstring,
#: from memory)
ENTROPY_298 = {
    "N2": 191.609, "O2": 205.147, "CO": 197.660, "H2": 130.680, "HCl": 186.902,
    "CO2": 213.785, "N2O": 219.96, "OCS": 231.57, "SO2": 248.223, "H2S": 205.81,
    "NH3": 192.77, "CH4": 186.251, "C2H6": 229.161, "C2H4": 219.33, "C3H8": 270.31,
    "C3H6": 266.6, "C4H10": 310.23, "C2H6O": 266.4, "C3H6O": 295.35, "C6H6": 269.2,
}
CELSIUS = 273.15
#: a wrong formula counts as a mistake when its molar mass is at least this fraction lighter
#: (CO for N2, 0.01 % apart, changes no number that matters)
WRONG_MASS_MIN = 0.05
MISTAKES = {
    "Cv under a Cp label": ("LABEL-CV-AS-CP", "CP-BELOW-EQUIPARTITION"),
    "degrees Celsius under a kelvin label": ("LABEL-CELSIUS-AS-KELVIN", "T-NOT-POSITIVE"),
    "per-mass table, lighter wrong formula": ("LABEL-MOLAR-MASS",),
}


@lru_cache(maxsize=None)
def _curve(fluid: str):
    from scipy.interpolate import PchipInterpolator

    t = np.arange(90.0, 2110.0, 10.0)
    return PchipInterpolator(t, cp0(fluid, t))


def reference_cp(fluid: str, t) -> np.ndarray:
    """CoolProp's ideal-gas Cp [J/(mol K)] of ``fluid`` at ``t`` [K] (90-2100 K)."""
    return _curve(fluid)(np.asarray(t, dtype=float))


def gases():
    """[(CoolProp fluid, formula, geometry)] of the trials."""
    return [(fluid, formula, geometry) for fluid, (formula, geometry) in FLUIDS.items()]


def _grid(rng, lo):
    hi = rng.uniform(1000.0, 2000.0)
    step = float(rng.choice([25.0, 50.0]))
    return np.unique(np.append(np.arange(lo, hi, step), 298.15))


def _table(t, cp, formula, geometry, **kw):
    return make_table(t, cp, formula, geometry, s298=ENTROPY_298[formula], **kw)


def vibrations_frozen_at(formula, geometry, fluid, t_min) -> bool:
    """True when Cv at the table's low end falls below Cp(0): the gas's vibrations add less
    than R there, so Cv under a Cp label breaks the rotor floor."""
    return bool(reference_cp(fluid, t_min) - R < bounds.cp_zero(geometry))


def trial(rng, mistake: str | None):
    """One trial: (gas formula, Table, whether the mistake is of the frozen-vibration class)."""
    fluid, formula, geometry = gases()[int(rng.integers(len(gases())))]
    if mistake == "degrees Celsius under a kelvin label":
        t = _grid(rng, rng.uniform(CELSIUS, CELSIUS + 50.0))
        cp = reference_cp(fluid, t) * (1 + 1e-3 * rng.standard_normal(len(t)))
        return formula, _table(t - CELSIUS, cp, formula, geometry), True
    t = _grid(rng, rng.uniform(150.0, 300.0))
    cp = reference_cp(fluid, t) * (1 + 1e-3 * rng.standard_normal(len(t)))
    if mistake is None:
        return formula, _table(t, cp, formula, geometry), True
    if mistake == "Cv under a Cp label":
        return formula, _table(t, cp - R, formula, geometry), \
            vibrations_frozen_at(formula, geometry, fluid, t.min())
    lighter = [g for g in gases() if chemistry.composition(g[1]).molar_mass <
               (1 - WRONG_MASS_MIN) * chemistry.composition(formula).molar_mass]
    if not lighter:
        return trial(rng, mistake)
    _, wrong, wrong_geometry = lighter[int(rng.integers(len(lighter)))]
    m_true = chemistry.composition(formula).molar_mass
    m_wrong = chemistry.composition(wrong).molar_mass
    table = make_table(t, cp * m_wrong / m_true, wrong, wrong_geometry,
                       s298=ENTROPY_298[formula])
    return formula, per_mass(table), True


def per_mass(table):
    """``table`` as the reader leaves a file whose Cp column was given in J/(g K)."""
    reading = {"columns": [{"header": "T [K]", "quantity": "T", "unit": "K", "from": "header"},
                           {"header": "Cp [J/(g*K)]", "quantity": "Cp", "unit": "J/(g*K)",
                            "from": "header"}]}
    return Table(meta=replace(table.meta, reading=reading), data=table.data)


def labelling_rates(trials=200, seed=2026, ctx=Settings()):
    """{mistake: {'all': (caught, n), 'frozen': (caught, n), 'missed': {formula: count}}} and
    (false errors, false warnings, clean tables) over seeded trials; 'frozen' counts the
    trials whose gas has its vibrations mostly frozen at the table's low end (it matters for
    Cv only; for the other mistakes every trial counts). Half the clean tables are per-mass
    tables with the right formula."""
    rng = np.random.default_rng(seed)
    rates = {}
    for mistake, codes in MISTAKES.items():
        got = {"all": [0, 0], "frozen": [0, 0], "missed": {}}
        for _ in range(trials):
            formula, table, frozen = trial(rng, mistake)
            caught = any(f.code in codes for f in run_checks(table, ctx))
            for key in ("all",) + (("frozen",) if frozen else ()):
                got[key][0] += caught
                got[key][1] += 1
            if not caught:
                got["missed"][formula] = got["missed"].get(formula, 0) + 1
        rates[mistake] = {"all": tuple(got["all"]), "frozen": tuple(got["frozen"]),
                          "missed": dict(sorted(got["missed"].items()))}
    false_errors = false_warnings = 0
    for i in range(trials):
        _, table, _ = trial(rng, None)
        if i % 2:
            table = per_mass(table)
        found = run_checks(table, ctx)
        false_errors += any(f.severity == "error" for f in found)
        false_warnings += any(f.severity == "warning" for f in found)
    return rates, (false_errors, false_warnings, trials)


#: mix-ups of the temperature scale between two sources: (name, T as written from true T [K])
SCALE_MIXUPS = {
    "Celsius under a kelvin label": lambda t: t - CELSIUS,
    "Fahrenheit under a Celsius label (read as Celsius)": lambda t: (t - CELSIUS) * 1.8 + 32.0
    + CELSIUS,
    "kelvin under a Celsius label (read as Celsius)": lambda t: t + CELSIUS,
}


def scale_rates(trials=100, seed=2026, ctx=Settings()):
    """{mix-up: (named by SRC-T-SCALE, n)} for a second, lower-priority source of the same gas
    with its temperatures mislabelled, and (false SRC-T-SCALE, n) for an honest second source."""
    rng = np.random.default_rng(seed)
    out = {}
    for name, written in list(SCALE_MIXUPS.items()) + [("honest second source", None)]:
        named = 0
        for _ in range(trials):
            fluid, formula, geometry = gases()[int(rng.integers(len(gases())))]
            t = _grid(rng, rng.uniform(200.0, 300.0))
            first = _table(t, reference_cp(fluid, t) * (1 + 1e-3 * rng.standard_normal(len(t))),
                           formula, geometry)
            t2 = _grid(rng, rng.uniform(CELSIUS + 1.0, 400.0))
            cp2 = reference_cp(fluid, t2) * (1 + 1e-3 * rng.standard_normal(len(t2)))
            t_written = t2 if written is None else written(t2)
            second = with_source(_table(t_written, cp2, formula, geometry), "second", 1,
                                 "second/t.csv")
            first = with_source(first, "first", 10, "first/t.csv")
            _, found, _ = reconcile.reconcile([first, second], [], ctx)
            named += any(f.code == "SRC-T-SCALE" for f in found)
        out[name] = (named, trials)
    return out
