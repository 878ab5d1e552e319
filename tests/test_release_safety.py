"""Nothing the user owns is ever destroyed: --out safety, locking, readers isolated from a
publishing build, --strict, signals and worker processes, and file names that cannot collide.
End to end through the CLI on real files; every file is hashed before and after."""

import hashlib
import json
import os
import re
import signal
import subprocess
import sys
import time
import uuid
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from thermoledger.core import names
from thermoledger.core.errors import OutputError
from thermoledger.library import document
from thermoledger.release import provenance, publish
from thermoledger.testing import table_entry, write_source

from .conftest import PROJECT, tree_hashes
from .conftest import run_cli as run


def everything(folder: Path) -> dict:
    """sha256 of every file below ``folder``, links not followed (what the user owns)."""
    out = {}
    for p in sorted(Path(folder).rglob("*")):
        if p.is_symlink():
            out[str(p.relative_to(folder))] = "link:" + os.readlink(p)
        elif p.is_file():
            out[str(p.relative_to(folder))] = hashlib.sha256(p.read_bytes()).hexdigest()
    return out


def small_raw(raw: Path, n: int = 2, first=None):
    """n synthetic linear-gas species (SYNTHETIC test data, smooth made-up Cp)."""
    rows = [[t, f"{29.1 + 3.0 * (t / 3000) ** 1.5:.4f}"] for t in range(200, 3001, 100)]
    ids = first or [f"G{i}" for i in range(n)]
    tables = [dict(table_entry(f"g{i}.csv", sid, "N2", "linear"), header=["T [K]", "Cp [J/(mol*K)]"],
                   rows=rows) for i, sid in enumerate(ids)]
    write_source(raw, "synth", tables)
    return raw


@pytest.fixture
def raw(tmp_path):
    return small_raw(tmp_path / "raw")


def build_args(raw, out, *more):
    return ("build", "--raw", raw, "--out", out, "--no-report", "--quiet", *more)


@pytest.mark.parametrize("where", ["raw", "raw/synth", "raw/synth/deeper", "parent"])
def test_output_in_or_around_a_raw_folder_is_refused(tmp_path, raw, capsys, where):
    out = tmp_path if where == "parent" else tmp_path / where
    before = everything(tmp_path)
    code, _, err = run(capsys, *build_args(raw, out))
    assert code == 2 and "refusing to write into" in err and "raw folder" in err
    assert everything(tmp_path) == before


def test_a_folder_of_the_users_files_is_refused(tmp_path, raw, capsys):
    docs = tmp_path / "mydocs"
    docs.mkdir()
    (docs / "thesis.tex").write_text("years of work")
    before = everything(tmp_path)
    code, _, err = run(capsys, *build_args(raw, docs))
    assert code == 2 and str(docs) in err and "not a thermoledger release" in err
    assert everything(tmp_path) == before


def test_working_directory_root_and_home_are_refused(tmp_path, raw, capsys, monkeypatch):
    work = tmp_path / "work"
    work.mkdir()
    monkeypatch.chdir(work)
    for out, why in ((work, "working directory"), (Path("."), "working directory"),
                     (Path("/"), "filesystem root")):
        code, _, err = run(capsys, *build_args(raw, out))
        assert code == 2 and why in err, err
    home = tmp_path / "home"
    home.mkdir()
    monkeypatch.setenv("HOME", str(home))
    code, _, err = run(capsys, *build_args(raw, home))
    assert code == 2 and "home folder" in err
    assert not any(home.iterdir()) and not any(work.iterdir())


def test_a_link_to_a_raw_folder_is_refused_and_a_link_to_a_release_kept(tmp_path, raw, capsys):
    trap = tmp_path / "trap"
    trap.symlink_to(raw)
    before = everything(tmp_path)
    code, _, err = run(capsys, *build_args(raw, trap))
    assert code == 2 and "a link to" in err and "raw folder" in err
    assert everything(tmp_path) == before
    real = tmp_path / "real-out"
    link = tmp_path / "out-link"
    link.symlink_to(real, target_is_directory=True)
    real.mkdir()
    code, _, _ = run(capsys, *build_args(raw, link))
    assert code == 0 and link.is_symlink() and (real / "library.json").is_file()


def test_a_file_as_output_is_refused(tmp_path, raw, capsys):
    f = tmp_path / "file"
    f.write_text("mine")
    code, _, err = run(capsys, *build_args(raw, f))
    assert code == 2 and "not a folder" in err and f.read_text() == "mine"


