"""Arrays that depend on a table's temperatures alone, made once per grid.

A computed catalogue gives thousands of tables the same temperatures, and several checks and
fits build a matrix of those temperatures alone (a basis, a design of windows) before they
look at Cp. ``by_grid`` remembers such a function's result for the last few grids, keyed by
the grid's bytes, so that the tables of one grid share it: the same numbers, made once. The
arrays it gives are read-only (a caller that changed one would change it for every table).
"""

from collections import OrderedDict
from functools import lru_cache, wraps
from threading import Lock

import numpy as np

#: grids remembered per function (a partition's tables rarely have more than a few)
GRIDS = 8


def by_grid(f=None, *, size: int = GRIDS):
    """``f(t, *args)`` (``t`` a 1-d float array, ``args`` hashable) remembered for the last
    ``size`` distinct (t, args); a result is an array or a tuple of arrays, made read-only.
    Used as ``@by_grid``, or ``@by_grid(size=n)`` where the tables of one grid ask for many
    ``args``."""
    if f is None:
        return lambda g: by_grid(g, size=size)
    seen, lock = OrderedDict(), Lock()      # (the library's users may call it from threads)

    @wraps(f)
    def cached(t, *args):
        t = np.asarray(t, dtype=float)
        key = (t.shape, t.tobytes(), args)
        with lock:
            got = seen.get(key)
            if got is not None:
                seen.move_to_end(key)
                return got
        got = _read_only(f(t, *args))
        with lock:
            seen[key] = got
            if len(seen) > size:
                seen.popitem(last=False)
        return got

    cached.cache_clear = seen.clear
    return cached


def _read_only(value):
    if isinstance(value, tuple):
        return tuple(_read_only(v) for v in value)
    value = np.asarray(value)
    value.flags.writeable = False
    return value


@lru_cache(maxsize=64)
def geomspace(start: float, stop: float, num: int) -> np.ndarray:
    """``np.geomspace(start, stop, num)``, read-only, made once for each (start, stop, num):
    the species of a catalogue share their ranges of use."""
    return _read_only(np.geomspace(start, stop, num))
