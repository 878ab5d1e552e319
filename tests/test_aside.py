"""Work done aside in a forked process (core.processes.aside), and library.json and
tables.parquet of a large release written that way: the same bytes as written by the
build's own process, and a failure there stops the build as one here does."""

import os
import time
from contextlib import contextmanager
from dataclasses import replace
from pathlib import Path

import orjson
import pytest
from thermoledger import build, partitions
from thermoledger.core import processes, spill
from thermoledger.core.errors import OutputError
from thermoledger.release import assemble, publish, tables

from .conftest import run_cli, tree_hashes

RAW = Path(__file__).resolve().parents[1] / "raw"


def _twice(x):
    return {"twice": 2 * x, "pid": os.getpid()}


def _refuse(what):
    raise OutputError(f"cannot write {what}")


class _Unpicklable(Exception):
    def __init__(self, a, b):
        super().__init__(f"{a} and {b}")


def _raise_unpicklable():
    raise _Unpicklable("one", "two")


def _vanish():
    os._exit(3)


def _pid_then_sleep(path):
    Path(path).write_text(str(os.getpid()))
    time.sleep(600)


def test_the_work_runs_in_another_process_and_its_result_comes_back():
    with processes.aside(_twice, 21) as helper:
        got = helper.result()
    assert got["twice"] == 42 and got["pid"] != os.getpid()


def test_what_the_work_raises_is_raised_here_as_itself():
    with pytest.raises(OutputError, match="cannot write library.parquet"):
        with processes.aside(_refuse, "library.parquet") as helper:
            helper.result()


def test_an_exception_that_cannot_cross_crosses_as_its_text():
    with pytest.raises(RuntimeError, match="_Unpicklable: one and two"):
        with processes.aside(_raise_unpicklable) as helper:
            helper.result()


def test_a_helper_that_dies_without_an_answer_is_an_error_not_a_hang():
    with pytest.raises(OSError, match="stopped without an answer .exit code 3"):
        with processes.aside(_vanish) as helper:
            helper.result()


def test_a_block_that_fails_kills_the_helper_instead_of_waiting(tmp_path):
    pid_file = tmp_path / "pid"
    with pytest.raises(KeyboardInterrupt):
        with processes.aside(_pid_then_sleep, pid_file):
            for _ in range(3000):             # the helper has started (at most 30 s)
                if pid_file.exists() and pid_file.read_text():
                    break
                time.sleep(0.01)
            raise KeyboardInterrupt
    with pytest.raises(ProcessLookupError):   # killed and reaped: no such process
        os.kill(int(pid_file.read_text()), 0)


@pytest.fixture
def aside_always(monkeypatch):
    """Every release's library.json and tables.parquet written aside, on any machine; the
    relative paths adopted from the helper are recorded."""
    monkeypatch.setattr(assemble, "ASIDE_FROM", 1)
    monkeypatch.setattr(os, "cpu_count", lambda: 2)
    adopted = []
    real = publish.Release.adopt

    def adopt(self, rel, summed):
        adopted.append(rel)
        return real(self, rel, summed)

    monkeypatch.setattr(publish.Release, "adopt", adopt)
    return adopted


def test_files_written_aside_are_those_written_here(tmp_path, monkeypatch, aside_always):
    """The demo with its report, built with library.json and tables.parquet written by the
    helper and by the build's own process: byte-identical releases, and the helper's files
    taken in. Both make the manifest's lineages ahead (where each lies is kept for the next
    build: release/reuse.py), the first while the helper writes."""
    rendered = []
    real = assemble.document.render_list
    monkeypatch.setattr(assemble.document, "render_list",
                        lambda *a: rendered.append(a[2]) or real(*a))
    aside = build.build(RAW, tmp_path / "aside")
    assert sorted(aside_always) == ["library.json", "tables.parquet"]
    assert rendered == ["species"]       # the manifest's lineages made while the helper wrote
    monkeypatch.setattr(assemble, "ASIDE_FROM", 10 ** 9)
    here = build.build(RAW, tmp_path / "here")
    assert rendered == ["species", "species"]
    assert tree_hashes(tmp_path / "aside") == tree_hashes(tmp_path / "here")
    assert aside.files.sha256("tables.parquet") == here.files.sha256("tables.parquet")


