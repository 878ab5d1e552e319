"""Auditable releases: manifest, Data Package, PROV, reproducibility, audit, diff, atomicity,
locking and raw-data protection — end to end through the CLI on real files."""

import hashlib
import json
import os
import random
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from thermoledger.core import names
from thermoledger.library import document as library
from thermoledger.physics import forms
from thermoledger.release import provenance, publish

from .conftest import PROJECT
from .conftest import run_cli as run
from .conftest import tree_hashes as tree


def edit_n2_row(raw: Path, new_cp="32.9444"):
    """Change one Cp cell (line 13, T = 1000 K) of the demo's computed N2 table."""
    path = raw / "isru-rrho-2026" / "n2.csv"
    lines = path.read_text().splitlines()
    cells = lines[12].split(",")
    assert cells[0] == "1000"
    cells[1] = new_cp
    lines[12] = ",".join(cells)
    path.write_text("\n".join(lines) + "\n")


def test_two_builds_are_byte_identical_in_every_file(demo_raw, demo_release, tmp_path, capsys):
    """A second build of the same bytes, in another folder, equals the session's build."""
    run(capsys, "build", "--raw", demo_raw, "--out", tmp_path / "b", "--quiet")
    a, b = tree(demo_release), tree(tmp_path / "b")
    assert {"library.json", "library.parquet", "findings.json", "manifest.json",
            "datapackage.json", "provenance.json"} <= set(a)
    assert a == b


def test_manifest_records_lineage_without_time_or_paths(demo_build):
    demo_raw, release = demo_build
    text = (release / "manifest.json").read_text()
    man = json.loads(text)
    assert str(release.parent) not in text and "20" + "26-12" not in text
    assert set(man["dependencies"]) >= {"numpy", "scipy", "pandas", "pyarrow"}
    raw_files = {str(p.relative_to(demo_raw)) for p in demo_raw.rglob("*")
                 if p.is_file() and (p.suffix == ".csv" or p.name == "source.json")}
    assert {f["path"] for f in man["inputs"]} == raw_files
    n2o = next(s for s in man["species"] if s["id"] == "N2O(g)")
    (src,) = n2o["sources"]
    assert 14 not in src["lines"] and len(src["lines"]) == 31
    assert n2o["excluded"] == [{"file": "isru-benchlog-2026/n2o.csv", "line": 14,
                                "code": "SMOOTH-OUTLIER"}]
    ar = next(s for s in man["species"] if s["id"] == "Ar(g)")
    assert any(f["acknowledged"] for f in ar["findings"])
    assert provenance.verify_release(release) == []
    lib = json.loads((release / "library.json").read_text())
    assert lib["build"]["manifest"] == "manifest.json"


def test_audit_passes_when_nothing_changed(demo_build, capsys):
    demo_raw, release = demo_build
    code, out, _ = run(capsys, "audit", "--raw", demo_raw, "--curated", release)
    assert code == 0 and "PASS" in out


def test_audit_names_the_species_file_and_size_of_a_changed_row(demo_raw, demo_release, capsys):
    edit_n2_row(demo_raw)
    code, out, _ = run(capsys, "audit", "--raw", demo_raw, "--curated", demo_release,
                       "--json")
    rep = json.loads(out)
    assert code == 1 and rep["status"] == "differences"
    assert rep["inputs_changed"] == ["isru-rrho-2026/n2.csv"]
    (sp,) = rep["species"]
    assert sp["id"] == "N2(g)" and sp["causes"] == ["changed inputs: isru-rrho-2026/n2.csv"]
    assert 1e-5 < sp["largest"]["cp_rel"] < 0.02 and sp["largest"]["dH"] > 0


def test_audit_says_settings_changed(demo_build, capsys):
    demo_raw, release = demo_build
    code, out, _ = run(capsys, "audit", "--raw", demo_raw, "--curated", release,
                       "--breakpoints", "conventional")
    assert code == 1
    assert "setting changed: fit.breakpoint_mode: optimise -> conventional" in out
    assert "cause: changed settings: fit.breakpoint_mode" in out


