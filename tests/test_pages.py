"""Report pages taken from the last release (release/pages.py): a rebuild links the pages of
every species whose inputs are unchanged, draws the others, and publishes the release a
fresh build makes."""

import hashlib
import json
import os
from pathlib import Path

from thermoledger import build
from thermoledger.release import pages, publish

from .conftest import run_cli, tree_hashes


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
    """{species id: its page paths} of the current release of ``home``."""
    doc = json.loads((home / "current" / "library.json").read_bytes())
    return {sp["id"]: [p for p in pages.page_paths(sp["id"]) if
                       (home / "current" / p).exists()] for sp in doc["species"]}


def test_a_rebuild_links_the_pages_of_species_whose_inputs_are_unchanged(demo_raw, tmp_path):
    """After one table is edited, the pages of every other species are hard links to those
    of the last release; the edited species is drawn again, and so is every species whose
    formation properties count from it (Ar is the reference of no other species' element,
    H2 of every species with hydrogen); the release is the one a fresh build makes."""
    out = tmp_path / "out"
    build.build(demo_raw, out)
    before = _inodes(out)
    by_species = _species_pages(out)
    _edit(demo_raw, "isru-rrho-2026/ar.csv")
    assert build.build(demo_raw, out).linked == len(by_species) - 1
    after = _inodes(out)
    drawn = {sid for sid, files in by_species.items()
             if any(after[f] != before[f] for f in files)}
    assert drawn == {"Ar(g)"}
    assert len(by_species) > 10 and all(by_species.values())
    kept = sorted((out / publish.STORE).glob("pages-*.jsonl"))
    assert [p.name for p in kept] == [pages.KEPT.format((out / "current").resolve().name)]
    lines = [json.loads(line) for line in kept[0].read_text().splitlines()]
    assert [line[0] for line in lines] == sorted(by_species)
    assert all(sorted(rel for rel, _, _ in files) == sorted(by_species[sid])
               for sid, _, files in lines)
    _edit(demo_raw, "isru-rrho-2026/h2.csv")
    build.build(demo_raw, out)
    again = _inodes(out)
    drawn = {sid for sid, files in by_species.items() if any(again[f] != after[f] for f in files)}
    assert {"H2(g)", "CH4(g)", "C2H4(g)"} <= drawn and "Ar(g)" not in drawn and "CO(g)" not in drawn
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
    page = next(p for p in pages.page_paths("CO(g)") if p.endswith(".html"))
    old = (out / "current").resolve() / page
    old.write_bytes(b"changed")
    _edit(demo_raw, "isru-rrho-2026/ar.csv")
    code, said, _ = run_cli(capsys, "build", "--raw", demo_raw, "--out", out)
    n = len(_species_pages(out))
    assert code in (0, 1) and f"linked the report pages of {n - 2} species from the last " \
        "release" in said         # all but Ar(g), edited, and CO(g), whose page changed
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
    """Pages drawn by worker processes come back later than those linked at once: each
    species' line waits for those before it, so the kept list is in the report's order,
    which the next build reads forward."""
    home = tmp_path / "home"
    (home / publish.STORE).mkdir(parents=True)
    release = publish.Release()
    drawn = pages.Drawn(home, "code").into(release)
    for sid in ("A(g)", "B(g)", "C(g)"):
        release.add(pages.page_paths(sid)[0], sid.encode())
        drawn.wait(sid, f"key of {sid}")
    drawn.drew("C(g)")
    drawn.drew("A(g)")
    drawn.drew("B(g)")
    drawn.save()
    (kept,) = (home / publish.STORE).glob("pages-*.jsonl")
    lines = [json.loads(line) for line in kept.read_text().splitlines()]
    assert [(sid, key) for sid, key, _ in lines] == [(s, f"key of {s}") for s in
                                                     ("A(g)", "B(g)", "C(g)")]
    assert lines[1][2] == [[pages.page_paths("B(g)")[0],
                            hashlib.sha256(b"B(g)").hexdigest(), 4]]


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
