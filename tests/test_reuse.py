"""What a release takes from the last release of its home (pipeline/release/reuse.py): the
pieces of the species whose entries are unchanged, and the same bytes as a fresh build."""

import json
import os
import shutil

import orjson
import pytest
from thermoledger import build, partitions
from thermoledger.core.errors import OutputError
from thermoledger.core.settings import FitSettings, Settings
from thermoledger.library.entries import Entries
from thermoledger.release import document, reuse, tables

from .conftest import tree_hashes
from .test_partitions import RAW, _edit_one_table


@pytest.fixture
def small_groups(monkeypatch):
    """Row groups of a few rows: the rows taken and made fall on both sides of their
    edges."""
    monkeypatch.setattr(tables, "ROW_GROUP", 7)
    monkeypatch.setattr(document, "LIBRARY_ROW_GROUP", 5)


@pytest.fixture
def counted(monkeypatch):
    """{(file, 'taken' or 'made'): how many pieces} of the builds that follow."""
    seen = {}
    real_piece, real_rows = reuse.Taking.piece, reuse.Taking.rows

    def count(name, got):
        key = (name, "made" if got is None else "taken")
        seen[key] = seen.get(key, 0) + 1
        return got

    monkeypatch.setattr(reuse.Taking, "piece",
                        lambda self, j: count(self.name, real_piece(self, j)))
    monkeypatch.setattr(reuse.Taking, "rows",
                        lambda self, j: count(self.name, real_rows(self, j)))
    return seen


def _home(tmp_path, parts=4):
    """A copy of the demo's raw data and a release home built from it until its
    partitions and pieces are kept (the second build is offered the first's breakpoints)."""
    raw, out = tmp_path / "raw", tmp_path / "out"
    shutil.copytree(RAW, raw)
    for _ in range(2):
        build.build(raw, out, parts=parts)
    return raw, out


def _fresh_twin(tmp_path, out):
    """A copy of release home ``out`` to build with --fresh."""
    twin = tmp_path / "twin"
    shutil.rmtree(twin, ignore_errors=True)
    shutil.copytree(out, twin, symlinks=True)
    return twin


def test_a_rebuild_takes_the_unchanged_pieces_and_writes_the_fresh_build_s_bytes(
        tmp_path, small_groups, counted):
    """After one table is edited, every other species' item of library.json and lineage,
    and its rows of library.parquet and tables.parquet, are taken from the last release;
    the edited species' are made; the release is byte for byte a fresh build's."""
    raw, out = _home(tmp_path)
    twin = _fresh_twin(tmp_path, out)
    _edit_one_table(raw)
    counted.clear()
    edited = build.build(raw, out, parts=4)
    n = len(edited.document["species"])
    for name in reuse.JSON_FILES + reuse.PARQUET_FILES:
        assert counted[(name, "made")] >= 1, name            # CO(g), whose table changed
        assert counted[(name, "made")] + counted[(name, "taken")] == n, name
        assert counted[(name, "taken")] >= n // 2, name
    fresh = build.build(raw, twin, parts=4, fresh=True)
    assert edited.reused[0] > 0 and fresh.reused[0] == 0
    assert tree_hashes(out) == tree_hashes(twin)


def test_nothing_is_taken_when_fresh_in_another_context_or_from_a_changed_file(
        tmp_path, counted):
    raw, out = _home(tmp_path, parts=2)
    counted.clear()
    build.build(raw, out, parts=2, fresh=True)
    assert not any(how == "taken" for _, how in counted)
    counted.clear()
    other = Settings(fit=FitSettings(accept_cp_max_rel=0.02))
    build.build(raw, out, other, parts=2)             # another context: nothing taken
    assert not any(how == "taken" for _, how in counted)
    build.build(raw, out, other, parts=2)
    twin = _fresh_twin(tmp_path, out)
    library = (out / "current" / "library.json").resolve()
    os.utime(library, ns=(library.stat().st_atime_ns, library.stat().st_mtime_ns + 10 ** 9))
    counted.clear()
    build.build(raw, out, other, parts=2)             # its identity changed: made anew
    assert ("library.json", "taken") not in counted
    assert counted[("library.parquet", "taken")] == len(json.loads(library.read_bytes())["species"])
    build.build(raw, twin, other, parts=2, fresh=True)
    assert tree_hashes(out) == tree_hashes(twin)


