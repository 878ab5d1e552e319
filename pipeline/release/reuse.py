"""What a release takes from the last release of its home instead of making it again: each
species' item of library.json and lineage in manifest.json (bytes), and its rows of
library.parquet and tables.parquet, when what they are made of is unchanged.

Every piece has a key, the sha256 of what it is made of as the build holds it: the species'
library entry with the findings the release adds to it (library.entries.Entries.key) for
its item of library.json and its rows of both Parquet files, its lineage for the manifest's.
What else a piece depends on is its context (``context``): the code and the settings, and
for tables.parquet also the transitions and the formation properties' reference species.
A build that publishes keeps, beside its stored partitions (``KEPT``), where each piece lies
in the files it published and the identity of each file (core.paths.identity); the next
build into the same home takes a piece whose key it finds from the file it lies in, as long
as that file is still the one kept and the context is the same. A release is written once
and never changed by thermoledger; a file changed since shows in its identity, and nothing
is then taken from it.

The release is the same bytes either way: a piece is a function of its key and its context
(a build is deterministic), a taken piece is the one an earlier build made of the same, and
the files are put together by the same code from pieces taken or made
(tests/test_partitions.py compares rebuilds with fresh builds byte for byte). A rebuild
after one edit of 10 000 tables so decodes and encodes again only what changed instead of
every entry (benchmarks/bench_incremental.py).
"""

import hashlib
import json
import mmap
import os
from pathlib import Path

from ..core import paths
from ..library.entries import key_of

#: the file of the store of partitions (publish.STORE) that keeps where the pieces lie
KEPT = "pieces.json"
KEPT_FORMAT = 2
#: the files pieces are taken from: JSON files by (byte offset, size), Parquet by (first
#: row, rows)
JSON_FILES = ("library.json", "manifest.json")
PARQUET_FILES = ("library.parquet", "tables.parquet")


def keys_of(items) -> list:
    """The key (sha256, hex) of each item of ``items``: Entries by ``Entries.key``, dicts by
    their compact JSON."""
    return [key_of(items, i) for i in range(len(items))]


def context(code: str, version: str, settings: dict) -> str:
    """The context of every piece: the code's digest, the pipeline's version, the schemas
    the pieces were checked against and the settings."""
    from ..core import schemas

    checked = [hashlib.sha256(schemas.schema_bytes(name)).hexdigest() for name in schemas.NAMES]
    return hashlib.sha256(json.dumps([code, version, checked, settings], sort_keys=True,
                                     default=str).encode()).hexdigest()


def tables_context(doc: dict, keys: list) -> str:
    """What the rows of tables.parquet depend on besides their entries: the transitions
    and the reference states of library document ``doc`` and the keys (``keys``, in the
    order of its species) of the reference species named."""
    from ..library.entries import ids_of

    named = {i for st in doc.get("reference_states", ()) for i in st.get("ids", ())}
    refs = sorted((sid, k) for sid, k in zip(ids_of(doc["species"]), keys) if sid in named)
    return hashlib.sha256(json.dumps([doc.get("transitions", []),
                                      doc.get("reference_states", []), refs],
                                     sort_keys=True, default=str).encode()).hexdigest()


class Previous:
    """The pieces of the last release that a build may take: ``json(name, key)`` the bytes
    of a JSON file's item, ``place(name, key)`` where a piece lies, (start, size); None
    where there is none to take. ``none()`` takes nothing. ``at`` maps each file to ({key:
    index}, places: a flat int64 array, (start, size) of the index-th piece at 2 index)."""

    def __init__(self, folder=None, at=None, contexts=None):
        self.folder, self._at, self.contexts = folder, at or {}, contexts or {}
        self._maps = {}

    @classmethod
    def none(cls) -> "Previous":
        return cls()

    def has(self, name: str) -> bool:
        return name in self._at

    def path(self, name: str) -> Path:
        return Path(self.folder) / name

    def share(self, name: str, keys) -> float:
        """The share of ``keys`` (0 to 1) with a piece of ``name`` to take."""
        index = self._at[name][0] if name in self._at else {}
        return sum(k in index for k in keys) / len(keys) if len(keys) else 0.0

    def json(self, name: str, key: str):
        place = self.place(name, key)
        if place is None:
            return None
        try:
            if name not in self._maps:
                with open(self.path(name), "rb") as fh:
                    self._maps[name] = mmap.mmap(fh.fileno(), 0, access=mmap.ACCESS_READ)
        except (OSError, ValueError):       # gone, or empty: nothing to take from it
            del self._at[name]
            return None
        start, size = place
        piece = self._maps[name][start:start + size]
        return piece if len(piece) == size else None

    def place(self, name: str, key: str):
        """The place kept for ``key`` in file ``name``: (start, size) — bytes of a JSON
        file, rows of a Parquet file — or None."""
        index, places = self._at.get(name, ({}, None))
        i = index.get(key)
        if i is None:
            return None
        start, size = int(places[2 * i]), int(places[2 * i + 1])
        return (start, size) if start >= 0 and size >= 0 else None

    def close(self) -> None:
        for m in self._maps.values():
            m.close()
        self._maps = {}


