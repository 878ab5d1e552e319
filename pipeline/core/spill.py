"""A scratch file for what a large build made and reads back only when it writes its release.

Until its release is written a build of 100 000 species would hold every library entry
(5 KB of JSON each) and every evaluated table (4 KB of numbers each) in memory. It puts
them in a ``Spill`` instead, as each partition arrives, and keeps only where each lies. The
file has no name (tempfile.TemporaryFile, in the folder given: the release home, on the
disk the release goes to): nothing is left behind, whatever stops the build, and reading
back is a pread from the page cache.
"""

import os
import pickle
import tempfile
from collections.abc import Mapping


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

    def put_objects(self, objs) -> list:
        """[(offset, size)] of each of ``objs`` pickled, as ``put_object`` (one write)."""
        return self.put_many(pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)
                             for obj in objs)

    def close(self) -> None:
        self._file.close()

    def __del__(self):
        # the file goes with the last reader of what it holds (a build's result): closed
        # here, it is not left to the file object's own finaliser, which warns
        file = getattr(self, "_file", None)
        if file is not None:
            file.close()


class SpilledObjects(Mapping):
    """{key: object} of objects this process pickled into a Spill (``put_object``), each
    unpickled when it is read: ``where`` maps the keys to their (offset, size)."""

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
