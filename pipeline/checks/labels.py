"""Labelling mistakes that leave an ideal-gas table looking plausible: Cv under a Cp label,
degrees Celsius under a kelvin label, per-mass values with the wrong formula.

Each is caught by physics, not by thresholds fitted to data, and named with its likely cause:

* rotor floor: where rotation is fully excited (rotors.py), Cp ≥ Cp(0) = 7/2 R (linear) or
  4 R (nonlinear); Cv = Cp − R of any gas whose vibrations are still mostly frozen falls
  below it, and so do per-mass values multiplied by too small a molar mass;
* frozen vibrations at the low end: above Cp(0), Cp − Cp(0) of a correctly labelled table is
  a sum of Einstein functions of at most 3N − 5 or 3N − 6 modes (vibrations; electronic
  levels add little at the low end); fitted by non-negative least squares with that mode
  count, a Cv table misfits where Cv + R fits;
* entropy floor: S°(T) = S°(298.15) − ∫_T^298.15 Cp/T dT must stay above what translation
  (Sackur–Tetrode) and rotation already give; a table whose temperatures are 273.15 K too
  low integrates too much entropy below 298.15 K and breaks it, and T + 273.15 mends it.
"""

import numpy as np

from ..core import chemistry, units
from ..core.constants import GAS_CONSTANT as R
from ..core.constants import REFERENCE_TEMPERATURE
from ..core.findings import finding
from ..core.gridcache import by_grid
from ..physics import bounds, rotors
from ..physics.statmech import einstein
from .smooth_model import nnls

CELSIUS = 273.15  # [K], 0 °C
#: the low end of a table tested for frozen vibrations: its rows up to this temperature [K]
LOW_END = 1000.0
#: misfit [R] a correct table may show beside its noise (electronic levels, anharmonicity)
MODEL_ALLOWANCE = 0.02
#: characteristic vibrational temperatures of the Einstein basis [K]
THETA = np.geomspace(40.0, 20000.0, 40)


def _applies(table):
    meta = table.meta
    return meta.phase == "g" and meta.geometry in ("linear", "nonlinear") and bool(meta.atoms)


def _elements(meta):
    return {symbol for symbol, _ in chemistry.composition(meta.formula).elements}


def check_rotor_floor(table, ctx):
    """CP-BELOW-ROTOR-FLOOR / LABEL-CV-AS-CP / LABEL-MOLAR-MASS: Cp below 7/2 R or 4 R where
    rotation is fully excited, named by its likely cause."""
    if not _applies(table):
        return []
    meta, settings = table.meta, ctx.checks
    d = table.valid
    t, cp, lines = d["T"], d["Cp"], d["line"]
    below_translation = np.any(cp < bounds.TRANSLATION_CP * (1 - settings.equipartition_tolerance))
    if not len(t) or below_translation and not _per_mass(meta):
        return []             # below 5/2 R: check_gas_bounds names it (equipartition, factor)
    start = rotors.excited_from(meta.formula, _elements(meta))
    floor = bounds.cp_zero(meta.geometry) * (1 - settings.rotor_floor_margin)
    excited = t >= start
    low = excited & (cp < floor)
    low &= ~_isolated(low)          # a single slipped row is the smoothness check's to name
    if not low.any():
        return []
    k = int(np.argmin(np.where(low, cp, np.inf)))
    shape = "7/2 R" if meta.geometry == "linear" else "4 R"
    base = (f"{int(low.sum())} row(s) below {shape} = {bounds.cp_zero(meta.geometry):.4f} "
            f"J/(mol*K), the least Cp of a {meta.geometry} ideal gas whose rotation is "
            f"excited (T >= {start:.4g} K)")
    where = dict(column="Cp", line=int(lines[low][0]), lines=tuple(int(x) for x in lines[low]),
                 seen=f"{cp[k]:.6g} at {t[k]:.6g} K", expected=f">= {floor:.6g}", **table.meta.where)
    if _per_mass(meta):
        need = meta.molar_mass * float(np.max(floor / cp[low]))
        return [finding("LABEL-MOLAR-MASS", f"{base}: the column is per mass and the formula "
                        f"{meta.formula} gives {meta.molar_mass:.4f} g/mol, but the values need "
                        f"a molar mass of at least {need:.4f} g/mol", fix="check the formula "
                        "(and the species) of this per-mass table in source.json", **where)]
    if np.all(cp[excited] + R >= floor):
        return [finding("LABEL-CV-AS-CP", f"{base}; Cv + R (Cp = Cv + R for an ideal gas) "
                        "fits the floor and the shape of a rigid rotor with its vibrations, so "
                        "the column probably holds Cv", fix="add R = 8.314462618 J/(mol*K) to "
                        "every value, or correct the column at its source", **where)]
    other = "linear" if meta.geometry == "nonlinear" else None
    hint = (" (the values would suit a linear molecule: is the geometry right?)"
            if other and np.all(cp[excited] >= bounds.cp_zero(other) * (1 - settings.rotor_floor_margin))
            else "")
    return [finding("CP-BELOW-ROTOR-FLOOR", base + hint, **where)]


