"""Publishing a release folder: one build at a time, all files or none.

Every output is written into a staging folder beside the target (same file system),
checked, and only then swapped into place. On Linux the swap is one atomic
``renameat2(RENAME_EXCHANGE)`` of the staging folder and the previous release, so a build
killed at any moment leaves either the complete previous release or the complete new one.
Where the exchange is not available, the previous release is renamed aside first and
restored by the next run if a build died in between.

A lock file beside the target (``<target>.lock``, ``fcntl.flock``) keeps two builds from
writing the same folder at once: the second waits up to ``wait`` seconds, then fails with
a clear message.
"""

import ctypes
import errno
import fcntl
import os
import shutil
import time
from contextlib import contextmanager
from pathlib import Path

from .errors import OutputError

_AT_FDCWD = -100
_RENAME_EXCHANGE = 2


def _exchange(a: Path, b: Path) -> bool:
    """Atomically swap two paths; False when the system does not offer it."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        fn = libc.renameat2
    except (OSError, AttributeError):
        return False
    fn.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    rc = fn(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE)
    if rc == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.ENOSYS, errno.EINVAL, errno.ENOTSUP if hasattr(errno, "ENOTSUP") else 95):
        return False
    raise OSError(err, os.strerror(err), str(a))


@contextmanager
def locked(target: Path, wait: float = 0.0):
    """Hold the lock of ``target`` for the duration of the block."""
    target = Path(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    lock_path = target.parent / f"{target.name}.lock"
    fd = os.open(lock_path, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        deadline = time.monotonic() + max(wait, 0.0)
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                if time.monotonic() >= deadline:
                    raise OutputError(f"another build is writing {target} (lock {lock_path}); "
                                      "run again when it has finished, or give --wait "
                                      "SECONDS") from None
                time.sleep(0.05)
        yield
    finally:
        os.close(fd)  # closing releases the lock


def _recover(target: Path):
    """Restore a release set aside by a build that died between the two plain renames, and
    remove staging folders of killed builds."""
    for p in target.parent.glob(f".{target.name}.old-*"):
        if not target.exists():
            os.rename(p, target)
        else:
            shutil.rmtree(p, ignore_errors=True)
    for p in target.parent.glob(f".{target.name}.staging-*"):
        shutil.rmtree(p, ignore_errors=True)


def publish(target: Path, files: dict, check=None, wait: float = 0.0) -> list:
    """Write ``files`` {relative path: bytes} as the new content of ``target``.

    ``check(staging_path)`` may raise to abort before anything is swapped in.
    Returns the written paths (inside ``target``).
    """
    target = Path(target)
    if target.exists() and not target.is_dir():
        raise OutputError(f"{target} exists and is not a folder")
    with locked(target, wait):
        _recover(target)
        staging = target.parent / f".{target.name}.staging-{os.getpid()}"
        staging.mkdir()
        try:
            for rel in sorted(files):
                path = staging / rel
                path.parent.mkdir(parents=True, exist_ok=True)
                with open(path, "wb") as fh:
                    fh.write(files[rel])
                    fh.flush()
                    os.fsync(fh.fileno())
            if check:
                check(staging)
            if target.exists():
                if _exchange(staging, target):
                    shutil.rmtree(staging)
                else:
                    aside = target.parent / f".{target.name}.old-{os.getpid()}"
                    os.rename(target, aside)
                    os.rename(staging, target)
                    shutil.rmtree(aside)
            else:
                os.rename(staging, target)
        except BaseException:
            shutil.rmtree(staging, ignore_errors=True)
            raise
    return [target / rel for rel in sorted(files)]
