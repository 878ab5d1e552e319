"""Choice of breakpoints: conventional, fixed, or optimised.

Optimised breakpoints minimise the largest weighted Cp deviation (or the rms) of the
constrained fit. Candidates for a breakpoint are the geometric means of neighbouring data
temperatures that leave enough points in every range, thinned to at most
``max_candidates``; every candidate problem is solved at once (lsq.batch_objective).
With two ranges the search is exhaustive over the candidates; with more, it is repeated
coordinate descent, one breakpoint at a time.
"""

import numpy as np

from . import basis, lsq


def _candidates(t, lo_idx, hi_idx, need, bounds, limit):
    """Candidate breakpoints between data index lo_idx and hi_idx leaving ``need`` points."""
    first, last = lo_idx + need - 1, hi_idx - need
    if last < first:
        return np.array([])
    cands = np.sqrt(t[first:last + 1] * t[first + 1:last + 2])
    lo, hi = bounds
    if lo is not None:
        cands = cands[cands >= lo]
    if hi is not None:
        cands = cands[cands <= hi]
    if len(cands) > limit:
        cands = cands[np.unique(np.linspace(0, len(cands) - 1, limit).round().astype(int))]
    return cands


def objective_for(t, y, sigma, powers, sets, order, norm):
    """Objective of each breakpoint set in ``sets`` (K, nb) -> (K,)."""
    sets = np.asarray(sets, dtype=float)
    k = len(sets)
    a = np.stack([basis.cp_rows(powers, t, s) for s in sets])
    c = np.stack([basis.continuity_rows(powers, s, order) for s in sets])
    return lsq.batch_objective(a, y, sigma, c, norm)[:k]


def optimise(t, y, sigma, powers, n_ranges, *, order=1, norm="max", need=5,
             bounds=(None, None), max_candidates=80, sweeps=3, start=None):
    """Breakpoints [K] (ascending) minimising the objective; ``t`` sorted ascending."""
    t = np.asarray(t, dtype=float)
    nb = n_ranges - 1
    if nb <= 0:
        return []
    n = len(t)
    if n < n_ranges * need:
        raise ValueError(f"{n} points cannot fill {n_ranges} ranges of {need}")
    if start is None:
        q = np.exp(np.quantile(np.log(t), np.arange(1, n_ranges) / n_ranges))
        current = list(q)
    else:
        current = list(start)
    best_obj = None
    for sweep in range(sweeps if nb > 1 else 1):
        changed = False
        for j in range(nb):
            lo_t = current[j - 1] if j > 0 else -np.inf
            hi_t = current[j + 1] if j < nb - 1 else np.inf
            lo_idx = int(np.searchsorted(t, lo_t, side="right"))
            hi_idx = int(np.searchsorted(t, hi_t, side="right")) - 1
            cands = _candidates(t, lo_idx, hi_idx, need, bounds, max_candidates)
            if not len(cands):
                continue
            sets = np.tile(np.asarray(current, dtype=float), (len(cands), 1))
            sets[:, j] = cands
            obj = objective_for(t, y, sigma, powers, sets, order, norm)
            k = int(np.argmin(obj))
            if best_obj is None or obj[k] < best_obj - 1e-15:
                changed = changed or current[j] != cands[k]
                current[j] = float(cands[k])
                best_obj = float(obj[k])
        if not changed:
            break
    return [float(round(b, 3)) for b in current]


def conventional(t, n_ranges, breakpoint, need):
    """The conventional breakpoint when the data straddle it with ``need`` points on each side
    (two ranges), else None."""
    t = np.asarray(t, dtype=float)
    if n_ranges == 2 and (t <= breakpoint).sum() >= need and (t > breakpoint).sum() >= need:
        return [float(breakpoint)]
    return None
