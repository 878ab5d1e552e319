"""Shared fixtures; the helpers that write raw sources live in thermoledger.testing."""

import hashlib
import shutil
from pathlib import Path

import pytest

PROJECT = Path(__file__).resolve().parent.parent


@pytest.fixture(scope="session")
def demo_release(tmp_path_factory):
    """One release of the demo (report and CSV tables included), built once per session for
    the tests that only read it; a test that changes a release builds its own."""
    from thermoledger.cli import main as cli

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
    from thermoledger.cli import main as cli

    code = cli.main([str(a) for a in argv])
    out = capsys.readouterr()
    return code, out.out, out.err
