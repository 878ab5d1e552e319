"""A library's species entries held as compact JSON (pipeline/library/entries.py): they read
as the list they stand for, write the same bytes, are checked against the schema a part at
a time and are what a build holds until its release is written."""

import io

import orjson
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from thermoledger import build
from thermoledger.core.errors import OutputError
from thermoledger.core.settings import Settings
from thermoledger.library import entries as held
from thermoledger.library.entries import Entries, by_id, ids_of
from thermoledger.release import document

from .test_library_load import DOCS
from .test_partitions import RAW

ENTRY_LISTS = st.lists(st.dictionaries(st.text(max_size=3), DOCS, max_size=4),
                       max_size=6).map(lambda xs: [{"id": f"s{i}", **x} for i, x in enumerate(xs)])


@pytest.fixture(scope="module")
def demo_doc():
    """The library document of the demo data, built without writing."""
    return build.build(RAW, None, write=False).document


@settings(max_examples=200, deadline=None)
@given(ENTRY_LISTS)
def test_entries_read_as_the_list_they_hold_and_write_its_bytes(entries):
    """Each entry comes back equal to itself (floats to the last bit), by index, slice and
    iteration; a document holding them writes the bytes of the document holding the list."""
    kept = Entries.of(entries)
    assert len(kept) == len(entries) and kept == entries and list(kept) == entries
    assert kept[1:3] == entries[1:3] and ids_of(kept) == ids_of(entries)
    for i, e in enumerate(entries):
        assert kept[i] == e and kept[-1 - i] == entries[-1 - i]
    doc = {"a": 1, "species": entries, "z": []}
    assert b"".join(document.json_chunks({**doc, "species": kept})) == \
        b"".join(document.json_chunks(doc))


def test_an_entry_read_is_a_copy_until_it_is_put_back():
    kept = Entries.of([{"id": "A(g)", "findings": []}, {"id": "B(g)", "findings": []}])
    entry = kept[1]
    entry["findings"].append({"code": "X"})
    assert kept[1] == {"id": "B(g)", "findings": []}
    kept[1] = entry
    assert kept[1]["findings"] == [{"code": "X"}]
    with pytest.raises(ValueError, match="entry 0 is A"):
        kept[0] = entry
    assert kept != [kept[0]] and kept == [kept[0], kept[1]]


def test_entries_looked_up_by_id_are_the_only_ones_decoded(monkeypatch):
    entries = [{"id": f"s{i}", "formula": "N2"} for i in range(200)]
    kept = Entries.of(entries)
    decoded = []
    monkeypatch.setattr(held, "_loads", lambda b: decoded.append(b) or orjson.loads(b))
    look = by_id({"species": kept})
    assert list(look) == [e["id"] for e in entries] and len(look) == 200
    assert "s7" in look and "s700" not in look and not decoded
    assert look["s7"] == entries[7] and look["s7"] == entries[7] and len(decoded) == 1
    assert by_id({"species": entries})["s7"] is entries[7]      # a list: the entry itself


def test_the_compact_json_is_held_in_bytes_of_its_own_size():
    """orjson's bytes keep the room of its buffer (12 KB for a 4.9 KB entry); what Entries
    holds is a copy of the JSON's own size (the allocator rounds up by at most a page)."""
    import tracemalloc

    entry = {"id": "s", "covariance": [[0.1 * i * j for j in range(10)] for i in range(10)]}
    tracemalloc.start()
    try:
        blobs = [held.compact(entry) for _ in range(50)]
        size = tracemalloc.get_traced_memory()[0]
    finally:
        tracemalloc.stop()
    assert blobs[0] == orjson.dumps(entry)
    assert size < 50 * (len(blobs[0]) + 4096)


def test_a_library_held_as_entries_is_checked_a_part_at_a_time_as_a_whole(monkeypatch,
                                                                         demo_doc):
    """The schema check of species held as Entries, CHECKED_AT_ONCE at a time, passes a
    valid library and names the first bad field where the whole document's check does."""
    assert isinstance(demo_doc["species"], Entries) and len(demo_doc["species"]) > 5
    monkeypatch.setattr(document, "CHECKED_AT_ONCE", 2)
    document.require_valid_library(demo_doc)
    plain = {**demo_doc, "species": list(demo_doc["species"])}
    bad = plain["species"][5]
    bad["ranges"][0]["t_min"] = "hot"
    with pytest.raises(OutputError) as whole:
        document.require_valid_library({**plain})
    species = Entries.of(plain["species"])
    with pytest.raises(OutputError) as parts:
        document.require_valid_library({**demo_doc, "species": species})
    assert "at species/5/ranges/0/t_min: 'hot' is not of type 'number'" in str(parts.value)
    assert "at species/5/ranges/0/t_min: 'hot' is not of type 'number'" in str(whole.value)
    with pytest.raises(OutputError, match="at build: "):
        document.require_valid_library({**demo_doc, "build": None})


