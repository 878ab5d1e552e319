"""Lists whose items are made when they are read.

A large build writes documents with one item per species (the library's entries, the
manifest's lineage): held as Python objects all at once, 100 000 of them cost gigabytes.
A ``LazyList`` stands in such a document for the list, a ``LazyMapping`` for a dict: the
JSON writer (release/document.json_chunks) writes them item by item and the schema check
(release/document.require_valid) checks a LazyList a part at a time, so no more than a part
is ever made at once.
"""

from collections.abc import Mapping, Sequence


class LazyList(Sequence):
    """A read-only list whose items are made when read: a fresh object each time. Equal to
    a list (or LazyList) of equal items."""

    __slots__ = ()

    def __eq__(self, other) -> bool:
        if not isinstance(other, (list, tuple, LazyList)):
            return NotImplemented
        return len(self) == len(other) and all(a == b for a, b in zip(self, other))

    __hash__ = None

    def __repr__(self) -> str:
        return f"{type(self).__name__}({len(self)} items)"


class Derived(LazyList):
    """``make(x)`` of each x of ``items``, made when read."""

    __slots__ = ("_items", "_make")

    def __init__(self, items, make):
        if isinstance(items, Derived):     # made of what is itself made when read
            items, make = items._items, _composed(make, items._make)
        self._items, self._make = tuple(items), make

    def __len__(self) -> int:
        return len(self._items)

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self._make(x) for x in self._items[i]]
        return self._make(self._items[i])

    def __iter__(self):
        return map(self._make, self._items)


def _composed(outer, inner):
    return lambda x: outer(inner(x))


class LazyMapping(Mapping):
    """A read-only mapping whose items are made when read, in order: ``items`` makes a fresh
    iterator of its ``size`` (key, value) pairs (keys unique). Written item by item by the
    JSON writer; looking a key up walks the items."""

    __slots__ = ("_items", "_size")

    def __init__(self, items, size: int):
        self._items, self._size = items, size

    def items(self):
        return self._items()

    def __iter__(self):
        return (k for k, _ in self._items())

    def __len__(self) -> int:
        return self._size

    def __getitem__(self, key):
        for k, v in self._items():
            if k == key:
                return v
        raise KeyError(key)

    def __eq__(self, other) -> bool:
        if not isinstance(other, Mapping):
            return NotImplemented
        return len(self) == len(other) and list(self.items()) == list(other.items())

    __hash__ = None

    def __repr__(self) -> str:
        return f"LazyMapping({self._size} items)"
