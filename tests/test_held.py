"""The fitted species as a build holds them until its release is written
(pipeline/release/held.py): in its scratch file, read back as they were, and the documents
made of them the same as of the FittedSpecies themselves."""

import pickle

import pytest
from thermoledger import build
from thermoledger.core.records import FittedSpecies
from thermoledger.core.spill import Spill
from thermoledger.library.entries import compact
from thermoledger.release import document, held, provenance

from .test_partitions import RAW


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    return build.build(RAW, tmp_path_factory.mktemp("held") / "out", parts=2)


def test_a_build_holds_its_fitted_species_in_its_scratch_file(built):
    """The result's fitted species are a HeldFitted: FittedSpecies in species-id order, each
    unpickled when read, with the Brief and the lineage of each, in the same order."""
    fitted = built.fitted
    assert isinstance(fitted, held.HeldFitted) and len(fitted) > 3
    ids = [sp.table.meta.species_id for sp in fitted]
    assert ids == sorted(ids) == [b.species_id for b in fitted.briefs]
    assert all(isinstance(sp, FittedSpecies) for sp in fitted)
    assert fitted[1] == list(fitted)[1] and fitted[1] is not fitted[1]     # a fresh object
    assert [held.brief(sp) for sp in fitted] == fitted.briefs
    assert list(fitted.lineages) == [provenance.lineage(sp) for sp in fitted]
    assert [sp.table.meta.species_id for sp in fitted[1:3]] == ids[1:3]


def test_held_and_listed_fitted_species_make_the_same_documents(built, tmp_path):
    """The library and provenance documents of a HeldFitted are those of the same
    FittedSpecies as a list, in any order."""
    fitted = built.fitted
    listed = list(reversed(fitted))
    assert held.in_order(fitted) is fitted
    assert held.in_order(listed) == list(fitted)
    assert held.briefs_of(listed) == fitted.briefs
    entries = {e["id"]: e for e in built.document["species"]}
    docs = [document.library_document(f, (), "0" * 64, {}, entries) for f in (fitted, listed)]
    assert docs[0] == docs[1] and docs[0]["species"] == built.document["species"]
    prov = [provenance.prov_document(f, built.inputs, [("library.json", "0" * 64, 1)])
            for f in (fitted, listed)]
    assert b"".join(document.json_chunks(prov[0])) == b"".join(document.json_chunks(prov[1]))


def test_lineages_of_other_species_are_refused(tmp_path):
    """A HeldFitted whose lineages are not those of its species, in order, is an error."""
    spill = Spill(tmp_path)
    brief = held.Brief("A(g)", "A", "nasa7", ())
    blob = spill.put(pickle.dumps("A"))
    with pytest.raises(ValueError, match="not those of the fitted species"):
        held.HeldFitted(spill, [(brief, blob)], [("B(g)", spill.put(compact({"id": "B(g)"})))])
    assert held.HeldFitted(spill, [(brief, blob)],
                           [("A(g)", spill.put(compact({"id": "A(g)"})))])[0] == "A"
