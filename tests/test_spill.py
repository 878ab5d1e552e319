"""The build's scratch file (pipeline/core/spill.py): what a build holds until its release is
written lies there, reads back as written, and leaves nothing behind."""

import os
import pickle

import numpy as np
import orjson
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp
from thermoledger import build
from thermoledger.core.spill import Spill
from thermoledger.library import tables
from thermoledger.library.entries import Entries

from .test_partitions import RAW


@settings(max_examples=100, deadline=None)
@given(st.lists(st.binary(max_size=300), max_size=6), hnp.arrays(np.float64, st.integers(0, 40)))
def test_what_is_spilled_reads_back_as_written(tmp_path_factory, blobs, values):
    """Bytes by (offset, size), whatever was written before and after them; an array's
    buffer to the last bit, NaN included."""
    folder = tmp_path_factory.mktemp("spill")
    spill = Spill(folder)
    where = [spill.put(b) for b in blobs]
    at = spill.put(values)
    together = spill.put_many(blobs + [values])       # one write: the same reading
    assert [spill.get(*w) for w in where] == blobs
    assert [spill.get(*w) for w in together[:-1]] == blobs
    assert spill.get(*together[-1]) == values.tobytes()
    assert [size for _, size in together] == [size for _, size in where + [at]]
    assert np.frombuffer(spill.get(*at), dtype=np.float64).tobytes() == values.tobytes()
    assert os.listdir(folder) == []            # the file has no name
    with pytest.raises(OSError, match="ends before"):
        spill.get(together[-1][0], together[-1][1] + 1)
    spill.close()


def test_entries_in_a_spill_read_and_are_put_back_there(tmp_path):
    spill = Spill(tmp_path)
    entries = [{"id": f"s{i}", "x": [0.1 * i, None]} for i in range(4)]
    kept = Entries(((e["id"], spill.put(orjson.dumps(e))) for e in entries), spill)
    assert kept == entries and kept[1:3] == entries[1:3]
    changed = {**entries[2], "x": [2.5]}
    kept[2] = changed
    assert kept[2] == changed and isinstance(kept._blobs[2], tuple)


@pytest.mark.parametrize("rows_of", [lambda i: i + 1, lambda i: 4],
                         ids=["rows of each species", "the same rows for all"])
def test_packed_rows_in_a_spill_are_the_rows_packed(tmp_path, rows_of):
    """Each species' record in the spill is its columns' bytes one after another, whether
    the species have as many rows each (written as one array) or not."""
    own = {f"s{i}": {"id": [f"s{i}"] * rows_of(i), "phase": ["g"] * rows_of(i),
                     **{c: np.linspace(1.0 + i, 2.0, rows_of(i)) if c not in tables.FLAGS
                        else np.arange(rows_of(i)) % 2 == i % 2
                        for c in tables.COLUMNS if c not in tables.TEXT}} for i in range(5)}
    block = tables.pack_rows(own)
    spill = Spill(tmp_path)
    spilled = tables.spill_rows(block, spill)
    kept = tables.unpack_rows(spilled)
    plain = tables.unpack_rows(block)
    for k, sid in enumerate(own):
        assert list(kept[sid]) == list(plain[sid])
        for c, v in plain[sid].items():
            assert np.asarray(kept[sid][c]).tobytes() == np.asarray(v).tobytes()
        assert spill.get(*spilled["spilled"][k]) == b"".join(
            np.asarray(own[sid][c]).tobytes() for c in tables.COLUMNS if c not in tables.TEXT)


def test_a_build_holds_its_entries_in_a_scratch_file_that_leaves_nothing(tmp_path):
    """A build puts each partition's library entries and evaluated tables in its scratch
    file as they arrive; the release home holds only what a build writes, and the library
    read from the scratch file is the one written."""
    out = tmp_path / "out"
    result = build.build(RAW, out, parts=2)
    species = result.document["species"]
    assert species._spill is not None and all(isinstance(b, tuple) for b in species._blobs)
    written = orjson.loads((out / "current" / "library.json").read_bytes())
    assert species == written["species"]
    assert species.formulas() == {e["id"]: e["formula"] for e in written["species"]}
    for p in out.iterdir():
        assert p.name in {"current", "releases", ".parts", ".lock"} or \
            (p.is_symlink() and os.readlink(p) == f"current/{p.name}")
    assert {p.name for p in (out / ".parts").iterdir()
            if not p.name.startswith(("part-", "pages-"))} == {"breakpoints.json",
                                                               "digests.json", "pieces.json"}


def test_objects_in_a_spill_are_unpickled_when_read(tmp_path):
    from thermoledger.core.spill import SpilledObjects

    spill = Spill(tmp_path)
    objs = {"a": {"t": np.arange(3.0), "dh": (np.zeros(2), np.ones(2))}, "b": {}}
    held = SpilledObjects(spill, {k: spill.put_object(v) for k, v in objs.items()})
    assert list(held) == ["a", "b"] and len(held) == 2 and held.get("c", 7) == 7
    pickled = [pickle.dumps(v, protocol=pickle.HIGHEST_PROTOCOL) for v in objs.values()]
    at_once = SpilledObjects(spill, dict(zip(objs, spill.put_many(pickled))))
    assert at_once["a"]["t"].tolist() == [0.0, 1.0, 2.0] and at_once["b"] == {}
    assert spill.put_many([]) == []
    assert held["b"] == {} and held["a"]["dh"][1].tolist() == [1.0, 1.0]
    assert held["a"] is not held["a"]                   # a fresh object at each read
    assert held.pickled("a") == pickle.dumps(objs["a"], protocol=pickle.HIGHEST_PROTOCOL)


