"""The package's layout follows the data flow, and its dependencies run one way.

Stages, in the order data flow through them (DEVELOPERS.md, "Layout"):

    core → physics → ingest → checks → fit → library → release → partitions → build → cli

A module may import from its own stage and from earlier ones, never from a later one.
``library`` (what a user of a curated library imports) depends only on ``core`` and
``physics``; nothing in the package imports ``testing``. The top-level ``thermoledger``
module (``__version__`` and the lazy user API) may be imported from anywhere.
"""

import ast
import subprocess
import sys
from pathlib import Path

import pytest

SOURCE = Path(__file__).resolve().parent.parent / "pipeline"
ORDER = ["core", "physics", "ingest", "checks", "fit", "library", "release", "partitions", "build", "cli",
         "testing"]
ONLY = {"library": {"core", "physics", "library"}}


def stage_of(module: str) -> str:
    """'thermoledger.fit.lsq' -> 'fit'; 'thermoledger.build' -> 'build'; the package -> ''."""
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else ""


def module_name(path: Path, root: Path = SOURCE) -> str:
    rel = path.relative_to(root).with_suffix("")
    parts = [p for p in rel.parts if p != "__init__"]
    return ".".join(["thermoledger", *parts])


def imports_of(path: Path, root: Path = SOURCE) -> set:
    """Every thermoledger module ``path`` imports, at top level or inside a function."""
    me = module_name(path, root)
    package = me if path.name == "__init__.py" else me.rsplit(".", 1)[0]
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[:len(base) - node.level + 1]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if target.split(".")[0] != "thermoledger":
                continue
            for alias in node.names:
                sub = root / alias.name
                if target == "thermoledger" and (sub.is_dir() or sub.with_suffix(".py").exists()):
                    found.add(f"thermoledger.{alias.name}")   # 'from .. import build'
                else:
                    found.add(target)
        elif isinstance(node, ast.Import):
            found |= {a.name for a in node.names if a.name.split(".")[0] == "thermoledger"}
    return found


def violations(path: Path, root: Path = SOURCE) -> list:
    """Imports of ``path`` that break the dependency rule, as messages."""
    me = module_name(path, root)
    mine = stage_of(me)
    if mine in ("", "__main__"):
        return []
    out = []
    for target in sorted(imports_of(path, root)):
        theirs = stage_of(target)
        if theirs in ("", mine):
            continue
        if theirs not in ORDER:
            out.append(f"{me} imports {target}, which is in no stage")
        elif ORDER.index(theirs) > ORDER.index(mine):
            out.append(f"{me} ({mine}) imports {target} from the later stage {theirs}")
        elif mine in ONLY and theirs not in ONLY[mine]:
            out.append(f"{me} imports {target}; {mine} may use only {sorted(ONLY[mine])}")
    return out


MODULES = sorted(SOURCE.rglob("*.py"))


def test_every_module_belongs_to_a_stage():
    stages = {stage_of(module_name(p)) for p in MODULES}
    assert stages <= set(ORDER) | {"", "__main__"}, stages - set(ORDER)
    assert {"core", "physics", "ingest", "checks", "fit", "library", "release", "cli"} <= stages


@pytest.mark.parametrize("path", MODULES, ids=lambda p: str(p.relative_to(SOURCE)))
def test_no_module_imports_from_a_later_stage(path):
    assert violations(path) == []


def test_the_rule_catches_backward_and_forbidden_imports(tmp_path):
    """The checker itself: a core module importing the fit stage and the build, and a library
    module importing the release stage, are all reported."""
    root = tmp_path / "pipeline"
    for name in ("core", "fit", "library", "release"):
        (root / name).mkdir(parents=True)
    (root / "build.py").write_text("")
    bad_core = root / "core" / "x.py"
    bad_core.write_text("from ..fit import lsq\n\ndef f():\n    from .. import build\n")
    bad_library = root / "library" / "y.py"
    bad_library.write_text("from ..release import publish\nfrom ..core import units\n")
    assert imports_of(bad_core, root) == {"thermoledger.fit", "thermoledger.build"}
    assert len(violations(bad_core, root)) == 2
    (problem,) = violations(bad_library, root)
    assert "later stage release" in problem


