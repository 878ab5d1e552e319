"""The fit beyond the data: an extension that leaves the data alone and rises monotonically.

A high-side extension (extrapolate.py) is first fitted together with the data. When that
worsens the largest relative Cp deviation inside the data by more than
``extension_tolerance``, or makes the fitted Cp fall somewhere beyond the data (an interior
maximum, checked on a fine grid of the polynomial), the data are fitted alone and the
extension gets a range of its own from the last data point, joined to the data's fit with
the required continuity and dCp/dT ≥ 0 imposed exactly on a fine grid (``extension_range``);
when the data's own fit falls at the last data point (a polynomial's end bent by noise), it
is made again with dCp/dT = 0 there, so that the joined range can rise. Without room for
another range, dCp/dT is held at zero where the shared fit falls fastest (at most MAX_PINS
points). FitRejected when Cp still falls, by more than FALL_FLOOR below its largest value
before.
"""

from functools import lru_cache
from typing import NamedTuple

import numpy as np

from ..core import gridcache
from ..core.constants import GAS_CONSTANT as R
from ..core.errors import FitRejected
from ..core.records import CpData
from ..core.settings import FitSettings
from ..physics import basis, forms
from . import lsq


class Fitted(NamedTuple):
    """A constrained solution and how its breakpoints were found."""

    bps: list        # [K]
    edges: list      # [K], t_min, breakpoints, t_max
    sol: lsq.Solution
    notes: list      # (code, message)
    choice: object   # breakchoice.Choice or None


def worst_inside(form, fitted: Fitted, data: CpData) -> float:
    """Largest relative Cp deviation of a solution from the data rows."""
    return float(np.max(np.abs(R * basis.values(form.powers, data.t, fitted.bps, fitted.sol.c)
                               / data.cp - 1.0)))


#: a fitted Cp falls beyond the data where it drops below the largest value it took before
#: by more than this fraction. dCp/dT >= 0 imposed exactly on a grid leaves plateaus that
#: dip by some 1e-8 between the grid's points (seen on synthetic harmonic molecules extended
#: to 6000 K), which are no fall; 1e-6 is far below the 0.01 % to which the best measured or
#: computed Cp are known (common practice)
FALL_FLOOR = 1e-6


def first_fall(form, fitted: Fitted, t_from: float, t_to: float, points: int = 400):
    """(where Cp first falls, where it falls fastest) [K] between ``t_from`` and ``t_to`` (a
    maximum beyond the data), or None when it never falls (checked on a fine grid: by
    more than FALL_FLOOR below its largest value before). Where it first falls is the
    maximum it falls from."""
    bps, sol = fitted.bps, fitted.sol
    grid = gridcache.geomspace(t_from, t_to, points)
    cp = basis.values(form.powers, grid, bps, sol.c)
    top = np.maximum.accumulate(cp)
    below = top - cp > FALL_FLOOR * np.abs(top)
    if not below.any():
        return None
    k = int(np.argmax(below))                      # the first point fallen below
    slope = basis.values(form.powers, grid, bps, sol.c, 1)
    return float(grid[int(np.argmax(cp[:k]))]), float(grid[np.argmin(slope)])


#: at most this many points where dCp/dT is held at zero to keep Cp from falling beyond the
#: data, when the extension shares a range with the data
MAX_PINS = 3
#: grid points of the extension's own range where dCp/dT >= 0 is imposed
MONOTONE_POINTS = 200


def protect_data(species_id, form, rows, inside, data: CpData, span, settings: FitSettings,
                 fitted: Fitted, solve) -> Fitted:
    """``fitted`` (data and a high-side extension, ``rows`` (t, cp, σ) with ``inside`` the
    rows up to the last data point) when it leaves the fit inside the data alone and rises
    without a maximum beyond the data; otherwise as the module describes. ``solve(rows,
    span, fixed=None, pins=())`` makes a Fitted of some rows over ``span`` [K]."""
    tn, hi = float(data.t[-1]), span[1]
    alone = solve(tuple(r[inside] for r in rows), (span[0], tn))
    best = worst_inside(form, alone, data)
    allowed = best + settings.extension_tolerance
    fall = first_fall(form, fitted, tn, hi)
    if worst_inside(form, fitted, data) <= allowed and fall is None:
        return fitted
    if len(alone.bps) + 2 <= 4 and hi / tn >= settings.min_range_ratio:
        said, why = "the data-only fit", "no room for a range of its own"
        level = settings.continuity >= 1 and ends_falling(form, alone, tn)
        if level:
            # a range joined with its slope would start falling: the data's own fit is made
            # again with dCp/dT = 0 at its last point (a polynomial's end bends with noise;
            # an ideal gas's Cp does not fall there)
            alone = solve(tuple(r[inside] for r in rows), (span[0], tn), fixed=alone.bps,
                          pins=[tn])._replace(notes=alone.notes, choice=alone.choice)
            said = f"the data-only fit with dCp/dT = 0 at {tn:.6g} K, where it fell"
            why = f"the data-only fit falls at {tn:.6g} K and is held level there"
        own = extension_range(form, alone, tuple(r[~inside] for r in rows), (tn, hi),
                              settings.continuity, level)
        fitted = own._replace(notes=alone.notes + [(
            "FIT-BREAKPOINT", f"a breakpoint at the last data point, {tn:.6g} K: the "
            f"extrapolated interval to {hi:g} K has a range of its own, so the fit inside the "
            f"data is {said}")])
        fall = first_fall(form, fitted, tn, hi)
    else:
        why = "no room for a range of its own"
        pins = []
        while fall is not None and len(pins) < MAX_PINS:
            pins.append(fall[1])
            fitted = solve(rows, span, fixed=fitted.bps, pins=pins)._replace(
                notes=fitted.notes, choice=fitted.choice)
            fall = first_fall(form, fitted, tn, hi)
    if fall is not None:
        raise FitRejected(species_id, f"the fitted Cp has a maximum at {fall[0]:.6g} K "
                          f"beyond the data (to {tn:.6g} K) and falls toward {hi:g} K; narrow "
                          "the range of use or add data")
    worst = worst_inside(form, fitted, data)
    if worst > allowed:
        fitted.notes.append(("FIT-EXTRAPOLATED", "extending the range of use to "
                             f"{hi:g} K worsens the largest Cp deviation inside the data from "
                             f"{100 * best:.3g} % to {100 * worst:.3g} % ({why})"))
    return fitted