def test_asking_whether_a_spill_holds_an_object_reads_nothing(tmp_path, monkeypatch):
    """``key in`` SpilledObjects looks at the keys alone (the report asks it of every
    species before it sends their points on as pickled)."""
    from thermoledger.core import spill as spill_module

    spill = Spill(tmp_path)
    held = spill_module.SpilledObjects(spill, {"a": spill.put_object({"t": np.ones(2)})})
    monkeypatch.setattr(spill, "get", lambda *a: pytest.fail("read"))
    assert "a" in held and "b" not in held


def test_a_spill_nobody_reads_any_more_is_closed_without_a_warning(tmp_path):
    """The build's scratch file goes with the last object that reads it (a build's result):
    no ResourceWarning for an unclosed file, and nothing left in the folder."""
    import gc
    import warnings

    with warnings.catch_warnings(record=True) as seen:
        warnings.simplefilter("always")
        spill = Spill(tmp_path)
        where = spill.put(b"entry")
        assert spill.get(*where) == b"entry"
        del spill
        gc.collect()
    assert not [w for w in seen if issubclass(w.category, ResourceWarning)]
    assert os.listdir(tmp_path) == []


def test_another_process_reads_a_spill_by_where_it_is(tmp_path):
    """A process of its own (a new interpreter, holding nothing of this one) opens the
    unnamed file by its SpillAt and reads what was written, by (offset, size)."""
    import subprocess
    import sys

    spill = Spill(tmp_path)
    where = spill.put_many([b"first piece", b"\x00\x01 second"])
    at = spill.at()
    code = ("import sys; from thermoledger.core.spill import SpillAt, SpillReader; "
            f"r = SpillReader(SpillAt({at.pid}, {at.fd}, {at.device}, {at.inode})); "
            f"sys.stdout.buffer.write(r.get{where[1]!r} + b'|' + r.get{where[0]!r})")
    got = subprocess.run([sys.executable, "-c", code], capture_output=True, check=True)
    assert got.stdout == b"\x00\x01 second|first piece"
    spill.close()


def test_a_descriptor_that_is_no_longer_the_spill_is_refused(tmp_path):
    """The descriptor named by a SpillAt may by then be another file (the spill closed and
    its number reused): the device and inode tell, and nothing is read from it."""
    from dataclasses import replace

    from thermoledger.core.spill import SpillReader, readable_elsewhere

    spill = Spill(tmp_path)
    spill.put(b"data")
    assert readable_elsewhere(spill)
    with pytest.raises(OSError, match="no longer its scratch file"):
        SpillReader(replace(spill.at(), inode=spill.at().inode + 1))
    spill.close()


def test_what_is_pickled_across_reads_its_spills_from_the_file_itself(tmp_path):
    """Entries and packed rows that point into a spill, pickled across (dumps_across), read
    back as themselves; each spill crosses as where it is, not as its bytes, and opens once
    however often it is named."""
    from thermoledger.core.spill import SpillReader, dumps_across, loads_across

    spill = Spill(tmp_path)
    entries = [{"id": f"s{i}", "formula": "N2", "x": [0.5 * i]} for i in range(50)]
    kept = Entries(((e["id"], spill.put(orjson.dumps(e))) for e in entries), spill,
                   formulas=["N2"] * 50, digests=["d"] * 50)
    own = {f"s{i}": {"id": [f"s{i}"] * 3, "phase": ["g"] * 3,
                     **{c: np.linspace(1.0, 2.0 + i, 3) if c not in tables.FLAGS
                        else np.array([True, False, True])
                        for c in tables.COLUMNS if c not in tables.TEXT}} for i in range(3)}
    rows = tables.unpack_rows(tables.spill_rows(tables.pack_rows(own), spill))
    data = dumps_across((kept.read_only(), rows))
    assert len(data) < 20 * 50 + 2000       # places, ids and formulas: no entry's bytes
    back, back_rows = loads_across(data)
    assert back == entries and back.formulas() == kept.formulas()
    assert back._digests is None and back._outlines is None
    assert isinstance(back._spill, SpillReader)
    assert back_rows["s1"]["id"] == own["s1"]["id"]
    for c in own["s2"]:
        if c not in ("id", "phase"):
            assert np.array_equal(back_rows["s2"][c], own["s2"][c])
    assert back_rows._blocks[0]["spill"] is back._spill     # one reader for the one file
    spill.close()


def test_places_read_as_the_pairs_they_hold_and_a_mixed_list_stays_as_it_is():
    from thermoledger.core.spill import Places

    pairs = [(0, 12), (12, 3), (2 ** 40, 7)]
    held = Places.of(pairs)
    assert isinstance(held, Places) and len(held) == 3
    assert list(held) == pairs and held[1] == (12, 3) and held[-1] == (2 ** 40, 7)
    assert pickle.loads(pickle.dumps(held))[2] == (2 ** 40, 7)
    mixed = [b"in memory", (5, 6)]
    assert Places.of(mixed) is mixed
    with pytest.raises(IndexError):
        held[3]