def test_a_rebuild_taking_most_of_library_json_writes_it_here_and_findings_aside(
        tmp_path, monkeypatch, aside_always):
    """When most of library.json is taken from the last release, the build's own process
    writes it and the helper writes findings.json with tables.parquet instead: the same
    release as a build made here."""
    build.build(RAW, tmp_path / "aside", parts=2)
    aside_always.clear()
    build.build(RAW, tmp_path / "aside", parts=2)       # every piece taken
    assert sorted(aside_always) == ["findings.json", "tables.parquet"]
    monkeypatch.setattr(assemble, "ASIDE_FROM", 10 ** 9)
    build.build(RAW, tmp_path / "here", parts=2, fresh=True)
    assert tree_hashes(tmp_path / "aside") == tree_hashes(tmp_path / "here")


def test_a_failure_in_the_helper_stops_the_build_and_leaves_the_last_release(
        tmp_path, monkeypatch, capsys, aside_always):
    out = tmp_path / "out"
    assert run_cli(capsys, "build", "--raw", RAW, "--out", out, "--no-report", "--quiet")[0] == 0
    before = tree_hashes(out)

    def full_disk(doc, step=100.0, points=None, own=None, taken=None):
        raise OutputError("tables.parquet: no space left on device (simulated)")

    monkeypatch.setattr(tables, "tables_parquet_chunks", full_disk)
    code, _, err = run_cli(capsys, "build", "--raw", RAW, "--out", out, "--no-report",
                           "--quiet", "--fresh")
    assert code != 0 and "no space left on device" in err and "Traceback" not in err
    assert tree_hashes(out) == before
    assert not [p for p in out.iterdir() if p.name.startswith(".staging-")]


@pytest.fixture
def beyond_the_window(monkeypatch, aside_always):
    """Every release of the demo's 17 species beyond the forked helper's window (from
    ASIDE_UNTIL species on, it would copy too much of the build's memory); what
    core.processes.fresh_aside gave the build is recorded after the adopted paths."""
    monkeypatch.setattr(assemble, "ASIDE_UNTIL", 17)
    gave = []
    real = processes.fresh_aside

    @contextmanager
    def recorded(*args):
        with real(*args) as helper:
            gave.append(helper)
            yield helper

    monkeypatch.setattr(processes, "fresh_aside", recorded)
    return aside_always, gave


def test_beyond_the_window_tables_parquet_is_written_by_a_fresh_process(
        tmp_path, monkeypatch, beyond_the_window):
    """Beyond ASIDE_UNTIL, library.json and tables.parquet are written by a process started
    fresh, which reads the entries and the evaluated tables from the build's scratch file
    itself. The release, and where each species' pieces lie (kept for the next build), are
    those of a release written here alone."""
    adopted, gave = beyond_the_window
    build.build(RAW, tmp_path / "fresh")
    assert sorted(adopted) == ["library.json", "tables.parquet"]
    assert len(gave) == 1 and gave[0] is not None and gave[0].done()
    monkeypatch.setattr(assemble, "ASIDE_FROM", 10 ** 9)
    monkeypatch.setattr(assemble, "ASIDE_UNTIL", 10 ** 9)
    build.build(RAW, tmp_path / "here")
    assert len(adopted) == 2 and len(gave) == 1
    assert tree_hashes(tmp_path / "fresh") == tree_hashes(tmp_path / "here")
    kept = [orjson.loads((tmp_path / home / partitions.STORE / "pieces.json").read_bytes())
            for home in ("fresh", "here")]
    for name in ("tables.parquet", "library.json"):
        assert kept[0]["files"][name]["places"] == kept[1]["files"][name]["places"]


def test_beyond_the_window_a_scratch_file_no_other_process_can_open_keeps_the_work_here(
        tmp_path, monkeypatch, beyond_the_window):
    """Where another process cannot open the build's scratch file (no /proc), every file is
    written by the build's own process: the same release."""
    adopted, gave = beyond_the_window
    monkeypatch.setattr(spill, "readable_elsewhere", lambda s: False)
    build.build(RAW, tmp_path / "here")
    assert adopted == [] and gave == []
    monkeypatch.undo()
    build.build(RAW, tmp_path / "plain")
    assert tree_hashes(tmp_path / "here") == tree_hashes(tmp_path / "plain")


