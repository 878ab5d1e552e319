"""The species partitions of the engine (pipeline/partitions.py): every table in exactly
one partition, and a release built from several partitions in several worker processes byte
for byte the release built from one."""

import json
import os
import pickle
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from thermoledger import build, partitions
from thermoledger.core.findings import Finding
from thermoledger.core.names import species_name
from thermoledger.ingest import sources
from thermoledger.release import pages, reuse

from .conftest import run_cli, tree_hashes

RAW = Path(__file__).resolve().parent.parent / "raw"


def _read(part=None):
    got = sources.ingest(RAW, part)
    return {(t.meta.file, t.meta.species_id) for t in got.tables}, got


def test_every_table_lies_in_exactly_one_partition_and_phases_stay_together():
    whole, _ = _read()
    for count in (2, 3, 5):
        parts = [_read(partitions.Part(k, count))[0] for k in range(count)]
        assert set().union(*parts) == whole
        assert sum(len(p) for p in parts) == len(whole)       # disjoint
        for p in parts:        # the phases of a species name share a partition
            names = {species_name(sid) for _, sid in p}
            assert not names & {species_name(sid) for q in parts if q is not p
                                for _, sid in q}


def test_a_process_keeps_a_source_s_tables_grouped_and_pickled_not_as_objects():
    """A worker reads every source.json once and keeps its table entries grouped by
    partition as pickled bytes (a 100 000-species build held them all as Python objects in
    every worker, some 150 MB each): each partition gets the entries the file lists, as
    fresh objects, in order, and together the partitions get each entry once."""
    path = RAW / "isru-rrho-2026" / "source.json"
    text = path.read_text()
    listed = json.loads(text)["tables"]
    cut = partitions.Part(0, 3)
    parsed = sources._parsed_source(text, "isru-rrho-2026/source.json", "isru-rrho-2026",
                                    "not checked", cut)
    assert "tables" not in parsed.doc and all(isinstance(b, bytes) for b in parsed.tables.values())
    got = [sources._own_tables(parsed, partitions.Part(k, 3)) for k in range(3)]
    assert sorted(i for part in got for i, _ in part) == list(range(len(listed)))
    for k, part in enumerate(got):
        assert [e for _, e in part] == [listed[i] for i, _ in part]
        assert all(partitions.partition_of(e["species"], 3) == k for _, e in part)
    again = sources._own_tables(parsed, partitions.Part(1, 3))
    assert again == got[1] and all(a[1] is not b[1] for a, b in zip(again, got[1]))


def test_what_a_process_keeps_of_the_sources_it_read_is_small(tmp_path):
    """After reading one partition of a catalogue, a process keeps of every source.json
    little beyond its table entries pickled: not the file's
    text, not the set of every file it lists, not every species name's partition. At
    100 000 species those were 17, 12 and 21 MB in every process that computes partitions.
    The bound lies between what the process keeps now (some 230 bytes a table) and what it
    kept before (some 700): counted by tracemalloc, not timed."""
    import gc
    import tracemalloc

    from thermoledger import ingest
    from thermoledger.testing.catalogue import write_catalogue

    write_catalogue(tmp_path / "small", 10, seed=7)
    write_catalogue(tmp_path / "large", 4000)
    ingest.ingest(tmp_path / "small", partitions.Part(2, 40))   # what reading loads once
    partitions.partition_of.cache_clear()
    gc.collect()
    tracemalloc.start()
    try:
        before = tracemalloc.get_traced_memory()[0]
        got = ingest.ingest(tmp_path / "large", partitions.Part(2, 40))
        del got
        gc.collect()
        kept = tracemalloc.get_traced_memory()[0] - before
    finally:
        tracemalloc.stop()
    assert kept < 400 * 4000


def test_a_partition_is_the_same_in_another_process():
    names = ["N2", "Ti", "C2H4", "FeO", "s00042"]
    here = [partitions.partition_of(n, 7) for n in names]
    code = ("from thermoledger.partitions import partition_of\n"
            f"print([partition_of(n, 7) for n in {names!r}])")
    there = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                           timeout=60, env={"PYTHONHASHSEED": "123", "PATH": ""}).stdout
    assert json.loads(there) == here and len(set(here)) > 1


def test_a_release_from_two_worker_processes_is_byte_identical(tmp_path):
    """The demo (several sources per species, a coefficient-set file of several species,
    phases linked by transitions, quarantined tables) built in one process and in two."""
    one = build.build(RAW, tmp_path / "one", workers=1)
    two = build.build(RAW, tmp_path / "two", workers=2)
    assert tree_hashes(tmp_path / "one") == tree_hashes(tmp_path / "two")
    assert len(one.fitted) == len(two.fitted) == 17


def test_check_gives_the_same_findings_in_any_number_of_workers(capsys):
    got = {}
    for n in (1, 3):
        code, out, _ = run_cli(capsys, "check", "--raw", RAW, "--json", "--workers", n)
        got[n] = (code, out)
    assert got[1] == got[3] and json.loads(got[1][1])["counts"]["error"] == 2


