"""Shared helpers: write raw sources in the documented format into a temporary folder."""

import hashlib
import json
import shutil
from pathlib import Path

import pytest

PROJECT = Path(__file__).resolve().parent.parent


def write_source(raw: Path, source_id: str, tables, *, priority=10, standard_pressure="1 bar",
                 method="other", extra=None):
    """Write raw/<source_id>/source.json and its CSV tables.

    ``tables`` is a list of dicts: the source.json table entry plus 'header' (list of
    column names with units) and 'rows' (list of lists of cells, written as given).
    """
    folder = raw / source_id
    folder.mkdir(parents=True, exist_ok=True)
    entries = []
    for t in tables:
        t = dict(t)
        header, rows = t.pop("header"), t.pop("rows")
        text = t.pop("text", None)
        if text is None:
            text = "\n".join([",".join(header)] + [",".join(str(c) for c in r) for r in rows]) + "\n"
        (folder / t["file"]).write_text(text, encoding="utf-8")
        entries.append(t)
    doc = {"source": source_id, "title": f"test source {source_id}", "citation": "test",
           "method": method, "standard_pressure": standard_pressure, "priority": priority,
           "license": "CC0-1.0", "tables": entries}
    doc.update(extra or {})
    (folder / "source.json").write_text(json.dumps(doc, indent=1), encoding="utf-8")
    return folder


def table_entry(file, species, formula, geometry, h="0 kJ/mol", s="200 J/(mol*K)", **more):
    d = {"file": file, "species": species, "formula": formula, "phase": "g",
         "geometry": geometry, "enthalpy_of_formation_298": h, "entropy_298": s}
    d.update(more)
    return d


@pytest.fixture(scope="session")
def demo_release(tmp_path_factory):
    """One release of the demo (report and CSV tables included), built once per session for
    the tests that only read it; a test that changes a release builds its own."""
    from pipeline import cli

    base = tmp_path_factory.mktemp("demo-release")
    shutil.copytree(PROJECT / "raw", base / "raw")
    code = cli.main(["build", "--raw", str(base / "raw"), "--out", str(base / "out"),
                     "--tables-csv", "--quiet"])
    assert code == 0
    return base / "out"


@pytest.fixture
def demo_raw(tmp_path):
    """A copy of the bundled demo raw/ folder (the original is never touched)."""
    dst = tmp_path / "raw"
    shutil.copytree(PROJECT / "raw", dst)
    return dst


def tree_hashes(folder: Path) -> dict:
    """sha256 of every file below ``folder`` by relative path; of a release home, the files
    of its current release."""
    if (Path(folder) / "current").is_symlink():
        folder = (Path(folder) / "current").resolve()
    return {str(p.relative_to(folder)): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(Path(folder).rglob("*")) if p.is_file()}


def run_cli(capsys, *argv):
    """Run the CLI in-process; (exit code, stdout, stderr)."""
    from pipeline import cli

    code = cli.main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err
