"""Physics checks: equipartition bounds, classical limits and unit-factor mistakes.

A table (or a block of rows) typed in one unit but labelled with another is off
by a recognisable factor: 4.184 (calories as joules), R (Cp/R as Cp), the molar
mass (per gram as per mole) or 1000 (kJ as J). Such a table breaks the physics
bounds of bounds.py; multiplying it by the right factor brings it back inside.
A block of rows shows the factor as a jump in ln Cp between neighbouring rows.
"""

import math

import numpy as np

from ..core import chemistry, phases
from ..core.constants import GAS_CONSTANT as R
from ..core.constants import THERMOCHEMICAL_CALORIE
from ..core.errors import InputError
from ..core.findings import finding
from ..physics import bounds
from .smooth_model import median


def factor_candidates(molar_mass):
    """(name, factor, fix) where the true value = seen value × factor."""
    out = [
        ("cal taken as J", THERMOCHEMICAL_CALORIE,
         "the values look like cal/(mol*K): relabel the column [cal/(mol*K)]"),
        ("J taken as cal", 1.0 / THERMOCHEMICAL_CALORIE,
         "the values look like J/(mol*K): relabel the column [J/(mol*K)]"),
        ("Cp/R taken as Cp", R, "the values look like Cp/R: multiply by R = 8.314462618 J/(mol*K)"),
        ("kJ taken as J", 1000.0, "the values look like kJ/(mol*K): relabel the column [kJ/(mol*K)]"),
        ("J taken as kJ", 1e-3, "the values look like J/(mol*K): relabel the column [J/(mol*K)]"),
    ]
    if molar_mass:
        out += [("per gram taken as per mole", molar_mass,
                 "the values look like J/(g*K): relabel the column [J/(g*K)]"),
                ("per mole taken as per gram", 1.0 / molar_mass,
                 "the values look like J/(mol*K): relabel the column [J/(mol*K)]")]
    return out


def gas_band(geometry, atoms, settings, tight=False):
    """(low, high) plausible Cp [J/(mol K)] of an ideal gas."""
    low = bounds.cp_zero(geometry) * (1 - settings.rotor_band_margin) if tight else \
        bounds.TRANSLATION_CP * (1 - settings.equipartition_tolerance)
    if geometry == "monatomic":
        high = bounds.TRANSLATION_CP + settings.monatomic_excess * R
    else:
        high = bounds.cp_infinity(geometry, atoms) * (1 + settings.classical_margin)
    return low, high


def implausible_cp(geometry, atoms, settings) -> float:
    """Cp [J/(mol K)] above which an ideal-gas value is a mistake, not physics: the classical
    limit times ``implausible_factor`` and at least ``implausible_excess`` R above it."""
    top = bounds.cp_infinity(geometry, atoms)
    return max(top * settings.implausible_factor, top + settings.implausible_excess * R)


def whole_table_factor(cp, geometry, atoms, molar_mass, settings):
    """The factor that brings an ideal-gas table that breaks the bounds back inside them, or
    None. Returns (name, factor, fix, alternatives) — alternatives are other names that also
    fit."""
    return band_factor(cp, gas_band(geometry, atoms, settings),
                       gas_band(geometry, atoms, settings, tight=True), molar_mass)


def band_factor(cp, band, tight, molar_mass, strict=False):
    """The unit factor that brings ``cp`` [J/(mol K)], all outside ``band`` (low, high),
    inside it — preferring one that brings it inside the ``tight`` band, and only such a one
    when ``strict`` — or None. Returns (name, factor, fix, alternatives)."""
    lo, hi = band
    if ((cp >= lo) & (cp <= hi)).all():
        return None
    fits = {False: [], True: []}
    for name, f, fix in factor_candidates(molar_mass):
        with np.errstate(over="ignore"):
            v = cp * f
        for is_tight, (a, b) in ((False, band), (True, tight)):
            if np.all((v >= a) & (v <= b)):
                fits[is_tight].append((name, f, fix))
    chosen = fits[True] or ([] if strict else fits[False])
    if not chosen:
        return None
    best = chosen[0]
    return best[0], best[1], best[2], [c[0] for c in chosen[1:]]