def test_audit_detects_a_tampered_release(demo_raw, release_copy, capsys):
    lib = (release_copy / "library.json").resolve()
    lib.chmod(0o644)
    lib.write_text(lib.read_text().replace('"Ar"', '"Ar "', 1))
    code, out, _ = run(capsys, "audit", "--raw", demo_raw, "--curated", release_copy)
    assert code == 1 and "library.json differs from its manifest hash" in out


def test_audit_without_a_release_is_an_error(demo_raw, tmp_path, capsys):
    code, _, err = run(capsys, "audit", "--raw", demo_raw, "--curated", tmp_path / "none")
    assert code == 2 and "not a release with a manifest" in err


def test_raw_is_unchanged_by_build_check_and_audit(demo_raw, tmp_path, capsys):
    before = tree(demo_raw)
    run(capsys, "build", "--raw", demo_raw, "--out", tmp_path / "rel", "--no-report")
    run(capsys, "check", "--raw", demo_raw)
    run(capsys, "audit", "--raw", demo_raw, "--curated", tmp_path / "rel")
    assert tree(demo_raw) == before


def test_datapackage_validates_against_the_data_package_standard(demo_release):
    frictionless = pytest.importorskip("frictionless")
    desc = json.loads((demo_release / "datapackage.json").read_text())
    # the descriptor against the Data Package profile bundled with frictionless
    errors = frictionless.Package.validate_descriptor(desc).flatten(["type", "note"])
    assert errors == [], errors
    for res in desc["resources"]:
        data = (demo_release / res["path"]).read_bytes()
        assert res["hash"] == "sha256:" + hashlib.sha256(data).hexdigest()
        assert res["bytes"] == len(data)
    assert {r["path"] for r in desc["resources"]} >= {"library.json", "library.parquet",
                                                      "manifest.json", "provenance.json"}


def test_provenance_reads_as_w3c_prov(demo_release):
    prov_model = pytest.importorskip("prov.model")
    text = (demo_release / "provenance.json").read_text()
    doc = prov_model.ProvDocument.deserialize(content=text, format="json")
    derived = [r for r in doc.get_records(prov_model.ProvDerivation)]
    pairs = {(str(r.formal_attributes[0][1]), str(r.formal_attributes[1][1])) for r in derived}
    assert (f"tl:species-{names.file_stem('N2O(g)')}", "raw:isru-benchlog-2026_n2o.csv") in pairs
    assert any(str(a) == f"tl:fit-{names.file_stem('N2O(g)')}" for a in
               [r.identifier for r in doc.get_records(prov_model.ProvActivity)])


def test_diff_lists_exactly_the_edited_species(demo_raw, tmp_path, capsys):
    run(capsys, "build", "--raw", demo_raw, "--out", tmp_path / "old")
    edit_n2_row(demo_raw)
    run(capsys, "build", "--raw", demo_raw, "--out", tmp_path / "new")
    code, out, _ = run(capsys, "diff", tmp_path / "old", tmp_path / "new", "--json")
    d = json.loads(out)
    assert code == 0 and d["added"] == [] and d["removed"] == []
    (c,) = d["changed"]
    assert c["id"] == "N2(g)"
    old = library.find_species(library.load(tmp_path / "old"), "N2(g)")
    new = library.find_species(library.load(tmp_path / "new"), "N2(g)")
    for row in c["at"]:
        a = forms.evaluate_ranges(library.ranges_of(old), [row["T"], 298.15], "nasa7")
        b = forms.evaluate_ranges(library.ranges_of(new), [row["T"], 298.15], "nasa7")
        assert row["Cp"] == pytest.approx(b["Cp"][0] - a["Cp"][0], abs=1e-9)
        assert row["dH"] == pytest.approx((b["H"][0] - b["H"][1]) - (a["H"][0] - a["H"][1]),
                                          abs=1e-6)
        assert row["S"] == pytest.approx(b["S"][0] - a["S"][0], abs=1e-9)
        assert row["G"] == pytest.approx(b["G"][0] - a["G"][0], abs=1e-6)
    assert [r["T"] for r in c["at"]] == [298.15, 300.0, 400.0, 500.0, 600.0, 800.0, 1000.0,
                                         1500.0, 2000.0, 3000.0]
    code, out, _ = run(capsys, "diff", tmp_path / "old", tmp_path / "new", "--cp-threshold",
                       "0.5")
    assert "no differences above the thresholds" in out
    code, out, _ = run(capsys, "diff", tmp_path / "old", tmp_path / "new")
    assert out.startswith("~ N2(g)") and "content changed: isru-rrho-2026/n2.csv" in out