def test_beyond_the_window_a_rebuild_taking_pieces_of_the_last_release_writes_here(
        tmp_path, beyond_the_window):
    """A rebuild that takes species' pieces of library.json and tables.parquet from the last
    release writes them here (the fresh process would need the last release's pieces too)."""
    adopted, gave = beyond_the_window
    build.build(RAW, tmp_path / "out", parts=2)
    assert sorted(adopted) == ["library.json", "tables.parquet"]
    adopted.clear()
    build.build(RAW, tmp_path / "out", parts=2)
    assert adopted == [] and len(gave) == 1


def test_a_failure_in_the_fresh_process_stops_the_build_and_leaves_the_last_release(
        tmp_path, monkeypatch, capsys, beyond_the_window):
    """A fresh process that cannot read the scratch file it was sent to (here: told the
    wrong inode) stops the build with one line, and the last release stays."""
    out = tmp_path / "out"
    assert run_cli(capsys, "build", "--raw", RAW, "--out", out, "--no-report", "--quiet")[0] == 0
    before = tree_hashes(out)
    real_at = spill.Spill.at
    monkeypatch.setattr(spill, "readable_elsewhere", lambda s: True)
    monkeypatch.setattr(spill.Spill, "at", lambda self: replace(real_at(self),
                                                                inode=real_at(self).inode + 1))
    code, _, err = run_cli(capsys, "build", "--raw", RAW, "--out", out, "--no-report",
                           "--quiet", "--fresh")
    assert code != 0 and "no longer its scratch file" in err and "Traceback" not in err
    assert tree_hashes(out) == before
    assert not [p for p in out.iterdir() if p.name.startswith(".staging-")]


def _how_ctrl_c_is_taken():
    import signal

    return (signal.getsignal(signal.SIGINT) == signal.SIG_IGN,
            signal.SIGINT in signal.pthread_sigmask(signal.SIG_BLOCK, []))


def test_ctrl_c_is_left_to_the_parent_and_never_caught_half_started():
    """The helper ignores Ctrl-C (the parent stops it), and SIGINT is held back from it
    until it does, so that a Ctrl-C arriving while it starts cannot print a traceback from
    it; afterwards it is not held back any more, here or there."""
    import signal

    with processes.aside(_how_ctrl_c_is_taken) as helper:
        ignored, blocked = helper.result()
    assert ignored and not blocked
    assert signal.SIGINT not in signal.pthread_sigmask(signal.SIG_BLOCK, [])


_PREPARED = []


def _prepare(tag):
    _PREPARED.append(tag)


def _prepare_badly(tag):
    raise ValueError("cannot prepare")


def _report(x):
    return {"prepared": list(_PREPARED), "x": x, "pid": os.getpid()}


def test_a_standby_process_prepares_then_does_the_work_it_is_given():
    with processes.standby(_prepare, "warm") as ready:
        ready.give(_report, 7)
        got = ready.result()
    assert got["prepared"] == ["warm"] and got["x"] == 7 and got["pid"] != os.getpid()
    assert _PREPARED == []                       # prepared there, not here


def test_a_standby_whose_preparing_fails_still_does_its_work_and_raises_what_it_raises():
    with processes.standby(_prepare_badly, "x") as ready:
        ready.give(_report, 1)
        assert ready.result()["prepared"] == []
    with processes.standby(_prepare, "x") as ready:
        ready.give(_refuse, "tables.parquet")
        with pytest.raises(OutputError, match="cannot write tables.parquet"):
            ready.result()


def _prepare_until(marker):
    """Wait (up to 20 s) for file ``marker``: whether it came while preparing."""
    for _ in range(2000):
        if os.path.exists(marker):
            _PREPARED.append("marker seen")
            return
        time.sleep(0.01)


def _size_of(payload):
    return {"prepared": list(_PREPARED), "size": len(payload)}