def test_importing_the_user_api_loads_no_heavy_or_posix_only_module():
    """`import thermoledger`, loading a library and evaluating it never import matplotlib,
    pyarrow, pandas or fcntl (a user's process stays light and portable)."""
    code = (
        "import sys, thermoledger\n"
        "assert 'numpy' not in sys.modules, 'import thermoledger loaded numpy'\n"
        "from thermoledger import load_library\n"
        f"lib = load_library({str(SOURCE.parent / 'curated')!r})\n"
        "lib['N2(g)'].cp([300.0, 1000.0]); lib['N2(g)'].uncertainty(500.0)\n"
        "print(sorted(m for m in sys.modules\n"
        "             if m.split('.')[0] in ('matplotlib', 'pyarrow', 'pandas', 'fcntl')))\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "[]"


def test_the_schemas_ship_inside_the_package():
    from thermoledger.core import schemas

    for name in schemas.NAMES:
        assert schemas.schema_bytes(name) == (SOURCE.parent / "schemas" / name).read_bytes()
    with pytest.raises(KeyError, match="no schema named 'nope.json'"):
        schemas.schema_bytes("nope.json")


def test_one_version_in_one_place():
    import importlib.metadata as md

    import thermoledger

    assert md.version("thermoledger") == thermoledger.__version__
    text = (SOURCE.parent / "pyproject.toml").read_text()
    assert 'dynamic = ["version"]' in text and thermoledger.__version__ not in text


def _heavy_modules_after(argv: list, heavy=("pandas", "scipy", "pyarrow"), codes=(0, 1)) -> str:
    """Which of the ``heavy`` libraries a fresh interpreter has loaded after running the
    command line ``argv`` (exiting with one of ``codes``), as the printed sorted list."""
    code = (
        "import sys\n"
        "from thermoledger.cli import main\n"
        f"assert main.main({argv!r}) in {codes!r}\n"
        "print(sorted({m.split('.')[0] for m in sys.modules}\n"
        f"             & {set(heavy)!r}))\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 0, done.stderr
    return done.stdout.strip().splitlines()[-1]


def test_reading_a_library_from_the_command_line_loads_no_build_library():
    """`props` starts without pandas, scipy, pyarrow, pint or jsonschema (start-up: 0.24 s
    against 2.4 s when the command line imported every stage)."""
    argv = ["props", str(SOURCE.parent / "curated"), "N2", "1000"]
    assert _heavy_modules_after(argv, ("pandas", "scipy", "pyarrow", "pint", "jsonschema"),
                                codes=(0,)) == "[]"


def test_checking_loads_no_data_frame_library_and_an_empty_folder_no_scipy(tmp_path):
    """Tables travel as numpy columns (core/rows.py): `check` of the demo data loads neither
    pandas nor pyarrow, and the solver's libraries load on first use, so that checking an
    empty folder starts without scipy (0.25 s against 0.9 s before)."""
    assert _heavy_modules_after(["check", "--raw", str(SOURCE.parent / "raw")]) == "['scipy']"
    assert _heavy_modules_after(["check", "--raw", str(tmp_path)]) == "[]"


def _leaves(doc, path=()):
    if isinstance(doc, dict):
        for k, v in doc.items():
            yield from _leaves(v, (*path, k))
    elif isinstance(doc, list):
        for k, v in enumerate(doc):
            yield from _leaves(v, (*path, k))
    else:
        yield path


def test_the_compiled_validator_agrees_with_the_explaining_one():
    """schemas.errors_of trusts jsonschema-rs to pass a valid document: on the demo release's
    documents and on each of them with one field replaced by a value of another type, both
    validators give the same verdict."""
    import copy
    import json

    from thermoledger.core import schemas

    release = SOURCE.parent / "curated"
    docs = {"library.schema.json": json.loads((release / "library.json").read_text()),
            "manifest.schema.json": json.loads((release / "manifest.json").read_text()),
            "findings.schema.json": json.loads((release / "findings.json").read_text()),
            "source.schema.json": json.loads(next((SOURCE.parent / "raw").glob(
                "*/source.json")).read_text())}
    docs["library.schema.json"]["species"] = docs["library.schema.json"]["species"][:2]
    rng = __import__("random").Random(7)
    checked = 0
    for name, doc in docs.items():
        assert schemas.compiled(name).is_valid(doc) and schemas.errors_of(doc, name) == []
        leaves = list(_leaves(doc))
        for path in rng.sample(leaves, min(40, len(leaves))):
            for value in ("text", -1.5, None, [], {"x": 1}, True):
                bad = copy.deepcopy(doc)
                target = bad
                for k in path[:-1]:
                    target = target[k]
                target[path[-1]] = value
                slow = not list(schemas.validator(name).iter_errors(bad))
                assert schemas.compiled(name).is_valid(bad) == slow, (name, path, value)
                checked += 1
    assert checked > 400
