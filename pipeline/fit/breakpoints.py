"""Choice of breakpoints: conventional, fixed, or optimised.

Optimised breakpoints minimise the largest weighted Cp deviation (or the rms) of the
constrained fit. Candidates for a breakpoint are the geometric means of neighbouring data
temperatures that leave enough points in every range, thinned to at most
``max_candidates``; every candidate problem is solved at once (lsq.batch_objective).
With two ranges the search is exhaustive over the candidates; with more, the best set of a
coarse grid of combinations starts a repeated coordinate descent, one breakpoint at a time.
"""

from dataclasses import dataclass

import numpy as np

from ..physics import basis, forms
from . import lsq

TIE_TOLERANCE = 1e-9
"""Objectives closer than this (relative, or absolute below 1) count as equal [1]."""


@dataclass(frozen=True)
class Observations:
    """Weighted Cp/R observations, ascending in T."""

    t: np.ndarray        # [K], ascending
    y: np.ndarray        # Cp/R [-]
    sigma: np.ndarray    # standard uncertainty of y [-]


@dataclass(frozen=True)
class SearchRules:
    """How optimised breakpoints are searched (from FitSettings)."""

    order: int = 1                 # continuity at breakpoints: 1 = Cp, dCp/dT; 2 = d2Cp/dT2
    norm: str = "max"              # minimise the largest weighted deviation, or "rms"
    need: int = 5                  # fewest data points in every range
    bounds: tuple = (None, None)   # allowed interval of a breakpoint [K]
    max_candidates: int = 80       # candidates tried per breakpoint
    ratio: float = 1.5             # every range spans at least this T_max/T_min


def _candidates(t, lo_idx, hi_idx, rules: SearchRules, lo_edge=None, hi_edge=None,
                limit=None):
    """Candidate breakpoints [K] between data index lo_idx and hi_idx leaving ``rules.need``
    points, and leaving every range at least ``rules.ratio`` wide (T_high/T_low) against its
    other edge; at most ``limit`` (default ``rules.max_candidates``)."""

    need, bounds, ratio = rules.need, rules.bounds, rules.ratio
    limit = rules.max_candidates if limit is None else limit
    first, last = lo_idx + need - 1, hi_idx - need
    if last < first:
        return np.array([])
    cands = np.sqrt(t[first:last + 1] * t[first + 1:last + 2])
    lo_edge = t[0] if lo_edge is None else lo_edge
    hi_edge = t[-1] if hi_edge is None else hi_edge
    cands = cands[(cands >= lo_edge * ratio) & (cands <= hi_edge / ratio)]
    lo, hi = bounds
    if lo is not None:
        cands = cands[cands >= lo]
    if hi is not None:
        cands = cands[cands <= hi]
    if len(cands) > limit:
        cands = cands[np.unique(np.linspace(0, len(cands) - 1, limit).round().astype(int))]
    return cands


def objective_for(obs: Observations, powers, sets, rules: SearchRules):
    """Objective of each breakpoint set in ``sets`` [K], shape (K, nb) -> (K,)."""
    return objectives_for(obs.t, np.asarray(obs.y)[None], np.asarray(obs.sigma)[None], powers,
                          np.asarray(sets, dtype=float)[None], rules)[0]


def prepared(t, ys, sigmas, powers) -> lsq.Prefixed:
    """What every search of S tables at the same temperatures ``t`` [K] (``ys`` ±
    ``sigmas``, (S, n)) in the basis ``powers`` starts from (lsq.prefixed), made once for
    several calls of ``objectives_for``."""
    return lsq.prefixed(_rows(t, powers), ys, sigmas)


def _rows(t, powers):
    return basis.powers_row(powers, np.asarray(t, dtype=float) / forms.T_SCALE)


def objectives_for(t, ys, sigmas, powers, sets, rules: SearchRules, made=None):
    """``objective_for`` of S tables at the same temperatures ``t`` [K] at once: ``ys`` ±
    ``sigmas`` (S, n) and each table's breakpoint sets [K] (S, K, nb) -> (S, K); ``made``:
    ``prepared(t, ys, sigmas, powers)`` when made already."""
    order = rules.order
    sets = np.asarray(sets, dtype=float)
    ss, kk, nb = sets.shape
    v = _rows(t, powers) if made is None else None     # the rows are in ``made``
    n = len(t)
    starts = np.zeros((ss, kk, nb + 2), dtype=int)
    starts[:, :, 1:-1] = np.searchsorted(t, sets, side="right")   # points <= b: lower range
    starts[:, :, -1] = n
    c = basis.continuity_rows_of_sets(powers, sets.reshape(ss * kk, nb), order)
    return lsq.batch_objectives(v, ys, sigmas, starts, c.reshape(ss, kk, *c.shape[1:]),
                                rules.norm, made)


def optimise_many(t, ys, sigmas, powers, rules: SearchRules = SearchRules(),
                  made=None) -> list:
    """``optimise`` with two ranges of S tables at the same temperatures ``t`` [K]: for each
    row of ``ys`` ± ``sigmas`` (S, n), its breakpoint [K] (a list of one) or the ValueError
    ``optimise`` raises; every table's candidates solved in one batched call, and each
    pick made as ``optimise`` makes it (``made`` as for ``objectives_for``)."""
    n = len(t)
    if n < 2 * rules.need:
        return [_too_few(n, 2, rules)] * len(ys)
    here = float(np.exp(np.median(np.log(t))))
    cands = _candidates(t, 0, n - 1, rules)
    if len(cands):
        obj = objectives_for(t, ys, sigmas, powers,
                             np.broadcast_to(cands[:, None], (len(ys), len(cands), 1)), rules,
                             made)
        picks = [float(cands[_pick(row, cands, here)]) for row in obj]
    else:
        picks = [here] * len(ys)
    return [_no_room(2, rules) if too_narrow([t[0], b, t[-1]], rules.ratio)
            else [float(round(b, 3))] for b in picks]


