"""Report pages taken from the last release (release/pages.py): a rebuild links the page
files whose species' inputs are unchanged, draws the others, and publishes the release a
fresh build makes. The demo's pages are spread over many files here (pages.GROUP 1: some
32 files for its species), so that each test tells one species' file from the others'."""

import hashlib
import json
import os
from pathlib import Path

import pytest
from thermoledger import build
from thermoledger.release import pages, publish

from .conftest import run_cli, tree_hashes


@pytest.fixture(autouse=True)
def one_species_a_file(monkeypatch):
    monkeypatch.setattr(pages, "GROUP", 1)


def _edit(raw: Path, rel: str) -> None:
    """Change one Cp value of table ``rel`` by 0.01 %."""
    path = raw / rel
    lines = path.read_text().splitlines()
    cells = lines[5].split(",")
    cells[1] = f"{float(cells[1]) * 1.0001:.6f}"
    lines[5] = ",".join(cells)
    path.write_text("\n".join(lines) + "\n")


def _inodes(home: Path) -> dict:
    """{path: inode} of the report pages of the current release of ``home``."""
    folder = (home / "current").resolve()
    return {str(p.relative_to(folder)): p.stat().st_ino
            for p in sorted((folder / "report").rglob("*")) if p.is_file()}


def _species_pages(home: Path) -> dict:
    """{species id: the path of its page file} of the current release of ``home``."""
    doc = json.loads((home / "current" / "library.json").read_bytes())
    files = pages.page_files(len(doc["species"]))
    return {sp["id"]: pages.page_of(sp["id"], files)[0] for sp in doc["species"]}


def _sharing(by_species: dict, *ids) -> set:
    """The species whose page file holds the page of one of ``ids``."""
    return {sid for sid, f in by_species.items() if f in {by_species[i] for i in ids}}


def test_a_rebuild_links_the_pages_of_species_whose_inputs_are_unchanged(demo_raw, tmp_path):
    """After one table is edited, every page file without its species is a hard link to
    the one of the last release; the edited species' file is drawn again, and so is the
    file of every species whose formation properties count from it (Ar is the reference of
    no other species' element, H2 of every species with hydrogen); the release is the one a
    fresh build makes."""
    out = tmp_path / "out"
    build.build(demo_raw, out)
    before = _inodes(out)
    by_species = _species_pages(out)
    assert len(by_species) > 10 and len(set(by_species.values())) > 10
    _edit(demo_raw, "isru-rrho-2026/ar.csv")
    ar = _sharing(by_species, "Ar(g)")
    assert build.build(demo_raw, out).linked == len(by_species) - len(ar)
    after = _inodes(out)
    drawn = {sid for sid, f in by_species.items() if after[f] != before[f]}
    assert drawn == ar
    kept = sorted((out / publish.STORE).glob("pages-*.jsonl"))
    assert [p.name for p in kept] == [pages.KEPT.format((out / "current").resolve().name)]
    lines = [json.loads(line) for line in kept[0].read_text().splitlines()]
    assert [line[0] for line in lines] == sorted(set(by_species.values()))
    assert all([rel for rel, _, _ in files] == [name] for name, _, files in lines)
    _edit(demo_raw, "isru-rrho-2026/h2.csv")
    build.build(demo_raw, out)
    again = _inodes(out)
    drawn = {sid for sid, f in by_species.items() if again[f] != after[f]}
    hydrogen = _sharing(by_species, "H2(g)", "CH4(g)", "C2H4(g)")
    assert hydrogen <= drawn
    assert not {"Ar(g)", "CO(g)"} & drawn - hydrogen
    fresh = tmp_path / "fresh"
    build.build(demo_raw, fresh, fresh=True)
    assert tree_hashes(out) == tree_hashes(fresh)


def test_a_page_changed_in_the_last_release_is_drawn_again_never_written_through(
        demo_raw, tmp_path, capsys):
    """A page of the last release that no longer has the sha256 kept for it is drawn again,
    not linked; the changed file stays as it was (nothing is written through a link); a
    build with --fresh, or a kept list made for another release, links nothing."""
    out = tmp_path / "out"
    build.build(demo_raw, out)
    by_species = _species_pages(out)
    page = by_species["CO(g)"]
    old = (out / "current").resolve() / page
    old.write_bytes(b"changed")
    _edit(demo_raw, "isru-rrho-2026/ar.csv")
    code, said, _ = run_cli(capsys, "build", "--raw", demo_raw, "--out", out)
    n = len(by_species) - len(_sharing(by_species, "Ar(g)", "CO(g)"))
    assert code in (0, 1) and f"linked the report pages of {n} species from the last " \
        "release" in said         # all but Ar(g)'s, edited, and CO(g)'s, whose file changed
    new = (out / "current").resolve() / page
    assert old.read_bytes() == b"changed" and new.stat().st_ino != old.stat().st_ino
    fresh = tmp_path / "fresh"
    build.build(demo_raw, fresh, fresh=True)
    assert tree_hashes(out) == tree_hashes(fresh)
    for how in ("fresh", "other release"):
        before = _inodes(out)
        _edit(demo_raw, "isru-rrho-2026/ar.csv")
        if how == "other release":
            kept = out / publish.STORE / pages.KEPT.format((out / "current").resolve().name)
            kept.rename(kept.with_name(pages.KEPT.format("0" * 16)))
        build.build(demo_raw, out, fresh=how == "fresh")
        assert not set(before.items()) & set(_inodes(out).items()), how


