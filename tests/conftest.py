"""Shared fixtures; the helpers that write raw sources live in thermoledger.testing."""

import hashlib
import shutil
from pathlib import Path

import pytest
from hypothesis import settings

# No test may depend on the machine's speed: hypothesis' per-example deadline would fail a
# test whose first example pays for a one-time set-up (the units registry, an import).
settings.register_profile("thermoledger", deadline=None)
settings.load_profile("thermoledger")

PROJECT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="session")
def demo_build(tmp_path_factory):
    """(raw, out): the demo built once per session with the default settings, exactly as
    ``thermoledger build`` does, for every test that only reads a release (or audits it). A
    test that changes a release works on ``release_copy``; one that changes raw/ on
    ``demo_raw``, a copy with the same bytes."""
    from thermoledger.cli import main as cli

    base = tmp_path_factory.mktemp("demo-release")
    shutil.copytree(PROJECT / "raw", base / "raw")
    code = cli.main(["build", "--raw", str(base / "raw"), "--out", str(base / "out"),
                     "--quiet"])
    assert code == 0
    return base / "raw", base / "out"


@pytest.fixture(scope="session")
def demo_release(demo_build):
    """The release home of the session's demo build (read only)."""
    return demo_build[1]


@pytest.fixture
def release_copy(demo_release, tmp_path):
    """A private copy of the session's demo release home, links kept, for tests that
    change it."""
    dst = tmp_path / "release"
    shutil.copytree(demo_release, dst, symlinks=True)
    return dst


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
    from thermoledger.cli import main as cli

    code = cli.main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err


def species_page(home: Path, species_id: str) -> str:
    """The page of ``species_id`` in the report of release ``home`` (a release folder, or a
    release home through its links): its section of the page file that holds it."""
    import json

    from thermoledger.release import pages

    n = len(json.loads((home / "library.json").read_bytes())["species"])
    path, section = pages.page_of(species_id, pages.page_files(n))
    text = (home / path).read_text()
    start = text.index(f"<section class=\"sp\" id=\"{section}\">")
    return text[start:text.index("</section>", start) + len("</section>")]