def test_library_parquet_written_a_row_group_at_a_time_is_the_table_written_whole(
        monkeypatch, demo_doc):
    """library.parquet is made and written a row group at a time: the bytes are those of
    the whole table written at once in groups of as many rows (pyarrow's own cut), with one
    group, as before, up to LIBRARY_ROW_GROUP rows; after each group what Arrow's allocator
    freed is given back and the group's bytes are handed on (release.arrowmem), the footer
    last."""
    import pyarrow as pa
    import pyarrow.parquet as pq
    from thermoledger.release import arrowmem

    given_back = []
    monkeypatch.setattr(arrowmem, "give_back", lambda: given_back.append(1))

    def rows_of(sp):          # the rows as the format describes them, one per range
        a = sp.get("anchor") or {"basis": "own", "temperature": 298.15,
                                 "enthalpy": sp["enthalpy_of_formation_298"],
                                 "entropy": sp["entropy_298"],
                                 "enthalpy_zero": sp["enthalpy_of_formation_298"]}
        return [{"id": sp["id"], "formula": sp["formula"], "phase": sp["phase"],
                 "geometry": sp["geometry"], "molar_mass": sp["molar_mass"],
                 "enthalpy_of_formation_298": sp["enthalpy_of_formation_298"],
                 "entropy_298": sp["entropy_298"], "anchor_basis": a["basis"],
                 "anchor_temperature": a["temperature"], "anchor_enthalpy": a["enthalpy"],
                 "anchor_entropy": a["entropy"], "enthalpy_zero": a["enthalpy_zero"],
                 "form": sp["form"], "range_index": j, "t_min": r["t_min"],
                 "t_max": r["t_max"], "data_t_min": sp["data_range"]["t_min"],
                 "data_t_max": sp["data_range"]["t_max"],
                 "cp_max_rel_dev": sp["quality"]["cp_max_rel_dev"],
                 "cp_rms_rel_dev": sp["quality"]["cp_rms_rel_dev"],
                 "points": sp["quality"]["points"], "coefficients": r["coefficients"],
                 **{k: orjson.dumps(sp[k]).decode()
                    for k in ("extrapolated", "sources", "findings")}}
                for j, r in enumerate(sp["ranges"])]

    rows = [r for sp in demo_doc["species"] for r in rows_of(sp)]
    kinds = {"string": pa.string(), "number": pa.float64(), "integer": pa.int32(),
             "array": pa.list_(pa.float64())}

    def whole(group):
        table = pa.table({c: pa.array([r[c] for r in rows], type=kinds[kind])
                          for c, kind, _ in document.LIBRARY_PARQUET_COLUMNS})
        meta = pq.read_schema(io.BytesIO(document.library_parquet_bytes(demo_doc))).metadata
        buf = io.BytesIO()
        pq.write_table(table.replace_schema_metadata(meta), buf, compression="zstd",
                       write_statistics=True, row_group_size=group,
                       use_dictionary=list(document.LIBRARY_DICTIONARY_COLUMNS))
        return buf.getvalue()

    assert len(rows) > len(demo_doc["species"]) > 5
    for group in (document.LIBRARY_ROW_GROUP, 1, 3, len(rows), len(rows) - 1):
        monkeypatch.setattr(document, "LIBRARY_ROW_GROUP", group)
        expected = whole(group)
        given_back.clear()
        chunks = list(document.library_parquet_chunks(demo_doc))
        got = document.library_parquet_bytes(demo_doc)
        assert got == expected == b"".join(chunks)
        assert pq.read_metadata(io.BytesIO(got)).num_row_groups == -(-len(rows) // group) \
            == len(chunks) - 1 == len(given_back) // 2
        assert all(chunks[:-1]) and chunks[-1].endswith(b"PAR1")
    assert pq.read_table(io.BytesIO(got)).column("id").to_pylist() == [r["id"] for r in rows]
    empty = document.library_parquet_bytes({**demo_doc, "species": []})
    assert pq.read_metadata(io.BytesIO(empty)).num_rows == 0


def test_a_build_holds_its_entries_as_compact_json_and_writes_them_as_read(tmp_path):
    """The partitions give their entries as compact JSON, the build holds them as Entries,
    and library.json holds exactly those entries (formation findings added)."""
    result = build.build(RAW, tmp_path / "out", parts=2)
    species = result.document["species"]
    assert isinstance(species, Entries)
    written = orjson.loads((tmp_path / "out" / "current" / "library.json").read_bytes())
    assert species == written["species"]
    part = build._build_part(RAW, Settings(), {}, build._quiet, build.partitions.Part(0, 2))
    assert part.entries and all(isinstance(blob, bytes) for _, blob in part.entries)


def test_a_derived_list_makes_each_item_when_read_and_writes_the_list_s_bytes():
    from thermoledger.core.lazy import Derived

    made = []
    items = Derived(range(5), lambda x: made.append(x) or {"n": x, "sq": [x * x]})
    assert not made and len(items) == 5
    assert items[3] == {"n": 3, "sq": [9]} and made == [3]
    assert items[1:3] == [{"n": 1, "sq": [1]}, {"n": 2, "sq": [4]}]
    plain = [{"n": x, "sq": [x * x]} for x in range(5)]
    assert items == plain and list(items) == plain
    assert b"".join(document.json_chunks({"k": 1, "items": items})) == \
        b"".join(document.json_chunks({"k": 1, "items": plain}))


def test_the_manifest_makes_each_lineage_when_written_and_checks_them_in_parts(
        monkeypatch, tmp_path):
    """The manifest's lineage of each species is made as it is written (of FittedSpecies)
    or read from the compact JSON a build holds (release.held.HeldFitted), the same either
    way, and checked against the schema CHECKED_AT_ONCE at a time; a bad lineage is named by
    its place in the list."""
    from thermoledger.core.lazy import Derived
    from thermoledger.release import provenance

    result = build.build(RAW, tmp_path / "out")
    spilled = provenance.manifest(result.fitted, result.quarantined, result.inputs, [],
                                  {"a": 1}, "0" * 64)
    man = provenance.manifest(list(reversed(result.fitted)), result.quarantined,
                              result.inputs, [], {"a": 1}, "0" * 64)
    assert isinstance(spilled["species"], Entries) and isinstance(man["species"], Derived)
    assert len(man["species"]) == len(result.fitted) > 3
    written = orjson.loads((tmp_path / "out" / "current" / "manifest.json").read_bytes())
    assert man["species"] == written["species"] == spilled["species"]
    assert b"".join(document.json_chunks(man)) == b"".join(document.json_chunks(spilled))
    monkeypatch.setattr(document, "CHECKED_AT_ONCE", 2)
    document.require_valid(man, "manifest.schema.json", "manifest.json")
    bad = Derived(list(man["species"]), lambda x: {**x, "form": 7} if x["id"] ==
                  man["species"][3]["id"] else x)
    with pytest.raises(OutputError, match=r"at species/3/form: 7 is not of type 'string' "
                                          r"\(1 problem\(s\) in species 2 to 3\)"):
        document.require_valid({**man, "species": bad}, "manifest.schema.json", "manifest.json")
    # rendered ahead (release.document.render_list): checked the same way, written the same
    from thermoledger.core.spill import Spill

    spill = Spill(tmp_path)
    for items in (man["species"], spilled["species"]):
        ahead = document.render_list(items, "manifest.schema.json", "species",
                                     "manifest.json", spill)
        document.require_valid({**man, "species": ahead}, "manifest.schema.json",
                               "manifest.json")
        assert b"".join(document.json_chunks({**man, "species": ahead})) == \
            b"".join(document.json_chunks(man))
    with pytest.raises(OutputError, match=r"at species/3/form: 7 is not of type 'string' "
                                          r"\(1 problem\(s\) in species 2 to 3\)"):
        document.render_list(bad, "manifest.schema.json", "species", "manifest.json", spill)
    with pytest.raises(OutputError, match="empty"):
        document.render_list([], "manifest.schema.json", "species", "manifest.json", spill)
    spill.close()


@settings(max_examples=200, deadline=None)
@given(st.dictionaries(st.text(max_size=3), DOCS, max_size=5),
       st.dictionaries(st.text(max_size=3), DOCS, max_size=2))
def test_a_mapping_made_item_by_item_writes_the_dict_s_bytes(items, rest):
    """A LazyMapping in a document is written item by item, the bytes of the dict it
    stands for (empty included), and is equal to it."""
    from thermoledger.core.lazy import LazyMapping

    lazy = LazyMapping(lambda: iter(items.items()), len(items))
    assert lazy == items and dict(lazy.items()) == items and list(lazy) == list(items)
    doc = {**rest, "m": items, "n": [1]}
    assert b"".join(document.json_chunks({**doc, "m": lazy})) == \
        b"".join(document.json_chunks(doc))
    if items:
        wrong = LazyMapping(lambda: iter(items.items()), len(items) + 1)
        with pytest.raises(OutputError, match="counted"):
            b"".join(document.json_chunks({**doc, "m": wrong}))


def test_writing_a_library_decodes_each_entry_once_and_a_batch_at_a_time(monkeypatch):
    """json_chunks makes each entry of Entries once, as it writes it, WRITTEN_AT_ONCE at a
    time: never all of them first (at 100 000 species that held 1.3 GB at once)."""
    n = 2 * document.WRITTEN_AT_ONCE + 50
    entries = [{"id": f"s{i}", "x": [float(i)]} for i in range(n)]
    kept = Entries.of(entries)
    decoded, written = [], []
    monkeypatch.setattr(held, "_loads", lambda b: decoded.append(b) or orjson.loads(b))
    for piece in document.json_chunks({"a": 1, "species": kept, "more": []}):
        written.append(len(decoded))
    assert len(decoded) == n
    assert written == sorted(written) and written[0] == 0     # none made before writing
    assert max(b - a for a, b in zip(written, written[1:])) == document.WRITTEN_AT_ONCE


def test_formulas_are_given_or_read_from_the_entries():
    from thermoledger.library.entries import formulas_of

    entries = [{"id": "CO2(g)", "formula": "CO2"}, {"id": "Ti(l)", "formula": "Ti"}]
    want = {"CO2(g)": "CO2", "Ti(l)": "Ti"}
    assert formulas_of({"species": entries}) == want
    assert formulas_of({"species": Entries.of(entries)}) == want
    given = Entries(((e["id"], orjson.dumps(e)) for e in entries), formulas=["CO2", "Ti"])
    assert formulas_of({"species": given}) == want
    with pytest.raises(ValueError, match="1 formulas for 2 entries"):
        Entries(((e["id"], orjson.dumps(e)) for e in entries), formulas=["CO2"])


def test_a_build_knows_its_species_outlines_and_they_say_what_the_entries_say(tmp_path):
    """The outlines a build holds (made in the partitions) are library.entries.outline of
    the entries it writes, formation findings added; the build's summary and its kept
    breakpoints read the same from them as from the whole entries, which are not decoded."""
    from thermoledger.cli import render

    result = build.build(RAW, tmp_path / "out", parts=2)
    species = result.document["species"]
    written = orjson.loads((tmp_path / "out" / "current" / "library.json").read_bytes())
    assert list(species.outlines()) == [held.outline(e) for e in written["species"]]
    whole = build.BuildResult(**{**result.__dict__,
                                 "document": {**result.document, "species": written["species"]}})
    real = Entries._json
    Entries._json = None                  # decoding an entry now fails
    try:
        lines = render.build_summary(result, "out", "notice")
        build.keep_breakpoints(tmp_path / "out", result.document)
    finally:
        Entries._json = real
    assert lines == render.build_summary(whole, "out", "notice")
    kept = orjson.loads((tmp_path / "out" / ".parts" / build.KEPT_BREAKPOINTS).read_bytes())
    assert kept["breakpoints"] == {e["id"]: e["breakpoints"] for e in written["species"]}


def test_an_outline_put_back_follows_its_entry():
    entry = {"id": "A(g)", "breakpoints": [1000.0], "excluded": [],
             "ranges": [{"t_min": 200.0, "t_max": 1000.0, "coefficients": [1.0]},
                        {"t_min": 1000.0, "t_max": 3000.0, "coefficients": [2.0]}],
             "extrapolated": [], "quality": {"cp_max_rel_dev": 0.001, "points": 9},
             "sources": [{"file": "a.csv", "rows": 9, "used": True, "priority": 0}],
             "origin": {"kind": "published set", "repair": "not needed"}}
    kept = Entries([("A(g)", held.compact(entry))], outlines=[held.compact(held.outline(entry))])
    assert list(kept.outlines()) == [held.outline(entry)]
    assert held.outline(entry)["origin"] == {"repair": "not needed"}
    entry["breakpoints"] = [900.0]
    kept[0] = entry
    assert next(kept.outlines())["breakpoints"] == [900.0]
    assert list(Entries.of([entry]).outlines()) == [held.outline(entry)]    # made when not known
    with pytest.raises(ValueError, match="2 outlines for 1 entries"):
        Entries([("A(g)", b"{}")], outlines=[b"{}", b"{}"])


FINDINGS = st.lists(st.builds(
    lambda code, sev, msg, src, file, line, col, ack: {
        "code": code, "severity": sev, "message": msg, "source": src, "file": file,
        "line": line, "column": col, "seen": "", "expected": "", "fix": "", "lines": [],
        "acknowledged": ack},
    st.sampled_from(["FORM-NO-REFERENCE", "FIT-BREAKPOINT", "ROW-DUPLICATE", "SRC-LICENSE"]),
    st.sampled_from(["error", "warning", "info"]), st.text(max_size=4),
    st.sampled_from(["", "a", "b"]), st.sampled_from(["", "a/x.csv", "b/y.csv"]),
    st.none() | st.integers(1, 5), st.sampled_from(["", "Cp"]), st.sampled_from(["", "ok"])),
    max_size=5)


def _held_entries(plain: list, folder=None) -> Entries:
    """Entries of the dicts ``plain``: held in a spill in ``folder``, or in memory."""
    from thermoledger.core.spill import Spill

    if folder is None:
        return Entries.of(plain)
    spill = Spill(folder)
    return Entries(((e["id"], spill.put(held.compact(e))) for e in plain), spill)


@settings(max_examples=200, deadline=None)
@given(FINDINGS, FINDINGS, FINDINGS, st.booleans())
def test_findings_added_to_an_entry_read_as_the_entry_put_back_with_them(tmp_path_factory, own,
                                                                         new, more, spilled):
    """Entries.add_findings (the formation findings of a build; in a spill, added without
    decoding the entry) reads as the entry put back with the Finding objects merged and
    sorted, as the build did before; dict_sort_key is Finding.sort_key."""
    from thermoledger.core.findings import Finding, dict_sort_key

    own = sorted(own, key=dict_sort_key)
    for d in own + new + more:
        assert dict_sort_key(d) == Finding.from_dict(d).sort_key()
    entry = {"id": "A(g)", "findings": own}
    plain = [{"id": "Z(g)", "findings": []}, entry]
    kept = _held_entries(plain, tmp_path_factory.mktemp("spill") if spilled else None)
    kept.add_findings(1, new)
    kept.add_findings(-1, more)
    merged = [Finding.from_dict(d) for d in own + new + more]
    expected = {**entry, "findings": [f.to_dict() for f in sorted(merged,
                                                                   key=lambda f: f.sort_key())]}
    assert kept[1] == expected and list(kept)[1] == expected and kept[0:2][1] == expected
    assert kept[0] == {"id": "Z(g)", "findings": []}
    kept[1] = entry                        # put back: what was added goes
    assert kept[1] == entry


def test_species_checked_as_library_parquet_reads_them_fail_as_the_whole_check_does(
        monkeypatch, demo_doc):
    """A release checks its species against the schema as library.parquet reads them (each
    entry decoded once): a valid library passes with the same bytes as unchecked, and a bad
    entry stops it with the message of the whole document's check."""
    monkeypatch.setattr(document, "CHECKED_AT_ONCE", 2)
    assert b"".join(document.library_parquet_chunks(demo_doc, check=True)) == \
        document.library_parquet_bytes(demo_doc)
    plain = list(demo_doc["species"])
    plain[5]["ranges"][0]["t_min"] = "hot"
    bad = {**demo_doc, "species": Entries.of(plain)}
    document.require_valid(bad, "library.schema.json", "library.json", later=("species",))
    with pytest.raises(OutputError) as whole:
        document.require_valid_library(bad)
    with pytest.raises(OutputError) as read:
        b"".join(document.library_parquet_chunks(bad, check=True))
    assert str(read.value) == str(whole.value)
    assert "at species/5/ranges/0/t_min: 'hot' is not of type 'number'" in str(read.value)


@settings(max_examples=100, deadline=None)
@given(FINDINGS, FINDINGS, st.booleans())
def test_an_entry_as_held_reads_as_the_entry_and_keys_as_it(tmp_path_factory, own, new,
                                                            spilled):
    """What the report's workers are sent of an entry (held_of: its compact JSON and the
    findings added to it, nothing decoded) reads as the entry (of_held), and key_of is its
    key, for Entries in a spill or in memory and for a plain list."""
    import hashlib

    from thermoledger.core.findings import dict_sort_key

    plain = [{"id": "Z(g)", "findings": []},
             {"id": "A(g)", "findings": sorted(own, key=dict_sort_key)}]
    kept = _held_entries(plain, tmp_path_factory.mktemp("spill") if spilled else None)
    kept.add_findings(1, new)
    for i in range(2):
        assert held.of_held(held.held_of(kept, i)) == kept[i]
        assert held.key_of(kept, i) == kept.key(i)
        assert held.of_held(held.held_of(plain, i)) == plain[i]
        assert held.key_of(plain, i) == hashlib.sha256(orjson.dumps(plain[i])).hexdigest()
    assert (held.held_of(kept, 1)[1] is not None) == (spilled and bool(new))