def test_releases_replace_releases_and_leave_nothing_outside(tmp_path, raw, capsys):
    out = tmp_path / "out"
    beside = set(os.listdir(tmp_path))
    assert run(capsys, *build_args(raw, out))[0] == 0
    first = tree_hashes(out)
    table = raw / "synth" / "g0.csv"
    lines = table.read_text().splitlines()
    lines[1] = "200,29.1600"                                    # one cell changes
    table.write_text("\n".join(lines) + "\n")
    assert run(capsys, *build_args(raw, out))[0] == 0
    assert tree_hashes(out) != first
    assert set(os.listdir(tmp_path)) == beside | {"out"}        # no lock or staging beside it
    names = set(os.listdir(out))
    assert {".lock", "current", "releases", "library.json"} <= names
    assert not [n for n in names if n.startswith(".staging")]
    assert len(os.listdir(out / "releases")) == 2                # current and the one before
    assert provenance.verify_release(out) == []


def test_a_failed_build_leaves_no_folder_it_created(tmp_path, capsys):
    out = tmp_path / "new-out"
    code, _, err = run(capsys, *build_args(tmp_path / "no-raw", out))
    assert code == 2 and not out.exists() and os.listdir(tmp_path) == []


def test_a_flat_release_of_an_earlier_version_is_taken_over(tmp_path, raw, capsys):
    out = tmp_path / "out"
    assert run(capsys, *build_args(raw, out))[0] == 0
    flat = tmp_path / "flat"
    flat.mkdir()
    for rel, _ in tree_hashes(out).items():                     # the release, written flat
        (flat / rel).parent.mkdir(parents=True, exist_ok=True)
        (flat / rel).write_bytes((out / "current" / rel).read_bytes())
    assert run(capsys, *build_args(raw, flat))[0] == 0
    assert (flat / "current").is_symlink() and tree_hashes(flat) == tree_hashes(out)
    (flat / "notes.txt").write_text("mine")                     # not part of any release
    (flat / "current").unlink()
    code, _, err = run(capsys, *build_args(raw, flat))
    assert code == 2 and (flat / "notes.txt").read_text() == "mine"


def test_the_lock_is_taken_before_the_work(tmp_path, raw, capsys):
    out = tmp_path / "out"
    with publish.locked(out):
        t0 = time.monotonic()
        code, _, err = run(capsys, *build_args(raw, out))
        assert code == 2 and "another build is writing" in err
        assert not (out / "releases").exists()
    assert time.monotonic() - t0 < 600  # it did not wait for anything (no speed asserted)


def _cli(*argv, env_extra=None):
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    env["PYTHONPATH"] = str(PROJECT)
    env.update(env_extra or {})
    return subprocess.Popen([sys.executable, "-m", "thermoledger.cli.entry", *map(str, argv)],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env,
                            text=True)


def test_readers_see_one_release_while_builds_publish(tmp_path, capsys):
    """A reader that resolves current once reads files of one release only (each file's
    hash is the one its release's manifest lists)."""
    raw_a, raw_b = small_raw(tmp_path / "a"), small_raw(tmp_path / "b", first=["G0", "G9"])
    out = tmp_path / "out"
    assert run(capsys, *build_args(raw_a, out))[0] == 0
    builds = [_cli(*build_args(r, out, "--wait", "120")) for r in (raw_b, raw_a)]
    reads = mixed = 0
    while any(p.poll() is None for p in builds) or reads < 50:
        folder = document.release_folder(out)
        try:
            man = json.loads((folder / "manifest.json").read_bytes())
            listed = {o["path"]: o["sha256"] for o in man["outputs"]}
            lib = (folder / "library.json").read_bytes()
        except FileNotFoundError:       # a release pruned under a very slow reader: no mix
            continue
        reads += 1
        mixed += hashlib.sha256(lib).hexdigest() != listed["library.json"]
    assert all(p.wait(300) == 0 for p in builds)
    assert reads >= 50 and mixed == 0


def test_strict_exits_one_when_a_whole_source_is_held_back(tmp_path, raw, capsys):
    broken = tmp_path / "raw" / "broken"
    broken.mkdir()
    (broken / "source.json").write_text('{"source": "broken"')
    code, out, _ = run(capsys, "build", "--raw", raw, "--out", tmp_path / "out", "--no-report",
                       "--strict")
    assert code == 1
    assert "HELD BACK   whole source   broken/source.json" in out and "SRC-UNREADABLE" in out
    code, out, _ = run(capsys, "build", "--raw", raw, "--out", tmp_path / "out", "--no-report")
    assert code == 0
    code, out, _ = run(capsys, "build", "--raw", raw, "--out", tmp_path / "out", "--no-report",
                       "--strict", "--json")
    assert code == 1 and json.loads(out)["held_back"] == [{"file": "broken/source.json",
                                                          "code": "SRC-UNREADABLE"}]


