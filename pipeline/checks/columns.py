"""Consistency of the H−H298, S and −(G−H298)/T columns with the Cp column and the metadata.

    H(T) − H(298.15) = ∫_{298.15}^{T} Cp dT,    S(T) − S(298.15) = ∫_{298.15}^{T} Cp/T dT
    −(G − H298)/T = S − (H − H298)/T            (the Gibbs energy function, gef)

Where a table gives S and H − H298 beside gef, the identity is checked row by row; else gef
is checked against the integrals of Cp with its constants fitted (S(298.15) through the
table, plus the H offset of a phase above 298.15 K), and at 298.15 K, where gef = S°, against
entropy_298.

The integrals of the table's Cp are taken with a cubic spline through the points
(scipy.interpolate.CubicSpline); the difference from a monotone cubic (PCHIP)
integral is kept as an estimate of the quadrature error and widens the tolerance. The
tolerance of a row is three standard uncertainties of the integral (from the
stated u(Cp), or an inferred relative u when none is stated), plus the
quadrature error and the rounding of the tabulated column.
"""

import numpy as np

from ..core.constants import REFERENCE_TEMPERATURE
from ..core.findings import finding

H_ROUNDING = 2.0     # [J/mol], allowance for tabulated rounding (common practice)
S_ROUNDING = 0.01    # [J/(mol K)]
TABLE_ROUNDING_REL = 1e-4  # relative rounding of tabulated H-H298 and S (common practice)
S298_TOLERANCE = 0.05  # [J/(mol K)], S column vs entropy_298 (common practice)


def _integrals(t, cp):
    """Cumulative ∫Cp dT and ∫Cp/T dT from t[0], spline and trapezoid [J/mol], [J/(mol K)]."""
    from scipy.interpolate import CubicSpline, PchipInterpolator  # here: loaded on first use

    spl = CubicSpline(t, cp)
    spl_t = CubicSpline(t, cp / t)
    ih = np.array([spl.integrate(t[0], x) for x in t])
    is_ = np.array([spl_t.integrate(t[0], x) for x in t])
    # a second, independent interpolant: the spread of the two estimates the quadrature error
    ph, ps = PchipInterpolator(t, cp), PchipInterpolator(t, cp / t)
    th = np.array([ph.integrate(t[0], x) for x in t])
    ts = np.array([ps.integrate(t[0], x) for x in t])
    return ih, is_, np.abs(ih - th), np.abs(is_ - ts), spl, spl_t


def check_columns(table, ctx):
    """CONS-* findings: the H-H298 [J/mol] and S [J/(mol K)] columns of ``table`` against the
    integrals of its Cp, and their values at 298.15 K against zero and entropy_298."""
    data = table.data
    # an increment table's Cp is the derivative of its H - H298 (ingest/increments.py)
    has_h = data.given("dH").sum() >= 2 and "Cp" not in table.meta.derived
    has_s = data.given("S").sum() >= 2
    has_g = data.given("gef").sum() >= 2
    if not (has_h or has_s or has_g):
        return []
    d = table.valid
    t, cp, lines = d["T"], d["Cp"], d["line"]
    if len(t) < 4 or np.any(np.diff(t) <= 0):
        return []
    u = d["u_Cp"]
    u_rel = float(np.median(u / cp)) if np.all(np.isfinite(u)) else \
        ctx.fit.inferred_cp_uncertainty
    ih, is_, eh, es, spl, spl_t = _integrals(t, cp)
    tref = REFERENCE_TEMPERATURE
    covers = t[0] <= tref <= t[-1]
    # integrals from 298.15 K when covered, else from the first row
    if covers:
        ih = ih - float(spl.integrate(t[0], tref))
        is_ = is_ - float(spl_t.integrate(t[0], tref))
    where = table.meta.where
    out = []
    if has_h:
        h = d["dH"]
        m = np.isfinite(h)
        ref = h[m][0] - ih[m][0]
        if covers:
            j = int(np.argmin(np.abs(t[m] - tref)))
            h0 = float(h[m][j] - ih[m][j])  # the column's own value at 298.15 K
            ref = h0
            if abs(h0) > H_ROUNDING + TABLE_ROUNDING_REL * abs(h[m]).max():
                out.append(finding("CONS-H298", f"H-H298 at 298.15 K is {h0:.6g} J/mol",
                                   column="H-H298", seen=f"{h0:.6g}", expected="0", **where))
        dev = h - (ih + ref)
        tol = 3 * u_rel * np.abs(ih) + 2 * eh + TABLE_ROUNDING_REL * np.abs(h) + H_ROUNDING
        bad = m & (np.abs(dev) > tol)
        if bad.any():
            i = int(np.argmax(bad))
            out.append(finding("CONS-H", f"H-H298 = {h[i]:.6g} J/mol at T = {t[i]:.6g} K, but the "
                               f"Cp column integrates to {ih[i] + ref:.6g} J/mol ({int(bad.sum())} "
                               "row(s) part from here on)", column="H-H298", line=int(lines[i]),
                               lines=tuple(int(x) for x in lines[bad]), seen=f"{h[i]:.6g}",
                               expected=f"{ih[i] + ref:.6g} ± {tol[i]:.3g}", **where))
    if has_s:
        s = d["S"]
        m = np.isfinite(s)
        s298 = table.meta.entropy_298
        base = s[m][0] - is_[m][0]
        if covers:
            # the column's own S(298.15) = S_j - ∫_{298.15}^{T_j} Cp/T dT at the nearest row
            j = int(np.argmin(np.abs(t[m] - tref)))
            s0 = float(s[m][j] - is_[m][j])
            base = s0
            if s298 is not None and abs(s0 - s298) > S298_TOLERANCE:
                out.append(finding("CONS-S298", f"the S column gives S(298.15 K) = {s0:.6g} "
                                   f"J/(mol*K) but entropy_298 is {s298:.6g}", column="S",
                                   line=int(lines[m][j]), seen=f"{s0:.6g}",
                                   expected=f"{s298:.6g} ± {S298_TOLERANCE}", **where))
        dev = s - (is_ + base)
        tol = 3 * u_rel * np.abs(is_) + 2 * es + TABLE_ROUNDING_REL * np.abs(s) + S_ROUNDING
        bad = m & (np.abs(dev) > tol)
        if bad.any():
            i = int(np.argmax(bad))
            out.append(finding("CONS-S", f"S = {s[i]:.6g} J/(mol*K) at T = {t[i]:.6g} K, but "
                               f"the column's S(298.15) + the integral of Cp/T gives {is_[i] + base:.6g} "
                               f"({int(bad.sum())} row(s) part from here on)", column="S",
                               line=int(lines[i]), lines=tuple(int(x) for x in lines[bad]),
                               seen=f"{s[i]:.6g}", expected=f"{is_[i] + base:.6g} ± {tol[i]:.3g}",
                               **where))
    if has_g:
        out += _gef(d, ih, is_, covers, u_rel, table.meta)
    return out