def test_a_second_build_waits_or_fails_clearly_while_the_lock_is_held(demo_raw, tmp_path,
                                                                        capsys):
    out = tmp_path / "rel"
    with publish.locked(out):
        code, _, err = run(capsys, "build", "--raw", demo_raw, "--out", out)
    assert code == 2 and "another build is writing" in err and not out.exists()


def _cli(*argv):
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    env["PYTHONPATH"] = str(PROJECT)
    return subprocess.Popen([sys.executable, "-m", "thermoledger.cli.main", *map(str, argv)],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env)


@pytest.fixture
def two_releases(demo_raw, tmp_path, capsys):
    """Raw folders A and B (one row differs) and the release trees they build. They hold the
    demo's computed source alone (eight species, every stage and output of a build): the
    tests that use them build many times, and what they test does not grow with the size."""
    raw_a, raw_b = tmp_path / "raw-a", tmp_path / "raw-b"
    for raw in (raw_a, raw_b):
        shutil.copytree(demo_raw / "isru-rrho-2026", raw / "isru-rrho-2026")
    edit_n2_row(raw_b)
    run(capsys, "build", "--raw", raw_a, "--out", tmp_path / "ref-a")
    run(capsys, "build", "--raw", raw_b, "--out", tmp_path / "ref-b")
    a, b = tree(tmp_path / "ref-a"), tree(tmp_path / "ref-b")
    assert a != b
    return raw_a, raw_b, a, b


def test_concurrent_builds_never_interleave(two_releases, tmp_path):
    raw_a, raw_b, a, b = two_releases
    out = tmp_path / "shared"
    for _ in range(2):
        p1, p2 = _cli("build", "--raw", raw_a, "--out", out, "--wait", "120"), \
            _cli("build", "--raw", raw_b, "--out", out, "--wait", "120")
        assert p1.wait(180) == 0 and p2.wait(180) == 0, (p1.stderr.read(), p2.stderr.read())
        assert tree(out) in (a, b)
        assert provenance.verify_release(out) == []


def test_killed_builds_leave_a_complete_release(two_releases, tmp_path):
    raw_a, raw_b, a, b = two_releases
    out = tmp_path / "victim"
    shutil.copytree(tmp_path / "ref-a", out, symlinks=True)
    rng = random.Random(20261202)
    start = time.monotonic()
    p = _cli("build", "--raw", raw_b, "--out", out)
    p.wait(120)
    full = time.monotonic() - start           # how long one build takes here
    shutil.rmtree(out)
    shutil.copytree(tmp_path / "ref-a", out, symlinks=True)
    for i in range(8):
        raw = raw_b if tree(out) == a else raw_a
        p = _cli("build", "--raw", raw, "--out", out)
        time.sleep(rng.uniform(0.3, 1.1) * full)
        if p.poll() is None:
            p.send_signal(signal.SIGKILL)
        p.wait(60)
        state = tree(out)
        assert state in (a, b), f"kill {i}: curated/ is neither release"
        assert provenance.verify_release(out) == []