def _too_few(n: int, n_ranges: int, rules: SearchRules) -> ValueError:
    return ValueError(f"{n} points cannot fill {n_ranges} ranges of {rules.need}")


def _no_room(n_ranges: int, rules: SearchRules) -> ValueError:
    return ValueError(f"no breakpoints leave {n_ranges} ranges of at least {rules.need} points "
                      f"each at least {rules.ratio:g} times wider at the top than at the bottom")


def optimise(obs: Observations, powers, n_ranges: int, rules: SearchRules = SearchRules(), *,
             sweeps: int = 3, start=None):
    """Breakpoints [K] (ascending) minimising the objective of the constrained fit of
    ``obs`` in the basis ``powers`` with ``n_ranges`` ranges."""
    t, need, ratio = obs.t, rules.need, rules.ratio
    nb = n_ranges - 1
    if nb <= 0:
        return []
    n = len(t)
    if n < n_ranges * need:
        raise _too_few(n, n_ranges, rules)
    if nb == 1 and start is None:     # exhaustive: one batch of every candidate
        best = optimise_many(t, np.asarray(obs.y)[None], np.asarray(obs.sigma)[None], powers,
                             rules)[0]
        if isinstance(best, ValueError):
            raise best
        return best
    current = list(start) if start is not None else _coarse_start(obs, powers, nb, rules)
    best_obj = None
    for sweep in range(sweeps if nb > 1 else 1):
        changed = False
        for j in range(nb):
            lo_t = current[j - 1] if j > 0 else -np.inf
            hi_t = current[j + 1] if j < nb - 1 else np.inf
            lo_idx = int(np.searchsorted(t, lo_t, side="right"))
            hi_idx = int(np.searchsorted(t, hi_t, side="right")) - 1
            cands = _candidates(t, lo_idx, hi_idx, rules,
                                lo_edge=current[j - 1] if j > 0 else None,
                                hi_edge=current[j + 1] if j < nb - 1 else None)
            if not len(cands):
                continue
            sets = np.tile(np.asarray(current, dtype=float), (len(cands), 1))
            sets[:, j] = cands
            obj = objective_for(obs, powers, sets, rules)
            k = _pick(obj, cands, current[j])
            if best_obj is None or obj[k] < best_obj - 1e-15:
                changed = changed or current[j] != cands[k]
                current[j] = float(cands[k])
                best_obj = float(obj[k])
        if not changed:
            break
    edges = [t[0]] + list(current) + [t[-1]]
    if too_narrow(edges, ratio):
        raise _no_room(n_ranges, rules)
    return [float(round(b, 3)) for b in current]


def too_narrow(edges, ratio: float, rel: float = 1e-9):
    """The first range (T_low, T_high) [K] of ``edges`` that is less than ``ratio`` times wider
    at the top than at the bottom (``rel`` allows for round-off), or None."""
    for a, b in zip(edges[:-1], edges[1:]):
        if b < a * ratio * (1 - rel):
            return float(a), float(b)
    return None


def _pick(obj, cands, here):
    """Index of the best candidate; candidates whose objective ties with the best within
    TIE_TOLERANCE (round-off, as for a table of constant Cp) go to the one nearest ``here``
    in log T, so the choice does not depend on the machine's floating-point kernels."""
    best = float(np.min(obj))
    tied = np.flatnonzero(obj <= best + TIE_TOLERANCE * max(1.0, abs(best)))
    return int(tied[np.argmin(np.abs(np.log(cands[tied] / here)))])


def _coarse_start(obs: Observations, powers, nb: int, rules: SearchRules, per_axis=None):
    """Best of a coarse grid of breakpoint sets (a start for coordinate descent, which alone
    can stall in a local minimum when there are several breakpoints)."""
    import itertools

    t, need, ratio = obs.t, rules.need, rules.ratio
    per_axis = per_axis or {2: 24, 3: 10}.get(nb, 7)
    grid = _candidates(t, 0, len(t) - 1, rules, limit=per_axis)
    idx = np.searchsorted(t, grid, side="right")
    sets = [c for c in itertools.combinations(range(len(grid)), nb)
            if all(idx[c[i + 1]] - idx[c[i]] >= need and grid[c[i + 1]] >= grid[c[i]] * ratio
                   for i in range(nb - 1))]
    if not sets:
        q = np.exp(np.quantile(np.log(t), np.arange(1, nb + 1) / (nb + 1)))
        return list(q)
    sets = np.array([[grid[i] for i in c] for c in sets])
    obj = objective_for(obs, powers, sets, rules)
    return list(sets[int(np.argmin(obj))])


def conventional(t, n_ranges, breakpoint, need, ratio=1.0):
    """The conventional breakpoint when the data straddle it with ``need`` points on each side
    (two ranges), each range at least ``ratio`` wide (T_high/T_low), else None."""
    t = np.asarray(t, dtype=float)
    if (n_ranges == 2 and (t <= breakpoint).sum() >= need and (t > breakpoint).sum() >= need
            and breakpoint >= t[0] * ratio and t[-1] >= breakpoint * ratio):
        return [float(breakpoint)]
    return None