def previous(store, release_folder, ctx: str, use: bool = True) -> Previous:
    """The pieces kept in ``store`` (the folder of stored partitions) of the release in
    ``release_folder`` (the current release of the home), taken in context ``ctx``; none
    when not ``use`` (--fresh), when nothing was kept, or for a file that is not the one
    kept (its identity changed), was kept in another context, or whose places are not one
    pair of integers per key."""
    import numpy as np
    import orjson

    if not use or release_folder is None:
        return Previous.none()
    try:
        kept = orjson.loads((Path(store) / KEPT).read_bytes())
        folder = Path(release_folder).resolve()
        if not isinstance(kept, dict) or kept.get("format") != KEPT_FORMAT or \
                kept.get("release") != folder.name or kept.get("context") != ctx:
            return Previous.none()
        indexes = {kind: {k: i for i, k in enumerate(keys)}
                   for kind, keys in kept["keys"].items()
                   if isinstance(keys, list) and all(isinstance(k, str) for k in keys)}
        files = kept["files"]
    except (OSError, ValueError, TypeError, AttributeError, KeyError):
        return Previous.none()
    at, contexts = {}, {}
    for name in JSON_FILES + PARQUET_FILES:
        got = files.get(name) if isinstance(files, dict) else None
        try:
            index = indexes[got["keys"]]
            places = np.array(got["places"], dtype=np.int64)
            if places.shape != (2 * len(index),) or \
                    list(paths.identity(os.stat(folder / name))) != got["identity"]:
                continue
        except (OSError, ValueError, TypeError, KeyError, OverflowError):
            continue                     # not written as ``keep`` writes it: not taken from
        at[name], contexts[name] = (index, places), got.get("context")
    return Previous(folder, at, contexts)


class Placed:
    """Where this release's pieces lie, as its files are written: per file, the name of
    its list of keys (``keys``: "entries" or "lineages") and its places (a flat int64
    array: (start, size) of each key's piece), and the context of each file's pieces."""

    def __init__(self):
        self.keys, self.files, self.contexts = {}, {}, {}

    def add(self, name: str, kind: str, keys: list, places) -> None:
        """The pieces of ``keys`` (of kind ``kind``) lie at ``places`` of file ``name``
        (a flat sequence of integers, or (start, size) pairs, in the order of ``keys``)."""
        import numpy as np

        self.keys[kind] = keys
        self.files[name] = (kind, np.asarray(places, dtype=np.int64).reshape(-1))


def keep(store, release_folder, ctx: str, placed: Placed) -> None:
    """Keep where the pieces of the release just published into ``release_folder`` lie
    (``placed``), with each file's identity, in the store of partitions ``store`` (written
    atomically; nothing when the store does not exist). Kept compactly: each list of keys
    once, each file's places as one list of integers (a map of key to place per file made
    a dict entry, a tuple and two integers per species and file)."""
    import orjson

    store = Path(store)
    if not store.is_dir():
        return
    folder = Path(release_folder).resolve()
    files = {}
    for name, (kind, places) in placed.files.items():
        if places.size != 2 * len(placed.keys[kind]) or not (folder / name).is_file():
            continue
        files[name] = {"identity": list(paths.identity(os.stat(folder / name))),
                       "context": placed.contexts.get(name), "keys": kind, "places": places}
    paths.write_atomic(store / KEPT, orjson.dumps(
        {"format": KEPT_FORMAT, "release": folder.name, "context": ctx,
         "keys": {kind: placed.keys[kind] for kind in {k for k, _ in placed.files.values()}},
         "files": files}, option=orjson.OPT_SERIALIZE_NUMPY))