@given(st.text(max_size=40))
def test_species_ids_are_sanitised_for_file_names(text):
    name = names.safe_name(text)
    assert name and "/" not in name and ".." not in name and not name.startswith(".")
    assert all(c.isalnum() or c in "._-" for c in name) and len(name) <= 80


def test_safe_name_of_a_species_id():
    assert names.safe_name("CO2(g)") == "CO2_g"
    assert names.safe_name("../../etc/passwd") == "etc_passwd"
    assert np.all([names.safe_name(x) for x in ("N2O(g)", "NO+(g)")])


def test_a_release_is_checked_against_the_outputs_its_manifest_lists_read_in_any_layout(
        release_copy):
    """The check of a release reads of its manifest only the list of outputs when the file
    is laid out as a build writes it, the whole document otherwise, with the same verdict;
    a manifest damaged after that list is caught by the data package, which holds its
    sha256."""
    folder = (release_copy / "current").resolve()
    path = folder / "manifest.json"
    written = path.read_bytes()
    whole = json.loads(written)
    assert publish.manifest_outputs(path) == whole["outputs"] and whole["outputs"]
    path.write_text(json.dumps(whole, separators=(",", ":")))        # another layout
    assert publish.manifest_outputs(path) == whole["outputs"]
    path.write_text(json.dumps({**whole, "outputs": []}, indent=2))
    assert publish.manifest_outputs(path) == []
    path.write_bytes(written[:written.index(b'\n  "species"')] + b"\n  ,,,")   # cut short
    assert publish.manifest_outputs(path) == whole["outputs"]
    assert provenance.verify_release(folder) == ["manifest.json does not match datapackage.json"]
    path.write_bytes(written.replace(whole["outputs"][0]["sha256"].encode(), b"0" * 64, 1))
    assert f"{whole['outputs'][0]['path']} differs from its manifest hash" in \
        provenance.verify_release(folder)
    path.write_bytes(b'{\n  "manifest_format": 1,\n  "outputs": [\n    {"path": ')
    assert provenance.verify_release(folder)[0].startswith("manifest.json cannot be read")


def test_the_listed_files_of_a_release_are_read_an_item_at_a_time(release_copy, monkeypatch):
    """The manifest's outputs and the data package's resources are read one item at a time
    from blocks of the file (publish.listed), whatever the size of a block and where it
    cuts an item: the same items as the whole document read at once, and nothing when the
    file is laid out otherwise (its caller then reads it whole)."""
    folder = (release_copy / "current").resolve()
    man, dp = folder / "manifest.json", folder / "datapackage.json"
    outputs, resources = (json.loads(man.read_bytes())["outputs"],
                          json.loads(dp.read_bytes())["resources"])
    assert len(resources) == len(outputs) + 1 > 10
    for block in (1, 7, 100, 1 << 22):
        monkeypatch.setattr(publish, "_BLOCK", block)
        assert list(publish.listed(man, "outputs", publish.MANIFEST_HEAD)) == outputs
        assert list(publish.listed(dp, "resources")) == resources
    assert publish.listed(man, "outputs", b"{\n  \"manifest_format\": 2") is None
    assert publish.listed(dp, "no such list") is None
    dp.write_text(json.dumps(json.loads(dp.read_bytes())))           # another layout
    assert publish.listed(dp, "resources") is None
    assert provenance.verify_release(folder) == []
    dp.write_text(json.dumps({"resources": []}, indent=2))
    assert list(publish.listed(dp, "resources")) == []
    written = man.read_bytes()
    man.write_bytes(written[:written.index(b'"outputs": [') + 300])          # cut short
    with pytest.raises(ValueError, match="closing bracket"):
        list(publish.listed(man, "outputs"))