def _processes_tagged(tag: str) -> list:
    """PIDs of processes whose environment carries ``tag`` (the build and its workers)."""
    pids = []
    for d in Path("/proc").iterdir():
        if d.name.isdigit():
            try:
                if tag.encode() in (d / "environ").read_bytes():
                    pids.append(int(d.name))
            except OSError:
                pass
    return pids


def _wait_for(predicate, limit=120.0, step=0.05):
    t0 = time.monotonic()
    while time.monotonic() - t0 < limit:
        if predicate():
            return True
        time.sleep(step)
    return False


@pytest.mark.skipif(not Path("/proc/self/environ").exists(), reason="needs /proc")
def test_workers_never_outlive_a_killed_build(tmp_path):
    raw = small_raw(tmp_path / "raw", first=[f"S{i:02d}" for i in range(64)])
    tag = f"THERMOLEDGER_TEST_TAG={uuid.uuid4().hex}"
    key, value = tag.split("=")
    # two partition workers, each busy for seconds (extrapolation costs ~0.1 s a species),
    # so that the workers are seen alive however fast the rest of the build is
    p = _cli("build", "--raw", raw, "--out", tmp_path / "out", "--workers", "2",
             "--range-of-use", "200", "6000", env_extra={key: value})
    assert _wait_for(lambda: len(_processes_tagged(tag)) >= 2), "no worker was started"
    p.send_signal(signal.SIGKILL)
    p.wait(60)
    assert _wait_for(lambda: not _processes_tagged(tag), 30), _processes_tagged(tag)


@pytest.mark.parametrize("signum", [signal.SIGINT, signal.SIGTERM])
def test_a_signal_stops_a_build_with_one_line(tmp_path, signum):
    raw = small_raw(tmp_path / "raw", first=[f"S{i:02d}" for i in range(64)])
    out = tmp_path / "out"
    p = _cli("build", "--raw", raw, "--out", out)
    # wait until it works on the species, then stop it
    assert _wait_for(lambda: p.poll() is not None or (out / ".lock").exists())
    time.sleep(0.5)
    p.send_signal(signum)
    code = p.wait(120)
    err = p.stderr.read()
    assert "Traceback" not in err
    if code == 0 and "after the new release was published" in err:
        assert provenance.verify_release(out) == []
    elif code == 0:
        assert "thermoledger build:" not in err or "published" in err  # finished first
    else:
        assert code == 128 + signum and "nothing was published" in err, (code, err)
        assert not (out / "current").exists()
    assert not [n for n in os.listdir(tmp_path) if n not in ("raw", "out")]
    assert not out.exists() or not [n for n in os.listdir(out) if n.startswith(".staging")]


def test_species_ids_that_sanitise_alike_get_their_own_files(tmp_path, capsys):
    raw = small_raw(tmp_path / "raw", first=["NO", "NO+", "CO", "Co"])
    out = tmp_path / "out"
    assert run(capsys, "build", "--raw", raw, "--out", out, "--quiet", "--tables-csv")[0] == 0
    index = (out / "report" / "index.html").read_text()
    links = re.findall(r"<a href=\"(species/[^\"#]+)#([^\"]+)\">", index)
    csvs = sorted(os.listdir(out / "tables"))
    assert len(links) == 4 and len({s.lower() for _, s in links}) == 4   # sections of their own
    for file, section in links:
        assert f"<section class=\"sp\" id=\"{section}\">" in (out / "report" / file).read_text()
    assert len(csvs) == 4 and len({c.lower() for c in csvs}) == 4
    assert names.file_stem("NO+(g)") == names.file_stem("NO+(g)")   # stable
    assert names.file_stem("NO(g)").startswith("NO_g-")