def check_frozen_vibrations(table, ctx):
    """LABEL-CV-AS-CP at the low end: Cp − Cp(0) that no set of the molecule's vibrations
    can give, where Cp − Cp(0) + R can; LABEL-MOLAR-MASS when a per-mass table's molar values
    are no possible gas of its formula."""
    if not _applies(table):
        return []
    meta = table.meta
    d = table.valid
    low = d["T"] <= LOW_END
    t, cp, lines, u = d["T"][low], d["Cp"][low], d["line"][low], d["u_Cp"][low]
    keep = t >= rotors.excited_from(meta.formula, _elements(meta))
    t, cp, lines = t[keep], cp[keep], lines[keep]
    if len(t) < 5 or t.min() > 0.6 * LOW_END:
        return []
    modes = bounds.vibrational_modes(meta.geometry, meta.atoms)
    noise = _noise(u[keep], cp)
    y = cp / R - bounds.cp_zero(meta.geometry) / R
    per_mass = _per_mass(meta)
    passes = max(3.0 * noise / R, MODEL_ALLOWANCE) if per_mass else 3.0 * noise / R
    if _misfit_bound(t, y, modes) + BOUND_MARGIN * np.abs(y).max() <= passes:
        return []                       # the misfit is below it too: the common case, done
    given = _misfit(t, y, modes)
    if per_mass:
        if given <= passes:
            return []
        return [finding("LABEL-MOLAR-MASS", f"the per-mass values times the molar mass of "
                        f"{meta.formula} ({meta.molar_mass:.4f} g/mol) are no possible Cp of a "
                        f"{meta.geometry} molecule of {meta.atoms} atoms: {modes} vibration(s) "
                        f"above Cp(0) misfit them by {given * R:.3g} J/(mol*K) at the low end "
                        f"({t.min():.6g}-{t.max():.6g} K)", column="Cp", line=int(lines[0]),
                        lines=tuple(int(x) for x in lines), seen=f"misfit {given * R:.3g}",
                        expected=f"<= {max(3 * noise, MODEL_ALLOWANCE * R):.3g} J/(mol*K)",
                        fix="check the formula (and the species) of this per-mass table in "
                            "source.json", **table.meta.where)]
    if given <= passes:
        return []
    as_cv = _misfit(t, cp / R + 1.0 - bounds.cp_zero(meta.geometry) / R, modes)
    if as_cv * 2.0 >= given:
        return []
    return [finding("LABEL-CV-AS-CP", f"the low end of the table ({t.min():.6g}-{t.max():.6g} "
                    f"K) is not what {modes} vibration(s) of a {meta.geometry} molecule can give "
                    f"above Cp(0) = {bounds.cp_zero(meta.geometry):.4f} J/(mol*K) (misfit "
                    f"{given * R:.3g} J/(mol*K)); Cv + R fits it (misfit {as_cv * R:.3g}), so "
                    "the column probably holds Cv", column="Cp", line=int(lines[0]),
                    lines=tuple(int(x) for x in lines), seen=f"misfit {given * R:.3g}",
                    expected=f"<= {3 * noise:.3g} J/(mol*K)", fix="add R = 8.314462618 "
                    "J/(mol*K) to every value, or correct the column at its source",
                    **table.meta.where)]


def check_entropy_floor(table, ctx):
    """LABEL-CELSIUS-AS-KELVIN / S-BELOW-FLOOR: S°(T) below 298.15 K, from entropy_298 and
    the table's Cp, below what translation and rotation alone give."""
    meta = table.meta
    if meta.phase != "g" or not meta.geometry or not meta.molar_mass or \
            meta.entropy_298 is None:
        return []
    d = table.valid
    t, cp, lines = d["T"], d["Cp"], d["line"]
    short = _entropy_shortfall(t, cp, meta)
    if short is None or short[0] <= ctx.checks.entropy_floor_margin:
        return []
    gap, i, s_at, s_floor = short
    where = dict(column="T", line=int(lines[i]), seen=f"S({t[i]:.6g} K) = {s_at:.2f}",
                 expected=f">= {s_floor:.2f} J/(mol*K)", **table.meta.where)
    base = (f"S°({t[i]:.6g} K) = entropy_298 − ∫Cp/T dT = {s_at:.2f} J/(mol*K) is "
            f"{gap:.2f} below the {s_floor:.2f} that translation (Sackur–Tetrode) and rotation "
            "alone give at that temperature")
    shifted = _entropy_shortfall(t + CELSIUS, cp, meta)
    if shifted is None or shifted[0] <= ctx.checks.entropy_floor_margin:
        return [finding("LABEL-CELSIUS-AS-KELVIN", f"{base}; read as degrees Celsius the "
                        f"table spans {t.min() + CELSIUS:.6g}-{t.max() + CELSIUS:.6g} K and is "
                        "consistent, so the T column probably holds degrees Celsius",
                        fix="relabel the column T [degC] (or map it in source.json)", **where)]
    return [finding("S-BELOW-FLOOR", f"{base}: Cp is too high at the low end, or "
                    "entropy_298 too low", **where)]


