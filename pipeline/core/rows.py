"""The rows of a table: named numpy columns of one length.

A table of a hundred rows is read, checked and fitted in well under a millisecond of numpy
work; a data frame library adds several times that in bookkeeping on every column access
and takes half a second to import. ``Rows`` is the small part of a frame the stages use:
columns by name, row selection, added columns and concatenation. Its columns are read-only,
so a stage that wants other values makes new rows (``with_columns``) instead of changing
the ones another stage holds.
"""

import numpy as np


class Rows:
    """Named 1-D numpy columns of one length, in a fixed order; immutable."""

    __slots__ = ("_columns", "_n")

    def __init__(self, columns: dict):
        cols = {}
        n = None
        for name, values in columns.items():
            array = np.asarray(values)
            if array.ndim == 0:              # a scalar fills the column
                if n is None:
                    raise ValueError(f"column {name!r}: a scalar needs a column before it")
                array = np.full(n, values)
            if array.ndim != 1:
                raise ValueError(f"column {name!r} is not one-dimensional")
            if n is None:
                n = len(array)
            elif len(array) != n:
                raise ValueError(f"column {name!r} has {len(array)} rows, not {n}")
            if array.flags.writeable:
                array = array.view()
                array.flags.writeable = False
            cols[name] = array
        self._columns = cols
        self._n = n or 0

    def __getitem__(self, name: str) -> np.ndarray:
        return self._columns[name]

    def __contains__(self, name: str) -> bool:
        return name in self._columns

    def __len__(self) -> int:
        return self._n

    def __repr__(self) -> str:
        return f"Rows({self._n} rows: {', '.join(self._columns)})"

    def __getstate__(self):
        if self._n:
            return self._columns
        # rows without rows (a partition's tables, its fitted species): the names and dtypes
        # alone, some 20 bytes a column, instead of an empty numpy array's pickle (2 us each)
        return tuple((name, col.dtype.str) for name, col in self._columns.items())

    def __setstate__(self, state):
        if isinstance(state, tuple):
            state = {name: np.empty(0, dtype=kind) for name, kind in state}
        self.__init__(state)

    @property
    def columns(self) -> tuple:
        return tuple(self._columns)

    def to_dict(self) -> dict:
        """{column: array} (read-only arrays)."""
        return dict(self._columns)

    @classmethod
    def _of(cls, columns: dict) -> "Rows":
        """Rows of ``columns`` made from the columns of Rows (one-dimensional, of one
        length): without the checks, each column made read-only (a new array of its own, or
        a view of a read-only one)."""
        rows = cls.__new__(cls)
        n = None
        for array in columns.values():
            array.flags.writeable = False
            n = len(array) if n is None else n
        rows._columns, rows._n = columns, n or 0
        return rows

    def take(self, keep) -> "Rows":
        """The rows ``keep`` (a boolean mask or row indices, in that order)."""
        return Rows._of({name: col[keep] for name, col in self._columns.items()})

    def head(self, n: int) -> "Rows":
        """The first ``n`` rows."""
        return Rows._of({name: col[:n] for name, col in self._columns.items()})

    def with_columns(self, **columns) -> "Rows":
        """These rows with ``columns`` added or replaced (a scalar fills a column)."""
        return Rows({**self._columns, **columns})

    def without(self, *names: str) -> "Rows":
        """These rows without the columns ``names``."""
        return Rows({k: v for k, v in self._columns.items() if k not in names})

    def given(self, name: str) -> np.ndarray:
        """Boolean mask of the rows whose float column ``name`` holds a number (not NaN)."""
        return ~np.isnan(self._columns[name])


def concat(parts) -> Rows:
    """The rows of ``parts`` (Rows with the same columns) one after another."""
    parts = list(parts)
    names = parts[0].columns
    return Rows({name: np.concatenate([p[name] for p in parts]) for name in names})