def test_a_release_links_a_file_only_when_it_holds_what_was_kept(tmp_path):
    """``Release.link`` adds a file as a hard link to one of an earlier release only when
    that file still has the sha256 and size kept for it; a file written later over a linked
    one replaces the link, never the earlier release's file; a release kept in memory takes
    the bytes."""
    source = tmp_path / "old" / "a.svg"
    source.parent.mkdir()
    source.write_bytes(b"abc")
    sha = hashlib.sha256(b"abc").hexdigest()
    staged = publish.Release(tmp_path / "new")
    (tmp_path / "new").mkdir()
    assert staged.link("report/a.svg", source, sha, 3)
    linked = tmp_path / "new" / "report" / "a.svg"
    assert os.path.samefile(linked, source)
    assert list(staged.outputs()) == [("report/a.svg", sha, 3)]
    assert not staged.link("report/b.svg", source, "0" * 64, 3)
    assert not staged.link("report/b.svg", source, sha, 4)
    assert not staged.link("report/b.svg", tmp_path / "absent", sha, 3)
    assert "report/b.svg" not in staged and len(staged) == 1
    staged.add("report/a.svg", b"drawn")
    assert source.read_bytes() == b"abc" and linked.read_bytes() == b"drawn"
    assert staged.summary("report/a.svg") == (hashlib.sha256(b"drawn").hexdigest(), 5)
    kept = publish.Release()
    assert kept.link("a.svg", source, sha, 3) and kept.get("a.svg") == b"abc"


def test_the_kept_pages_are_written_in_the_order_the_species_came(tmp_path):
    """Page files drawn by worker processes come back later than those linked at once: each
    file's line waits for those before it, so the kept list is in the order of the paths,
    which the next build reads forward."""
    home = tmp_path / "home"
    (home / publish.STORE).mkdir(parents=True)
    release = publish.Release()
    drawn = pages.Drawn(home, "code").into(release)
    names = [f"report/species/4-{k}.html" for k in range(3)]
    for name in names:
        release.add(name, name.encode())
        drawn.wait(name, f"key of {name}")
    for k in (2, 0, 1):
        drawn.drew(names[k])
    drawn.save()
    (kept,) = (home / publish.STORE).glob("pages-*.jsonl")
    lines = [json.loads(line) for line in kept.read_text().splitlines()]
    assert [(name, key) for name, key, _ in lines] == [(n, f"key of {n}") for n in names]
    assert lines[1][2] == [[names[1], hashlib.sha256(names[1].encode()).hexdigest(),
                            len(names[1])]]


def test_a_species_page_file_is_chosen_by_its_id_alone(monkeypatch):
    """The page file of a species depends on its id and the number of files only: the
    same on every machine; the files double as the species do, some GROUP a file."""
    monkeypatch.setattr(pages, "GROUP", 16)               # as built
    assert [pages.page_files(n) for n in (0, 1, 16, 17, 32, 33, 10_000, 100_000)] == \
        [1, 1, 1, 2, 2, 4, 1024, 8192]
    assert pages.page_of("N2(g)", 1) == ("report/species/1-0.html", "N2_g-87e625cc9a")
    spread = {pages.page_of(f"S{k}(g)", 64)[0] for k in range(2000)}
    assert len(spread) == 64 and all(p.startswith("report/species/64-") for p in spread)


def test_the_kept_pages_are_read_forward_past_species_added_or_gone(tmp_path):
    """The kept lines are read once, forward, as the species come in id order: a species
    the last release did not have finds nothing, one it had finds its own line past those
    of species gone since, and a line that does not read stops the reading (nothing more
    is linked, nothing is linked wrongly)."""
    home = tmp_path / "home"
    rid = "0123456789abcdef"
    (home / "releases" / rid).mkdir(parents=True)
    (home / "current").symlink_to(f"releases/{rid}")
    (home / publish.STORE).mkdir()
    lines = [json.dumps([sid, f"k{sid}", []]) for sid in ("A(g)", "C(g)", "E(g)", "G(g)")]
    (home / publish.STORE / pages.KEPT.format(rid)).write_text(
        "\n".join(lines[:3] + ["not json", lines[3]]) + "\n")
    drawn = pages.Drawn(home, "code")
    assert drawn.folder == (home / "releases" / rid).resolve()
    assert drawn._kept("B(g)") is None
    assert drawn._kept("C(g)") == ["C(g)", "kC(g)", []]
    assert drawn._kept("D(g)") is None
    assert drawn._kept("F(g)") is None                  # E(g) is gone
    assert drawn._kept("G(g)") is None                  # past a line that does not read
    assert pages.Drawn(home, "code", use=False).folder is None