def _entropy_shortfall(t, cp, meta):
    """(largest shortfall, its row, S there, floor there) of S°(T) below its translational
    and rotational floor at the rows below 298.15 K, or None without such rows."""
    below = t < REFERENCE_TEMPERATURE
    if not below.any() or t.max() < REFERENCE_TEMPERATURE:
        return None
    grid = np.append(t[below], REFERENCE_TEMPERATURE)
    cp_grid = np.interp(grid, t, cp)
    # ∫ Cp d ln T from each row up to 298.15 K (trapezoids in ln T)
    lg = np.log(grid)
    steps = (lg[1:] - lg[:-1]) * (cp_grid[1:] + cp_grid[:-1]) / 2
    s = meta.entropy_298 - steps[::-1].cumsum()[::-1]
    theta_mean, _ = rotors.rotational_temperature(meta.formula, _elements(meta))
    tb = t[below]
    floor = rotors.translational_entropy(meta.molar_mass, tb) + \
        rotors.rotational_entropy_floor(meta.geometry, theta_mean, tb)
    ok = tb >= rotors.excited_from(meta.formula, _elements(meta))  # the high-T rotor form holds
    if not ok.any():
        return None
    gap = np.where(ok, floor - s, -np.inf)
    i = int(gap.argmax())
    return float(gap[i]), int(below.nonzero()[0][i]), float(s[i]), float(floor[i])


def _isolated(mask):
    """Rows of ``mask`` (rows sorted by T) whose neighbours are all outside it."""
    before = np.concatenate(([False], mask[:-1]))
    after = np.concatenate((mask[1:], [False]))
    return mask & ~before & ~after & (len(mask) > 1)


def _per_mass(meta) -> bool:
    """True when the file gave Cp per mass (its unit as read, recorded by the reader)."""
    return any(c["quantity"] == "Cp" and units.check_unit(c["unit"], "heat_capacity") == "mass"
               for c in meta.reading.get("columns", ()))


def _noise(u, cp) -> float:
    """The scale of the data's scatter [J/(mol K)]: the stated u(Cp), else 0.1 % of Cp
    (the usual precision of tabulated heat capacities, common practice)."""
    u = u[np.isfinite(u)]
    return float(np.sqrt((u ** 2).sum() / len(u))) if len(u) else \
        float(1e-3 * np.sqrt((cp ** 2).sum() / len(cp)))


#: the weight of the row that holds the sum of the vibrations' weights
SUM_WEIGHT = 1e3


@by_grid
def _misfit_design(t, every=1):
    """E(θ_j/T) of every ``every``-th θ of THETA at ``t`` [K], and the same with the slack
    column and the weighted sum row below (made once per grid)."""
    theta = THETA[::every]
    a = einstein(theta[None, :] / t[:, None])
    return a, np.vstack([np.hstack([a, np.zeros((len(t), 1))]),
                         SUM_WEIGHT * np.ones((1, len(theta) + 1))])


def _sum_bounded(big, y, modes):
    """(weights, the slack last; residual norm) of the NNLS fit of ``y`` by the columns of
    ``big`` (a ``_misfit_design``), their sum held to at most ``modes``."""
    return nnls(big, np.append(y, SUM_WEIGHT * modes), maxiter=50 * big.shape[1])


def _misfit(t, y, modes) -> float:
    """RMS misfit [R] of y(T) by Σ w_j E(θ_j/T), w ≥ 0, Σ w ≤ ``modes`` (NNLS, the sum held
    by a slack variable on a heavily weighted row)."""
    a, big = _misfit_design(t)
    w, _ = _sum_bounded(big, y, modes)
    return float(np.sqrt(((a @ w[:-1] - y) ** 2).sum() / len(y)))


#: how far below the threshold ``_misfit_bound`` must be to stand for the misfit, relative to
#: the largest |y| (the scale of both residuals' round-off, which is far smaller; the bound
#: is never above that scale, the residual of all weights zero)
BOUND_MARGIN = 1e-6


def _misfit_bound(t, y, modes) -> float:
    """An upper bound [R] of ``_misfit(t, y, modes)`` at half its cost: the rms residual of
    the same problem on every other θ of THETA, its weighted sum row included. A solution of
    it is one of the whole problem (the other weights zero), whose optimum, and the data's
    share of that optimum's residual, can only be smaller [the least-squares objective over
    a larger set of columns]."""
    _, rnorm = _sum_bounded(_misfit_design(t, 2)[1], y, modes)
    return float(rnorm / np.sqrt(len(y)))