def check_gas_bounds(table, ctx):
    """Equipartition (error), classical limit (warning), or a whole-table unit factor (error)."""
    settings = ctx.checks
    meta = table.meta
    if meta.phase != "g" or not meta.geometry or not meta.atoms:
        return []
    data = table.data
    ok = np.isfinite(data["Cp"]) & (data["Cp"] > 0)
    cp = data["Cp"][ok]
    lines = data["line"][ok]
    if not len(cp):
        return []
    hit = whole_table_factor(cp, meta.geometry, meta.atoms, meta.molar_mass, settings)
    if hit:
        name, f, fix, others = hit
        also = f"; also consistent with: {', '.join(others)}" if others else ""
        return [finding("UNIT-FACTOR", f"whole table off by a factor {f:.6g} ({name}): Cp "
                        f"{cp.min():.4g}-{cp.max():.4g} J/(mol*K) breaks the physical bounds, "
                        f"Cp x {f:.6g} = {cp.min() * f:.4g}-{cp.max() * f:.4g} fits them{also}",
                        column="Cp", line=int(lines[0]), lines=tuple(int(x) for x in lines),
                        seen=f"{cp.min():.4g}-{cp.max():.4g}",
                        expected=f"{cp.min() * f:.4g}-{cp.max() * f:.4g}", fix=fix,
                        **table.meta.where)]
    out = []
    floor = bounds.TRANSLATION_CP * (1 - settings.equipartition_tolerance)
    low = cp < floor
    if low.any():
        cv = ("; Cv + R clears it: does the column hold Cv (Cp = Cv + R)?"
              if np.all(cp + R >= floor) else "")
        out.append(finding("CP-BELOW-EQUIPARTITION", f"{int(low.sum())} row(s) below 5/2 R = "
                           f"{bounds.TRANSLATION_CP:.4f} J/(mol*K), the translational minimum of "
                           f"any ideal gas{cv}", column="Cp", line=int(lines[low][0]),
                           lines=tuple(int(x) for x in lines[low]),
                           seen=f"{cp[low].min():.6g}", expected=f">= {floor:.6g}",
                           **table.meta.where))
    _, high = gas_band(meta.geometry, meta.atoms, settings)
    ceiling = implausible_cp(meta.geometry, meta.atoms, settings)
    wild = cp > ceiling
    if wild.any():
        out.append(finding("CP-IMPLAUSIBLE", f"{int(wild.sum())} row(s) above {ceiling:.4g} "
                           f"J/(mol*K), more than any ideal gas of {meta.atoms} atom(s) can "
                           "reach (the classical limit with room for anharmonic and electronic "
                           "contributions)", column="Cp", line=int(lines[wild][0]),
                           lines=tuple(int(x) for x in lines[wild]),
                           seen=f"{cp[wild].max():.6g}", expected=f"<= {ceiling:.6g}",
                           **table.meta.where))
    if meta.geometry == "monatomic":
        top = np.full(len(cp), high)
        what = (f"monatomic gas above 5/2 R by more than {settings.monatomic_excess:g} R "
                "(electronic states rarely add that much)")
    else:
        top = bounds.cp_ceiling(meta.geometry, meta.atoms, data["T"][ok])
        what = ("above the classical rigid-rotor/harmonic-oscillator limit Cp(inf) = "
                f"{bounds.cp_infinity(meta.geometry, meta.atoms):.4g} J/(mol*K) by more than "
                "anharmonicity and an excited electronic level can add at that temperature")
    above = (cp > top) & ~wild
    if above.any():
        k = int(np.argmax(np.where(above, cp - top, -np.inf)))
        out.append(finding("CP-ABOVE-CLASSICAL", f"{int(above.sum())} row(s) {what}", column="Cp",
                           line=int(lines[above][0]), lines=tuple(int(x) for x in lines[above]),
                           seen=f"{cp[k]:.6g}", expected=f"<= {top[k]:.6g}",
                           **table.meta.where))
    return out


def check_condensed_bounds(table, ctx):
    """Condensed phases: a whole table off by a unit factor (4.184, 1000, R, per gram) is an
    error, judged against the Neumann–Kopp band at and above 250 K (bounds.condensed_band);
    a crystal far above 3R per atom (more than anharmonicity and vacancies give near melting,
    common practice) is a warning, and a liquid above the band."""
    settings = ctx.checks
    meta = table.meta
    if meta.phase == "g" or not meta.atoms:
        return []
    try:
        elements = chemistry.composition(meta.formula).elements
    except InputError:
        return []
    data = table.data
    t, cp, lines = (data[c] for c in ("T", "Cp", "line"))
    ok = np.isfinite(cp) & (cp > 0) & np.isfinite(t)
    warm = ok & (t >= bounds.CONDENSED_BAND_FROM)
    if warm.any():
        tw = t[warm]
        hit = band_factor(cp[warm], bounds.condensed_band(elements, tw),
                          bounds.condensed_band(elements, tw, tight=True), meta.molar_mass,
                          strict=True)
        if hit:
            name, f, fix, others = hit
            nk = float(bounds.neumann_kopp(elements, tw[0]))
            also = f"; also consistent with: {', '.join(others)}" if others else ""
            c = cp[warm]
            return [finding("UNIT-FACTOR", f"whole table off by a factor {f:.6g} ({name}): Cp "
                            f"{c.min():.4g}-{c.max():.4g} J/(mol*K) above 250 K is far from the "
                            f"Neumann-Kopp estimate of {meta.formula} ({nk:.4g} J/(mol*K) at "
                            f"{tw[0]:.6g} K), Cp x "
                            f"{f:.6g} = {c.min() * f:.4g}-{c.max() * f:.4g} fits it{also}",
                            column="Cp", line=int(lines[warm][0]),
                            lines=tuple(int(x) for x in lines[warm]),
                            seen=f"{c.min():.4g}-{c.max():.4g}",
                            expected=f"{c.min() * f:.4g}-{c.max() * f:.4g}", fix=fix,
                            **meta.where)]
    if phases.is_crystal(meta.phase):
        limit = settings.dulong_petit_factor * bounds.DULONG_PETIT_PER_ATOM * meta.atoms
        what = f"{settings.dulong_petit_factor:g} x 3R per atom = {limit:.4g} J/(mol*K)"
    else:
        limit = np.where(ok, bounds.condensed_band(elements, np.where(ok, t, 1.0))[1], np.inf)
        what = (f"{bounds.CONDENSED_HIGH:g} x the Neumann-Kopp sum at their temperature (more "
                "than liquids reach)")
    above = ok & (cp > limit)
    if not above.any():
        return []
    return [finding("CP-ABOVE-DULONG-PETIT", f"{int(above.sum())} row(s) above {what}",
                    column="Cp", line=int(lines[above][0]),
                    lines=tuple(int(x) for x in lines[above]),
                    seen=f"{cp[above].max():.6g}",
                    expected=f"<= {float(np.min(np.broadcast_to(limit, cp.shape)[above])):.6g}",
                    **meta.where)]


