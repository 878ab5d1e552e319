"""The acceptance rule of a fitted Cp: when is the misfit more than the data's uncertainty
explains?

Stated u(Cp) (rule "stated-u"): two tests at the false-rejection rate ``accept_alpha`` each,
so that an honest table, whose errors are normal with the stated standard uncertainty, is
rejected with probability at most about 2 · alpha:

* χ² test: χ² = Σ ((P − Cp)/u)² over the data rows against the χ² distribution with
  ν = n − q degrees of freedom (q the free coefficients); rejected when P(χ²_ν ≥ χ²) < alpha;
* per-point bound, corrected for the number of points (Šidák): rejected when any
  |P − Cp|/u exceeds z_n with 2 (1 − Φ(z_n)) = 1 − (1 − alpha)^(1/n).

The χ² test catches a form or a number of ranges that cannot follow the data (many points a
little off); the per-point bound catches a defect left in (one point far off). Residuals of
a least-squares fit scatter a little less than the data (by the leverage), so both tests are
conservative.

No stated u(Cp) (rule "threshold"): no probability can be attached; a point off by more than
``accept_cp_max_rel`` (relative) rejects the fit, as before.

References: JCGM 100:2008 (GUM) on standard uncertainty; Z. Šidák, J. Am. Stat. Assoc. 62,
626 (1967) for the per-point correction (from memory); χ² and normal tails from scipy.special
(the functions scipy.stats calls, without importing scipy.stats: ~1 s of start-up).
"""

import numpy as np
from scipy.special import chdtrc, ndtri


def point_bound(n: int, alpha: float) -> float:
    """z_n: the largest |residual|/u that n honest normal points exceed with probability
    alpha together (Šidák)."""
    per_point = -np.expm1(np.log1p(-alpha) / max(n, 1))
    return float(-ndtri(per_point / 2.0))   # the normal upper quantile, norm.isf


def judge(t, cp, fitted, u, free: int, settings) -> tuple:
    """(record, failure message or None) of the data rows t [K], cp and fitted Cp
    [J/(mol K)], stated u(Cp) [J/(mol K)] or None, with ``free`` free coefficients."""
    rel = (fitted - cp) / cp
    if u is None:
        worst = int(np.abs(rel).argmax())
        record = {"rule": "threshold", "max_rel_dev": float(abs(rel[worst])),
                  "bound": settings.accept_cp_max_rel}
        if abs(rel[worst]) > settings.accept_cp_max_rel:
            return record, (f"|dCp/Cp| {100 * abs(rel[worst]):.3g} % at {t[worst]:.6g} K > "
                            f"{100 * settings.accept_cp_max_rel:g} %")
        return record, None
    z = (fitted - cp) / u
    n, alpha = len(z), settings.accept_alpha
    dof = max(n - free, 1)
    chi2 = float(z @ z)
    p_value = float(chdtrc(dof, chi2))      # the chi-squared tail, chi2.sf
    bound = point_bound(n, alpha)
    worst = int(np.abs(z).argmax())
    record = {"rule": "stated-u", "chi2": chi2, "dof": dof, "p_value": p_value,
              "max_z": float(abs(z[worst])), "z_bound": bound, "alpha": alpha}
    fails = []
    if p_value < alpha:
        fails.append(f"chi2 {chi2:.4g} for {dof} degrees of freedom (p = {p_value:.2g} < "
                     f"{alpha:g}): the form does not follow the data within their stated "
                     "u(Cp)")
    if abs(z[worst]) > bound:
        fails.append(f"the point at {t[worst]:.6g} K is off by {abs(z[worst]):.3g} u(Cp) "
                     f"({100 * abs(rel[worst]):.3g} %) > {bound:.3g} u for {n} points")
    return record, ("; ".join(fails) or None)
