"""Ingest of sources: schema errors, quantities, paths, provenance."""

import json

import pytest
from thermoledger.core.constants import ENTROPY_ATM_TO_BAR
from thermoledger.ingest import sources as ingest
from thermoledger.testing import table_entry, write_source

from .conftest import PROJECT

ROWS = [[t, 29.1 + 0.001 * t] for t in range(200, 1300, 100)]
HEADER = ["T [K]", "Cp [J/(mol*K)]"]


def good_table(file="n2.csv", **kw):
    return dict(table_entry(file, "N2", "N2", "linear", **kw), header=HEADER, rows=ROWS)


def test_reads_tables_with_provenance(tmp_path):
    write_source(tmp_path, "lab-a", [good_table()])
    got = ingest.ingest(tmp_path)
    assert not got.findings
    (table,) = got.tables
    assert table.meta.file == "lab-a/n2.csv"
    raw = (tmp_path / "lab-a" / "n2.csv").read_bytes()
    assert table.meta.sha256 == ingest.sha256(raw)
    assert [f.path for f in got.inputs] == ["lab-a/n2.csv", "lab-a/source.json"]
    assert table.meta.molar_mass == pytest.approx(28.0134, rel=1e-4)


def test_entropy_metadata_at_one_atm_is_moved_to_one_bar(tmp_path):
    write_source(tmp_path, "lab-a", [good_table(s="191.4996 J/(mol*K)")],
                 standard_pressure="1 atm")
    (table,) = ingest.ingest(tmp_path).tables
    assert table.meta.entropy_298 == pytest.approx(191.4996 + ENTROPY_ATM_TO_BAR, rel=1e-12)


@pytest.mark.parametrize("change, field", [
    ({"phase": "gas"}, "tables/0/phase"),
    ({"enthalpy_of_formation_298": -393.51}, "tables/0/enthalpy_of_formation_298"),
    ({"file": "../escape.csv"}, "tables/0/file"),
    ({"geometry": None}, "tables/0/geometry"),
])
def test_schema_errors_name_the_field(tmp_path, change, field):
    t = good_table()
    t.update(change)
    if t.get("geometry") is None:
        t.pop("geometry")
        field = "tables/0"
    if t["file"].startswith(".."):
        (tmp_path / "lab-a").mkdir()
        t["text"] = "x"
        t["file"] = "n2.csv"
        write_source(tmp_path, "lab-a", [t])
        doc = json.loads((tmp_path / "lab-a" / "source.json").read_text())
        doc["tables"][0]["file"] = "../escape.csv"
        (tmp_path / "lab-a" / "source.json").write_text(json.dumps(doc))
    else:
        write_source(tmp_path, "lab-a", [t])
    got = ingest.ingest(tmp_path)
    assert got.tables == ()
    (f,) = got.findings
    assert (f.code, f.file, f.column) == ("SRC-SCHEMA", "lab-a/source.json", field)


def test_bare_number_in_quantity_string_is_an_error(tmp_path):
    write_source(tmp_path, "lab-a", [good_table(h="-393.51 ")])
    got = ingest.ingest(tmp_path)
    assert [f.code for f in got.findings] == ["SRC-SCHEMA"]


def test_wrong_dimension_quantity(tmp_path):
    write_source(tmp_path, "lab-a", [good_table(s="191.6 kJ/mol")])
    got = ingest.ingest(tmp_path)
    (f,) = got.findings
    assert (f.code, f.column, f.extra["table"]) == ("SRC-QUANTITY", "tables/0/entropy_298",
                                                    "lab-a/n2.csv")


def test_bad_formula(tmp_path):
    t = good_table()
    t["formula"] = "Xq2"
    write_source(tmp_path, "lab-a", [t])
    (f,) = ingest.ingest(tmp_path).findings
    assert (f.code, f.column, f.seen) == ("SRC-FORMULA", "tables/0/formula", "Xq2")


def test_invalid_json(tmp_path):
    (tmp_path / "lab-a").mkdir()
    (tmp_path / "lab-a" / "source.json").write_text('{"source": "lab-a",\n  oops}')
    (f,) = ingest.ingest(tmp_path).findings
    assert (f.code, f.line) == ("SRC-UNREADABLE", 2)


def test_missing_and_unlisted_tables(tmp_path):
    folder = write_source(tmp_path, "lab-a", [good_table()])
    (folder / "n2.csv").rename(folder / "other.csv")
    codes = sorted(f.code for f in ingest.ingest(tmp_path).findings)
    assert codes == ["TAB-MISSING", "TAB-UNLISTED"]


def test_symlinked_table_is_not_followed(tmp_path):
    outside = tmp_path / "outside.csv"
    outside.write_text("T [K],Cp [J/(mol*K)]\n300,29\n")
    raw = tmp_path / "raw"
    folder = write_source(raw, "lab-a", [good_table()])
    (folder / "n2.csv").unlink()
    (folder / "n2.csv").symlink_to(outside)
    got = ingest.ingest(raw)
    assert [f.code for f in got.findings] == ["SRC-PATH"]
    assert got.tables == ()


def test_folder_without_metadata_and_duplicate_ids(tmp_path):
    write_source(tmp_path, "lab-a", [good_table()])
    write_source(tmp_path, "lab-b", [good_table()], extra={"source": "lab-a"})
    (tmp_path / "loose").mkdir()
    codes = sorted(f.code for f in ingest.ingest(tmp_path).findings)
    assert codes == ["SRC-DUPLICATE-ID", "SRC-NO-METADATA"]