class Taking:
    """How one file of a release is written from the last release's pieces: for its item
    ``j`` (a species, in the order written) of key ``keys[j]``, ``piece(j)`` the bytes of a
    JSON file's item and ``rows(j)`` the (first row, rows) of a Parquet file's to take, or
    None; ``made(j, rows)`` and ``take(j, place)`` place the rows of a Parquet file in turn,
    ``take`` and ``flush`` giving the rows taken as Arrow tables of ``schema`` (contiguous
    rows read at once); ``placed`` where each species' rows lie in the new file. With
    ``usable`` False (another context), nothing is taken."""

    def __init__(self, previous: Previous, name: str, keys: list, ids: list, schema=None,
                 usable: bool = True):
        import numpy as np

        self.previous, self.name, self.keys, self.ids = previous, name, keys, ids
        self.schema, self.usable = schema, usable and previous.has(name)
        self.placed = np.zeros(2 * len(keys), dtype=np.int64)     # (row, rows) of each
        self._row, self._run, self._source = 0, None, None

    @classmethod
    def placing(cls, name: str, count: int) -> "Taking":
        """A Taking of file ``name`` of ``count`` items that takes nothing: it only hears
        where each item's rows lie (``made``)."""
        return cls(Previous.none(), name, range(count), (), usable=False)

    def share(self) -> float:
        """The share of the items that can be taken (0 to 1)."""
        return self.previous.share(self.name, self.keys) if self.usable else 0.0

    def piece(self, j: int):
        """The bytes of item ``j`` taken, or None; a piece that does not begin with its
        species' id (a kept place that is not its item's) is not taken."""
        import orjson

        got = self.previous.json(self.name, self.keys[j]) if self.usable else None
        if got is None or not got.startswith(b'    {\n      "id": ' +
                                             orjson.dumps(self.ids[j]) + b","):
            return None
        return got

    def rows(self, j: int):
        return self.previous.place(self.name, self.keys[j]) if self.usable else None

    def made(self, j: int, rows: int) -> None:
        self.placed[2 * j], self.placed[2 * j + 1] = self._row, rows
        self._row += rows

    def take(self, j: int, place):
        """Place the taken rows ``place`` of item ``j``; the rows taken before, as Arrow
        tables, when these do not follow them in the last file."""
        start, rows = place
        self.placed[2 * j], self.placed[2 * j + 1] = self._row, rows
        self._row += rows
        if self._run is not None and self._run[1] == start:
            self._run[1] = start + rows
            self._run[2].append((self.ids[j], rows))
            return ()
        out = self.flush()
        self._run = [start, start + rows, [(self.ids[j], rows)]]
        return out

    def flush(self):
        """The rows taken and not yet given, as Arrow tables."""
        run, self._run = self._run, None
        return () if run is None else self._read(*run)

    def _read(self, start: int, stop: int, whose: list):
        """Arrow tables of rows ``start`` to ``stop`` of the last file, which must be those
        of the species ``whose`` ((id, rows) in order): OutputError if not (the places kept
        are not those of that file's rows)."""
        import numpy as np
        import pyarrow as pa

        from ..core.errors import OutputError
        from .arrowmem import RowSource, arrow_array

        if self._source is None:
            self._source = RowSource(self.previous.path(self.name), self.schema)
        ids = np.repeat(np.array([sid for sid, _ in whose], dtype=object),
                        [rows for _, rows in whose])
        at, wrong = 0, OutputError(f"rows {start} to {stop - 1} of the last release's "
                                   f"{self.name} are not those its build kept ({KEPT}): "
                                   "build again with --fresh")
        try:
            for table in self._source.rows(start, stop):    # (pyarrow.compute: 30 ms)
                want = arrow_array(ids[at:at + table.num_rows].tolist(), pa.string())
                if not table.column("id").equals(pa.chunked_array([want])):
                    raise wrong
                at += table.num_rows
                yield table
        except (IndexError, OSError, ValueError):  # beyond its rows, or not a Parquet file
            raise wrong from None

    def close(self) -> None:
        if self._source is not None:
            self._source.close()
            self._source = None
