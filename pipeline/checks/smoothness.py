"""Smoothness checks: single-point slips, jittery runs, scatter beyond the stated u(Cp).

Uses the physically shaped smooth model of smooth.py. A single-point outlier is a
warning and the row is left out of the fit (recorded in the provenance); three or
more outliers within a short run of rows are reported together as jitter.
"""

import numpy as np

from ..core import units
from ..core.findings import finding
from . import smooth_model as smooth

JITTER_RUN, JITTER_MIN = smooth.RUN_ROWS, smooth.RUN_MIN


def sorted_valid(table):
    """(t [K], cp [J/(mol K)], u or None, lines) sorted by T, only finite positive values."""
    d = table.valid
    u = d["u_Cp"]
    return d["T"], d["Cp"], (u if np.isfinite(u).all() else None), \
        d["line"]


def check_smoothness(table, ctx):
    """SMOOTH-OUTLIER, SMOOTH-JITTER and SMOOTH-SCATTER findings of ``table`` from the robust
    smooth model of its Cp(T) (smooth_model.py)."""
    s = ctx.checks
    t, cp, u, lines = sorted_valid(table)
    if len(t) < 8 or (t[1:] - t[:-1] <= 0).any():
        return []
    found, sigma = smooth.find_outliers(t, cp, sigmas=s.outlier_sigmas, floor=s.outlier_floor)
    where = dict(table.meta.where, column="Cp")
    out = []
    idx = sorted(i for i, _, _ in found)
    clusters, used = [], set()
    for k, i in enumerate(idx):
        run = [j for j in idx[k:] if j - i < JITTER_RUN]
        if len(run) >= JITTER_MIN and not used.intersection(run):
            clusters.append(run)
            used.update(run)
    for run in clusters:
        ls = tuple(int(lines[j]) for j in run)
        out.append(finding("SMOOTH-JITTER", f"{len(run)} rows between lines {ls[0]} and {ls[-1]} "
                           "scatter about the smooth curve far beyond the rest of the table; "
                           "left out of the fit", line=ls[0], lines=ls,
                           seen=", ".join(f"{cp[j]:.6g}" for j in run), **where))
    raw_unit = raw_cp_unit(table)
    for i, expected, rel in found:
        if i in used:
            continue
        in_file = ""
        if raw_unit:
            seen_raw, exp_raw = units.from_si([cp[i], expected], raw_unit, "heat_capacity",
                                              table.meta.molar_mass)
            in_file = f" (in the file's unit: {seen_raw:.6g}, expected {exp_raw:.6g} {raw_unit})"
        out.append(finding("SMOOTH-OUTLIER", f"Cp = {cp[i]:.6g} J/(mol*K) at T = {t[i]:.6g} K is "
                           f"{100 * rel:+.2f} % off the smooth curve through its neighbours"
                           f"{in_file}; left out of the fit", line=int(lines[i]),
                           seen=f"{cp[i]:.6g}", expected=f"{expected:.6g}", **where))
    if u is not None and len(t) >= 8:
        stated = float(np.median(u / cp))
        if sigma > 3.0 * stated:
            out.append(finding("SMOOTH-SCATTER", f"rows scatter by {100 * sigma:.3g} % about the "
                               f"smooth curve, more than 3x the stated u(Cp) of "
                               f"{100 * stated:.3g} %", line=int(lines[0]),
                               seen=f"{100 * sigma:.3g} %", expected=f"<= {300 * stated:.3g} %",
                               **where))
    return out


def raw_cp_unit(table):
    """The unit written in the Cp column header, or None."""
    for cell in table.meta.columns:
        name, _, rest = cell.partition("[")
        if name.strip() == "Cp" and rest.endswith("]"):
            return rest[:-1].strip()
    return None


#: findings whose rows are left out of the fit
EXCLUDING = ("SMOOTH-OUTLIER", "SMOOTH-JITTER")