@pytest.mark.parametrize("argv, option", [
    (["build", "--table-step", "0"], "--table-step"),
    (["build", "--table-step", "nan"], "--table-step"),
    (["build", "--table-step", "inf"], "--table-step"),
    (["build", "--accept-cp", "-1"], "--accept-cp"),
    (["build", "--accept-cp", "nan"], "--accept-cp"),
    (["build", "--wait", "-5"], "--wait"),
    (["build", "--range-of-use", "1e-300", "3000"], "--range-of-use"),
    (["build", "--range-of-use", "3000", "nan"], "--range-of-use"),
    (["build", "--conventional-break", "inf"], "--conventional-break"),
    (["props", "curated", "N2", "nan"], "T"),
    (["props", "curated", "N2", "-5"], "T"),
    (["diff", "a", "b", "--cp-threshold", "inf"], "--cp-threshold"),
])
def test_command_line_numbers_are_checked(capsys, argv, option):
    from thermoledger.cli import main as cli

    with pytest.raises(SystemExit) as stop:
        cli.main(argv)
    err = capsys.readouterr().err
    assert stop.value.code == 2 and option in err and "Traceback" not in err


@pytest.mark.parametrize("value", ["0", "nan", "1000,1000", "3000,500", "1e-300", "x",
                                   "500,1000,2000,2500", "inf,2000"])
def test_fixed_breakpoints_on_the_command_line_are_checked(tmp_path, raw, capsys, value):
    code, _, err = run(capsys, *build_args(raw, tmp_path / "out", f"--breakpoints={value}"))
    assert code == 2 and "--breakpoints" in err and not (tmp_path / "out").exists()


def test_range_of_use_must_be_increasing(tmp_path, raw, capsys):
    code, _, err = run(capsys, *build_args(raw, tmp_path / "out", "--range-of-use", "3000",
                                           "300"))
    assert code == 2 and "TMAX is not above TMIN" in err


def test_check_names_a_whole_source_held_back(tmp_path, raw, capsys):
    (tmp_path / "raw" / "broken").mkdir()
    (tmp_path / "raw" / "broken" / "source.json").write_text("[" * 100 + "]" * 100)
    code, out, _ = run(capsys, "check", "--raw", raw)
    assert code == 1 and "  held back: broken/source.json (SRC-TOO-DEEP)" in out


def _loading_numpy(pid: int) -> bool:
    """Wait until process ``pid`` has mapped one of numpy's extension modules (its imports
    under way, so that thermoledger's own start-up code runs); False where /proc cannot
    tell or when the process ended first."""
    maps = Path(f"/proc/{pid}/maps")

    def mapped() -> bool | None:
        try:
            return "numpy" in maps.read_text()
        except OSError:
            return None          # no /proc, or the process is gone: stop waiting

    return _wait_for(lambda: mapped() is not False, 60.0, 0.005) and bool(mapped())


def test_ctrl_c_while_starting_never_prints_a_traceback(tmp_path, raw):
    # at fixed delays, and once numpy is being loaded (thermoledger's own start-up code
    # runs then, whatever the machine's speed)
    for when in (0.1, 0.3, 0.8, "numpy"):
        p = _cli(*build_args(raw, tmp_path / f"out-{when}"))
        if when == "numpy":
            if not _loading_numpy(p.pid):
                p.kill()
                p.wait(120)
                continue
        else:
            time.sleep(when)
        p.send_signal(signal.SIGINT)
        code = p.wait(120)
        err = p.stderr.read()
        assert "Traceback" not in err, err
        if code == -signal.SIGINT:
            # the interpreter had not yet set its own handler (a slow start): the signal's
            # default action ended it before any of thermoledger's code ran, silently
            assert when != "numpy" and err == "", (when, err)
            continue
        assert code in (0, 130), (code, err)
        if code == 130:
            assert err.strip().count("\n") == 0 and "interrupted" in err


def test_ctrl_c_wrapped_by_python_while_a_module_loads_is_an_interrupt(monkeypatch, capsys):
    """A Ctrl-C that arrives while a module defines a dataclass reaches the command wrapped
    in a RuntimeError (Python 3.11 wraps what __set_name__ raises; seen once in CI while
    `build` imported the audit stage): the command stops as interrupted, in one line, not
    as an internal error."""
    from thermoledger.cli import main as cli

    def loads_a_module(args):
        try:
            raise cli.Interrupted(signal.SIGINT)
        except cli.Interrupted as stop:
            raise RuntimeError("Error calling __set_name__ on 'Field' instance") from stop

    monkeypatch.setitem(cli.COMMANDS, "check", loads_a_module)
    code = cli.main(["check", "--raw", "raw"])
    err = capsys.readouterr().err
    assert code == 128 + signal.SIGINT
    assert err == "thermoledger check: interrupted (SIGINT)\n"
    monkeypatch.setitem(cli.COMMANDS, "check", lambda args: 1 / 0)
    assert cli.main(["check", "--raw", "raw"]) == 3
    assert "internal error (ZeroDivisionError" in capsys.readouterr().err


