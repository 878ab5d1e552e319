"""The species entries of a library document held as compact JSON.

A build holds every library entry from the moment its partition is fitted until its release
is written: 11.8 KB of Python objects per species (mostly the floats of the covariance), but
4.9 KB as the compact JSON orjson writes. ``Entries`` keeps them so, in memory or in the
build's scratch file (core/spill.py), and reads as the list of dicts it stands for, each
entry decoded when it is asked for (about 20 µs). Floats written by orjson read back as the
same floats, so an entry written again gives the same bytes.

``by_id(doc)`` is the one way the library's functions look entries up by id: over
``Entries`` it decodes only the entries looked up, over a list it is the plain dict.
"""

from array import array
from collections.abc import Mapping

from ..core.lazy import LazyList


def _loads(blob: bytes) -> dict:
    import orjson

    return orjson.loads(blob)


def compact(entry: dict) -> bytes:
    """The compact JSON of a species entry, as Entries holds it: copied into bytes of its
    own size (orjson's bytes keep the room of its buffer, 12 KB for 4.9 KB of JSON)."""
    import orjson

    return bytes(memoryview(orjson.dumps(entry)))


def merged_findings(own: list, added: list) -> list:
    """An entry's findings (dicts, as Finding.to_dict gives them) with ``added`` ones,
    sorted as a build sorts findings (stable: of equal keys, its own first)."""
    from ..core.findings import dict_sort_key

    return sorted(own + added, key=dict_sort_key)


def outline(entry: dict) -> dict:
    """A species entry cut down to what a build reads of every species after its release is
    written (its summary line and the breakpoints it keeps for the next build): id,
    breakpoints, the ranges' and extrapolated intervals' ends, the largest relative Cp
    deviation, the sources' files, rows and use, the rows left out, and the origin's repair.
    Laid out as the entry is, so that what reads an outline reads a whole entry too."""
    out = {"id": entry["id"], "breakpoints": entry["breakpoints"],
           "ranges": [{"t_min": r["t_min"], "t_max": r["t_max"]} for r in entry["ranges"]],
           "extrapolated": [{"t_min": e["t_min"], "t_max": e["t_max"]}
                            for e in entry["extrapolated"]],
           "quality": {"cp_max_rel_dev": entry["quality"]["cp_max_rel_dev"]},
           "sources": [{"file": x["file"], "rows": x["rows"], "used": x["used"]}
                       for x in entry["sources"]],
           "excluded": entry["excluded"]}
    if entry.get("origin") is not None:
        out["origin"] = {"repair": entry["origin"].get("repair")}
    return out


#: entries whose added findings ``Entries.add_findings_to`` writes to the spill at once
ADDED_AT_ONCE = 2048