def test_inputs_digest_depends_on_content_only(tmp_path):
    write_source(tmp_path / "a", "lab-a", [good_table()])
    write_source(tmp_path / "b", "lab-a", [good_table()])
    d1 = ingest.inputs_digest(ingest.ingest(tmp_path / "a").inputs)
    d2 = ingest.inputs_digest(ingest.ingest(tmp_path / "b").inputs)
    assert d1 == d2
    (tmp_path / "b" / "lab-a" / "n2.csv").write_text("T [K],Cp [J/(mol*K)]\n300,29\n")
    assert ingest.inputs_digest(ingest.ingest(tmp_path / "b").inputs) != d1


def test_a_settled_source_json_is_read_once_per_process_and_again_when_it_changes(
        tmp_path, monkeypatch):
    """Every partition reads every source.json: a process reads one that has not changed
    for RECENT_CHANGE seconds once (by its identity on disk), and again once it changes;
    each partition still gets only its own tables."""
    import shutil
    import time
    from pathlib import Path

    from thermoledger.core import limits
    from thermoledger.partitions import Part

    raw = tmp_path / "raw"
    shutil.copytree(Path(__file__).resolve().parent.parent / "raw", raw)
    reads = []
    real = Path.read_bytes
    monkeypatch.setattr(Path, "read_bytes", lambda p: (reads.append(p) if p.name ==
                                                       "source.json" else None) or real(p))
    sources_ = len(list(raw.glob("*/source.json")))
    whole = ingest.ingest(raw)
    assert len(reads) == sources_                         # just copied: read as they are
    monkeypatch.setattr(limits, "RECENT_CHANGE", 0.0)
    time.sleep(0.05)
    parts = [ingest.ingest(raw, Part(k, 3)) for k in range(3)]
    assert len(reads) == 2 * sources_                     # settled: once for three parts
    assert sorted(t.meta.file for p in parts for t in p.tables) == \
        sorted(t.meta.file for t in whole.tables)
    src = sorted(raw.glob("*/source.json"))[0]
    doc = json.loads(src.read_text())
    doc["citation"] = doc.get("citation", "") + " (edited)"
    src.write_text(json.dumps(doc))
    again = ingest.ingest(raw, Part(0, 3))
    assert len(reads) == 2 * sources_ + 1
    assert any(s.citation.endswith("(edited)") for s in again.sources)


def test_tables_read_alike_share_their_reading_and_nothing_else_is_shared():
    """Tables of one layout share one record of how they were read (a large build keeps
    every table's until its release is written); values that are equal but written
    otherwise are never merged."""
    from thermoledger.core.records import alike

    got = ingest.ingest(PROJECT / "raw")
    by_layout = {}
    for t in got.tables:
        by_layout.setdefault(repr(t.meta.reading), []).append(t.meta.reading)
    assert any(len(same) > 1 for same in by_layout.values())
    assert all(all(r is same[0] for r in same) for same in by_layout.values())
    assert alike({"a": 6000.0}) is alike({"a": 6000.0})
    assert repr(alike({"b": 6000})) == "{'b': 6000}" and repr(alike({"b": 6000.0})) == \
        "{'b': 6000.0}"
    assert alike((1, True)) == (1, True) and alike((1, 1)) == (1, 1)
    assert repr(alike([-0.0])) == "[-0.0]" and repr(alike([0.0])) == "[0.0]"


def test_a_path_is_inside_raw_as_pathlib_resolves_it(tmp_path):
    """The real paths of folders are remembered per ingest; whether a listed file lies in
    raw/ is still what resolving its whole path says: a folder linked out of raw/, a
    '..' that climbs out, a linked file, raw/ itself."""
    import os
    from pathlib import Path

    raw, out = tmp_path / "raw", tmp_path / "elsewhere"
    (raw / "src" / "sub").mkdir(parents=True)
    out.mkdir()
    (raw / "src" / "t.csv").write_text("x")
    (out / "t.csv").write_text("x")
    os.symlink(out, raw / "src" / "away")
    os.symlink(raw / "src" / "t.csv", raw / "src" / "link.csv")
    os.symlink(out / "t.csv", raw / "src" / "out.csv")
    cases = [raw / "src" / "t.csv", raw / "src" / "away" / "t.csv", raw / "src" / ".." / "..",
             raw / "src" / "sub" / ".." / "t.csv", raw / "src" / "link.csv",
             raw / "src" / "out.csv", raw, raw / "src" / "missing.csv", raw / "src" / "."]

    def resolved_inside(path: Path) -> bool:
        try:
            path.resolve().relative_to(raw.resolve())
            return True
        except ValueError:
            return False

    ingest._real_dir.cache_clear()
    assert [ingest._inside(p, raw) for p in cases] == [resolved_inside(p) for p in cases]
    assert [resolved_inside(p) for p in cases] == [True, False, False, True, True, False,
                                                   True, True, True]


def test_the_unlisted_file_scan_sees_the_csv_names_pathlib_s_glob_sees(tmp_path):
    """sources.csv_names gives the names of sorted(folder.glob('*.csv')), in that order:
    hidden, upper-case, odd and non-ASCII names, a folder and a link among them."""
    names = ["b.csv", "a.csv", ".hidden.csv", "C.CSV", "c.Csv", "z.csv.bak", "x.csv~",
             "10.csv", "9.csv", "é.csv", "a b.csv", "[x].csv"]
    for name in names:
        (tmp_path / name).write_text("T [K],Cp [J/(mol*K)]\n")
    (tmp_path / "dir.csv").mkdir()
    (tmp_path / "link.csv").symlink_to(tmp_path / "a.csv")
    assert ingest.csv_names(tmp_path) == [p.name for p in sorted(tmp_path.glob("*.csv"))]
    assert "dir.csv" in ingest.csv_names(tmp_path) and "C.CSV" not in ingest.csv_names(tmp_path)
