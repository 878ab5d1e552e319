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
    keep_freed_heap()


def keep_freed_heap() -> None:
    """Have glibc's allocator keep what this process frees for its next arrays (mallopt; a
    no-op where there is none): blocks of up to 32 MB from its heap instead of fresh
    mappings, and the heap's top given back only beyond 128 MB free. A worker's batched
    arrays (a few MB each, tens of MB at once) were otherwise mapped anew and faulted in page
    by page: 62 page faults and 0.13 ms of system time per species, 8 % of a partition's
    time. It raises a build's peak by some 30 MiB (a worker's freed heap stays with it:
    216-218 against 184-186 MiB for 1 000 species). Called in the processes that compute
    partitions; never in a build's own process, which gives its heap back on purpose
    (``give_back_memory``)."""
    import ctypes

    try:
        mallopt = ctypes.CDLL(None).mallopt
    except (OSError, AttributeError):
        return
    mallopt(-3, 32 << 20)          # M_MMAP_THRESHOLD (its largest value)
    mallopt(-1, 128 << 20)         # M_TRIM_THRESHOLD


def stop_workers(pool) -> None:
    """Kill the processes of ``pool`` and release it without waiting for their work."""
    for proc in list(getattr(pool, "_processes", {}).values()):
        proc.kill()
    pool.shutdown(wait=False, cancel_futures=True)


@contextmanager
def worker_pool(count: int, fresh: tuple = ()):
    """A ProcessPoolExecutor of ``count`` workers that die with this process; whatever
    stops the block (an error, an interrupt) kills them instead of waiting for them.
    Workers are forked from this process, sharing what it holds; with ``fresh`` (module
    names), where the machine can, from a server process that imported them instead
    (core.fresh)."""
    from concurrent.futures import ProcessPoolExecutor

    from . import fresh as fresh_start

    server = fresh_start.server(fresh) if fresh else None
    if server is None:
        pool = ProcessPoolExecutor(count, initializer=workers_die_with_parent,
                                   initargs=(os.getpid(),))
    else:
        pool = ProcessPoolExecutor(count, mp_context=server,
                                   initializer=fresh_start.die_with_asker)
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


class Aside:
    """What ``aside`` gives its block: ``result()`` waits for the forked process and gives
    what its work returned, or raises what it raised."""

    def __init__(self, proc, answer):
        self._proc, self._answer, self._got = proc, answer, None

    def result(self):
        if self._got is None:
            try:
                self._got = self._answer.recv()
            except EOFError:
                self._proc.join()
                self._got = ("raised", OSError(f"a helper process stopped without an answer "
                                               f"(exit code {self._proc.exitcode})"))
            self._proc.join()
        how, value = self._got
        if how == "raised":
            raise value
        return value

    def dismiss(self) -> None:
        """Kill the process unless its result was taken (a standby holds some 100 MB of
        imports for as long as it waits)."""
        if self._got is None:
            self._proc.kill()
            self._proc.join()
            self._got = ("raised", RuntimeError("the helper process was dismissed"))


def _answer(work, args, parent: int, reply) -> None:
    """The forked process of ``aside``: ``work(*args)``, and what it returned or raised
    sent back (an exception that cannot cross as itself crosses as its text)."""
    _as_helper(parent)
    _reply(work, args, reply)


def _as_helper(parent: int) -> None:
    """A forked helper process dies with its parent and ignores Ctrl-C, held back from it
    until now (by ``_forked``)."""
    import signal

    workers_die_with_parent(parent)
    if hasattr(signal, "pthread_sigmask"):
        signal.pthread_sigmask(signal.SIG_UNBLOCK, {signal.SIGINT})


def _reply(work, args, reply) -> None:
    import pickle

    try:
        out = ("returned", work(*args))
    except BaseException as exc:  # noqa: BLE001 - the parent raises it
        out = ("raised", exc)
    try:
        pickle.loads(pickle.dumps(out))
    except Exception:  # noqa: BLE001 - an answer that does not cross as itself
        out = ("raised", RuntimeError(f"{type(out[1]).__name__}: {out[1]}"))
    reply.send(out)
    reply.close()


