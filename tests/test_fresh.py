"""Workers that start fresh (core.fresh): forked from a server process, they hold nothing of
the process that asked for them, never run its script again, and die with it."""

import os
import signal
import subprocess
import sys
import types
import uuid
from pathlib import Path

import pytest
from thermoledger.core.processes import worker_pool

from .test_release_safety import _processes_tagged, _wait_for

FRESH = ("thermoledger.core.limits",)   # what their server imports: anything small
PROBE = "thermoledger_test_probe"
SEEN = f"__import__('sys').modules.get('{PROBE}') is not None"
PARENT = "__import__('os').getppid()"

pytestmark = pytest.mark.skipif(sys.platform == "win32", reason="no forkserver")


def test_fresh_workers_hold_nothing_of_this_process(monkeypatch):
    """A module this process holds (put in sys.modules after the server could have started)
    is seen by a forked worker and not by a fresh one, whose parent is the server."""
    monkeypatch.setitem(sys.modules, PROBE, types.ModuleType(PROBE))
    with worker_pool(1) as pool:
        assert pool.submit(eval, SEEN).result() is True
        assert pool.submit(eval, PARENT).result() == os.getpid()
    with worker_pool(2, fresh=FRESH) as pool:
        assert pool.submit(eval, SEEN).result() is False
        assert pool.submit(eval, PARENT).result() != os.getpid()
        assert list(pool.map(abs, [-1, -2, -3])) == [1, 2, 3]


def test_without_a_server_the_workers_are_forked(monkeypatch):
    """A server that cannot be started (no such method, or its process fails to start)
    leaves the pool's workers forked from this process, doing the same work."""
    from multiprocessing import forkserver

    def fails():
        raise OSError("no server here")

    monkeypatch.setattr(forkserver, "ensure_running", fails)
    monkeypatch.setitem(sys.modules, PROBE, types.ModuleType(PROBE))
    with worker_pool(2, fresh=FRESH) as pool:
        assert pool.submit(eval, PARENT).result() == os.getpid()
        assert list(pool.map(abs, [-1, -2, -3])) == [1, 2, 3]


def test_a_script_without_a_main_guard_runs_once(tmp_path):
    """Processes of multiprocessing's server import the asking process's __main__ again,
    unless it is hidden from them (core.fresh.FreshProcess): a script that makes a fresh pool
    at its top level would run once more in each worker."""
    script = tmp_path / "unguarded.py"
    script.write_text(
        "from thermoledger.core.processes import worker_pool\n"
        "print('ran', flush=True)\n"
        f"with worker_pool(2, fresh={FRESH!r}) as pool:\n"
        "    print(sum(pool.map(abs, [-1, -2, -3])), flush=True)\n")
    got = subprocess.run([sys.executable, str(script)], capture_output=True, text=True,
                         timeout=120, cwd=tmp_path)
    assert (got.returncode, got.stdout) == (0, "ran\n6\n"), got.stderr


@pytest.mark.skipif(not Path("/proc/self/environ").exists(), reason="needs /proc")
def test_fresh_workers_and_their_server_never_outlive_a_killed_process(tmp_path):
    tag = f"THERMOLEDGER_TEST_TAG={uuid.uuid4().hex}"
    key, value = tag.split("=")
    script = tmp_path / "busy.py"
    script.write_text(
        "import time\n"
        "from thermoledger.core.processes import worker_pool\n"
        "if __name__ == '__main__':\n"
        f"    with worker_pool(2, fresh={FRESH!r}) as pool:\n"
        "        pool.map(time.sleep, [600] * 2)\n"
        "        time.sleep(600)\n")
    p = subprocess.Popen([sys.executable, str(script)], env={**os.environ, key: value})
    try:
        # the process itself, the server and two workers
        assert _wait_for(lambda: len(_processes_tagged(tag)) >= 4), _processes_tagged(tag)
    finally:
        p.send_signal(signal.SIGKILL)
        p.wait(60)
    assert _wait_for(lambda: not _processes_tagged(tag), 30), _processes_tagged(tag)


def test_the_reports_server_is_started_only_for_a_report_drawn_by_workers(monkeypatch):
    """release.report.start_drawing (called before the release's other files are written)
    starts the server of the report's workers when the report will have them: from
    POOL_FROM species on a machine of several cores."""
    from thermoledger.core import fresh
    from thermoledger.release import report

    started = []
    monkeypatch.setattr(fresh, "server", started.append)
    monkeypatch.setattr(report, "default_workers", lambda: 2)
    report.start_drawing(report.POOL_FROM - 1)
    assert started == []
    report.start_drawing(report.POOL_FROM)
    assert started == [report.DRAWING]
    monkeypatch.setattr(report, "default_workers", lambda: 1)
    report.start_drawing(100 * report.POOL_FROM)
    assert started == [report.DRAWING]


def test_a_fresh_worker_that_cannot_start_leaves_no_traceback(tmp_path):
    """A process of the server that fails before its work begins, while unpickling what it
    was sent (as when its asker lets go of its pool meanwhile: a build stopped by Ctrl-C
    while the report's workers start), ends with exit code 1 and says nothing: the asker,
    if still there, sees it gone."""
    script = tmp_path / "unstartable.py"
    script.write_text(
        "import os\n"
        "from thermoledger.core import fresh\n"
        "class Gone:\n"                 # unpickled by looking up a file that is not there,
        "    def __reduce__(self):\n"   # as a lock its asker let go of is looked up
        f"        return os.stat, ({str(tmp_path / 'gone')!r},)\n"
        "if __name__ == '__main__':\n"
        f"    ctx = fresh.server({FRESH!r})\n"
        "    p = ctx.Process(target=print, args=(Gone(),))\n"
        "    p.start()\n"
        "    p.join(60)\n"
        "    print(p.exitcode, flush=True)\n")
    got = subprocess.run([sys.executable, str(script)], capture_output=True, text=True,
                         timeout=120, cwd=tmp_path)
    assert (got.returncode, got.stdout) == (0, "1\n"), got.stderr
    assert "Traceback" not in got.stderr and got.stderr == ""


def test_an_error_of_a_fresh_worker_s_work_reaches_the_asker():
    """What fails in the work a fresh worker was given is sent back to the asker (the
    server's quiet start, core.fresh.quiet_start, silences only failures to start)."""
    with worker_pool(1, fresh=FRESH) as pool:
        assert isinstance(pool.submit(int, "not a number").exception(60), ValueError)