def _prov_made_whole(fitted, inputs, outputs) -> dict:
    """provenance.json as one dict, every relation numbered in the order of the PROV
    document: the build's agent, each output's generation, then per species (by id) its
    generation and agent, a used and a derived-from per raw file it used, and its place in
    library.json (the definition the lazily made document must follow)."""
    from thermoledger.core.names import file_stem, safe_name

    agent = f"tl:thermoledger-{provenance.__version__}"
    doc = {"entity": {}, "activity": {}, "used": {}, "wasGeneratedBy": {},
           "wasDerivedFrom": {}, "wasAssociatedWith": {}}
    n = [0]

    def rel(kind, body):
        n[0] += 1
        doc[kind][f"_:r{n[0]}"] = body

    raw_id = {f.path: "raw:" + safe_name(f.path) for f in inputs}
    for f in inputs:
        doc["entity"][raw_id[f.path]] = {"prov:type": "tl:RawFile", "tl:path": f.path,
                                         "tl:sha256": f.sha256}
    doc["activity"]["tl:build"] = {"prov:type": "tl:Build"}
    rel("wasAssociatedWith", {"prov:activity": "tl:build", "prov:agent": agent})
    for path, digest, _ in outputs:
        oid = "out:" + safe_name(path)
        doc["entity"][oid] = {"prov:type": "tl:Output", "tl:path": path, "tl:sha256": digest}
        rel("wasGeneratedBy", {"prov:entity": oid, "prov:activity": "tl:build"})
    for sp in sorted(fitted, key=lambda s: s.table.meta.species_id):
        sid = file_stem(sp.table.meta.species_id)
        eid, aid = f"tl:species-{sid}", f"tl:fit-{sid}"
        doc["entity"][eid] = {"prov:type": "tl:FittedSpecies",
                              "tl:id": sp.table.meta.species_id, "tl:form": sp.fit.form}
        doc["activity"][aid] = {"prov:type": "tl:Fit"}
        rel("wasGeneratedBy", {"prov:entity": eid, "prov:activity": aid})
        rel("wasAssociatedWith", {"prov:activity": aid, "prov:agent": agent})
        for u in sp.uses:
            if u.rows and u.meta.file in raw_id:
                rel("used", {"prov:activity": aid, "prov:entity": raw_id[u.meta.file]})
                rel("wasDerivedFrom", {"prov:generatedEntity": eid,
                                       "prov:usedEntity": raw_id[u.meta.file]})
        rel("wasDerivedFrom", {"prov:generatedEntity": "out:library.json", "prov:usedEntity": eid})
    return doc


@given(st.lists(st.lists(st.tuples(st.integers(0, 3), st.sampled_from(["a/x.csv", "a/y.csv",
                                                                       "b/x.csv", "c/z.csv"])),
                         max_size=3), max_size=6),
       st.lists(st.sampled_from(["library.json", "lib rary.json", "lib_rary.json", "t.parquet"]),
                max_size=4))
def test_provenance_made_item_by_item_numbers_its_relations_as_the_document_does(uses, outs):
    """The lazily made PROV document (entities, activities, each kind of relation written
    as it is made) is, item for item and in order, the document made whole, also where two
    raw files or two outputs share an id ('a/x.csv' and 'a x.csv', 'lib rary.json' and
    'lib_rary.json')."""
    from types import SimpleNamespace as NS

    inputs = [NS(path=p, sha256=p * 2) for p in ("a/x.csv", "a/y.csv", "a x.csv", "b/x.csv")]
    fitted = [NS(table=NS(meta=NS(species_id=f"S{k}(g)", formula="S")), fit=NS(form="nasa7"),
                 uses=[NS(rows=r, meta=NS(file=f)) for r, f in u]) for k, u in enumerate(uses)]
    outputs = [(p, "0" * 64, 1) for p in outs]
    made = provenance.prov_document(list(reversed(fitted)), inputs, outputs)
    whole = _prov_made_whole(fitted, inputs, outputs)
    for kind, items in whole.items():
        assert list(made[kind].items()) == list(items.items()), kind
        assert len(made[kind]) == len(items)