class Entries(LazyList):
    """Library entries, in order, each held as its compact JSON (a core.lazy.LazyList): in
    memory, or where a core.spill.Spill holds it ((offset, size)). Indexing and iterating
    give a fresh dict each time: changing it changes nothing held until it is put back
    (``entries[i] = entry``, into the spill when there is one)."""

    __slots__ = ("_blobs", "_ids", "_index", "_spill", "_formulas", "_outlines", "_more",
                 "_digests")

    #: its items are read from JSON: each reads back as itself when written again
    from_json = True

    def __init__(self, pairs=(), spill=None, formulas=None, outlines=None, digests=None):
        """``pairs``: (species id, compact JSON bytes of its entry, or its (offset, size) in
        ``spill``), in the document's order; ``formulas`` the entries' formulas and
        ``outlines`` the compact JSON of their ``outline`` (bytes, or (offset, size) in
        ``spill``), in the same order, when known (``formulas`` and ``outlines`` then need no
        entry decoded); ``digests`` the sha256 (hex) of each entry's compact JSON, or None
        where not known (``key`` then reads and hashes it)."""
        self._ids, self._blobs = [], []
        for sid, blob in pairs:
            self._ids.append(sid)
            self._blobs.append(blob)
        self._index, self._spill, self._more = None, spill, None
        self._formulas = list(formulas) if formulas is not None else None
        self._outlines = list(outlines) if outlines is not None else None
        self._digests = list(digests) if digests is not None else None
        for name, known in (("formulas", self._formulas), ("outlines", self._outlines),
                            ("digests", self._digests)):
            if known is not None and len(known) != len(self._ids):
                raise ValueError(f"{len(known)} {name} for {len(self._ids)} entries")

    @classmethod
    def of(cls, entries) -> "Entries":
        """Entries of the dicts ``entries``."""
        return cls((e["id"], compact(e)) for e in entries)

    def _json(self, i: int) -> bytes:
        return self._held(self._blobs[i])

    def _held(self, blob) -> bytes:
        return blob if isinstance(blob, bytes) else self._spill.get(*blob)

    def _put(self, blob: bytes):
        return blob if self._spill is None else self._spill.put(blob)

    def __len__(self) -> int:
        return len(self._blobs)

    def _entry(self, i: int) -> dict:
        return of_held(self.held(i))

    def _added(self, i: int) -> list:
        """The findings added to entry ``i`` (``add_findings``) and not yet in it."""
        if self._more is None or self._more[2 * i] < 0:
            return []
        return _loads(self._spill.get(self._more[2 * i], self._more[2 * i + 1]))

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self._entry(j) for j in range(*i.indices(len(self)))]
        return self._entry(range(len(self))[i])

    def __setitem__(self, i: int, entry: dict) -> None:
        i = range(len(self))[i]
        if entry["id"] != self._ids[i]:
            raise ValueError(f"entry {i} is {self._ids[i]}, not {entry['id']}")
        self._blobs[i] = self._put(compact(entry))
        if self._digests is not None:
            self._digests[i] = None
        if self._more is not None:
            self._more[2 * i] = -1
        if self._outlines is not None:
            self._outlines[i] = self._put(compact(outline(entry)))

    def __iter__(self):
        for i in range(len(self._blobs)):
            yield self._entry(i)

    def add_findings(self, i: int, findings: list) -> None:
        """Findings (as Finding.to_dict gives them) added to entry ``i``: each time it is
        read, its findings are these and its own, sorted as a build sorts them (the same
        entry as one put back with them merged, ``entries[i] = entry``). Entries held in a
        spill are not decoded for it: the findings go to the spill and their place into an
        array of two 8-byte integers per entry (a build of 100 000 species adds them to
        every species that has no formation properties)."""
        self.add_findings_to(((i, findings),))

    def add_findings_to(self, added) -> None:
        """``add_findings`` of each (index, findings) of ``added``, those going to the spill
        written there ADDED_AT_ONCE entries per write (a build adds them to every species
        without formation properties: 10 000 writes at 10 000 species, one by one; all in
        one write held every finding's dict at once, and a build of 100 000 species peaked
        at 1 163 instead of 862 MiB)."""
        from itertools import islice

        import orjson

        pairs = ((range(len(self))[i], list(f)) for i, f in added if f)
        if self._spill is None:
            for i, findings in pairs:
                entry = self._entry(i)
                entry["findings"] = merged_findings(entry["findings"], findings)
                self[i] = entry
            return
        if self._more is None:
            self._more = array("q", [-1]) * (2 * len(self))
        while part := list(islice(pairs, ADDED_AT_ONCE)):
            places = self._spill.put_many(orjson.dumps(self._added(i) + findings)
                                          for i, findings in part)
            for (i, _), (offset, size) in zip(part, places):
                self._more[2 * i], self._more[2 * i + 1] = offset, size

    def key(self, i: int) -> str:
        """The key of entry ``i`` as it reads (sha256, hex; nothing decoded): of its compact
        JSON, and with findings added to it, of that and their compact JSON. Two entries
        of equal keys read as equal dicts: what release/reuse.py takes a piece of a release
        by."""
        import hashlib

        own = self._digests[i] if self._digests is not None else None
        if own is None:
            own = hashlib.sha256(self._json(i)).hexdigest()
        if self._more is None or self._more[2 * i] < 0:
            return own
        added = self._spill.get(self._more[2 * i], self._more[2 * i + 1])
        return hashlib.sha256(own.encode() + b"\0" + added).hexdigest()

    def held(self, i: int) -> tuple:
        """(compact JSON of entry ``i`` as held, compact JSON of the findings added to it or
        None): what ``of_held`` reads as entry ``i``, nothing decoded."""
        added = None if self._more is None or self._more[2 * i] < 0 else \
            self._spill.get(self._more[2 * i], self._more[2 * i + 1])
        return self._json(i), added

    def read_only(self) -> "Entries":
        """These entries as reading them needs, for another process (core.spill.dumps_across):
        without their outlines and digests (made again from the entries if asked for), the
        places of those in a spill held compact (core.spill.Places)."""
        from ..core.spill import Places

        out = Entries.__new__(Entries)
        out._ids, out._blobs, out._formulas, out._more = \
            self._ids, Places.of(self._blobs), self._formulas, self._more
        out._spill, out._index, out._outlines, out._digests = self._spill, None, None, None
        return out

    def ids(self) -> list:
        """The species ids, in order (nothing decoded)."""
        return list(self._ids)

    def formulas(self) -> dict:
        """{species id: formula}, decoding the entries only when their formulas were not
        given."""
        if self._formulas is None:
            return {e["id"]: e["formula"] for e in self}
        return dict(zip(self._ids, self._formulas))

    def outlines(self):
        """The ``outline`` of each entry, in order: decoded from those given, else made from
        each entry decoded."""
        if self._outlines is None:
            return (outline(e) for e in self)
        return (_loads(self._held(blob)) for blob in self._outlines)

    def position(self, sid: str) -> int:
        """The index of entry ``sid`` (KeyError when there is none)."""
        if self._index is None:
            self._index = {s: i for i, s in enumerate(self._ids)}
        return self._index[sid]

    def by_id(self) -> Mapping:
        """A read-only mapping of ids to entries that decodes only what is looked up."""
        return _ById(self)


