"""A scratch file for what a large build made and reads back only when it writes its release.

Until its release is written a build of 100 000 species would hold every library entry
(5 KB of JSON each) and every evaluated table (4 KB of numbers each) in memory. It puts
them in a ``Spill`` instead, as each partition arrives, and keeps only where each lies. The
file has no name (tempfile.TemporaryFile, in the folder given: the release home, on the
disk the release goes to): nothing is left behind, whatever stops the build, and reading
back is a pread from the page cache.
"""

import io
import os
import pickle
import tempfile
from collections.abc import Mapping
from dataclasses import dataclass


class Spill:
    """An append-only unnamed file of bytes, read back by (offset, size)."""

    def __init__(self, folder=None):
        self._file = tempfile.TemporaryFile(dir=folder)
        self._fd = self._file.fileno()
        self._end = 0

    def put(self, data) -> tuple:
        """(offset, size) of ``data`` (bytes, or any contiguous buffer) written at the end."""
        view = memoryview(data).cast("B")
        offset, done = self._end, 0
        while done < len(view):
            done += os.pwrite(self._fd, view[done:], offset + done)
        self._end += len(view)
        return offset, len(view)

    def put_many(self, pieces) -> list:
        """[(offset, size)] of each of ``pieces`` (bytes or contiguous buffers), written one
        after another at the end in one write: a stored partition's hundreds of entries cost
        one system call, not one each."""
        views = [memoryview(p).cast("B") for p in pieces]
        where, offset = [], self._end
        for v in views:
            where.append((offset, len(v)))
            offset += len(v)
        if views:
            self.put(b"".join(views))
        return where

    def get(self, offset: int, size: int) -> bytes:
        """The ``size`` bytes written at ``offset``."""
        data = os.pread(self._fd, size, offset)
        if len(data) != size:
            raise OSError(f"the build's scratch file ends before byte {offset + size}")
        return data

    def put_object(self, obj) -> tuple:
        """(offset, size) of ``obj`` pickled (read back by SpilledObjects)."""
        return self.put(pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL))

    def at(self) -> "SpillAt":
        """Where another process of this machine opens this file to read it (SpillReader)."""
        st = os.fstat(self._fd)
        return SpillAt(os.getpid(), self._fd, st.st_dev, st.st_ino)

    def close(self) -> None:
        self._file.close()

    def __del__(self):
        # the file goes with the last reader of what it holds (a build's result): closed
        # here, it is not left to the file object's own finaliser, which warns
        file = getattr(self, "_file", None)
        if file is not None:
            file.close()


class SpilledObjects(Mapping):
    """{key: object} of objects pickled into a Spill (``put_object``, or their pickles
    made elsewhere and ``put_many``), each unpickled when it is read: ``where`` maps the
    keys to their (offset, size)."""

    def __init__(self, spill: Spill, where: dict):
        self._spill, self._where = spill, where

    def __getitem__(self, key):
        return pickle.loads(self.pickled(key))

    def pickled(self, key) -> bytes:
        """The pickle of the object of ``key``, as written (KeyError when there is none)."""
        return self._spill.get(*self._where[key])

    def __contains__(self, key) -> bool:
        return key in self._where          # (Mapping's own would unpickle the object)

    def __iter__(self):
        return iter(self._where)

    def __len__(self) -> int:
        return len(self._where)


class Places:
    """(offset, size) pairs of pieces in a Spill, read as a sequence of tuples and held as
    one int64 array: 16 bytes a piece instead of some 100 as a list of tuples (what crosses
    to another process, ``dumps_across``, and what it holds there)."""

    __slots__ = ("_flat",)

    def __init__(self, pairs):
        import numpy as np

        self._flat = np.array(pairs, dtype=np.int64).reshape(-1)

    def __len__(self) -> int:
        return len(self._flat) // 2

    def __getitem__(self, i: int) -> tuple:
        i = range(len(self))[i]
        return int(self._flat[2 * i]), int(self._flat[2 * i + 1])

    def __iter__(self):
        pairs = self._flat.tolist()
        return iter(zip(pairs[::2], pairs[1::2]))

    @classmethod
    def of(cls, items):
        """``items`` as Places when every one is an (offset, size) pair, else as they are."""
        if all(isinstance(x, tuple) for x in items):
            return cls(list(items))
        return items


@dataclass(frozen=True)
class SpillAt:
    """A Spill as another process finds it: the process that holds it, its descriptor there,
    and the file's device and inode (told apart from whatever else the descriptor may be
    by the time it is opened)."""

    pid: int
    fd: int
    device: int
    inode: int


class SpillReader:
    """A Spill of another process read from this one (``get`` alone): opened through
    /proc/<pid>/fd/<fd>, which opens the file itself though it has no name (Linux)."""

    def __init__(self, at: SpillAt):
        self._fd = None
        fd = os.open(f"/proc/{at.pid}/fd/{at.fd}", os.O_RDONLY)
        st = os.fstat(fd)
        if (st.st_dev, st.st_ino) != (at.device, at.inode):
            os.close(fd)
            raise OSError(f"descriptor {at.fd} of process {at.pid} is no longer its scratch "
                          "file")
        self._fd = fd

    get = Spill.get

    def close(self) -> None:
        if self._fd is not None:
            os.close(self._fd)
            self._fd = None

    def __del__(self):
        self.close()


def readable_elsewhere(spill: Spill) -> bool:
    """Whether another process could open ``spill`` by its SpillAt (this process tries)."""
    try:
        SpillReader(spill.at()).close()
    except OSError:
        return False
    return True


def dumps_across(obj) -> bytes:
    """``obj`` pickled for another process of this machine, every Spill in it by its SpillAt
    (read back by ``loads_across``): a build's document and evaluated tables, which point
    into its scratch file, go to a process that reads them from the file itself. OSError
    when a Spill in it cannot be opened so (``readable_elsewhere``)."""
    out = io.BytesIO()
    pickler = pickle.Pickler(out, protocol=pickle.HIGHEST_PROTOCOL)
    seen = {}

    def persistent_id(x):
        if not isinstance(x, Spill):
            return None
        if id(x) not in seen:
            if not readable_elsewhere(x):
                raise OSError("the build's scratch file cannot be opened by another process")
            seen[id(x)] = x.at()
        return seen[id(x)]

    pickler.persistent_id = persistent_id
    pickler.dump(obj)
    return out.getvalue()


def loads_across(data: bytes):
    """What ``dumps_across`` pickled, each Spill in it a SpillReader (one per file)."""
    opened = {}

    def persistent_load(at):
        if at not in opened:
            opened[at] = SpillReader(at)
        return opened[at]

    unpickler = pickle.Unpickler(io.BytesIO(data))
    unpickler.persistent_load = persistent_load
    return unpickler.load()