def _swap_places(out, name):
    """Swap where the first two species' pieces of ``name`` lie in the kept places."""
    path = out / partitions.STORE / reuse.KEPT
    kept = orjson.loads(path.read_bytes())
    at = kept["files"][name]["places"]
    at[0:2], at[2:4] = at[2:4], at[0:2]
    path.write_bytes(orjson.dumps(kept))


def test_a_json_piece_kept_at_another_item_s_place_is_made_anew(tmp_path, counted):
    raw, out = _home(tmp_path, parts=2)
    twin = _fresh_twin(tmp_path, out)
    _swap_places(out, "library.json")
    counted.clear()
    build.build(raw, out, parts=2)
    assert counted[("library.json", "made")] == 2
    build.build(raw, twin, parts=2, fresh=True)
    assert tree_hashes(out) == tree_hashes(twin)


def test_parquet_rows_kept_at_another_species_place_stop_the_build_and_say_how_to_go_on(
        tmp_path):
    raw, out = _home(tmp_path, parts=2)
    before = tree_hashes(out)
    _swap_places(out, "library.parquet")
    with pytest.raises(OutputError, match="library.parquet are not those its build kept "
                                          r"\(pieces.json\): build again with --fresh"):
        build.build(raw, out, parts=2)
    assert tree_hashes(out) == before                  # nothing published
    build.build(raw, out, parts=2, fresh=True)


def test_an_entry_s_key_is_the_same_known_or_read_and_follows_its_added_findings():
    entries = [{"id": "A(g)", "findings": []}, {"id": "B(g)", "findings": [{"code": "X"}]}]
    blobs = [(e["id"], orjson.dumps(e)) for e in entries]
    import hashlib

    digests = [hashlib.sha256(b).hexdigest() for _, b in blobs]
    read, known = Entries(blobs), Entries(blobs, digests=digests)
    assert [read.key(i) for i in range(2)] == [known.key(i) for i in range(2)] == digests
    assert reuse.keys_of(entries) == digests
    known[0] = {"id": "A(g)", "findings": [], "more": 1}           # put back changed
    assert known.key(0) == hashlib.sha256(orjson.dumps(known[0])).hexdigest() != digests[0]


def _set_place(out, name, place):
    """Give the first species' piece of ``name`` the kept place ``place``."""
    path = out / partitions.STORE / reuse.KEPT
    kept = orjson.loads(path.read_bytes())
    kept["files"][name]["places"][0:2] = place
    path.write_bytes(orjson.dumps(kept))


def test_a_kept_place_that_is_not_one_is_made_anew_or_refused(tmp_path, counted):
    """A negative place is not taken; places not written as a build writes them leave
    nothing taken from their file; a place beyond a Parquet file's rows stops the build."""
    raw, out = _home(tmp_path, parts=2)
    twin = _fresh_twin(tmp_path, out)
    _set_place(out, "library.json", ["not", "a place"])
    _set_place(out, "manifest.json", [-5, 10])
    counted.clear()
    build.build(raw, out, parts=2)
    assert ("library.json", "taken") not in counted
    assert counted[("manifest.json", "made")] == 1 and counted[("manifest.json", "taken")] > 1
    build.build(raw, twin, parts=2, fresh=True)
    assert tree_hashes(out) == tree_hashes(twin)
    _set_place(out, "tables.parquet", [10 ** 6, 3])       # beyond the file's rows
    with pytest.raises(OutputError, match="tables.parquet are not those its build kept"):
        build.build(raw, out, parts=2)