class _ById(Mapping):
    """{species id: entry} over Entries; the last CACHED entries looked up are kept
    decoded (the reference species are looked up once per species that counts from them).
    The entries it gives are to be read, not changed."""

    CACHED = 64

    def __init__(self, entries: Entries):
        self._entries, self._cache = entries, {}

    def __getitem__(self, sid: str) -> dict:
        hit = self._cache.pop(sid, None)
        if hit is None:
            hit = self._entries[self._entries.position(sid)]
            if len(self._cache) >= self.CACHED:
                del self._cache[next(iter(self._cache))]
        self._cache[sid] = hit      # the most recent last
        return hit

    def __contains__(self, sid) -> bool:
        try:
            self._entries.position(sid)
        except (KeyError, TypeError):
            return False
        return True

    def __iter__(self):
        return iter(self._entries.ids())

    def __len__(self) -> int:
        return len(self._entries)


def by_id(doc: dict) -> Mapping:
    """{species id: entry} of library document ``doc``: a read-only mapping that decodes on
    demand when its species are held as Entries, else a dict."""
    species = doc["species"]
    if isinstance(species, Entries):
        return species.by_id()
    return {s["id"]: s for s in species}


def held_of(species, i: int) -> tuple:
    """``Entries.held(i)`` of ``species`` (a document's list of entries, or Entries): for a
    list, the compact JSON of its entry and None."""
    if isinstance(species, Entries):
        return species.held(i)
    return compact(species[i]), None


def of_held(held: tuple) -> dict:
    """The entry that ``held_of`` gave as held: its JSON decoded, with the findings added
    to it merged in (``Entries.add_findings``)."""
    blob, added = held
    entry = _loads(blob)
    if added is not None:
        entry["findings"] = merged_findings(entry["findings"], _loads(added))
    return entry


def key_of(species, i: int) -> str:
    """The key of entry ``i`` of ``species`` as it reads (sha256, hex): ``Entries.key``,
    or that of a list's entry by its compact JSON."""
    import hashlib

    if isinstance(species, Entries):
        return species.key(i)
    return hashlib.sha256(compact(species[i])).hexdigest()


def ids_of(species) -> list:
    """The ids of ``species`` (a document's list of entries, or Entries: nothing decoded)."""
    if isinstance(species, Entries):
        return species.ids()
    return [s["id"] for s in species]


def formulas_of(doc: dict) -> dict:
    """{species id: formula} of library document ``doc`` (of Entries, without decoding them
    when they know their formulas)."""
    species = doc["species"]
    if isinstance(species, Entries):
        return species.formulas()
    return {s["id"]: s["formula"] for s in species}


def outlines_of(doc: dict):
    """The ``outline`` of each species of library document ``doc``, in order (of Entries,
    without decoding them when they know their outlines; a list's entries as they are, which
    read as outlines)."""
    species = doc["species"]
    return species.outlines() if isinstance(species, Entries) else iter(species)
