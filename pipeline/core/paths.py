"""Writing files atomically, and knowing a file again by its identity on disk."""

import errno
import os
import tempfile
import time
from functools import lru_cache
from pathlib import Path

from . import limits

#: the errors of os.lstat and os.stat that mean nothing is there, those for which pathlib's
#: exists and is_symlink say False (no such file, a path through a file, a bad descriptor,
#: a loop of links)
ABSENT = (errno.ENOENT, errno.ENOTDIR, errno.EBADF, errno.ELOOP)


def lstat_or_none(path: str):
    """os.lstat of ``path``, or None when nothing is there (``ABSENT``): one call tells a
    link, a file, a folder, its size and identity, as pathlib's is_symlink, exists, is_file
    and stat would; other errors raise."""
    try:
        return os.lstat(path)
    except OSError as exc:
        if exc.errno not in ABSENT:
            raise
        return None


@lru_cache(maxsize=1)
def _sync_file_range():
    """libc's sync_file_range (Linux), or None."""
    import ctypes

    try:
        call = ctypes.CDLL(None, use_errno=True).sync_file_range
    except (OSError, AttributeError):
        return None
    call.argtypes = (ctypes.c_int, ctypes.c_int64, ctypes.c_int64, ctypes.c_uint)
    return call


#: sync_file_range's flag: start writing the dirty pages of the range, do not wait
SYNC_FILE_RANGE_WRITE = 2


def start_writeback(fd: int) -> bool:
    """Ask the kernel to start writing the file open as ``fd`` to its disk now, without
    waiting (Linux's sync_file_range; nothing elsewhere): the sync that makes a release
    durable before it is published (``sync_files``) then finds most of it written. At
    10 000 species that sync waited 0.17 s for some 140 MB, and 0.1 s with each file's
    writeback started as it was closed. It makes nothing durable by itself. Whether the
    kernel was asked (and took the request)."""
    call = _sync_file_range()
    return call is not None and call(fd, 0, 0, SYNC_FILE_RANGE_WRITE) == 0


def drop_cached(fd: int) -> bool:
    """Tell the kernel that the pages of the file open as ``fd``, written and synced, will
    not be read soon (posix_fadvise DONTNEED; nothing where it is missing): they are freed
    at once, and the build's next writes reuse them rather than take pages from the free
    memory, which on the benchmark machine cost 3.8-5 ms of system time per MB written
    against 0.2 (common practice for large write-once files). Whether the kernel was
    told."""
    if not hasattr(os, "posix_fadvise"):
        return False
    try:
        os.posix_fadvise(fd, 0, 0, os.POSIX_FADV_DONTNEED)
    except OSError:
        return False
    return True


def sync_files(folder: Path, rels) -> None:
    """Make the files ``rels`` (relative paths) under ``folder``, and the folders that hold
    them, durable before anything points at them. On Linux one syncfs(2) of the file system
    that holds ``folder``: the kernel writes every dirty page and entry of that file system
    and waits for them, as an fsync of each file would, in one journal commit instead of one
    per file (at 20 000 report pages, 8 s of fsync calls before). Elsewhere, or when syncfs
    fails, each file is fsynced."""
    import ctypes

    fd = os.open(folder, os.O_RDONLY)
    try:
        syncfs = ctypes.CDLL(None, use_errno=True).syncfs
        if syncfs(fd) == 0:
            return
    except (OSError, AttributeError):
        pass
    finally:
        os.close(fd)
    for rel in rels:
        fd = os.open(Path(folder) / rel, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


def write_atomic(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` through a temporary file in the same folder and a rename."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def identity(st) -> tuple:
    """What a file is known again by, from its ``os.stat`` result ``st``: device, inode,
    size, and the modification and change times [ns] (a write moves the change time, also
    when a tool restores the modification time)."""
    return (st.st_dev, st.st_ino, st.st_size, st.st_mtime_ns, st.st_ctime_ns)


def settled(st) -> bool:
    """True when the file of ``st`` has not changed for limits.RECENT_CHANGE seconds: a
    later change then shows in its ``identity`` (a file changed more recently may change
    again within one tick of the file system's clock, unseen in its times)."""
    return time.time_ns() - max(st.st_mtime_ns, st.st_ctime_ns) >= limits.RECENT_CHANGE * 1e9