def ends_falling(form, fitted: Fitted, t_end: float) -> bool:
    """Whether the fitted Cp falls at ``t_end`` [K] (dCp/dT < 0 there)."""
    return float(basis.values(form.powers, np.array([t_end]), fitted.bps, fitted.sol.c,
                              1)[0]) < 0.0


def extension_range(form, alone: Fitted, ext_rows, span, order: int,
                    level: bool = False) -> Fitted:
    """``alone`` (the data-only solution) with one more range over ``span`` (tn, hi) [K]
    fitted to the extension rows (t, cp, σ): its Cp and derivatives up to ``order`` equal
    the data fit's at tn, and dCp/dT ≥ 0 on a grid of MONOTONE_POINTS over the range. With
    ``level`` (the data fit held level at tn) the grid leaves out tn, where the join fixes
    the slope at zero (a constraint there, met or missed by rounding, would leave nothing to
    solve for), and d²Cp/dT² ≥ 0 holds at tn unless the join fixes it too: a range that
    starts level must start rising, not dip before the grid's next point. The
    equalities are inhomogeneous, so the range is solved as d = d_p + N z (d_p a particular
    solution, N the null space of the equalities), with the inequalities on z solved
    exactly (lsq.at_least); the coefficients of the data ranges are left as they are and
    the covariance is block-diagonal (the join's correlation is not kept)."""
    bps, edges, sol, notes = alone.bps, alone.edges, alone.sol, alone.notes
    tn, hi = span
    m = len(form.powers)
    project, null = _join(tuple(form.powers), float(tn), order)
    d_p = project @ sol.c[-m:]
    t, cp, sig = ext_rows
    a = basis.powers_at(t, tuple(form.powers))
    grid = gridcache.geomspace(tn, hi, MONOTONE_POINTS)
    if level:          # the slope at tn is the data fit's, zero: fixed by the join, not free
        grid = grid[1:]
    slope = basis.powers_at(grid, tuple(form.powers), 1)
    if level and order < 2:
        slope = np.vstack([slope, basis.powers_at(np.array([tn]), tuple(form.powers), 2)])
    part = lsq.at_least(a @ null, cp / R - a @ d_p, sig / R, slope @ null, -(slope @ d_p))
    d = d_p + null @ part.c
    cov = np.zeros((sol.c.size + m, sol.c.size + m))
    cov[:sol.c.size, :sol.c.size] = sol.cov
    cov[sol.c.size:, sol.c.size:] = null @ part.cov @ null.T
    joined = lsq.Solution(c=np.concatenate([sol.c, d]), residual=sol.residual, cov=cov,
                          chi2=sol.chi2, dof=sol.dof)
    return Fitted(list(bps) + [tn], list(edges[:-1]) + [tn, hi], joined, list(notes),
                  alone.choice)


@lru_cache(maxsize=64)
def _join(powers: tuple, tn: float, order: int) -> tuple:
    """(P, N) of a range joined at ``tn`` [K] with continuity up to ``order``: K the rows of
    Cp and its derivatives there, P = K⁺K the projector onto the row space of K (P c is the
    least-norm d with K d = K c: the particular solution of the join) and N an orthonormal
    basis of ker K; read-only, made once for each join (a catalogue's species share their
    last data point)."""
    k = np.vstack([basis.powers_row(powers, tn / forms.T_SCALE, d) for d in range(order + 1)])
    out = (np.linalg.pinv(k) @ k, lsq.null_basis(k, len(powers)))
    for x in out:
        x.flags.writeable = False
    return out