@contextmanager
def aside(work, *args):
    """``work(*args)`` in a process forked now, while this one goes on with the block; the
    block gets an Aside whose ``result()`` waits for it. The process shares what this one
    holds at the fork (nothing is pickled on the way in), dies with it and leaves Ctrl-C
    to it; whatever ends the block before the result was taken (an error, an interrupt)
    kills it instead of waiting for it."""
    import multiprocessing

    answer, reply = multiprocessing.get_context("fork").Pipe(duplex=False)
    proc = _forked(_answer, work, args, os.getpid(), reply)
    reply.close()
    handle = Aside(proc, answer)
    try:
        yield handle
    finally:
        handle.dismiss()
        answer.close()


@contextmanager
def fresh_aside(modules: tuple, work, *args):
    """``aside`` in a process started fresh (core.fresh: from a server that imported
    ``modules``, sharing nothing of this one's heap), ``args`` pickled on the way; the block
    gets an object whose ``result()`` waits for it. For work on a large build's data that a
    forked helper would copy page by page from this process as it touches them. None is
    given where the machine cannot start such a process: the caller then does the work."""
    from . import fresh

    if fresh.server(modules) is None:
        yield None
        return
    with worker_pool(1, fresh=modules) as pool:
        yield pool.submit(work, *args)


def _forked(target, *args):
    """A started daemon process forked to run ``target(*args)``, with Ctrl-C held back from
    it until it ignores it (``_as_helper``): one arriving in between would print a traceback
    from it."""
    import multiprocessing
    import signal

    proc = multiprocessing.get_context("fork").Process(target=target, args=args, daemon=True)
    masking = hasattr(signal, "pthread_sigmask")
    was = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT}) if masking else None
    try:
        proc.start()
    finally:
        if masking:
            signal.pthread_sigmask(signal.SIG_SETMASK, was)
    return proc


class Standby(Aside):
    """What ``standby`` gives its block: ``give(work, *args)`` hands the waiting process its
    one piece of work (pickled on the way), ``result()`` waits for it as ``Aside.result``."""

    def __init__(self, proc, answer, jobs):
        super().__init__(proc, answer)
        self._jobs, self.given = jobs, False

    def give(self, work, *args) -> None:
        if self.given:
            raise RuntimeError("a standby process takes one piece of work")
        self.given = True
        self._jobs.send((work, args))


def _stand_by(prepare, args, parent: int, jobs, reply) -> None:
    """The forked process of ``standby``: ``prepare(*args)`` (its failure ignored: the work
    itself says what is wrong), then the work it is given, answered as ``aside`` answers.
    The work is read while it prepares, by a thread of its own: a work larger than the
    pipe holds (a rebuild's breakpoints of 10 000 species: 240 KB) kept the giver waiting
    until it was prepared (0.3 s), instead of loading the stored partitions meanwhile."""
    import pickle
    import threading

    _as_helper(parent)
    keep_freed_heap()
    given = []        # the work's bytes, read as soon as they come: the giver never waits

    def receive():
        try:
            given.append(jobs.recv_bytes())
        except (EOFError, OSError):
            pass

    reader = threading.Thread(target=receive, daemon=True)
    reader.start()
    try:
        prepare(*args)
    except Exception:  # noqa: BLE001 - preparing only saves time
        pass
    reader.join()
    if not given:
        return
    work, work_args = pickle.loads(given[0])
    _reply(work, work_args, reply)


@contextmanager
def standby(prepare, *args):
    """A process forked now that runs ``prepare(*args)`` (imports, caches) and then waits,
    while this one goes on, for one piece of work from ``Standby.give``: the work starts
    prepared. Given nothing by the end of the block, or if the block ends before a given
    work's result was taken (an error, an interrupt), it is killed."""
    import multiprocessing

    ctx = multiprocessing.get_context("fork")
    answer, reply = ctx.Pipe(duplex=False)
    jobs_out, jobs_in = ctx.Pipe(duplex=False)
    proc = _forked(_stand_by, prepare, args, os.getpid(), jobs_out, reply)
    reply.close()
    jobs_out.close()
    handle = Standby(proc, answer, jobs_in)
    try:
        yield handle
    finally:
        handle.dismiss()
        jobs_in.close()
        answer.close()
