"""The fitted species as a large build holds them until its release is written.

What the release takes from the fitted species after their library entries are made is
their lineage: the manifest's account of each fit (files, lines, findings, settings), the
provenance's (its id, form and the raw files it used) and the formulas of the library
entries. Held as Python objects, the lineage of a species costs 2.2 KB; at 100 000 species
that is 220 MB of a build's own process. A partition therefore gives each species as a
``Brief`` (what the provenance and the library need, some 250 bytes), its manifest lineage
as compact JSON and the FittedSpecies pickled; the build puts the last two in its scratch
file (core/spill.py), and ``HeldFitted`` reads as the sequence of FittedSpecies they stand
for, each unpickled when it is read.

``in_order`` and ``briefs_of`` are how the release's functions take the fitted species,
given as HeldFitted or as any sequence of FittedSpecies.
"""

import pickle
from typing import NamedTuple

from ..core.lazy import LazyList
from ..library.entries import Entries


class Brief(NamedTuple):
    """What the library and provenance documents take from a fitted species."""

    species_id: str
    formula: str
    form: str
    used: tuple       # files of the tables whose rows the fit used, in the order of its uses


def brief(sp) -> Brief:
    """The Brief of FittedSpecies ``sp``."""
    meta = sp.table.meta
    return Brief(meta.species_id, meta.formula, sp.fit.form,
                 tuple(u.meta.file for u in sp.uses if u.rows))


def pickled(sp) -> bytes:
    """FittedSpecies ``sp`` as HeldFitted reads it back."""
    return pickle.dumps(sp, protocol=pickle.HIGHEST_PROTOCOL)


class HeldFitted(LazyList):
    """FittedSpecies in species-id order, each held pickled where a core.spill.Spill holds
    it and unpickled when read; ``briefs`` their Briefs and ``lineages`` their manifest
    lineages (release/provenance.lineage) as library.entries.Entries of compact JSON, both
    in the same order."""

    __slots__ = ("_spill", "_where", "briefs", "lineages")

    def __init__(self, spill, fitted=(), lineages=(), digests=None):
        """``fitted``: (Brief, (offset, size) of the pickled FittedSpecies in ``spill``) in
        species-id order; ``lineages``: (species id, (offset, size) of its compact JSON);
        ``digests`` the sha256 of each lineage's compact JSON, in order, when known."""
        self._spill = spill
        self.briefs = [b for b, _ in fitted]
        self._where = [w for _, w in fitted]
        self.lineages = Entries(lineages, spill, digests=digests)
        if self.lineages.ids() != [b.species_id for b in self.briefs]:
            raise ValueError("the lineages are not those of the fitted species, in order")

    def __len__(self) -> int:
        return len(self._where)

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self[j] for j in range(*i.indices(len(self)))]
        return pickle.loads(self._spill.get(*self._where[i]))

    def __iter__(self):
        for i in range(len(self._where)):
            yield self[i]


def in_order(fitted):
    """``fitted`` (HeldFitted, or FittedSpecies in any order) in species-id order: a
    HeldFitted as it is (nothing unpickled)."""
    if isinstance(fitted, HeldFitted):
        return fitted
    return sorted(fitted, key=lambda s: s.table.meta.species_id)


def briefs_of(fitted) -> list:
    """The Briefs of ``fitted`` in species-id order (of a HeldFitted, nothing unpickled)."""
    if isinstance(fitted, HeldFitted):
        return fitted.briefs
    return [brief(s) for s in in_order(fitted)]