def test_the_data_package_and_manifest_list_outputs_as_they_are_written(demo_release):
    """The resources of datapackage.json and the outputs of manifest.json are made as they
    are written (core.lazy.Derived: a release with a report of 100 000 species has as many
    outputs), the bytes of the lists made whole."""
    from thermoledger.core.lazy import Derived
    from thermoledger.release import document

    outputs = [("library.json", "a" * 64, 10), ("report/s 1.svg", "b" * 64, 3),
               ("library.parquet", "c" * 64, 7)]
    dp = provenance.datapackage(outputs, [], "notice")
    man = provenance.manifest([], [], [], outputs, {}, "0" * 64)
    assert isinstance(dp["resources"], Derived) and isinstance(man["outputs"], Derived)
    for doc, key in ((dp, "resources"), (man, "outputs")):
        whole = {**doc, key: list(doc[key])}
        assert b"".join(document.json_chunks(doc)) == document.json_bytes(whole)
    assert [r["path"] for r in dp["resources"]] == [p for p, _, _ in outputs]
    assert dp["resources"][2]["schema"]["primaryKey"] == ["id", "range_index"]
    written = json.loads((demo_release / "datapackage.json").read_text())
    assert len(written["resources"]) > 3


def test_a_release_lists_its_files_with_their_sha256_and_size():
    """A release keeps of each file its sha256 and size only (40 bytes: with the report, a
    build of 100 000 species writes some 200 000 files) and lists them sorted by path, each
    (path, sha256 in hex, size) made when read, also through what is made of the list."""
    from thermoledger.core.lazy import Derived

    release = publish.Release()
    release.add("b.json", b"xy")
    release.add_chunks("a/c.svg", (b"1", b"", b"23"))
    release.add("a/e.html", b"")
    listed = [("a/c.svg", hashlib.sha256(b"123").hexdigest(), 3),
              ("a/e.html", hashlib.sha256(b"").hexdigest(), 0),
              ("b.json", hashlib.sha256(b"xy").hexdigest(), 2)]
    assert list(release.outputs()) == listed and len(release.outputs()) == 3
    assert release.sha256("b.json") == listed[2][1] and release.get("a/c.svg") == b"123"
    paths = Derived(release.outputs(), lambda out: out[0])
    assert list(paths) == ["a/c.svg", "a/e.html", "b.json"] and paths[1] == "a/e.html"


def test_audit_tells_rounding_from_a_change(demo_release):
    """A species whose numbers differ in their last digits only, with nothing it depends
    on changed, is put down to rounding (another CPU or BLAS build); a difference above
    audit.ROUNDING, or with an input changed, is not."""
    import copy
    from types import SimpleNamespace

    from thermoledger.release import audit

    recorded = audit.read_release(demo_release)
    inputs = [SimpleNamespace(**f) for f in recorded.manifest["inputs"]]
    settings = recorded.manifest["settings"]

    def rebuilt(factor):
        doc = copy.deepcopy(recorded.library)
        sp = next(s for s in doc["species"] if s["id"] == "N2(g)")
        sp["ranges"][0]["coefficients"][0] *= factor
        return doc

    rep = audit.compare(recorded, inputs, {}, rebuilt(1 + 1e-14), settings)
    (sp,) = rep.species
    assert sp["id"] == "N2(g)" and sp["causes"] == [audit.ROUNDING_CAUSE]
    assert rep.rounding_only and rep.status == audit.DIFFERENCES    # the bytes still differ
    assert "rounding alone" in audit.render(rep)
    rep = audit.compare(recorded, inputs, {}, rebuilt(1 + 1e-6), settings)
    assert rep.species[0]["causes"] == ["unexplained (same inputs, settings and dependency "
                                        "versions)"] and not rep.rounding_only
    n2 = next(f for f in inputs if f.path == "isru-rrho-2026/n2.csv")
    n2.sha256 = "0" * 64                                   # its table changed
    rep = audit.compare(recorded, inputs, {}, rebuilt(1 + 1e-14), settings)
    assert rep.species[0]["causes"] == ["changed inputs: isru-rrho-2026/n2.csv"]
    assert not rep.rounding_only