def _no_step_near(size, tol, logs) -> bool:
    """Whether no step of ``size`` (|Δ ln Cp|) can lie within ``tol`` of any of ``logs`` (the
    candidate factors' logarithms, all > 0): the largest step and the tolerance stay below
    the smallest (with a relative margin of 1e-9 for round-off)."""
    return bool(len(logs)) and (size.max() + tol) * (1.0 + 1e-9) < logs.min()


def check_unit_blocks(table, ctx):
    """A block of rows off by a recognisable factor, seen as jumps in ln Cp."""
    settings = ctx.checks
    d = table.valid
    if len(d["T"]) < 4:
        return []
    cp, lines = d["Cp"], d["line"]
    lc = np.log(cp)
    d = lc[1:] - lc[:-1]
    cands = [(n, f, fix) for n, f, fix in factor_candidates(table.meta.molar_mass) if f > 1]
    size = np.abs(d)
    tol = settings.factor_tolerance + 2.0 * median(size)
    logs = np.log([f for _, f, _ in cands])
    if _no_step_near(size, tol, logs):
        return []                       # the common case, done
    level = np.zeros(len(cp))
    off = np.abs(size[:, None] - logs[None, :])          # (steps, candidates)
    nearest = np.argmin(off, axis=1)
    hits = np.nonzero(off[np.arange(len(d)), nearest] < tol)[0]
    if not len(hits):
        return []
    jumps = [(int(i), math.copysign(1.0, d[i]), cands[nearest[i]]) for i in hits]
    for i, sign, (name, f, fix) in jumps:
        level[i + 1:] += sign * math.log(f)
    # the right level is the most common one; ties go to the level inside the physics band
    levels, counts = np.unique(np.round(level, 6), return_counts=True)
    if len(levels) < 2:
        return []
    right = levels[np.argmax(counts)]
    if table.meta.phase == "g" and table.meta.geometry and table.meta.atoms:
        lo, hi = gas_band(table.meta.geometry, table.meta.atoms, settings)
        inside = [lv for lv in levels if np.all((cp[np.isclose(level, lv)] >= lo)
                                                & (cp[np.isclose(level, lv)] <= hi))]
        if len(inside) == 1:
            right = inside[0]
    out = []
    wrong = ~np.isclose(level, right)
    # report each contiguous wrong run
    idx = np.nonzero(wrong)[0]
    runs = np.split(idx, np.nonzero(np.diff(idx) > 1)[0] + 1) if len(idx) else []
    for run in runs:
        f = math.exp(right - level[run[0]])
        name, fix = _name_of(f, cands)
        block = lines[run]
        out.append(finding("UNIT-BLOCK", f"lines {int(block[0])}-{int(block[-1])} are off by a "
                           f"factor {f:.6g} ({name}) from the rows around them",
                           column="Cp", line=int(block[0]), lines=tuple(int(x) for x in block),
                           seen=f"{cp[run[0]]:.6g}", expected=f"{cp[run[0]] * f:.6g}",
                           fix=f"multiply lines {int(block[0])}-{int(block[-1])} by {f:.6g} "
                               f"or correct their unit ({fix.split(': ', 1)[-1]})",
                           **table.meta.where))
    return out


def _name_of(f, cands):
    inv = f < 1
    g = 1 / f if inv else f
    best = min(cands, key=lambda c: abs(math.log(c[1] / g)))
    return (best[0] + (" (reversed)" if inv else ""), best[2])
