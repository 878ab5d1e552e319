"""A jump in Cp inside one table: a phase transition the table does not list.

Inside one phase Cp is a smooth function of T; at a first-order transition it jumps (and
H with it). For every gap between consecutive rows, a quadratic in ln T is fitted by least
squares to the WINDOW rows on each side and both are carried to the middle of the gap: the
difference of the two, in ln Cp, is the jump there. Smooth data give jumps at the level of
their scatter; a transition gives one jump far above that level and above STEP_MIN (common
practice: a few per cent, more than the scatter of careful calorimetry, as large as the
smallest jumps of Cp at melting), with both sides well fitted by their own quadratic, and
the same jump again when the rows next to the gap are left out (a single slipped row makes
a jump only while it is in a window: it is left to the smoothness checks).
"""

from functools import lru_cache

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from ..core.findings import finding
from ..core.gridcache import by_grid
from ..core.records import first_of_each_t
from .smooth_model import median

#: rows on each side of a gap, the smallest relative jump reported, how far above the
#: median jump it must be, and how much worse than the jump each side's own fit may be
WINDOW = 5
STEP_MIN = 0.02
STEP_OVER_MEDIAN = 12.0
SIDE_FIT = 0.25


@by_grid
def _window_design(x, w):
    """The quadratic design of every window of ``w`` consecutive ``x`` (k, w, 3) and the
    least-squares solution operator of each (k, 3, w), from its normal equations slightly
    regularised: of the grid alone."""
    xs = sliding_window_view(x, w)
    a = np.stack([np.ones_like(xs), xs, xs ** 2], axis=-1)          # (k, w, 3)
    normal = np.einsum("kwi,kwj->kij", a, a) + 1e-12 * np.eye(3)
    return a, np.linalg.solve(normal, np.swapaxes(a, 1, 2))


@lru_cache(maxsize=64)
def _windows(n: int, w: int) -> np.ndarray:
    """Indices (k, w) of every window of ``w`` consecutive of ``n`` points, read-only: a
    gather by them takes 1 us, ``sliding_window_view`` 13 (the same numbers)."""
    idx = np.arange(n - w + 1)[:, None] + np.arange(w)[None, :]
    idx.flags.writeable = False
    return idx


def _coefficients(x, y, w):
    """Quadratic least-squares coefficients of every window of ``w`` consecutive points, and
    the windows' values -> ((k, 3), (k, w))."""
    _, solution = _window_design(x, w)
    ys = y[_windows(len(y), w)]
    return np.einsum("kiw,kw->ki", solution, ys), ys


def _rms(x, c, ys, w):
    """The rms residual of each window's fit ``c`` to its values ``ys`` -> (k,)."""
    a, _ = _window_design(x, w)
    resid = np.einsum("kwi,ki->kw", a, c) - ys
    return np.sqrt((resid ** 2).sum(axis=1) / w)


def _at(c, m):
    """The quadratics ``c`` (k, 3) at ``m`` (k,)."""
    return c[:, 0] + c[:, 1] * m + c[:, 2] * m ** 2


def _gaps(t, cp, w):
    """(ln T, window coefficients and values, gaps k, ln T in their middle, the jump in ln Cp
    at each) of ``steps``; None when the table is too short."""
    t, cp = np.asarray(t, dtype=float), np.asarray(cp, dtype=float)
    n = len(t)
    if n < 2 * w + 2:
        return None
    x = np.log(t)
    c, ys = _coefficients(x, np.log(cp), w)
    k = np.arange(w + 1, n - w)                       # gaps with room for the second look
    mid = 0.5 * (x[k - 1] + x[k])
    return x, c, ys, k, mid, _at(c[k], mid) - _at(c[k - w], mid)


def steps(t, cp, w=WINDOW):
    """(jump in ln Cp at each gap between rows k-1 and k, k = w+1..n-w-1 [-], the larger rms
    of its two side fits [-], the jump again with the row next to the gap left out on both
    sides [-], T in the middle of the gap [K]); empty when the table is too short. A slipped
    row next to the gap makes the first jump but not the second; a transition makes both."""
    return _steps_of(_gaps(t, cp, w), w)


def _steps_of(gaps, w):
    """``steps`` of what ``_gaps`` gave."""
    if gaps is None:
        return (np.zeros(0),) * 4
    x, c, ys, k, mid, jump = gaps
    rms = _rms(x, c, ys, w)
    apart = _at(c[k + 1], mid) - _at(c[k - w - 1], mid)
    return jump, np.maximum(rms[k - w], rms[k]), apart, np.exp(mid)


def check_unlisted_transition(table, ctx):
    """TRS-UNLISTED: Cp jumps between two rows of one table, far beyond the scatter of the
    rest; reported with the temperature, instead of as a bad fit."""
    d = first_of_each_t(table.valid)
    t, cp, lines = d["T"], d["Cp"], d["line"]
    gaps = _gaps(t, cp, WINDOW)
    if gaps is None or not len(gaps[-1]) or np.abs(gaps[-1]).max() < STEP_MIN:
        return []                       # no jump reaches STEP_MIN: the common case, done
    jump, side, apart, at = _steps_of(gaps, WINDOW)
    size = np.abs(jump)
    k = int(size.argmax())
    typical = median(size)
    if size[k] < max(STEP_MIN, STEP_OVER_MEDIAN * typical) or side[k] > SIDE_FIT * size[k] \
            or not apart[k] * jump[k] > 0.5 * jump[k] ** 2:
        return []
    i = k + WINDOW + 1                                  # the first row above the gap
    meta = table.meta
    what = ("an ideal gas has no phase transitions: are two sources, or two units, joined "
            "here?" if meta.phase == "g" else "a phase transition the table does not list: "
            "split the rows by phase (a phase column) and state the transition")
    return [finding("TRS-UNLISTED", f"Cp jumps by {100 * (np.exp(jump[k]) - 1):+.3g} % between "
                    f"{t[i - 1]:.6g} and {t[i]:.6g} K (near {at[k]:.6g} K); between the other "
                    f"rows the median jump is {100 * typical:.2g} %; {what}",
                    column="Cp", line=int(lines[i]), lines=(int(lines[i - 1]), int(lines[i])),
                    seen=f"{100 * (np.exp(jump[k]) - 1):+.3g} % at {at[k]:.6g} K",
                    expected="a smooth Cp inside one phase", **meta.where)]