def test_workers_and_partitions_follow_the_size_of_the_build(tmp_path, monkeypatch):
    assert partitions.plan(RAW, 3) == partitions.Plan(parts=3, workers=3)
    assert partitions.plan(RAW) == partitions.Plan(parts=1, workers=1)     # a small build
    assert partitions.plan(RAW, 2, 7) == partitions.Plan(parts=7, workers=2)
    monkeypatch.setattr(partitions, "PARALLEL_FROM", 5)
    monkeypatch.setattr(partitions, "PART_SIZE", 4)
    entries = partitions.listed_entries(RAW)
    workers = min(partitions._cores(), 4)
    assert partitions.plan(RAW) == partitions.Plan(parts=max(workers, -(-entries // 4)),
                                                   workers=workers)
    (tmp_path / "bad").mkdir()
    (tmp_path / "bad" / "source.json").write_text("[" * 5000)   # unreadable: counts as none
    assert partitions.listed_entries(tmp_path) == 0


def _edit_one_table(raw):
    csv = raw / "isru-rrho-2026" / "co.csv"
    lines = csv.read_text().splitlines()
    cells = lines[5].split(",")
    cells[1] = f"{float(cells[1]) * 1.0001:.6f}"          # one Cp value, +0.01 %
    lines[5] = ",".join(cells)
    csv.write_text("\n".join(lines) + "\n")


def test_an_edited_table_refits_its_partition_only_and_gives_the_full_build(tmp_path):
    """Incremental build: the unchanged partitions come from the last build, and the release
    is byte for byte the one a full build (--fresh) makes from the same previous release."""
    raw, out = tmp_path / "raw", tmp_path / "out"
    shutil.copytree(RAW, raw)
    first = build.build(raw, out, parts=4)
    again = build.build(raw, out, parts=4)
    assert first.reused == (0, 4) and again.reused == (0, 4)   # breakpoints offered changed
    assert build.build(raw, out, parts=4).reused == (4, 4)       # nothing changed
    shutil.copytree(out, tmp_path / "full", symlinks=True)
    _edit_one_table(raw)
    edited = build.build(raw, out, parts=4)
    full = build.build(raw, tmp_path / "full", parts=4, fresh=True)
    assert edited.reused == (3, 4) and full.reused == (0, 4)
    assert tree_hashes(out) == tree_hashes(tmp_path / "full")
    assert len(list((out / partitions.STORE).glob("part-*"))) == 4   # the old one pruned


def test_other_settings_or_a_damaged_store_recompute(tmp_path, capsys):
    from thermoledger.core.settings import FitSettings, Settings

    raw, out = tmp_path / "raw", tmp_path / "out"
    shutil.copytree(RAW, raw)
    for _ in range(3):
        last = build.build(raw, out, parts=2)
    assert last.reused == (2, 2)
    other = Settings(fit=FitSettings(form="nasa9"))
    assert build.build(raw, out, other, parts=2).reused == (0, 2)
    for path in (out / partitions.STORE).iterdir():
        path.write_bytes(b"not a pickle")
    assert build.build(raw, out, other, parts=2).reused == (0, 2)
    for _ in range(2):      # other partitions, then other breakpoints offered (nasa9's)
        code, text, _ = run_cli(capsys, "build", "--raw", raw, "--out", out, "--quiet")
        assert code == 0 and "reused" not in text
    code, text, _ = run_cli(capsys, "build", "--raw", raw, "--out", out, "--quiet")
    assert "reused 1 of 1 partition(s) of species from the last build" in text
    code, text, _ = run_cli(capsys, "build", "--raw", raw, "--out", out, "--quiet", "--fresh")
    assert code == 0 and "reused" not in text


def test_a_build_that_fails_leaves_no_store(tmp_path, monkeypatch):
    from thermoledger.release import assemble

    def broken(*args, **kwargs):
        raise RuntimeError("disk on fire")

    monkeypatch.setattr(assemble, "release_files", broken)
    try:
        build.build(RAW, tmp_path / "out")
    except RuntimeError:
        pass
    assert not (tmp_path / "out").exists()


def test_a_bad_worker_count_is_refused_with_a_clear_message(capsys):
    import pytest

    for bad in ("100", "-1", "two"):
        with pytest.raises(SystemExit) as stop:
            run_cli(capsys, "check", "--raw", RAW, "--workers", bad)
        assert stop.value.code == 2
        assert f"'{bad}' is not a whole number from 0 to 64" in capsys.readouterr().err


def test_a_key_never_reads_outside_raw_nor_a_file_ingest_refuses(tmp_path, monkeypatch):
    """A listed path outside raw/ or a file over the size limit enters the key by what
    ingest sees of it, never by its content; a change of size still changes the key."""
    from thermoledger.core import limits

    raw = tmp_path / "raw"
    shutil.copytree(RAW, raw)
    src = raw / "isru-rrho-2026" / "source.json"
    doc = json.loads(src.read_text())
    doc["tables"][0]["file"] = "../../secret.csv"
    src.write_text(json.dumps(doc))
    (tmp_path / "secret.csv").write_text("a")
    before = partitions.part_keys(raw, 3, {}, {})
    (tmp_path / "secret.csv").write_text("b")               # not read: the key is the same
    assert partitions.part_keys(raw, 3, {}, {}) == before
    monkeypatch.setattr(partitions, "MAX_TABLE_BYTES", 10)
    big = raw / "isru-rrho-2026" / doc["tables"][1]["file"]
    small = partitions.part_keys(raw, 3, {}, {})
    big.write_text(big.read_text().replace("1000,", "1000.0,", 1))   # one byte longer
    assert partitions.part_keys(raw, 3, {}, {}) != small
    assert limits.MAX_TABLE_BYTES > 10


@pytest.mark.parametrize("name", ["{f}", "./{f}", "sub/../{f}", "{f}/", "sub//../{f}"])
def test_a_table_s_key_follows_its_content_however_source_json_writes_its_name(tmp_path,
                                                                                name):
    """A table listed by a plain name (joined as a string) or by one that pathlib
    normalises (joined as pathlib joins it, as ingest reads it) gives its partition the
    key of its content: an edit of the file changes the key."""
    raw = tmp_path / "raw"
    shutil.copytree(RAW, raw)
    (raw / "isru-rrho-2026" / "sub").mkdir()
    src = raw / "isru-rrho-2026" / "source.json"
    doc = json.loads(src.read_text())
    table = raw / "isru-rrho-2026" / doc["tables"][0]["file"]
    doc["tables"][0]["file"] = name.format(f=table.name)
    src.write_text(json.dumps(doc))
    before = partitions.part_keys(raw, 3, {}, {})
    table.write_text(table.read_text().replace("1000,", "1000.0,", 1))
    assert partitions.part_keys(raw, 3, {}, {}) != before


def test_the_progress_counts_partitions_in_partitions():
    from thermoledger.cli.progress import UNITS

    assert UNITS[partitions.STAGE] == "partitions"


def test_partitions_kept_without_the_report_serve_a_build_with_it(tmp_path):
    """The kept partitions do not depend on the outputs asked for: after --no-report builds,
    a build with the report reuses them and writes the report a full build writes."""
    from thermoledger.core.settings import OutputSettings, Settings

    raw, out = tmp_path / "raw", tmp_path / "out"
    shutil.copytree(RAW, raw)
    bare = Settings(outputs=OutputSettings(report=False))
    for _ in range(2):
        build.build(raw, out, bare, parts=2)
    shutil.copytree(out, tmp_path / "full", symlinks=True)
    assert build.build(raw, out, parts=2).reused == (2, 2)
    assert build.build(raw, tmp_path / "full", parts=2, fresh=True).reused == (0, 2)
    assert tree_hashes(out) == tree_hashes(tmp_path / "full")
    assert any(name.startswith("report/img/") for name in tree_hashes(out))


def test_tables_evaluated_in_the_partitions_equal_the_whole_library_s(tmp_path):
    """The evaluated tables are made where each species was fitted, and the formation
    properties (which need every partition's reference species) added afterwards: the
    demo's tables.parquet equals one made from the library document alone, also with
    another table step; a kept partition of another step is not reused."""
    from thermoledger.core.settings import OutputSettings, Settings
    from thermoledger.release.tables import tables_parquet_bytes

    for step in (100.0, 37.5):
        ctx = Settings(outputs=OutputSettings(report=False, table_step=step))
        got = build.build(RAW, tmp_path / "out", ctx, parts=3)
        assert got.files.get("tables.parquet") == tables_parquet_bytes(got.document, step)
        assert got.reused == (0, 3)


def test_check_keeps_no_rows_and_finds_the_same():
    """The check command asks for no rows (a 100 000-table check held 3.4 GB of them);
    its findings, quarantined tables and selections are those of a check that keeps them."""
    bare, full = build.examine(RAW, rows=False), build.examine(RAW)
    assert all(len(t.data) == 0 for t in bare.tables) and any(len(t.data) for t in full.tables)
    assert all(len(s.data) == 0 for s in bare.selections)
    assert bare.findings == full.findings and bare.quarantined == full.quarantined
    assert [s.species_id for s in bare.selections] == [s.species_id for s in full.selections]


def test_a_partition_s_tables_evaluated_together_are_each_species_own_to_the_last_bit():
    """own_rows_of (a partition's species evaluated in one pass) gives each species of the
    demo library, its phases linked by transitions among them, the rows own_rows gives it
    alone."""
    import numpy as np
    from thermoledger.library import document, tables

    doc = document.load(RAW.parent / "curated")
    trs = tables.transitions_of(doc["transitions"])
    assert any(sp.get("anchor") for sp in doc["species"])       # phases reached by transitions
    together = tables.own_rows_of(doc["species"], 50.0, None, trs)
    assert list(together) == [sp["id"] for sp in doc["species"]]
    for sp in doc["species"]:
        alone = tables.own_rows(sp, 50.0, None, trs.get(sp["id"], ()))
        assert list(together[sp["id"]]) == list(alone)
        for c, v in alone.items():
            got = together[sp["id"]][c]
            if c in tables.TEXT:
                assert got == v
            else:
                assert np.asarray(got).dtype == np.asarray(v).dtype
                np.testing.assert_array_equal(got, v)


def test_packed_tables_give_back_every_species_rows():
    """A partition keeps its evaluated tables packed in a few arrays; unpacked they are
    each species' own_rows, value for value and type for type."""
    import numpy as np
    from thermoledger.library import document, tables

    doc = document.load(RAW.parent / "curated")
    trs = tables.transitions_of(doc["transitions"])
    own = {sp["id"]: tables.own_rows(sp, 50.0, None, trs.get(sp["id"], ()))
           for sp in doc["species"]}
    back = tables.unpack_rows(tables.pack_rows(own))
    assert list(back) == sorted(own)
    for sid, rows in own.items():
        assert list(back[sid]) == list(rows)
        for c, v in rows.items():
            if c in tables.TEXT:
                assert back[sid][c] == v
            else:
                assert back[sid][c].dtype == np.asarray(v).dtype
                np.testing.assert_array_equal(back[sid][c], v)
    assert tables.unpack_rows(tables.pack_rows({})) == {}
    ids = sorted(own)            # several blocks (the partitions'), unpacked as one mapping
    blocks = [tables.pack_rows({i: own[i] for i in ids[k::3]}) for k in range(3)]
    both = tables.unpack_rows(*blocks)
    assert len(both) == len(own) and set(both) == set(own) and "nothing" not in both
    for sid, rows in own.items():
        np.testing.assert_array_equal(both[sid]["T"], rows["T"])
        assert both[sid]["id"] == [sid] * len(rows["T"])


def test_kept_partitions_wait_on_disk_until_the_release_is_published(tmp_path, monkeypatch):
    """A build writes each partition to keep as it finishes, under a pending name (not held
    in memory), makes them the kept ones only after publishing, and clears what a killed
    build left pending."""
    out = tmp_path / "out"
    build.build(RAW, out, parts=2)
    stray = out / partitions.STORE / f".pending-1-part-{'0' * 64}.pickle"
    stray.write_bytes(b"left by a killed build")
    seen = {}
    real_commit = partitions.PartStore.commit

    def commit(self):
        seen["pending"] = sorted(p.name.split("-part-")[0] for p in self.folder.iterdir()
                                 if p.name.startswith(".pending-") and "-part-" in p.name)
        seen["held"] = self.pending
        real_commit(self)

    monkeypatch.setattr(partitions.PartStore, "commit", commit)
    build.build(RAW, out, parts=2, fresh=True)
    assert len(seen["pending"]) == 3 and seen["held"] == [0, 1]     # two of this build
    names = sorted(p.name for p in (out / partitions.STORE).iterdir())
    assert names[:2] == [build.KEPT_BREAKPOINTS, partitions.Digests.FILE]
    assert names[2] == pages.KEPT.format((out / "current").resolve().name)
    assert len(names) == 6 and all(n.startswith("part-") for n in names[3:5])
    assert names[5] == reuse.KEPT


def test_a_loaded_partition_is_kept_as_the_caller_keeps_it_before_the_next_is_loaded(
        monkeypatch):
    """A rebuild loads its stored partitions one at a time, each reduced to what the build
    holds (``keep``) before the next is read: a partition whole is some 30 KB per species,
    and a rebuild of 100 000 species that loaded them all first held 2.4 GB."""
    events = []

    def result(k):
        return partitions.PartResult(checked=None, entries=((f"s{k}", b"{}"),))

    class Store:
        def holds(self, k):
            return True               # partition 2's file is there but cannot be read

        def load(self, k):
            events.append(("load", k))
            return None if k == 2 else result(k)

        def save(self, k, result):
            events.append(("save", k))

    def keep(result):
        events.append(("keep", result.entries[0][0]))
        return result

    def work(part):
        events.append(("work", part.index))
        return result(part.index)

    monkeypatch.setattr(partitions, "merge", lambda results: [r.entries for r in results])
    merged, reused = partitions.run(work, partitions.Plan(parts=3, workers=1), store=Store(),
                                    keep=keep)
    assert reused == 2 and merged == [((f"s{k}", b"{}"),) for k in range(3)]
    assert events == [("load", 0), ("keep", "s0"), ("load", 1), ("keep", "s1"), ("load", 2),
                      ("work", 2), ("save", 2), ("keep", "s2")]


def _collector_on(part) -> bool:
    import gc

    return gc.isenabled()


def test_the_garbage_collector_is_paused_in_the_work_and_on_again_after():
    """Full collections walk every object a build keeps (2.6 s of an 11 s rebuild at 10 000
    species); the work of the partitions runs without them, here and in worker processes."""
    import gc
    from functools import partial

    from thermoledger.core.processes import without_collector, worker_pool

    seen = []

    def work(part):
        seen.append(_collector_on(part))
        return partitions.PartResult(checked=build.examine_part(RAW, part=part))

    partitions.run(work, partitions.Plan(parts=2, workers=1))
    with worker_pool(2) as pool:
        seen += pool.map(partial(without_collector, _collector_on),
                         [partitions.Part(k, 2) for k in range(2)])
    assert seen == [False] * 4
    assert gc.isenabled()
    build.build(RAW, None, write=False)
    assert gc.isenabled()


def test_digests_are_remembered_by_file_identity_and_not_for_files_just_changed(
        tmp_path, monkeypatch):
    """A rebuild hashes only the tables whose identity on disk (inode, size, times) changed
    since the last build remembered them; a file changed within RECENT_CHANGE seconds of that
    build is not remembered (it could change again unseen within one clock tick), and the
    keys are those of hashing every file."""
    import time

    from thermoledger.core import limits

    raw, store = tmp_path / "raw", tmp_path / "store"
    shutil.copytree(RAW, raw)
    store.mkdir()
    read = []
    real_read = partitions._sha256_of
    monkeypatch.setattr(partitions, "_sha256_of", lambda p: (
        read.append(Path(p).name) if p.endswith(".csv") else None) or real_read(p))
    tables = len(list(raw.glob("*/*.csv")))
    first = partitions.Digests(store)
    keys = partitions.part_keys(raw, 3, {}, {}, first)
    first.save()
    assert len(read) == tables and partitions.Digests(store).known == {}   # all too recent
    monkeypatch.setattr(limits, "RECENT_CHANGE", 0.0)
    time.sleep(0.05)
    again = partitions.Digests(store)
    assert partitions.part_keys(raw, 3, {}, {}, again) == keys
    again.save()
    read.clear()
    table = sorted(raw.glob("*/*.csv"))[0]
    time.sleep(0.05)
    table.write_text(table.read_text().replace("1", "2", 1))          # the same size
    edited = partitions.part_keys(raw, 3, {}, {}, partitions.Digests(store))
    assert read == [table.name]
    assert edited == partitions.part_keys(raw, 3, {}, {}) != keys     # as hashing every file
    assert partitions.Digests(store, use=False).known == {}            # --fresh


def test_a_partition_is_kept_whole_but_held_as_the_caller_keeps_it(tmp_path):
    """``run`` saves each computed partition whole and holds and merges what ``keep``
    leaves of it (a build without a report leaves out the plot points); a partition taken
    from the store is held the same way."""
    def work(part):
        checked = build.examine_part(RAW, part=part)
        return partitions.PartResult(checked=checked, points=((f"s{part.index}", {}),))

    def keep(result):
        return partitions.PartResult(checked=result.checked)

    cut = partitions.Plan(parts=2, workers=1)
    store = partitions.PartStore(tmp_path / "store", ["a" * 64, "b" * 64])
    merged, reused = partitions.run(work, cut, store=store, keep=keep)
    assert reused == 0 and merged.points == ()
    store.commit()
    assert [store.load(k).points for k in range(2)] == [(("s0", {}),), (("s1", {}),)]
    again = partitions.PartStore(tmp_path / "store", ["a" * 64, "b" * 64])
    merged, reused = partitions.run(work, cut, store=again, keep=keep)
    assert reused == 2 and merged.points == ()
    assert partitions.run(work, cut, store=again)[0].points == (("s0", {}), ("s1", {}))


def test_a_store_makes_its_keys_only_when_it_has_to(tmp_path):
    """Keys given as a function are made when first needed: a store with no folder yet says
    it holds nothing without them (a first build's workers start while they are made), and
    makes them once, to save; a store with a folder makes them to answer."""
    made = []

    def keys():
        made.append(1)
        return ["a" * 64, "b" * 64]

    store = partitions.PartStore(tmp_path / "store", keys)
    assert not store.holds(0) and not store.holds(1) and made == []
    store.save(1, partitions.PartResult(checked=None, points=(("s1", {}),)))
    store.save(0, partitions.PartResult(checked=None, points=(("s0", {}),)))
    store.commit()
    assert len(made) == 1
    again = partitions.PartStore(tmp_path / "store", keys)
    assert again.holds(0) and again.holds(1) and len(made) == 2
    assert again.load(1).points == (("s1", {}),)
    assert not partitions.PartStore(tmp_path / "store", keys, use=False).holds(0)


def _marked_part(part):
    """A partition's result marked with its index (sent from a worker: module level)."""
    return partitions.PartResult(checked=build.examine_part(RAW, part=part),
                                 points=((f"s{part.index}", {"t": part.index}),))


def test_a_partition_pickled_by_a_worker_is_kept_as_those_bytes(tmp_path):
    """Workers send each partition pickled (``_pickled``), and the store keeps those bytes
    after a header of its format and key: the result loads as computed; a file whose
    header names another key or format is not read further, and a damaged body is as
    absent."""
    keys = ["a" * 64, "b" * 64]
    store = partitions.PartStore(tmp_path / "store", keys)
    merged, _ = partitions.run(_marked_part, partitions.Plan(parts=2, workers=2), store=store)
    store.commit()
    assert merged.points == (("s0", {"t": 0}), ("s1", {"t": 1}))
    for k in range(2):
        data = (tmp_path / "store" / f"part-{keys[k]}.pickle").read_bytes()
        head = pickle.dumps((partitions.STORE_FORMAT, keys[k]),
                            protocol=pickle.HIGHEST_PROTOCOL)
        assert data.startswith(head)
        assert pickle.loads(data[len(head):]).points == ((f"s{k}", {"t": k}),)
        assert store.load(k).points == ((f"s{k}", {"t": k}),)
    other = tmp_path / "store" / f"part-{keys[0]}.pickle"
    other.write_bytes(pickle.dumps((partitions.STORE_FORMAT, "c" * 64)) + b"not a pickle")
    assert store.load(0) is None
    other.write_bytes(pickle.dumps((partitions.STORE_FORMAT, keys[0])) + b"not a pickle")
    assert store.load(0) is None
    other.write_bytes(pickle.dumps((partitions.STORE_FORMAT - 1, keys[0], merged)))
    assert store.load(0) is None


def test_a_build_holds_the_numbers_of_a_fit_once_in_its_library_entry(tmp_path):
    """Until its release is written a large build holds every species: the numbers of each
    fit once, in its library entry, and of the fitted species only their lineage (what the
    manifest and the provenance take from them), in the result and in the kept partitions."""
    result = build.build(RAW, tmp_path / "out", parts=2)
    entries = {sp["id"]: sp for sp in result.document["species"]}
    assert result.fitted and len(result.fitted) == len(entries)
    for sp in result.fitted:
        fit = sp.fit
        assert fit.ranges == fit.covariance == fit.model_error == fit.notes == ()
        assert fit.form == entries[sp.table.meta.species_id]["form"] and fit.settings
        assert entries[sp.table.meta.species_id]["ranges"]
    kept = partitions.PartStore(tmp_path / "out" / partitions.STORE,
                                [p.name[5:-7] for p in sorted(
                                    (tmp_path / "out" / partitions.STORE).glob("part-*"))])
    assert all(pickle.loads(f).fit.covariance == () for k in range(2)
               for _, f in kept.load(k).fitted)


def test_the_tables_written_a_row_group_at_a_time_are_the_table_written_whole(
        tmp_path, monkeypatch):
    """tables.parquet is written a row group at a time, never held whole: the bytes are
    those of the whole table written at once in groups of as many rows (pyarrow's own
    cut), whatever the size of a group and where it falls between species."""
    import io

    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq
    from thermoledger.library import tables as evaluated
    from thermoledger.library.formation import Formation
    from thermoledger.release import tables

    doc = build.build(RAW, None, write=False).document

    def whole(group):
        made, trs = Formation(doc), evaluated.transitions_of(doc.get("transitions", []))
        parts = [evaluated.species_rows(sp, 100.0, None, trs.get(sp["id"], ()), made)
                 for sp in doc["species"]]
        cols = {c: np.concatenate([np.asarray(p[c]) for p in parts]) for c in evaluated.COLUMNS}
        table = pa.table({c: pa.array(cols[c], type=pa.string() if c in evaluated.TEXT else (
            pa.bool_() if c in evaluated.FLAGS else pa.float64())) for c in evaluated.COLUMNS})
        table = table.replace_schema_metadata({"thermoledger.units": str(evaluated.UNITS),
                                               "thermoledger.notice": doc["notice"]})
        buf = io.BytesIO()
        pq.write_table(table, buf, compression="zstd", row_group_size=group,
                       use_dictionary=list(tables.DICTIONARY_COLUMNS))
        return buf.getvalue()

    rows = pq.read_metadata(io.BytesIO(tables.tables_parquet_bytes(doc))).num_rows
    assert rows > 100
    for group in (tables.ROW_GROUP, 7, 64, rows, rows - 1):
        monkeypatch.setattr(tables, "ROW_GROUP", group)
        chunks = list(tables.tables_parquet_chunks(doc))
        got = tables.tables_parquet_bytes(doc)
        assert got == whole(group) == b"".join(chunks)
        assert pq.read_metadata(io.BytesIO(got)).num_row_groups == -(-rows // group) \
            == len(chunks) - 1


class _HalfStore:
    """A store that holds the partitions ``held`` (``damaged`` among them cannot be read),
    and records in which process each call was made."""

    def __init__(self, held, damaged=()):
        self.held, self.damaged, self.saved, self.loaded_in = set(held), set(damaged), [], set()

    def holds(self, k):
        return k in self.held

    def load(self, k):
        self.loaded_in.add(os.getpid())
        return None if k in self.damaged else _part_result(k, "stored")

    def save(self, k, result):
        self.saved.append(k)


def _part_result(k, how):
    return partitions.PartResult(checked=None, entries=((f"s{k}", how, os.getpid()),))


def _computed(part):
    return _part_result(part.index, "computed")


@pytest.mark.parametrize("held", [{0, 1, 3}, {0, 3}])
def test_the_partitions_to_compute_run_in_other_processes_while_the_stored_ones_load(
        monkeypatch, held):
    """A rebuild computes its changed partitions (one in a helper process, several in the
    workers) while this process loads the stored ones; every partition ends up once, in
    order, and only the computed ones are saved."""
    monkeypatch.setattr(partitions, "merge", lambda results: [r.entries[0] for r in results])
    store = _HalfStore(held)
    merged, reused = partitions.run(_computed, partitions.Plan(parts=4, workers=2),
                                    store=store)
    assert reused == len(held) and sorted(store.saved) == sorted(set(range(4)) - held)
    assert [e[:2] for e in merged] == [(f"s{k}", "stored" if k in held else "computed")
                                       for k in range(4)]
    assert all(e[2] != os.getpid() for e in merged if e[1] == "computed")
    assert store.loaded_in == {os.getpid()}


def test_a_stored_partition_that_cannot_be_read_is_computed_after_the_others(monkeypatch):
    monkeypatch.setattr(partitions, "merge", lambda results: [r.entries[0] for r in results])
    store = _HalfStore({0, 1, 2}, damaged={1})
    merged, reused = partitions.run(_computed, partitions.Plan(parts=4, workers=2),
                                    store=store)
    assert reused == 2 and store.saved == [3, 1]
    assert [e[1] for e in merged] == ["stored", "computed", "stored", "computed"]


def _fails(part):
    raise ValueError(f"partition {part.index} cannot be made")


def test_a_partition_that_fails_in_the_helper_stops_the_run_and_saves_nothing():
    store = _HalfStore({0, 2, 3})
    with pytest.raises(ValueError, match="partition 1 cannot be made"):
        partitions.run(_fails, partitions.Plan(parts=4, workers=2), store=store)
    assert store.saved == []


def test_what_a_listed_file_gives_a_key_is_told_from_one_look_at_it(tmp_path, monkeypatch):
    """``_file_digest`` (one os.lstat per file): a file's sha256, with or without the
    remembered digests; a link by its target, a folder, a missing file, a file whose real
    path leaves raw/ and a file too large to read by their kind, as ingest sees them."""
    import hashlib

    raw, elsewhere = tmp_path / "raw", tmp_path / "elsewhere"
    (raw / "src").mkdir(parents=True)
    elsewhere.mkdir()
    table = raw / "src" / "a.csv"
    table.write_bytes(b"T [K],Cp [J/(mol*K)]\n300,29.1\n")
    (raw / "src" / "b.csv").symlink_to("a.csv")
    (raw / "src" / "folder.csv").mkdir()
    (elsewhere / "c.csv").write_bytes(b"x")
    (raw / "out").symlink_to(elsewhere, target_is_directory=True)
    real = os.path.realpath(raw)
    partitions._real_folder.cache_clear()
    sha = hashlib.sha256(table.read_bytes()).hexdigest()
    digests = partitions.Digests(tmp_path / "store")
    assert partitions._file_digest(table, real) == sha
    assert partitions._file_digest(table, real, digests) == sha
    assert partitions._file_digest(raw / "src" / "b.csv", real) == "link:a.csv"
    assert partitions._file_digest(raw / "src" / "folder.csv", real) == "dir"
    assert partitions._file_digest(raw / "src" / "none.csv", real) == "absent"
    assert partitions._file_digest(raw / "src" / "a.csv" / "under", real) == "absent"
    assert partitions._file_digest(raw / "out" / "c.csv", real) == "outside"
    monkeypatch.setattr(partitions, "MAX_TABLE_BYTES", 10)
    assert partitions._file_digest(table, real) == f"size:{table.stat().st_size}"


def test_the_paths_a_key_lists_are_pathlib_s_recursive_listing(tmp_path):
    """partitions.listed_paths (one os.walk) lists what sorted(rglob("*")) lists: hidden
    files, empty and nested folders, links to files and to folders (not followed), broken
    links and a link that loops."""
    raw = tmp_path / "raw"
    (raw / "a" / "deep" / "deeper").mkdir(parents=True)
    (raw / "empty").mkdir()
    (raw / "a" / "t.csv").write_text("x")
    (raw / "a" / ".hidden").write_text("x")
    (raw / "a" / "deep" / "deeper" / "u.csv").write_text("x")
    (raw / "link.csv").symlink_to("a/t.csv")
    (raw / "folder-link").symlink_to("a", target_is_directory=True)
    (raw / "broken").symlink_to("nowhere")
    (raw / "a" / "loop").symlink_to("..", target_is_directory=True)
    expected = sorted(str(p.relative_to(raw)) for p in raw.rglob("*"))
    assert partitions.listed_paths(raw) == expected
    assert "folder-link" in expected and "folder-link/t.csv" not in expected


_FINDINGS = st.builds(
    lambda code, file, line, message, species: Finding(
        code, "warning" if code == "SMOOTH-OUTLIER" else "info", message, source="s",
        file=file, line=line, extra={"species": species} if species else {}),
    st.sampled_from(["SMOOTH-OUTLIER", "FIT-BREAKPOINT"]), st.sampled_from(["a.csv", "b.csv"]),
    st.one_of(st.none(), st.integers(1, 3)), st.sampled_from(["m", "n"]),
    st.sampled_from(["", "X(g)", "Y(g)"]))


@settings(max_examples=300, deadline=None)
@given(st.lists(st.lists(_FINDINGS, max_size=8), max_size=4))
def test_merged_findings_are_each_finding_once_in_the_canonical_order(groups):
    """The partitions' findings merged: those of equal repr once (the first), sorted by
    (sort key, repr): what sorting them all by both gives, reprs made only where sort keys
    meet (findings differing only in the species they are about share one)."""
    want = tuple(sorted(partitions._unique(f for g in groups for f in g),
                        key=partitions._finding_order))
    got = partitions._merged_findings(groups)
    assert got == want and [repr(f) for f in got] == [repr(f) for f in want]


def test_a_store_written_through_drops_each_file_it_synced_and_loads_as_kept(tmp_path,
                                                                              monkeypatch):
    """A store of a large build (``through``) tells the kernel, file by file once synced,
    that it will not read them soon (core.paths.drop_cached); what it kept loads as saved.
    A store of a smaller build leaves its files in the page cache (a rebuild reads them)."""
    from thermoledger.core import paths

    dropped, real = [], paths.drop_cached
    monkeypatch.setattr(paths, "drop_cached",
                        lambda fd: dropped.append(os.fstat(fd).st_ino) or real(fd))
    keys = ["a" * 64, "b" * 64]
    for through in (True, False):
        dropped.clear()
        folder = tmp_path / f"store-{through}"
        store = partitions.PartStore(folder, keys, through=through)
        store.save(1, partitions.PartResult(checked=None, points=(("s1", {"t": 1}),)))
        store.save(0, partitions.PartResult(checked=None, points=(("s0", {"t": 0}),)))
        store.commit()
        kept = {(folder / f"part-{k}.pickle").stat().st_ino for k in keys}
        assert set(dropped) == (kept if through else set()) and len(dropped) == len(set(dropped))
        again = partitions.PartStore(folder, keys)
        assert [again.load(k).points for k in range(2)] == [(("s0", {"t": 0}),),
                                                            (("s1", {"t": 1}),)]


def test_the_kernel_is_told_where_it_can_be_and_nothing_breaks_where_it_cannot(tmp_path,
                                                                              monkeypatch):
    from thermoledger.core import paths

    (tmp_path / "x").write_bytes(b"z" * 10000)
    with open(tmp_path / "x", "rb+") as fh:
        assert paths.drop_cached(fh.fileno()) is hasattr(os, "posix_fadvise")
    assert paths.drop_cached(-1) is False                   # the call fails: not told
    monkeypatch.delattr(os, "posix_fadvise", raising=False)
    with open(tmp_path / "x", "rb+") as fh:
        assert paths.drop_cached(fh.fileno()) is False
    assert (tmp_path / "x").read_bytes() == b"z" * 10000


def test_a_build_of_as_many_partitions_as_a_large_one_writes_its_store_through(
        tmp_path, capsys, monkeypatch):
    """From THROUGH_FROM partitions on, the build's store is written through the page cache:
    the same store and release as without (the threshold moved down to the demo's)."""
    from thermoledger.core import paths

    dropped, real = [], paths.drop_cached
    monkeypatch.setattr(paths, "drop_cached", lambda fd: dropped.append(fd) or real(fd))
    homes = {}
    for through_from in (10 ** 9, 1):
        monkeypatch.setattr(partitions, "THROUGH_FROM", through_from)
        homes[through_from] = tmp_path / f"out-{through_from}"
        code, _, _ = run_cli(capsys, "build", "--raw", RAW, "--out", homes[through_from],
                             "--quiet", "--no-report", "--workers", 3)
        assert code == 0
        assert len(dropped) == (0 if through_from > 1 else 3)
    assert tree_hashes(homes[1]) == tree_hashes(homes[10 ** 9])
    stores = [sorted(p.name for p in (home / partitions.STORE).glob("part-*.pickle"))
              for home in homes.values()]
    assert stores[0] == stores[1] and len(stores[0]) == 3