def test_a_standby_takes_a_large_work_while_it_prepares(tmp_path):
    """Giving a work larger than a pipe holds does not wait for the standby to finish
    preparing: the marker file made once ``give`` returned is seen while it prepares."""
    marker = tmp_path / "given"
    payload = b"x" * (4 << 20)                   # 4 MB: some 60 times a pipe's buffer
    with processes.standby(_prepare_until, str(marker)) as ready:
        ready.give(_size_of, payload)
        marker.touch()
        got = ready.result()
    assert got == {"prepared": ["marker seen"], "size": len(payload)}


def test_a_standby_given_nothing_or_dismissed_is_killed_and_takes_one_work_only():
    with processes.standby(_prepare, "x") as ready:
        proc = ready._proc
        ready.give(_report, 1)
        with pytest.raises(RuntimeError, match="one piece of work"):
            ready.give(_report, 2)
        ready.dismiss()                          # its result not taken: killed
        assert not proc.is_alive()
    with processes.standby(_prepare, "x") as ready:
        proc = ready._proc
    assert not proc.is_alive()                   # given nothing by the end of the block


def _in_partition(part):
    from thermoledger import partitions

    return partitions.PartResult(checked=None, entries=((f"s{part.index}", os.getpid()),))


class _StoreOfAllBut:
    def __init__(self, missing):
        self.missing, self.saved = missing, []

    def holds(self, k):
        return k != self.missing

    def load(self, k):
        from thermoledger import partitions

        return partitions.PartResult(checked=None, entries=((f"s{k}", "stored"),))

    def save(self, k, result):
        self.saved.append(k)


def test_a_rebuild_computes_its_one_changed_partition_in_the_prepared_process(monkeypatch):
    from thermoledger import partitions

    monkeypatch.setattr(partitions, "merge", lambda results: [r.entries[0] for r in results])
    store = _StoreOfAllBut(2)
    with processes.standby(_prepare, "x") as ready:
        merged, reused = partitions.run(_in_partition, partitions.Plan(parts=4, workers=2),
                                        store=store, ready=ready)
        helper_pid = ready._proc.pid
    assert reused == 3 and store.saved == [2]
    assert merged[2] == ("s2", helper_pid) and [m[1] for m in merged[:2]] == ["stored"] * 2
    store = _StoreOfAllBut(None)                 # nothing changed: the standby is dismissed
    with processes.standby(_prepare, "x") as ready:
        partitions.run(_in_partition, partitions.Plan(parts=4, workers=2), store=store,
                       ready=ready)
        assert not ready._proc.is_alive()


def test_a_rebuild_whose_prepared_process_is_gone_forks_another(monkeypatch):
    from thermoledger import partitions

    monkeypatch.setattr(partitions, "merge", lambda results: [r.entries[0] for r in results])
    with processes.standby(_prepare, "x") as ready:
        ready._proc.kill()
        ready._proc.join()
        merged, reused = partitions.run(_in_partition, partitions.Plan(parts=4, workers=2),
                                        store=_StoreOfAllBut(1), ready=ready)
    assert reused == 3 and merged[1][0] == "s1" and merged[1][1] not in (os.getpid(),
                                                                          ready._proc.pid)


def _faults_of_batched_arrays(rounds: int = 10) -> int:
    """Minor page faults of arrays made and freed as a partition's batched searches make
    them (three of 5.9 MB at once), after a first round."""
    import resource

    import numpy as np

    def once():
        for _ in range(rounds):
            arrays = [np.ones((64, 80, 144)) for _ in range(3)]
            sum(float(a.sum()) for a in arrays)
            del arrays

    once()
    before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
    once()
    return resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before


def _glibc() -> bool:
    try:
        return os.confstr("CS_GNU_LIBC_VERSION") is not None
    except (AttributeError, ValueError, OSError):
        return False


@pytest.mark.skipif(not _glibc(), reason="the allocator's settings are glibc's")
def test_a_partition_worker_takes_its_freed_memory_again_without_page_faults():
    """A worker of the partitions keeps what it frees (processes.keep_freed_heap): arrays
    made again come from its heap, not from fresh mappings faulted in page by page (one
    round maps some 4 300 pages anew)."""
    with processes.worker_pool(1) as pool:
        assert pool.submit(_faults_of_batched_arrays).result() < 500