def _gef(d, ih, is_, covers, u_rel, meta) -> list:
    """CONS-GEF findings of the −(G−H298)/T column [J/(mol K)]; ``ih`` [J/mol] and ``is_``
    [J/(mol K)] the integrals of Cp from 298.15 K when ``covers``, else from the first row."""
    t, lines = d["T"], d["line"]
    g, s, h = (d[c] for c in ("gef", "S", "dH"))
    m = np.isfinite(g)
    direct = m & np.isfinite(s) & np.isfinite(h)
    out = []
    if direct.sum() >= 2:
        want = s - h / t
        tol = S_ROUNDING + TABLE_ROUNDING_REL * (np.abs(g) + np.abs(s)) + \
            (H_ROUNDING + TABLE_ROUNDING_REL * np.abs(h)) / t
        bad = direct & (np.abs(g - want) > tol)
        what = "S - (H-H298)/T of the same row"
    else:
        # g = b + is_ - (a + ih)/T: b the entropy at the integrals' origin, a the H offset
        y = g[m] - is_[m] + ih[m] / t[m]
        if covers:        # S(298.15) at the row nearest 298.15 K, as for the S column
            coef, a = [float(y[int(np.argmin(np.abs(t[m] - REFERENCE_TEMPERATURE)))])], 0.0
        else:
            coef, *_ = np.linalg.lstsq(np.column_stack([np.ones(m.sum()), -1.0 / t[m]]), y,
                                       rcond=None)
            a = coef[1]
        want = np.full(len(t), np.nan)
        want[m] = coef[0] + is_[m] - (a + ih[m]) / t[m]
        tol = 3 * u_rel * (np.abs(is_) + np.abs(ih) / t) + S_ROUNDING + TABLE_ROUNDING_REL * \
            np.abs(g)
        bad = m & (np.abs(g - want) > tol)
        what = "the integrals of the Cp column"
        s298 = meta.entropy_298
        if covers and s298 is not None and abs(coef[0] - s298) > S298_TOLERANCE:
            out.append(finding("CONS-GEF", f"the -(G-H298)/T column gives S(298.15 K) = "
                               f"{coef[0]:.6g} J/(mol*K) but entropy_298 is {s298:.6g}",
                               column="-(G-H298)/T", seen=f"{coef[0]:.6g}",
                               expected=f"{s298:.6g} ± {S298_TOLERANCE}", **meta.where))
    if bad.any():
        i = int(np.argmax(bad))
        out.append(finding("CONS-GEF", f"-(G-H298)/T = {g[i]:.6g} J/(mol*K) at T = {t[i]:.6g} K, "
                           f"but {what} give {want[i]:.6g} ({int(bad.sum())} row(s) disagree)",
                           column="-(G-H298)/T", line=int(lines[i]),
                           lines=tuple(int(x) for x in lines[bad]), seen=f"{g[i]:.6g}",
                           expected=f"{want[i]:.6g} ± {tol[i]:.3g}", **meta.where))
    return out
