"""Heat capacity from an enthalpy-increment table (drop calorimetry: T and H − H298 only).

H(T) − H298 is fitted by least squares with a polynomial in τ = T/1000 K,

    H − H298 = h0 + 1000 K · Σ_{k=1..n+1} b_k τ^k / k,    so that   Cp = Σ b_k τ^(k−1),

of the lowest Cp degree n (0 to 3) that the table supports: each degree is kept only when
it lowers the residual sum of squares by an F-test at the 1 % level (common practice for
nested least-squares models). Cp at each row is the derivative of that fit, a form every
published coefficient form represents exactly in one range; the fit stage then fits the
H − H298 column itself together with these Cp values, so the coefficients honour the
measured increments.
"""

import numpy as np

#: highest Cp degree tried and the F-test level of each added degree (common practice)
MAX_DEGREE = 3
F_LEVEL = 0.01


def _f_quantile(dof: int) -> float:
    """The 1 − F_LEVEL quantile of the F distribution with (1, dof) degrees of freedom."""
    from scipy.special import fdtri  # here: only an increment table needs scipy

    return float(fdtri(1, dof, 1 - F_LEVEL))


def _design(tau, degree):
    cols = [np.ones_like(tau)] + [1000.0 * tau ** k / k for k in range(1, degree + 2)]
    return np.column_stack(cols)


def cp_from_increments(t, dh, u_dh=None):
    """(Cp [J/(mol K)] at ``t``, Cp degree, rms H residual [J/mol]) from H − H298 [J/mol] at
    T [K]; None when fewer than three rows are given. ``u_dh`` [J/mol] weights the rows
    when every row states it."""
    t = np.asarray(t, dtype=float)
    dh = np.asarray(dh, dtype=float)
    n = len(t)
    if n < 3:
        return None
    w = 1.0 / np.asarray(u_dh, dtype=float) if u_dh is not None and np.all(
        np.isfinite(u_dh)) and np.all(np.asarray(u_dh) > 0) else np.ones(n)
    tau = t / 1000.0
    best, best_rss, degree = None, None, 0
    for k in range(0, MAX_DEGREE + 1):
        p = k + 2                                    # h0 and k + 1 Cp coefficients
        if n <= p:
            break
        a = _design(tau, k) * w[:, None]
        coef, *_ = np.linalg.lstsq(a, dh * w, rcond=None)
        rss = float(np.sum((a @ coef - dh * w) ** 2))
        if best is not None:
            dof = n - p
            f = (best_rss - rss) / (rss / dof) if rss > 0 else np.inf
            if not f > _f_quantile(dof):
                break
        best, best_rss, degree = coef, rss, k
    b = best[1:]
    cp = sum(bk * tau ** j for j, bk in enumerate(b))
    resid = _design(tau, degree) @ best - dh
    return np.asarray(cp, dtype=float), degree, float(np.sqrt(np.mean(resid ** 2)))