def test_a_stop_after_the_command_has_ended_changes_nothing(tmp_path):
    """Once the command has ended its status stands: a SIGINT or SIGTERM that comes while
    the interpreter shuts down (when its handlers are back to the system's) neither kills
    it silently nor changes the status (a build interrupted just as it finished exited with
    -2, the release published)."""
    code = ("import os, signal, sys\n"
            "from thermoledger.cli import entry\n"
            f"sys.argv = ['thermoledger', 'check', '--raw', {str(tmp_path)!r}]\n"
            "status = entry.main()\n"
            "print('status', status, flush=True)\n"
            "os.kill(os.getpid(), signal.SIGINT)\n"
            "os.kill(os.getpid(), signal.SIGTERM)\n"
            "sys.exit(status)\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=60)
    said = [line for line in done.stdout.splitlines() if line.startswith("status ")]
    assert said and done.returncode == int(said[0].split()[1]), (done.stdout, done.stderr)
    assert "Traceback" not in done.stderr, done.stderr


def test_the_console_command_runs_without_the_cyclic_collector_and_freezes_what_is_left():
    """entry.main runs the command with the cyclic garbage collector off (turned on after a
    build, it walked every object the build held) and freezes what is left when it ends
    (the interpreter's shutdown then does not walk it again)."""
    code = ("import gc, sys\n"
            "from thermoledger.cli import entry, main as cli\n"
            "seen = []\n"
            "cli.main = lambda: seen.append(gc.isenabled()) or 0\n"
            "kept = [[i] for i in range(1000)]\n"
            "status = entry.main()\n"
            "print(status, seen, gc.isenabled(), gc.get_freeze_count() >= 1000)\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=60)
    assert done.stdout.split() == ["0", "[False]", "False", "True"], done.stderr


def test_a_folder_that_only_looks_like_a_release_home_is_refused(tmp_path, raw, capsys):
    fake = tmp_path / "fake"
    (fake / "releases" / "my-photos").mkdir(parents=True)
    (fake / "releases" / "my-photos" / "cat.jpg").write_bytes(b"\xff\xd8")
    before = everything(tmp_path)
    code, _, err = run(capsys, *build_args(raw, fake))
    assert code == 2 and "not a thermoledger release" in err
    assert everything(tmp_path) == before


def test_json_documents_refuse_numbers_json_cannot_carry():
    from thermoledger.core.errors import OutputError
    from thermoledger.release.document import json_bytes

    want = '{\n  "a": [\n    1.5,\n    null,\n    "é"\n  ]\n}\n'
    assert json_bytes({"a": [1.5, None, "é"]}) == want.encode()
    for bad in (float("nan"), float("inf"), -float("inf")):
        with pytest.raises(OutputError, match="JSON cannot carry"):
            json_bytes({"species": [{"quality": {"x": bad}}]})


JSON_LEAVES = st.one_of(st.none(), st.booleans(), st.integers(), st.text(max_size=5),
                        st.floats(allow_nan=True, allow_infinity=True))
JSON_DOCS = st.recursive(JSON_LEAVES, lambda inner: st.one_of(
    st.lists(inner, max_size=4), st.tuples(inner, inner),
    st.dictionaries(st.text(max_size=3), inner, max_size=4)), max_leaves=25)


@settings(max_examples=300, deadline=None)
@given(JSON_DOCS)
def test_the_fast_non_finite_check_names_the_first_bad_number(doc):
    """A fitted entry is scanned for NaN and infinities by an orjson round trip (then the
    json module's C encoder) and walked only when it holds one: the path is that of the
    walk, '' for a clean entry."""
    from thermoledger.release.document import _first_non_finite, non_finite

    assert non_finite(doc) == _first_non_finite(doc, "")
    assert non_finite({"species": [0.5, {"cp": doc}]}) == \
        _first_non_finite({"species": [0.5, {"cp": doc}]}, "")


#: JSON_DOCS with the integers orjson writes (64 bits)
ORJSON_DOCS = st.recursive(
    st.one_of(st.none(), st.booleans(), st.integers(-2 ** 63, 2 ** 63 - 1), st.text(max_size=5),
              st.floats(allow_nan=True, allow_infinity=True)),
    lambda inner: st.one_of(st.lists(inner, max_size=4), st.tuples(inner, inner),
                            st.dictionaries(st.text(max_size=3), inner, max_size=4)),
    max_leaves=25)


@settings(max_examples=40, deadline=None)
@given(st.dictionaries(st.text(max_size=3), ORJSON_DOCS, max_size=3),
       st.lists(ORJSON_DOCS, min_size=1, max_size=8), st.integers(0, 600), st.booleans())
def test_a_long_list_or_mapping_written_in_batches_is_the_document_written_whole(
        rest, base, n, as_mapping):
    """json_chunks writes the items of a top-level list or mapping WRITTEN_AT_ONCE per
    orjson call: the bytes are orjson's of the whole document (indented by two, a final
    newline), and a NaN or an infinity anywhere is refused. (``n`` items drawn in turn from
    ``base``: long lists without drawing hundreds of documents.)"""
    import orjson
    from thermoledger.release.document import json_bytes

    items = [base[i % len(base)] for i in range(n)]
    doc = {**rest, "big": {f"k{i}": x for i, x in enumerate(items)} if as_mapping else items}
    if _first_non_finite_of(doc):
        with pytest.raises(OutputError, match="JSON cannot carry"):
            json_bytes(doc)
    else:
        assert json_bytes(doc) == orjson.dumps(
            doc, option=orjson.OPT_INDENT_2 | orjson.OPT_APPEND_NEWLINE)


def test_a_number_json_cannot_carry_past_the_first_batch_is_refused_where_it_is():
    from thermoledger.release.document import WRITTEN_AT_ONCE, json_bytes

    items = [{"x": float(i), "line": None} for i in range(WRITTEN_AT_ONCE + 40)]
    items[WRITTEN_AT_ONCE + 7]["x"] = float("inf")
    with pytest.raises(OutputError, match=f"at /findings/{WRITTEN_AT_ONCE + 7}/x"):
        json_bytes({"findings": items})
    pairs = {f"r{i}": {"v": float(i)} for i in range(WRITTEN_AT_ONCE * 2)}
    pairs["r300"]["v"] = float("nan")
    with pytest.raises(OutputError, match="at /relation/r300/v"):
        json_bytes({"relation": pairs})


def test_release_files_are_written_as_they_are_made_and_a_failure_leaves_none(
        tmp_path, raw, capsys, monkeypatch):
    """The release is never held whole in memory: each file lands in the staging folder as
    soon as it is made (the report pages before the manifest exists). A build that fails
    half-way removes its staging folder and leaves the previous release current."""
    from thermoledger.release import report

    out = tmp_path / "out"
    assert run(capsys, *build_args(raw, out))[0] == 0
    before = everything(out)
    seen = {}
    real = report.report_files

    def drawing_then_failing(doc, points, accept, workers=None, say=None, pages=None,
                             release=None):
        real(doc, points, accept, workers, say, pages, release)
        staging = [p for p in out.iterdir() if p.name.startswith(".staging-")]
        seen["pages"] = sorted(str(p.relative_to(staging[0]))
                               for p in staging[0].rglob("*.html"))
        seen["manifest"] = (staging[0] / "manifest.json").exists()
        raise OSError("disk full (simulated)")

    monkeypatch.setattr(report, "report_files", drawing_then_failing)
    code, _, err = run(capsys, "build", "--raw", raw, "--out", out, "--quiet")
    assert code != 0 and "disk full" in err and "Traceback" not in err
    assert "report/index.html" in seen["pages"] and not seen["manifest"]
    assert everything(out) == before           # no staging folder, the same release current


def test_a_first_build_at_work_leaves_the_folder_acceptable_to_the_next(tmp_path):
    """While a first build works (its lock, staging folder and pending partitions in the
    folder) a second build waiting for the lock must not take the folder for the user's:
    it is empty of releases, not 'other'. A file of the user's still makes it 'other'."""
    folder = tmp_path / "out"
    (folder / ".staging-4242").mkdir(parents=True)
    (folder / publish.STORE).mkdir()
    (folder / publish.LOCK).write_bytes(b"")
    assert publish.kind_of(folder) == "empty"
    (folder / "notes.txt").write_text("mine")
    assert publish.kind_of(folder) == "other"


ORJSON_DOCS = st.recursive(
    st.one_of(st.none(), st.booleans(), st.integers(-2**63, 2**63 - 1), st.text(max_size=5),
              st.floats(allow_nan=True, allow_infinity=True)),
    lambda inner: st.one_of(st.lists(inner, max_size=4), st.tuples(inner, inner),
                            st.dictionaries(st.text(max_size=3), inner, max_size=4)),
    max_leaves=25)


@settings(max_examples=300, deadline=None)
@given(ORJSON_DOCS)
def test_a_document_is_written_exactly_when_it_holds_no_nan_nor_infinity(doc):
    """json_bytes checks its own bytes read back (a NaN or infinity would come back as
    null), tuples included: it refuses exactly the documents the walk finds a bad number
    in, naming the walk's place, and writes the others as the json module reads them."""
    from thermoledger.core.errors import OutputError
    from thermoledger.release.document import _first_non_finite, json_bytes

    bad = _first_non_finite({"d": doc}, "")
    if bad:
        with pytest.raises(OutputError, match=f"at {re.escape(bad)}$"):
            json_bytes({"d": doc})
    else:
        assert json.loads(json_bytes({"d": doc})) == json.loads(json.dumps({"d": doc}))


def test_a_kept_release_s_manifest_is_read_once_and_again_when_it_changes(tmp_path, raw, capsys,
                                                                      monkeypatch):
    """The release home is judged before and under the lock; the manifests of its releases
    are read once for both once settled (core.paths.settled), and a manifest changed in
    place is read again (and a damaged one makes the folder another's)."""
    from thermoledger.core import limits

    out = tmp_path / "out"
    assert run(capsys, *build_args(raw, out))[0] in (0, 1)
    monkeypatch.setattr(limits, "RECENT_CHANGE", 0.0)
    time.sleep(0.05)
    reads = []
    real = publish.manifest_outputs
    monkeypatch.setattr(publish, "manifest_outputs", lambda p: reads.append(p) or real(p))
    assert publish.kind_of(out) == "home" and publish.kind_of(out) == "home"
    assert len(reads) == 1
    man = next((out / publish.RELEASES).iterdir()) / "manifest.json"
    man.write_text("{}")
    assert publish.kind_of(out) == "other"
    assert len(reads) == 2


@settings(max_examples=300, deadline=None)
@given(st.dictionaries(st.sampled_from(["a", "species", "\0thermoledger-list-0\0", "z"]),
                       ORJSON_DOCS.filter(lambda d: not _first_non_finite_of(d))
                       | st.just("\0thermoledger-list-0\0"), max_size=4))
def test_a_document_written_in_pieces_is_the_document_written_whole(doc):
    """json_chunks gives a document's top-level lists item by item; joined, the pieces are
    the bytes orjson writes for the whole document (also where a value looks like the
    marks the pieces are cut at)."""
    import orjson
    from thermoledger.release.document import json_chunks

    want = orjson.dumps(doc, option=orjson.OPT_INDENT_2 | orjson.OPT_APPEND_NEWLINE)
    assert b"".join(json_chunks(doc)) == want


def _first_non_finite_of(doc) -> str:
    from thermoledger.release.document import _first_non_finite

    return _first_non_finite(doc, "")


def test_a_release_is_made_durable_at_once_before_it_is_renamed_into_place(
        tmp_path, monkeypatch):
    """Its files are written without an fsync each and synced together (one syncfs on
    Linux) while they are checked, before the rename makes them a release."""
    from thermoledger.core import paths

    synced, fsyncs = [], []
    real_sync, real_fsync = paths.sync_files, os.fsync

    def sync_files(folder, rels):
        synced.append((Path(folder).name, list(rels), any((tmp_path / "releases").glob("*"))))
        real_sync(folder, rels)
    monkeypatch.setattr(paths, "sync_files", sync_files)
    monkeypatch.setattr(os, "fsync", lambda fd: fsyncs.append(fd) or real_fsync(fd))
    tmp_path.mkdir(exist_ok=True)
    release = publish.Release.staged(tmp_path)
    release.add("a/b.txt", b"one")
    release.add_chunks("c.txt", (b"two", b"three"))
    release.add("manifest.json", b"{}")          # names the release
    assert not fsyncs
    publish.publish(tmp_path, release)
    assert synced == [(f".staging-{os.getpid()}", ["a/b.txt", "c.txt", "manifest.json"],
                       False)]
    assert (tmp_path / "current" / "c.txt").read_bytes() == b"twothree"


def _staged_release(home: Path):
    home.mkdir(exist_ok=True)
    release = publish.Release.staged(home)
    release.add("a.txt", b"new")
    release.add("manifest.json", b"{}")
    return release


@pytest.mark.parametrize("fails", ["sync", "check", "both"])
def test_a_release_whose_sync_or_check_fails_is_not_published(tmp_path, monkeypatch, fails):
    """The check and the sync run at once (another thread syncs); either failing stops the
    publication with its error (the check's first when both fail), both finished, and the
    staged files are gone."""
    from thermoledger.core import paths

    ran = []

    def sync_files(folder, rels):
        ran.append("sync")
        if fails in ("sync", "both"):
            raise OSError(5, "the disk refused")

    def check(folder):
        assert (Path(folder) / "a.txt").read_bytes() == b"new"
        ran.append("check")
        if fails in ("check", "both"):
            raise OutputError("the staged release fails its own manifest")

    monkeypatch.setattr(paths, "sync_files", sync_files)
    release = _staged_release(tmp_path / "home")
    with pytest.raises(OSError if fails == "sync" else OutputError,
                       match="disk refused" if fails == "sync" else "own manifest"):
        publish.publish(tmp_path / "home", release, check=check)
    assert sorted(ran) == ["check", "sync"]
    assert not (tmp_path / "home" / "current").exists()
    assert not any((tmp_path / "home").glob(".staging-*"))
    assert not list((tmp_path / "home").glob("releases/*"))


def test_each_release_file_s_writeback_starts_as_it_is_closed(tmp_path, monkeypatch):
    """write_summed asks the kernel to start writing each file out as soon as it is
    written (sync_file_range on Linux): the sync before publishing then waits less."""
    from thermoledger.core import paths

    started = []
    real = paths.start_writeback
    monkeypatch.setattr(paths, "start_writeback",
                        lambda fd: started.append(os.fstat(fd).st_size) or real(fd))
    got = publish.write_summed(tmp_path / "a" / "x.bin", (b"one", b"two"))
    assert started == [6] and (tmp_path / "a" / "x.bin").read_bytes() == b"onetwo"
    assert got == publish.summed(hashlib.sha256(b"onetwo").digest(), 6)
    if sys.platform.startswith("linux"):
        with open(tmp_path / "a" / "x.bin", "rb+") as fh:
            assert real(fh.fileno()) is True


def test_without_syncfs_every_file_is_fsynced(tmp_path, monkeypatch):
    import ctypes

    from thermoledger.core import paths

    (tmp_path / "d").mkdir()
    for name in ("d/x", "y"):
        (tmp_path / name).write_bytes(b"z")
    fsyncs = []
    real_fsync = os.fsync

    def no_library(*args, **kwargs):
        raise OSError("no C library here")
    monkeypatch.setattr(ctypes, "CDLL", no_library)
    monkeypatch.setattr(os, "fsync", lambda fd: fsyncs.append(os.readlink(
        f"/proc/self/fd/{fd}") if os.path.exists("/proc/self/fd") else fd) or real_fsync(fd))
    paths.sync_files(tmp_path, ["d/x", "y"])
    assert len(fsyncs) == 2
    if os.path.exists("/proc/self/fd"):
        assert fsyncs == [str(tmp_path / "d" / "x"), str(tmp_path / "y")]


def test_an_interrupt_wrapped_by_python_passes_the_stages_nets(monkeypatch):
    """The nets that turn a table's unexpected exception into its finding let an interrupt
    behind it through (core.errors.let_through): a Ctrl-C wrapped while a stage imported a
    module stops the build; a plain exception is still the table's STAGE-FAILED finding."""
    from thermoledger import build
    from thermoledger.checks import registry
    from thermoledger.core.errors import let_through

    def wrapped(*args, **kwargs):
        try:
            raise KeyboardInterrupt
        except KeyboardInterrupt as stop:
            raise RuntimeError("Error calling __set_name__") from stop

    monkeypatch.setattr(registry, "_validate_table", wrapped)
    with pytest.raises(KeyboardInterrupt):
        build.examine(PROJECT / "raw", workers=1)
    monkeypatch.setattr(registry, "_validate_table", lambda *a, **k: 1 / 0)
    got = build.examine(PROJECT / "raw", workers=1)
    assert any(f.code == "STAGE-FAILED" and "ZeroDivisionError" in f.message
               for f in got.findings)
    let_through(ValueError("alone"))                        # nothing behind: nothing raised
    outer = RuntimeError("outer")
    outer.__cause__ = OSError("inner")
    let_through(outer)                                      # an Exception behind: nothing
    outer.__cause__.__context__ = SystemExit(4)
    with pytest.raises(SystemExit):                         # an exit two steps behind
        let_through(outer)
