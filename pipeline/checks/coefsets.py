"""Audit of published coefficient sets (tables whose ``meta.published`` is set).

The physics, smoothness and reconcile checks reach a set through its evaluated table; these
checks read the coefficients themselves:

* ``check_set_ranges``: ranges that overlap or leave a gap (SET-OVERLAP, SET-GAP), and a set
  that does not hold 298.15 K, where its H and S are anchored (SET-NO-298 within the allowed
  anchor extension, ANCHOR-OUT-OF-REACH beyond it);
* ``check_set_steps``: at every breakpoint, the step of Cp, H and S between the two ranges,
  absolute and relative to its scale (Cp; R T; R), against the stated thresholds (SET-STEP)
  and the strict ones of programs that load a reaction mechanism (SET-STEP-STRICT), and the
  step of dCp/dT relative to Cp/T (SET-KINK).

A set the build is asked to repair (settings.Settings.repairs) keeps its SET-STEP findings as
warnings, each saying so: the fit stage refits it into a continuous set.
"""

from dataclasses import replace

import numpy as np

from ..core import constants
from ..core.constants import GAS_CONSTANT as R
from ..core.findings import ERROR, WARNING, finding
from ..core.records import Table
from ..core.settings import Settings
from ..physics.forms import FORMS, evaluate_ranges

#: relative tolerance [-] within which two range ends count as the same breakpoint
JOIN_TOLERANCE = 1e-9


def check_set_ranges(table: Table, ctx: Settings):
    """SET-OVERLAP, SET-GAP, SET-NO-298 / ANCHOR-OUT-OF-REACH of a published set."""
    published = table.meta.published
    if published is None:
        return []
    meta, out = table.meta, []
    ordered = published.ordered
    for lo, hi in zip(ordered, ordered[1:]):
        end, start = lo[1], hi[0]
        where = dict(source=meta.source.id, file=meta.file, line=hi[3],
                     lines=(lo[3], hi[3]), column="T_min")
        if start > end * (1 + JOIN_TOLERANCE):
            out.append(finding("SET-GAP", f"{meta.species_id}: the range on line {hi[3]} starts "
                               f"at {start:g} K, {start - end:g} K above the end of the range "
                               f"on line {lo[3]}", seen=f"{start:g} K",
                               expected=f"{end:g} K", **where))
        elif start < end * (1 - JOIN_TOLERANCE):
            out.append(finding("SET-OVERLAP", f"{meta.species_id}: the range on line {hi[3]} "
                               f"starts at {start:g} K, inside the range on line {lo[3]} "
                               f"(up to {end:g} K)", seen=f"{start:g} K",
                               expected=f"{end:g} K", **where))
    tref = constants.REFERENCE_TEMPERATURE
    t_lo, t_hi = ordered[0][0], max(r[1] for r in ordered)
    if t_lo <= tref <= t_hi:
        return out
    where = dict(source=meta.source.id, file=meta.file, line=ordered[0][3], column="T_min",
                 seen=f"{t_lo:g}-{t_hi:g} K", expected="a range holding 298.15 K")
    distance = t_lo - tref if t_lo > tref else float("inf")
    if distance <= ctx.fit.max_anchor_extension:
        out.append(finding("SET-NO-298", f"{meta.species_id}: the set starts at {t_lo:g} K; "
                           f"its H(298.15 K) and S° are read from the lowest range "
                           f"{distance:.4g} K beyond its end", **where))
    else:
        out.append(finding("ANCHOR-OUT-OF-REACH", f"{meta.species_id}: the set covers "
                           f"{t_lo:g}-{t_hi:g} K, too far from 298.15 K to read its ΔfH° and "
                           "S° there", fix="give the set's range down to 298.15 K", **where))
    return out


def steps(published) -> list:
    """One dict per breakpoint of a set whose ranges meet: temperature, the two lines, and
    for Cp, H, S and dCp/dT the values below and above and the scale a step is measured in."""
    form = FORMS[published.form]
    ordered = published.ordered
    out = []
    for lo, hi in zip(ordered, ordered[1:]):
        t = lo[1]
        if abs(hi[0] - t) > JOIN_TOLERANCE * t:
            continue                       # a gap or an overlap: check_set_ranges reports it
        below = evaluate_ranges([(0.0, np.inf, lo[2])], [t], form)
        above = evaluate_ranges([(0.0, np.inf, hi[2])], [t], form)
        cp = 0.5 * (abs(below["Cp"][0]) + abs(above["Cp"][0]))
        slopes = [float(form.dcp(form.unpack(r[2])[0], t)) for r in (lo, hi)]
        out.append({"t": t, "lines": (lo[3], hi[3]), "quantities": {
            "Cp": (float(below["Cp"][0]), float(above["Cp"][0]), cp, "J/(mol*K)"),
            "H": (float(below["H"][0]), float(above["H"][0]), R * t, "J/mol"),
            "S": (float(below["S"][0]), float(above["S"][0]), R, "J/(mol*K)"),
            "dCp/dT": (slopes[0], slopes[1], cp / t, "J/(mol*K^2)")}})
    return out


def check_set_steps(table: Table, ctx: Settings):
    """SET-STEP, SET-STEP-STRICT and SET-KINK at every breakpoint of a published set."""
    published = table.meta.published
    if published is None:
        return []
    meta, c = table.meta, ctx.checks
    absolute = {"Cp": c.set_step_cp_abs, "H": c.set_step_h_abs, "S": c.set_step_s_abs}
    out = []
    for joint in steps(published):
        t, (line_lo, line_hi) = joint["t"], joint["lines"]
        for name, (below, above, scale, unit) in joint["quantities"].items():
            step = above - below
            rel = abs(step) / scale if scale > 0 else float("inf")
            what = "Cp/T" if name == "dCp/dT" else {"Cp": "Cp", "H": "R T", "S": "R"}[name]
            text = (f"{meta.species_id}: {name} steps by {step:+.4g} {unit} ({rel:.3g} of "
                    f"{what}) at {t:g} K between the ranges on lines {line_lo} and {line_hi}")
            where = dict(source=meta.source.id, file=meta.file, line=line_hi,
                         lines=(line_lo, line_hi), column=name, seen=f"{rel:.3g}")
            if name == "dCp/dT":
                if rel > c.set_kink_rel:
                    out.append(finding("SET-KINK", text, expected=f"<= {c.set_kink_rel:g}",
                                       **where))
                continue
            if rel > c.set_step_rel and abs(step) > absolute[name]:
                out.append(finding("SET-STEP", text, expected=f"<= {c.set_step_rel:g} or "
                                   f"<= {absolute[name]:g} {unit}", **where))
            elif rel > c.set_step_rel * c.set_strict_factor and \
                    abs(step) > absolute[name] * c.set_strict_factor:
                out.append(finding("SET-STEP-STRICT", text, expected=f"<= "
                                   f"{c.set_step_rel * c.set_strict_factor:g} or <= "
                                   f"{absolute[name] * c.set_strict_factor:g} {unit}", **where))
    if ctx.repairs(meta):
        out = [replace(f, severity=WARNING if f.severity == ERROR else f.severity,
                       message=f.message + "; the set is repaired",
                       fix="none needed: the fit stage refits the set (its report page shows "
                           "both)") for f in out]
    return out

