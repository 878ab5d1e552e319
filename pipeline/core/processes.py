"""Worker processes of the stages that fan out (species partitions, report pages): they die
with their parent, leave Ctrl-C to it, and are killed, not waited for, when it stops."""

import gc
import os
from contextlib import contextmanager


def workers_die_with_parent(parent_pid: int) -> None:
    """Initializer of a worker process: it is killed when its parent dies (Linux
    PR_SET_PDEATHSIG), leaves Ctrl-C to the parent, and exits at once if the parent is
    already gone."""
    import ctypes
    import signal

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        ctypes.CDLL(None, use_errno=True).prctl(1, int(signal.SIGKILL))  # 1 = PR_SET_PDEATHSIG
    except (OSError, AttributeError):
        pass  # not Linux: the parent's interrupt handler still stops the workers
    if os.getppid() != parent_pid:
        os._exit(1)


def stop_workers(pool) -> None:
    """Kill the processes of ``pool`` and release it without waiting for their work."""
    for proc in list(getattr(pool, "_processes", {}).values()):
        proc.kill()
    pool.shutdown(wait=False, cancel_futures=True)


@contextmanager
def worker_pool(count: int):
    """A ProcessPoolExecutor of ``count`` workers that die with this process; whatever
    stops the block (an error, an interrupt) kills them instead of waiting for them."""
    from concurrent.futures import ProcessPoolExecutor

    pool = ProcessPoolExecutor(count, initializer=workers_die_with_parent,
                               initargs=(os.getpid(),))
    try:
        yield pool
    except BaseException:
        stop_workers(pool)
        raise
    pool.shutdown()


@contextmanager
def collector_paused():
    """Python's cyclic garbage collector off for the block (as it was after it). A build
    holds millions of long-lived objects (its partitions' results) and makes almost no
    cycles (under one object per species); each full collection walks all of them, and at
    10 000 species a rebuild spent 2.6 s of its 11 s in 18 of them. Reference counting
    still frees everything that is not in a cycle."""
    was = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was:
            gc.enable()


def without_collector(work, *args):
    """``work(*args)`` with the cyclic garbage collector paused (collector_paused): a
    picklable wrapper for work sent to worker processes."""
    with collector_paused():
        return work(*args)


def give_back_memory() -> None:
    """Return the free pages of this process's heap to the system (glibc's malloc_trim; a
    no-op elsewhere): a millisecond or a few. The report's pages pass through the build's
    own process as bytes of some 10-50 KB, which glibc's allocator keeps when freed: at
    100 000 species it held some 190 MB more after the report than before, of which Python
    objects were 60 MB (tracemalloc); workers forked from it share, and the build's peak
    counts, whatever it holds then."""
    import ctypes

    try:
        ctypes.CDLL(None).malloc_trim(0)
    except (OSError, AttributeError):
        pass
