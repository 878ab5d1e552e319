"""Coverage of the stated uncertainties against an independent reference: CoolProp's ideal-gas
heat capacities (the ideal-gas part of each fluid's reference equation of state, density →
0), used by benchmarks/coverage.py and tests/test_uncertainty.py. Needs CoolProp (a test
dependency).

For each fluid a table of exact reference Cp on a 25 K grid is fitted the way a build fits it
(FitSettings defaults), with or without normal noise at a stated u(Cp), and with the data cut
at a lower temperature and the range of use kept at the top (extrapolation). The fitted Cp,
H − H298 and S − S298 are compared with the reference on a grid between the data points; a
point is covered when |fit − reference| ≤ 2u, u the library's stated standard uncertainty.
"""

from dataclasses import dataclass, replace

import numpy as np

from ..core import chemistry
from ..core.constants import REFERENCE_TEMPERATURE
from ..core.settings import FitSettings
from ..library.document import evaluate_entry
from . import fit_arrays

#: CoolProp fluid: (formula, geometry). The ideal-gas parts of these reference equations rise
#: monotonically below the classical limit up to 2000 K (checked by ``reference``).
FLUIDS = {
    "Nitrogen": ("N2", "linear"), "Oxygen": ("O2", "linear"),
    "CarbonMonoxide": ("CO", "linear"), "Hydrogen": ("H2", "linear"),
    "HydrogenChloride": ("HCl", "linear"), "CarbonDioxide": ("CO2", "linear"),
    "NitrousOxide": ("N2O", "linear"), "CarbonylSulfide": ("OCS", "linear"),
    "SulfurDioxide": ("SO2", "nonlinear"), "HydrogenSulfide": ("H2S", "nonlinear"),
    "Ammonia": ("NH3", "nonlinear"), "Methane": ("CH4", "nonlinear"),
    "Ethane": ("C2H6", "nonlinear"), "Ethylene": ("C2H4", "nonlinear"),
    "Propane": ("C3H8", "nonlinear"), "Propylene": ("C3H6", "nonlinear"),
    "n-Butane": ("C4H10", "nonlinear"), "DimethylEther": ("C2H6O", "nonlinear"),
    "Acetone": ("C3H6O", "nonlinear"), "Benzene": ("C6H6", "nonlinear"),
}
T_LOW, T_HIGH, STEP = 200.0, 2000.0, 25.0


def cp0(fluid: str, t) -> np.ndarray:
    """CoolProp ideal-gas molar Cp [J/(mol K)] at ``t`` [K]."""
    from CoolProp.CoolProp import PropsSI
    return np.array([PropsSI("Cp0molar", "T", float(x), "Dmolar", 1e-6, fluid)
                     for x in np.atleast_1d(t)])


@dataclass(frozen=True)
class Reference:
    """Exact Cp, H − H298 and S − S298 of one fluid on a fine grid [K]."""

    fluid: str
    t: np.ndarray
    cp: np.ndarray
    dh: np.ndarray
    ds: np.ndarray

    def at(self, t):
        """(Cp, H − H298, S − S298) at ``t`` by interpolation on the fine grid."""
        return tuple(np.interp(t, self.t, v) for v in (self.cp, self.dh, self.ds))


def reference(fluid: str, step: float = 1.0) -> Reference:
    """The reference of ``fluid`` on a ``step`` K grid, integrated by Simpson's rule."""
    t = np.arange(T_LOW, T_HIGH + step / 2, step)
    cp = cp0(fluid, t)
    mids = cp0(fluid, t[:-1] + step / 2)
    inc_h = step / 6 * (cp[:-1] + 4 * mids + cp[1:])
    tm = t[:-1] + step / 2
    inc_s = step / 6 * (cp[:-1] / t[:-1] + 4 * mids / tm + cp[1:] / t[1:])
    dh = np.concatenate([[0.0], np.cumsum(inc_h)])
    ds = np.concatenate([[0.0], np.cumsum(inc_s)])
    dh -= np.interp(REFERENCE_TEMPERATURE, t, dh)
    ds -= np.interp(REFERENCE_TEMPERATURE, t, ds)
    return Reference(fluid, t, cp, dh, ds)


def data_grid(t_max: float = T_HIGH) -> np.ndarray:
    return np.unique(np.append(np.arange(T_LOW, t_max + 1e-9, STEP), REFERENCE_TEMPERATURE))


def entry(fit) -> dict:
    """The parts of a library entry that ``evaluate_entry`` reads, from a FitResult."""
    from ..release.document import extrapolated_intervals
    return {"id": "x", "form": fit.form, "breakpoints": list(fit.breakpoints),
            "ranges": [{"t_min": r.t_min, "t_max": r.t_max, "coefficients": r.coefficients}
                       for r in fit.ranges],
            "data_range": {"t_min": fit.data_t_min, "t_max": fit.data_t_max},
            "extrapolated": extrapolated_intervals(fit),
            "uncertainty": {"powers": list(fit.powers), "covariance": fit.covariance,
                            "model_error": list(fit.model_error)}}


def fit_fluid(ref: Reference, *, cut: float = T_HIGH, noise: float = 0.0, seed: int = 0,
              settings: FitSettings = FitSettings()):
    """Fit the reference's table cut at ``cut`` [K] (range of use to T_HIGH), with normal
    relative noise ``noise`` stated as u(Cp) (none stated when 0). Returns the FitResult."""
    formula, geometry = FLUIDS[ref.fluid]
    atoms = chemistry.composition(formula).atoms
    t = data_grid(cut)
    cp = ref.at(t)[0]
    u = None
    if noise:
        cp = cp * (1 + noise * np.random.default_rng(seed).standard_normal(len(t)))
        u = noise * ref.at(t)[0]
    if cut < T_HIGH:
        settings = replace(settings, use_t_max=T_HIGH)
    return fit_arrays(ref.fluid, t, cp, u, 0.0, 200.0, settings, geometry=geometry,
                      atoms=atoms)


def covered(ref: Reference, fit, lo: float, hi: float) -> dict:
    """Per quantity ('Cp', 'H', 'S'): a boolean array, |fit − reference| ≤ 2u at the points
    between ``lo`` and ``hi`` [K] (the data grid and the midpoints between its points)."""
    grid = data_grid()
    t = np.unique(np.concatenate([grid, (grid[1:] + grid[:-1]) / 2]))
    t = t[(t >= lo) & (t <= hi)]
    e = entry(fit)
    ev = evaluate_entry(e, t)
    h298 = evaluate_entry(e, [REFERENCE_TEMPERATURE])["H"][0]
    cp, dh, ds = ref.at(t)
    return {"Cp": np.abs(ev["Cp"] - cp) <= 2 * ev["u_Cp"],
            "H": np.abs(ev["H"] - h298 - dh) <= 2 * ev["u_H"],
            "S": np.abs(ev["S"] - 200.0 - ds) <= 2 * ev["u_S"]}


def spread_ratio(ref: Reference, noise: float, trials: int = 20) -> float:
    """Monte Carlo: the standard deviation of the fitted Cp over ``trials`` noise draws,
    divided by the mean stated u(Cp), averaged over the data grid."""
    t = data_grid()
    values, stated = [], []
    for k in range(trials):
        fit = fit_fluid(ref, noise=noise, seed=1000 + k)
        ev = evaluate_entry(entry(fit), t)
        values.append(ev["Cp"])
        stated.append(ev["u_Cp"])
    return float(np.mean(np.std(values, axis=0, ddof=1) / np.mean(stated, axis=0)))
